/* levelsums.h - the eliminated factor's per-level sums of a pass (the d,
 * b_D and c rows of solve/absorb.h): a block's rows add into its levels'
 * rows in row order, and blocks add into the pass's rows in block order
 * (one job adds them, whatever the threads: the same bits for any count,
 * streamed, cached or in memory).  Unlike the other sums (accum/partial.h)
 * they skip the group: a group of 16 blocks meets nearly every level of
 * a factor of 10^5 (about 10 rows a level), so its rows would cost as much
 * memory as the pass's and save nothing, while a share of the file (MPI)
 * could pass on its blocks' rows as well as its groups'. */
#ifndef MR_LEVELSUMS_H
#define MR_LEVELSUMS_H

#include <stddef.h>
#include <stdint.h>
#include "accum/accumulate.h"

/* The levels met by a block.  A level's row is d, b_D and its c entries,
 * of which it holds only those some row of it touched: a level's few rows
 * meet few of the other columns (about 6 a row of case A's 60), and the
 * untouched entries are +0 in the dense row, whose additions change
 * nothing (no entry is ever -0: each starts at +0, and -0 comes only from
 * -0 + -0), so the touched entries alone give the dense row's bits at a
 * fraction of its memory and work.  Row e's entries form a chain in
 * increasing column order from head[e] through next[]. */
typedef struct mr__level_part {
    size_t width;            /* of a row in the pass's totals: p + 2 */
    size_t n;                /* levels met */
    int32_t *level, *head;   /* per level met */
    double *db;              /* d and b_D, 2 per level met */
    size_t ncell;            /* c entries held */
    double *val;             /* per entry */
    int32_t *col, *next;     /* per entry: its column, the next entry (-1: none) */
    int32_t *scratch_col;    /* a row's entries on their way in (width) */
    double *scratch_val;
    int32_t *source;         /* the order a row's entries are taken in (mr__level_part_init) */
} mr__level_part;

/* An empty part for one block's rows under design d (d->nabsorb > 0):
 * room for its levels and entries, and the order its rows' entries are
 * taken in.  MR_ERR_NO_MEMORY. */
mr_status mr__level_part_init(mr__level_part *p, const mr__design *d, mr__error *err);
void mr__level_part_release(mr__level_part *p);

/* The doubles of a pass's level totals under design d: each level's row
 * of p + 2, then the reference's (accumulate.h). */
static inline size_t mr__level_totals_size(const mr__design *d) { return (d->nabsorb + 1) * (d->p + 2); }

/* A slot map for mr__level_part_block: nabsorb + 1 entries, all -1 (the
 * caller frees it); NULL when out of memory. */
int32_t *mr__level_slots_new(const mr__design *d);

/* total[level * width ..] += the part's rows, in the part's order. */
void mr__level_part_add_to(const mr__level_part *p, double *total);

/* The block's rows from ws as mr__accumulate_block has just left it for
 * the block's n rows (sqrt(w); the dense columns times sqrt(w), then
 * sqrt(w) z; the sparse entries; each n apart): d += w, b_D += w z,
 * c += w x for each row at its level, the reference's row numbered
 * nabsorb (the pass's rows hold it after the others': solve/absorb.h,
 * "Precision").  The worker that computed the block makes them, and the
 * calling thread adds them in block order (mr__level_part_add_to): the
 * same arithmetic in the same order whichever thread makes them.  slot is
 * a slot map of nabsorb + 1 entries (all -1, and left so).  The part must
 * come from mr__level_part_init. */
void mr__level_part_block(const mr__irls_point *pt, const mr__block *blk, const mr__workspace *ws, size_t n,
                          int32_t *slot, mr__level_part *out);

/* The same rows from the workspace as mr__block_scores leaves it (x
 * unscaled, each row's score multiplier u in place of sqrt(w)): d += u,
 * b_D += u^2, c += u x, so that a level's c is its score sum over the
 * other columns (the meat of standard errors clustered by the eliminated
 * factor: fit/robust.c). */
void mr__level_part_scores(const mr__irls_point *pt, const mr__block *blk, const mr__workspace *ws, size_t n,
                           int32_t *slot, mr__level_part *out);

#endif
