/* census.h - the distinct levels of each factor, counted over the whole
 * file in block order.
 *
 * Each first-pass worker numbers the levels it meets in a set of its own,
 * so no worker sees the file's count: with more levels than a factor may
 * have, which worker fills its set first, and at which row, would depend
 * on how blocks fell to workers.  The calling thread, which takes the
 * blocks in file order, counts here the levels each block met first
 * (mr__block.new_levels): the level that goes beyond the limit is then
 * always the file's first such one, named by line, column and value,
 * whatever the threads.  A worker's set takes one level more than the
 * limit, so it is never full before the count here has gone beyond it. */
#ifndef MR_CENSUS_H
#define MR_CENSUS_H

#include "accum/decode.h"

typedef struct mr__level_census {
    mr__levelset *seen; /* per factor */
    size_t nfac;
} mr__level_census;

/* A census of binding b's factors, each held to its limit
 * (mr__factor_level_limit). */
mr_status mr__census_init(mr__level_census *c, const mr__binding *b, mr__error *err);
void mr__census_release(mr__level_census *c);

/* Counts the levels new in this block (decoded from chunk `ch`, the next in
 * file order).  MR_ERR_DOMAIN naming file, line, column and value when a
 * factor would go beyond its limit; MR_ERR_NO_MEMORY. */
mr_status mr__census_add(mr__level_census *c, const mr__block *blk, const mr__chunk *ch, const mr__decode_cfg *cfg,
                         mr__error *err);

#endif
