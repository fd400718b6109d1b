/* score_row.h - one scored row (score_row.c), shared with the job that
 * runs it (job_score.c): the worker's and the slot's state, the CSV text. */
#ifndef MR_ACCUM_SCORE_ROW_H
#define MR_ACCUM_SCORE_ROW_H

#include "accum/pass.h"
#include "accum/score.h"
#include "common/strbuf.h"

/* A scored row with its outcome, for the groups: its key's bytes in
 * keys from key_at, and its observed and expected counts and exposure. */
typedef struct group_row {
    size_t key_at, key_len;
    double obs, exp, expo, prior;
} group_row;

typedef struct score_slot {
    mr__strbuf out;
    uint64_t rows, scored, unseen, missing;
    mr__strbuf keys;
    group_row *grow;
    size_t ngrow, grow_cap;
    int nomem;
} score_slot;

typedef struct score_worker {
    const mr__score_cfg *c;
    mr__tokenizer tok;
    mr__numparser *np;
    unsigned char *wanted; /* per header field */
    mr__row_cells cells;   /* the row's cells */
    int32_t *lev;  /* the row's level numbers and numerics */
    double *num;
    size_t *xcol; /* the row's non-zero design entries */
    double *xval;
    mr__pass_slot *s;
    const mr__chunk *chunk;
    double expo; /* the row's exposure */
} score_worker;

/* RFC 4180 text of n bytes at p onto o. */
void mr__score_put_text(mr__strbuf *o, const char *p, size_t n);

/* The field sink's calls (the worker is user): a row's cells, then at its
 * end its CSV line (and group row) into the worker's slot. */
void mr__score_on_field(void *user, size_t k, const char *p, size_t len);
void mr__score_row_end(void *user, uint32_t r, size_t nfields);

#endif
