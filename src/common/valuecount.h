/* valuecount.h - a numeric column's distinct values with their counts, in
 * bounded memory: what exact quantiles need (a spline's knots at df=).
 *
 * A block's values are sorted and counted on the worker that decoded it;
 * the calling thread merges blocks into the total.  The merged table is a
 * function of the multiset of values alone (two sorted lists merge to the
 * same list in any order), so knots are the same bits for any thread
 * count.  Past MR__COUNT_MAX_DISTINCT distinct values the table is dropped
 * and only the count of values, the minimum and the maximum are kept. */
#ifndef MR_VALUECOUNT_H
#define MR_VALUECOUNT_H

#include <stddef.h>
#include <stdint.h>
#include "millrace.h"

/* 2^18 distinct values: 4 MiB of table per column at most. */
#define MR__COUNT_MAX_DISTINCT 262144

typedef struct mr__value_counts {
    double *value;   /* ascending, distinct (compared as doubles) */
    uint64_t *count; /* rows holding each value */
    size_t n, cap;
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
/* into += from; on failure into->failed is set (the caller reports it). */
void mr__counts_merge(mr__value_counts *into, const mr__value_counts *from);
/* The value of rank r (0-based, r < total) among the values counted;
 * only with the table (over and failed 0). */
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
