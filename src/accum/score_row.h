/* score_row.h - one scored row (score_row.c), shared with the job that
 * runs it (job_score.c): the worker's and the slot's state, the CSV text. */
#ifndef MR_ACCUM_SCORE_ROW_H
#define MR_ACCUM_SCORE_ROW_H

#include "accum/pass.h"
#include "accum/score.h"
#include "common/strbuf.h"

/* A block's groups, in the order of their first row in it: each key
 * (each cell as its 4-byte little-endian length and bytes) in keys, and
 * the group's sums over the block's rows in it, in row order (the job's
 * add takes them into the totals in block order: the same bits for any
 * thread count). */
typedef struct group_key {
    size_t at, len;
    double obs, exp, expo, prior;
    uint64_t rows;
} group_key;

typedef struct score_slot {
    mr__strbuf out;
    uint64_t rows, scored, unseen, missing;
    mr__strbuf keys;
    group_key *gkey;
    size_t nkey, gkey_cap;
    int nomem, toomany;
} score_slot;

typedef struct score_worker {
    const mr__score_cfg *c;
    mr__tokenizer tok;
    mr__numparser *np;
    /* no missing-value token looks like a number: a short decimal cell is
     * read by mr__parse_short_decimal before the tokens are compared */
    int quick_numbers;
    /* the computed columns written (mr__score_column_written), and which
     * of the costlier ones they need */
    unsigned char written[MR__SCORE_NCOLUMNS];
    int wants_se, wants_interval, wants_residuals;
    unsigned char *wanted; /* per header field */
    mr__row_cells cells;   /* the row's cells */
    int32_t *lev;  /* the row's level numbers and numerics */
    double *num;
    size_t *xcol; /* the row's non-zero design entries */
    double *xval;
    /* A `many` level's row: x - m_l at the columns either touches (dcol,
     * n of them), dpos[j] 1 + j's place there, 0 elsewhere */
    double *dx;
    size_t *dcol, *dpos;
    mr__pass_slot *s;
    const mr__chunk *chunk;
    double expo; /* the row's exposure */
    /* The groups of the block at hand, by a key that is cheap to build:
     * a by column that is a model factor as its level number (the row's
     * cell is that level's bytes), another as its length and bytes. */
    int32_t *by_fac; /* per by column: its index in fac, or -1 */
    mr__levelset local;
    mr__strbuf lkey;
    /* Every by column a factor, and their cells few (MR__SCORE_DENSE_GROUPS
     * at most): the group's number in the block straight from its cell's
     * number (sum of level number times stride), -1 before its first row. */
    int32_t *dense, *dense_cell; /* by cell; each block group's cell */
    size_t *by_stride;
    size_t nlocal;
} score_worker;

#define MR__SCORE_DENSE_GROUPS 65536

/* Each block's groups numbered afresh (the job's compute). */
void mr__score_groups_reset(score_worker *sw);


/* A row's end (mr__tokenize_cells; the worker is user): its CSV line (and
 * group row) into the worker's slot. */
void mr__score_row_end(void *user, uint32_t r, size_t nfields);

#endif
