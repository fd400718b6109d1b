/* patterns.h - collapsing rows into covariate patterns.
 *
 * When every term is a factor or a numeric with few distinct values, rows
 * with the same covariate values share one fitted mean, and the IRLS sums
 * depend on their outcomes only through a few totals.  The first pass then
 * reduces the file to its distinct patterns, and IRLS runs in memory on the
 * patterns: one read of the file for the whole fit.
 *
 * A pattern's key is one small number per key column (each factor, then
 * each numeric), not its text: hashing and comparing a few words is what
 * keeps the merge cheap.  A worker numbers the values it meets its own way
 * and lists, with each block, the values it met first in that block; the
 * calling thread merges blocks in block order and renumbers every value by
 * its first appearance in that order.  So pattern order, the global
 * numbers and every sum are the same bits for any thread count.
 *
 * Two forms, chosen before the read:
 *  - no offset, any family with a saturated term: a pattern is one row
 *    with prior weight W = sum w and outcome ybar = sum w y / W;
 *  - poisson, log link, offset or exposure: one row with outcome
 *    Y = sum w y, exposure E = sum w exp(offset), prior weight 1.
 * Which form a family allows is in its table (family.h: saturated_term,
 * log_offset_patterns); fit/run.c chooses.
 * Either way the deviance of the rows differs from that of the patterns by
 * a constant (the deviance within patterns), and the Pearson statistic by
 * a term per pattern divided by V(mu); both are kept (see MR__PATTERN_*). */
#ifndef MR_PATTERNS_H
#define MR_PATTERNS_H

#include <stddef.h>
#include <stdint.h>
#include "common/levels.h"

#define MR__MAX_PATTERNS 250000
/* A numeric with more distinct values than this in one block is taken
 * as continuous: collapsing would only make a copy of the file. */
#define MR__COLLAPSE_MAX_DISTINCT 256

/* The sums of a pattern (or of one row):
 *   no offset: a = sum w, b = sum w y, c = sum w y^2, d = sum w h(y)
 *   offset:    a = sum w e^o, b = sum w y, c = sum w y^2 e^-o,
 *              d = sum w (y log y - y o)
 * and for calibration (accum/calibration.h), either way: n = the rows of
 * w > 0, and sum w. */
enum { MR__PATTERN_A, MR__PATTERN_B, MR__PATTERN_C, MR__PATTERN_D, MR__PATTERN_N, MR__PATTERN_W, MR__PATTERN_SUMS };

/* One block's rows as a worker leaves them for the merge. */
typedef struct mr__pattern_rows {
    size_t nkey, n;
    uint32_t *ids; /* row i, key column k: ids[i * nkey + k], the worker's numbers */
    double *sums;  /* row i: sums[i * MR__PATTERN_SUMS + ...] */
    /* Key column k's values first met in this block have the worker's
     * numbers from[k] .. to[k] - 1; their bytes follow one another in
     * text, each as a uint32_t length and the bytes. */
    uint32_t *from, *to;
    char *text;
    size_t text_len, text_cap;
} mr__pattern_rows;

/* Rows for one block of MR__BLOCK_ROWS rows.  MR_ERR_NO_MEMORY when out of memory. */
mr_status mr__pattern_rows_init(mr__pattern_rows *r, size_t nkey);
void mr__pattern_rows_release(mr__pattern_rows *r);
/* Starts a block: notes where each worker set stands (sets[k] numbers key
 * column k). */
void mr__pattern_rows_begin(mr__pattern_rows *r, const mr__levelset *const *sets);
/* Ends a block: lists the values the sets gained.  MR_ERR_NO_MEMORY when out of memory. */
mr_status mr__pattern_rows_end(mr__pattern_rows *r, const mr__levelset *const *sets);

/* The distinct patterns, in order of first appearance: each one's four
 * sums (32 bytes, on a 64-byte boundary every other pattern, so never
 * across two cache lines), and apart from them its key, the global
 * numbers packed two to a 64-bit word. */
typedef struct mr__pattern_table {
    size_t nkey, kwords;
    uint64_t *slot;              /* hash tag | pattern + 1; 0 = empty */
    size_t cap, n;
    double *sums;                /* MR__PATTERN_SUMS per pattern */
    uint64_t *keys;              /* kwords per pattern */
    size_t room;                 /* patterns the two arrays hold */
} mr__pattern_table;

/* Pattern i's sums, and the global number of its key column k. */
void mr__pattern_sums(const mr__pattern_table *t, size_t i, double out[MR__PATTERN_SUMS]);
uint32_t mr__pattern_id(const mr__pattern_table *t, size_t i, size_t k);

/* Appends a pattern (kwords key words, its sums) to a table read back
 * (accum/first_bytes.c), found by number only.  MR_ERR_NO_MEMORY. */
mr_status mr__pattern_table_put(mr__pattern_table *t, const uint64_t *key, const double sums[MR__PATTERN_SUMS]);

/* A direct index of up to 2^21 cells (8 MiB) replaces the hash table
 * while the key columns' value counts, each rounded up to a power of two,
 * multiply to no more than that. */
#define MR__DENSE_MAX_BITS 21

/* The merge on the calling thread. */
typedef struct mr__pattern_merge {
    size_t nkey, nworkers;
    mr__levelset *values; /* per key column, numbered by first appearance */
    int32_t **map;        /* [worker * nkey + k]: worker's number -> global */
    size_t *map_cap;
    uint64_t *key, *hash; /* scratch: a block's packed keys and their hashes
                             (with the direct index: its cells) */
    /* The direct index: cell = sum of global number k << shift[k], holding
     * record number + 1 (0 = no such pattern yet).  NULL once the hash
     * table has taken over for good. */
    uint32_t *dense;
    unsigned char *bits, *shift;
    int hashed;
    mr__pattern_table table;
} mr__pattern_merge;

mr_status mr__pattern_merge_init(mr__pattern_merge *m, size_t nkey, size_t nworkers);
void mr__pattern_merge_release(mr__pattern_merge *m);
/* Adds a block's rows from `worker`, in row order.  MR_ERR_NO_MEMORY when out of memory. */
mr_status mr__pattern_merge_add(mr__pattern_merge *m, int32_t worker, const mr__pattern_rows *rows);

/* 1 if x[0..n) holds at most `limit` distinct values (limit < 1024). */
int mr__few_distinct(const double *x, size_t n, size_t limit);

#endif
