/* levelsums.h - the eliminated factor's per-level sums of a pass (the d,
 * b_D and c rows of solve/absorb.h), in the order of additions of
 * accum/partial.h: a block's rows add into its levels' rows in row order;
 * blocks add into a group's rows in block order; groups add into the
 * pass's rows in group order.  A block or a group holds only the levels it
 * met (at most a block's or a group's rows, whatever the number of
 * levels), in the order it met them; only the pass holds every level. */
#ifndef MR_LEVELSUMS_H
#define MR_LEVELSUMS_H

#include <stddef.h>
#include <stdint.h>
#include "accum/accumulate.h"

/* Rows of `width` doubles for the levels met, level[e]'s at val + e *
 * width. */
typedef struct mr__level_part {
    size_t width, n, cap;
    int32_t *level;
    double *val;
} mr__level_part;

/* An empty part whose rows are `width` doubles, room for `cap` levels
 * (it grows when adding into it needs more). */
mr_status mr__level_part_init(mr__level_part *p, size_t width, size_t cap, mr__error *err);
void mr__level_part_release(mr__level_part *p);

/* A group's rows: a part and where each level's row is (slot[level], -1
 * for none; nlev entries, all -1 between groups). */
typedef struct mr__level_group {
    mr__level_part part;
    int32_t *slot;
    size_t nlev;
} mr__level_group;

mr_status mr__level_group_init(mr__level_group *g, size_t nlev, size_t width, mr__error *err);
void mr__level_group_release(mr__level_group *g);
/* The group's rows += the block's, in the block's order of levels. */
mr_status mr__level_group_add(mr__level_group *g, const mr__level_part *block, mr__error *err);
/* total[level * width ..] += the group's rows, in the group's order; the
 * group emptied. */
void mr__level_group_close(mr__level_group *g, double *total);

/* What a block's rows are made from, copied from its worker's workspace
 * when the block is computed and made into rows only when it is added:
 * (ndense + 2) doubles and nsparse (double, column) pairs a row, against
 * (p + 2) doubles a level met for the rows themselves, so that the ring's
 * blocks waiting to be added do not each hold a block's worth of level
 * rows (the same arithmetic in the same order: the same bits). */
typedef struct mr__level_input {
    size_t n;        /* rows kept (0: none) */
    double *w, *D;   /* sqrt(w); the dense columns times sqrt(w), then sqrt(w) z (n apart) */
    double *sval;    /* the sparse entries (n apart) */
    int32_t *scol;
} mr__level_input;

/* Room for a block's inputs under design d. */
mr_status mr__level_input_init(mr__level_input *in, const mr__design *d, mr__error *err);
void mr__level_input_release(mr__level_input *in);
/* Keeps the inputs mr__accumulate_block has just left in ws for a block of
 * n rows. */
void mr__level_input_keep(mr__level_input *in, const mr__design *d, const mr__workspace *ws, size_t n);

/* The block's rows from its kept inputs: d += w, b_D += w z, c += w x for
 * each row at a level other than the reference.  slot is a slot map of
 * nabsorb entries (all -1, and left so).  The part must have room for
 * min(nabsorb, rows). */
void mr__level_part_block(const mr__irls_point *pt, const mr__block *blk, const mr__level_input *in, int32_t *slot,
                          mr__level_part *out);

#endif
