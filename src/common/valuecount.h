/* valuecount.h - a numeric column's distinct values with their counts, in
 * bounded memory: what exact quantiles need (a spline's knots at df=).
 *
 * A block's values are sorted and counted on the worker that decoded it;
 * the calling thread adds each block's table into a hash table of the
 * total, and mr__counts_finish sorts the total once at the end.  The
 * total is a function of the multiset of values alone (counts are whole
 * numbers), so knots are the same bits for any thread count, and merging
 * costs the block's distinct values, not the total's.  Past
 * MR__COUNT_MAX_DISTINCT distinct values the table is dropped and only
 * the count of values, the minimum and the maximum are kept.  Zeros are
 * counted as +0. */
#ifndef MR_VALUECOUNT_H
#define MR_VALUECOUNT_H

#include <stddef.h>
#include <stdint.h>
#include "millrace.h"

/* 2^18 distinct values: a hash table of 8 MiB per column at most. */
#define MR__COUNT_MAX_DISTINCT 262144

typedef struct mr__count_slot {
    double value;
    uint64_t count; /* 0: an empty slot */
} mr__count_slot;

typedef struct mr__value_counts {
    /* Sorted: a block's table, and the total once finished. */
    double *value;   /* ascending, distinct */
    uint64_t *count; /* rows holding each value */
    size_t n, cap;
    /* The total while blocks are added: open addressing, nslots a power
     * of two, at most half full; n counts its values. */
    mr__count_slot *slot;
    size_t nslots;
    uint64_t total;  /* values counted, also past the limit */
    double min, max; /* of every value counted (NaN when total is 0) */
    int over;        /* more than MR__COUNT_MAX_DISTINCT distinct values: table dropped */
    int failed;      /* out of memory while merging: the table cannot be trusted */
} mr__value_counts;

void mr__counts_init(mr__value_counts *c);
void mr__counts_release(mr__value_counts *c);
/* c becomes the counts of x[0..n) (scratch: n doubles).  MR_ERR_NO_MEMORY
 * when out of memory. */
mr_status mr__counts_of(mr__value_counts *c, const double *x, size_t n, double *scratch);
/* into += from (a block's sorted table) into the hash table; on failure
 * into->failed is set (the caller reports it). */
void mr__counts_merge(mr__value_counts *into, const mr__value_counts *from);
/* The total's table sorted, for the queries below (after the last merge;
 * again is harmless).  On failure c->failed is set. */
void mr__counts_finish(mr__value_counts *c);
/* The queries take a sorted table (a block's, or a finished total) with
 * over and failed 0.  The value of rank r (0-based, r < total). */
double mr__counts_order_stat(const mr__value_counts *c, uint64_t r);
/* How many values counted lie in [lo, hi]; only with the table. */
uint64_t mr__counts_within(const mr__value_counts *c, double lo, double hi);
/* The p-quantile of the values in [lo, hi], by R's quantile type 7
 * (Hyndman and Fan's definition 7): with n values, index = 1 + (n - 1) p,
 * j = floor(index) and f = index - j, the j-th smallest value x_j, or
 * (1 - f) x_j + f x_j+1 when f > 0 and the two differ, in that order of
 * operations (so the same bits as R's quantile()).  Exact: every value is
 * in the table.  NaN when no value lies in [lo, hi]. */
double mr__counts_quantile(const mr__value_counts *c, double lo, double hi, double p);

#endif
