/* calibration.h - observed against expected by fitted mean, in one pass.
 *
 * Each row's fitted mean falls in one bin of a fixed grid, and the bin sums
 * the row's count, prior weight, observed (w y) and expected (w mu) and
 * keeps the least and greatest mean it met.  The grid is the double's own
 * bits: sign, exponent and the top MR__CALIB_FRACTION_BITS bits of the
 * fraction, so a bin spans a relative width of 2^-4 (about 6%) on a log
 * scale, for |mu| from 2^-64 to 2^64 (outside, the end bins).  A mean in
 * (0, 1) (binomial) is binned by min(mu, 1 - mu) mirrored about 1/2, a
 * logit-like scale fine at both ends (1 - mu is exact for mu >= 1/2).
 *
 * Blocks fill a bin table each, which the pass adds in the order of every
 * other sum (accum/partial.h): bins are independent sums, so the totals are
 * the same bits for any thread count.  Ten groups of about equal row
 * counts are then whole bins: the split is as fine as a bin, the sums in
 * each group exact. */
#ifndef MR_CALIBRATION_H
#define MR_CALIBRATION_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"

#define MR__CALIB_FRACTION_BITS 4
#define MR__CALIB_EXPONENTS 128 /* 2^-64 .. 2^64 */
#define MR__CALIB_HALF (MR__CALIB_EXPONENTS << MR__CALIB_FRACTION_BITS)
#define MR__CALIB_BINS (2 * MR__CALIB_HALF + 1)
#define MR__CALIB_GROUPS 10
/* In a fit's calibration basis when the bins are of rates, not means. */
#define MR__CALIB_RATE_WORDS "fitted rate per unit of exposure"

/* The values a bin holds, in this order. */
enum { MR__CB_ROWS, MR__CB_WEIGHT, MR__CB_OBSERVED, MR__CB_EXPECTED, MR__CB_LOW, MR__CB_HIGH, MR__CB_N };

typedef struct mr__calib {
    double *bin;     /* MR__CALIB_BINS x MR__CB_N; NULL: not kept */
    uint32_t lo, hi; /* bins [lo, hi) may be non-zero */
} mr__calib;

typedef struct mr__calib_group {
    uint64_t rows;
    double weight, mean_low, mean_high, observed, expected;
} mr__calib_group;

mr_status mr__calib_init(mr__calib *c, mr__error *err);
void mr__calib_release(mr__calib *c);
void mr__calib_zero(mr__calib *c);
/* into += from, bin by bin (either may be unkept: then nothing). */
void mr__calib_add(mr__calib *into, const mr__calib *from);

/* The bin of a mean; `unit`: means lie in (0, 1). */
uint32_t mr__calib_bin(double mu, int unit);

/* Rows 0..n-1: outcome y, mean mu, prior weight (NULL: 1).  `rows` and
 * `weight` (NULL: one row each, of weight prior) are a collapsed
 * pattern's row count and prior weight.  `rate` (NULL: mu) is what a row
 * is binned by, and what the least and greatest keep: a model with an
 * offset bins by the mean per unit of exposure, g^-1(eta - offset), which
 * a collapsed pattern shares with each of its rows (its mu is their
 * total), while observed and expected stay sums of w y and w mu.  Rows of
 * weight 0 and rows whose mean or rate is not finite are left out. */
void mr__calib_rows(mr__calib *c, const double *y, const double *mu, const double *rate, const double *prior,
                    const double *rows, const double *weight, size_t n, int unit);

/* The bins in order of mean, cut into at most MR__CALIB_GROUPS groups: a
 * group ends at the first bin where the rows so far reach the next tenth
 * of all rows (k n / 10); a bin passing several tenths ends one group.
 * Returns the number of groups (0 when there are no rows). */
size_t mr__calib_groups(const mr__calib *c, mr__calib_group out[MR__CALIB_GROUPS]);

#endif
