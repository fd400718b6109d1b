/* decode.h - from the fields of a chunk to typed model columns.
 *
 * Each row's used cells become numbers or factor levels; missing cells
 * (the configured tokens) drop the row as an incomplete case, counted per
 * column; cells the model cannot take (a negative count, a zero exposure,
 * ...) are errors that name file, line, column and value.  Only complete,
 * valid rows reach the block, in file order. */
#ifndef MR_DECODE_H
#define MR_DECODE_H

#include <stdint.h>
#include "common/error.h"
#include "input/chunk.h"
#include "input/fields.h"
#include "input/numparse.h"
#include "model/columns.h"
#include "common/levels.h"
#include "common/valuecount.h"
#include "family/family.h"
#include "accum/patterns.h"
#include <stdatomic.h>

#define MR__BAD_SHOWN 5

/* First pass: a factor level a worker met for the first time, at chunk
 * row `row`; `str` is the worker's own copy, valid for the whole pass. */
typedef struct mr__new_level {
    const char *str;
    uint32_t len, row;
    size_t var;          /* the factor */
} mr__new_level;

typedef struct mr__bad_row {
    uint64_t line;
    const char *file; /* a set's file (the set owns the name), NULL for a single input */
    char msg[320];
} mr__bad_row;

/* The typed rows of one chunk.  Arrays hold MR__BLOCK_ROWS entries; only
 * the first n are filled.  num and lev are variable-major:
 * num[k * MR__BLOCK_ROWS + i] is numeric variable k on kept row i. */
typedef struct mr__block {
    uint64_t index;
    /* First pass: the decoder whose own level numbers `lev` holds (they are
     * mapped to the shared sorted numbers before use). */
    int32_t worker;
    uint32_t nread, n;
    double *y;     /* outcome; a proportion for binomial */
    double *prior; /* prior weight (weight x trials); NULL = all 1 */
    double *off;   /* offset + log(exposure); NULL = none */
    /* off holds the exposure itself (its log deferred, see mr__decoder)
     * until mr__block_settle_offsets. */
    int off_is_exposure;
    double *num;
    int32_t *lev;
    /* With a cluster column: each row's cluster as a 128-bit hash of its
     * cell's text (two words a row); NULL otherwise. */
    uint64_t *cluster;
    /* First pass only, summed row by row as rows are kept: the prior
     * weights, w y, the rows with w > 0, the log-likelihood terms that
     * depend on the data alone (see accum/scan.c), and w e^offset and
     * w offset for the null model's start (the latter left at 0 when the
     * offset is deferred, see mr__decoder). */
    double sw, swy, llc, swe, swoff;
    uint64_t npos;
    uint64_t nfraction; /* rows whose outcome lies strictly between 0 and 1 */
    uint64_t nnonint;   /* rows whose outcome is not a whole number */
    /* Collapsed patterns only: per-pattern Pearson correction (see
     * accum/patterns.h); NULL otherwise. */
    double *extra;
    /* Collapsed patterns only: each one's rows of positive weight and
     * their prior weight, for calibration (accum/calibration.h). */
    double *cal_rows, *cal_weight;
    /* First pass with collapsing: this block's rows as pattern keys. */
    mr__pattern_rows *patterns;
    /* First pass: the levels new to this block's worker, in the order met
     * (rows, then fields); the calling thread counts them in block order
     * (accum/census.h). */
    mr__new_level *new_levels;
    size_t nnew_levels, new_levels_cap;
    /* First pass, when the binding counts some numeric's values: per
     * numeric, this block's distinct values and their counts (a zero
     * table for the others), and the sort's scratch (MR__BLOCK_ROWS). */
    mr__value_counts *counts;
    size_t ncounts;
    double *count_scratch;
    uint64_t *missing; /* per bound column: rows left out for a missing cell */
    uint32_t incomplete;
    uint32_t nbad, nbad_shown;
    mr__bad_row bad[MR__BAD_SHOWN];
    int failed;        /* err holds the first row error (fail mode) */
    mr__error err;
} mr__block;

mr_status mr__block_init(mr__block *b, const mr__binding *bind, mr__error *err);
void mr__block_release(mr__block *b);
/* Takes the deferred logs, if any: for a block about to be kept. */
void mr__block_settle_offsets(mr__block *b);

typedef struct mr__decode_cfg {
    const mr__binding *bind;
    const mr__family *family;
    int skip_bad;
    char delim;
    const char *display;
    char **missing;   /* tokens; "" is the empty cell */
    size_t *missing_len;
    size_t nmissing;
    /* Shared sorted levels per factor, or NULL in the first pass, when each
     * decoder collects the levels it meets in `local` instead. */
    const mr__levelset *levels;
    /* First pass: 0 = no collapsing, 1 = patterns without offset, 2 = poisson
     * log-link patterns with offset (accum/patterns.h).  Workers stop
     * building patterns once *collapse_abandoned is set. */
    int collapse;
    atomic_int *collapse_abandoned;
    /* First pass: the pairs of factors (binding numbers) that interact,
     * whose cells accum/level_outcomes.h counts. */
    const int32_t (*pairs)[2];
    size_t npairs;
    /* ... and the triples of factors that interact (after the pairs' tables) */
    const int32_t (*triples)[3];
    size_t ntriples;
} mr__decode_cfg;

typedef struct mr__decoder {
    const mr__decode_cfg *cfg;
    int32_t worker;
    mr__tokenizer tok;
    mr__numparser *np;
    mr__levelset *local; /* nfac sets, first pass only */
    double *val;         /* per bound column, current row */
    int32_t *lev;
    unsigned char *miss;
    unsigned char *wanted; /* per field: an mr__field_use (QUICK: a numeric cell
                              the inline parser may take) */
    /* The first bytes of the non-empty missing tokens, and whether the
     * empty cell is one: most cells are told apart from every token by
     * their first byte. */
    unsigned char missing_first[256];
    int missing_empty;
    int row_missing;       /* some miss[] is set for the current row */
    mr__outcome_range outcome; /* the family's, checked on every row */
    /* First pass, poisson log-link patterns with an exposure alone: the
     * patterns need log(exposure) only for rows with events, and a block
     * is kept for later passes only when collapsing was given up early, so
     * the block keeps the exposure and the log is taken only when needed. */
    int defer_offset;
    double row_eoff;       /* the row's e^offset (the exposure alone: e itself) */
    int row_bad;
    mr_status row_status;
    size_t bad_field;
    char row_msg[300];
    double row_llc;
    /* First pass with collapsing: the numbering of each key column's
     * values (the factors' `local` sets, then one per numeric). */
    mr__levelset *numvals;
    const mr__levelset **keysets;
    mr__block *blk;
    uint64_t cluster_key[2]; /* the current row's cluster (its hash) */
    int cluster_col;         /* the binding's cluster column, -1 without one */
    const mr__chunk *chunk;
    uint32_t row;        /* the chunk row being decoded */
    int stop;
    mr__error *err;      /* out of memory inside a callback */
} mr__decoder;

#define MR__STRINGIFY(x) #x
#define MR__STRING_OF(x) MR__STRINGIFY(x)
#define MR__TOO_MANY_LEVELS \
    "more than " MR__STRING_OF(MR__MAX_LEVELS) " distinct levels, the most a factor may have (is it an identifier? " \
    "a factor of up to " MR__STRING_OF(MR__MAX_MANY_LEVELS) " levels can be declared 'many')"
#define MR__TOO_MANY_MANY_LEVELS \
    "more than " MR__STRING_OF(MR__MAX_MANY_LEVELS) " distinct levels, the most a 'many' factor may have"

/* What to say when factor variable f goes beyond its limit. */
static inline const char *mr__too_many_levels(const mr__binding *b, size_t f)
{
    return mr__factor_level_limit(b, f) == MR__MAX_MANY_LEVELS ? MR__TOO_MANY_MANY_LEVELS : MR__TOO_MANY_LEVELS;
}

/* "FIELD: column 'NAME': WHAT (value 'V')", the part of a cell's message
 * after file and line. */
void mr__cell_message(char *out, size_t cap, const mr__column *c, const char *what, const char *p, size_t len);

mr_status mr__decoder_init(mr__decoder *d, const mr__decode_cfg *cfg, mr__error *err);
void mr__decoder_release(mr__decoder *d);

/* Decodes a chunk into blk (which is reset first).  A row error in fail
 * mode is not a failure of this call: it is recorded in blk->failed/err so
 * that errors are reported in file order.  Returns non-OK only for errors
 * that are not about a row (malformed quoting, out of memory). */
mr_status mr__decode_chunk(mr__decoder *d, const mr__chunk *c, mr__block *blk, mr__error *err);

#endif
