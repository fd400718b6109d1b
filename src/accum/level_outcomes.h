/* level_outcomes.h - per factor level, and per cell of two or three
 * factors that interact, how many rows with weight the first pass saw, how many had an
 * outcome above 0 and how many below its maximum (a binomial proportion
 * below 1): a level or cell with none of either has its fitted mean at
 * the edge of the family's range, and its coefficient runs off to
 * infinity.  Each first-pass worker counts the blocks it decoded, by its
 * own level numbers; the fit maps them to the shared ones and adds them
 * up.  The counts are integers, so their totals do not depend on which
 * worker took which block. */
#ifndef MR_LEVEL_OUTCOMES_H
#define MR_LEVEL_OUTCOMES_H

#include <stdint.h>
#include "accum/decode.h"

typedef struct mr__outcome_counts {
    uint64_t rows, above_zero, below_max;
} mr__outcome_counts;

/* One cell of a pair of factors (first level << 32 | second level, + 1)
 * or of three (first << 42 | second << 21 | third, + 1: levels below
 * MR__MAX_LEVELS < 2^21 fit), and its counts.  Either key is written as
 * its two 32-bit halves (accum/first_bytes.c). */
#define MR__CELL_LEVEL_BITS 21
typedef struct mr__cell_counts {
    uint64_t key; /* as above; 0: an empty slot */
    mr__outcome_counts c;
} mr__cell_counts;

typedef struct mr__cell_table {
    mr__cell_counts *slot;
    size_t n, cap;
} mr__cell_table;

typedef struct mr__level_outcomes {
    size_t nfac, ntables;
    mr__outcome_counts **level; /* per factor, by level number */
    size_t *nlevel;             /* per factor: entries in level[] */
    mr__cell_table *cells;      /* per pair of decode_cfg.pairs, then per triple of its triples */
    int failed;                 /* out of memory: the counts are not whole */
    uint8_t *kind;              /* scratch: a block's rows' outcome kinds (level_outcomes.c) */
    uint32_t *tally;            /* scratch: a block's counts by level and kind */
    size_t ntally;
} mr__level_outcomes;

/* ntables: the pairs and the triples; NULL on no memory. */
mr__level_outcomes *mr__level_outcomes_new(size_t nfac, size_t ntables);
void mr__level_outcomes_free(mr__level_outcomes *lo);
/* Counts a decoded block's rows (cfg: the pairs and triples of factors).
 * `local`: NULL, or the levels of the decoder that numbered the block's
 * (per factor; their number bounds its level numbers, which saves a walk
 * down each column for the greatest). */
void mr__level_outcomes_block(mr__level_outcomes *lo, const mr__block *blk, const mr__decode_cfg *cfg,
                              const mr__levelset *local);
/* Adds c into cell (a, b) of t: -1 on no memory. */
int mr__cell_table_add(mr__cell_table *t, uint32_t a, uint32_t b, const mr__outcome_counts *c);
/* Slot i's cell (i < t->cap): 0 for an empty slot, else 1 with a and b. */
int mr__cell_table_slot(const mr__cell_table *t, size_t i, uint32_t *a, uint32_t *b);
/* Cell (a, b) of t, or NULL. */
const mr__outcome_counts *mr__cell_table_find(const mr__cell_table *t, uint32_t a, uint32_t b);
/* A triple's cells: the key of levels (a, b, c), each below
 * 2^MR__CELL_LEVEL_BITS; a slot's key back to its levels (0 for an empty
 * slot); c added into the cell of key (-1 on no memory); the cell, or NULL. */
uint64_t mr__cell_key3(uint32_t a, uint32_t b, uint32_t c);
void mr__cell_key3_levels(uint64_t key, uint32_t lev[3]);
int mr__cell_table_slot3(const mr__cell_table *t, size_t i, uint32_t lev[3]);
int mr__cell_table_add_key(mr__cell_table *t, uint64_t key, const mr__outcome_counts *c);
const mr__outcome_counts *mr__cell_table_find_key(const mr__cell_table *t, uint64_t key);

#endif
