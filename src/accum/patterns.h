/* patterns.h - collapsing rows into covariate patterns.
 *
 * When every term is a factor or a numeric with few distinct values, rows
 * with the same covariate values share one fitted mean, and the IRLS sums
 * depend on their outcomes only through a few totals.  The first pass then
 * reduces the file to its distinct patterns (built per block and merged in
 * block order, so the totals are the same bits for any thread count), and
 * IRLS runs in memory on the patterns: one read of the file for the whole
 * fit.
 *
 * Two forms, chosen before the read:
 *  - no offset, any family: a pattern is one row with prior weight
 *    W = sum w and outcome ybar = sum w y / W;
 *  - poisson, log link, offset or exposure: one row with outcome
 *    Y = sum w y, exposure E = sum w exp(offset), prior weight 1.
 * Either way the deviance of the rows differs from that of the patterns by
 * a constant (the deviance within patterns), and the Pearson statistic by
 * a term per pattern divided by V(mu); both are kept (see mr__pattern). */
#ifndef MR_PATTERNS_H
#define MR_PATTERNS_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"

#define MR__MAX_PATTERNS 250000
/* A numeric with more distinct values than this in one block is taken
 * as continuous: collapsing would only make a copy of the file. */
#define MR__COLLAPSE_MAX_DISTINCT 256

typedef struct mr__pattern {
    uint64_t hash;
    uint32_t key_off, key_len;
    /* no offset: a = sum w, b = sum w y, c = sum w y^2, d = sum w h(y)
     * offset:    a = sum w e^o, b = sum w y, c = sum w y^2 e^-o,
     *            d = sum w (y log y - y o) */
    double a, b, c, d;
} mr__pattern;

typedef struct mr__pattern_table {
    uint64_t *slot; /* entry index + 1 and a hash tag (patterns.c); 0 = empty */
    size_t cap, n;
    mr__pattern *ent;
    size_t ent_cap;
    char *keys;
    size_t keys_len, keys_cap;
    /* 1: a list of rows in order, not a table (a block's rows rarely share
     * a pattern, so adding them up per block first would only double the
     * lookups; the merge adds them in order all the same). */
    int rows_only;
} mr__pattern_table;

void mr__patterns_init(mr__pattern_table *t);
void mr__patterns_release(mr__pattern_table *t);
void mr__patterns_clear(mr__pattern_table *t);

uint64_t mr__patterns_hash(const char *key, size_t len);
/* Adds the statistics to the pattern `key`, creating it after the others
 * if new.  Returns 0, or -1 when out of memory. */
int mr__patterns_add(mr__pattern_table *t, const char *key, size_t len, uint64_t hash, double a, double b,
                     double c, double d);
/* into += from, entry by entry in from's order.  -1 when out of memory. */
int mr__patterns_merge(mr__pattern_table *into, const mr__pattern_table *from);

/* 1 if x[0..n) holds at most `limit` distinct values (limit < 1024). */
int mr__few_distinct(const double *x, size_t n, size_t limit);

#endif
