/* scan.h - what the first pass learns about the data, before any fitting:
 * row counts, missing cells per column, the spread of each numeric (for
 * internal centring), the pieces of the null model's starting value, and
 * the part of the log-likelihood that depends on the data alone (so that
 * the log-likelihood of any fit is that constant minus deviance / 2, with
 * no per-row special functions in later passes; each row's term is the
 * family's loglik_row, family/family.h). */
#ifndef MR_SCAN_H
#define MR_SCAN_H

#include <stdint.h>
#include "accum/decode.h"

typedef struct mr__scan_sums {
    uint64_t nread, nused, incomplete, nbad, npos;
    uint64_t nfraction; /* rows used whose outcome lies strictly between 0 and 1 */
    uint64_t nnonint;   /* rows used whose outcome is not a whole number */
    uint64_t *missing; /* per bound column */
    /* Per numeric: the sum, and the sum of squared deviations from the
     * mean as dev_scale^2 * dev_ssq (scaled, so that a cell of 1e200
     * does not overflow it).  A block takes the deviations from its own
     * mean (exact for x = 1e10 + i, where the mean of squares minus the
     * squared mean cancelled to nothing); blocks are merged in block
     * order with Chan's update, so the spread is the same bits for any
     * thread count. */
    double *sx, *dev_scale, *dev_ssq;
    /* Per numeric: the least and greatest value of the rows used (the
     * page's effect curves run between them); order-free, so the same
     * for any thread count. */
    double *xmin, *xmax;
    double sw, swy, swe, swoff, llc;
    /* The values of the numerics the binding counts (common/valuecount.h):
     * a block's are its own (borrowed from the block, valid until it is
     * added), the total's are merged in block order (nnum tables, NULL
     * until a block brings some; counts_failed: out of memory then). */
    const mr__value_counts *block_counts;
    mr__value_counts *counts;
    size_t ncounts;
    int counts_failed;
    uint32_t nbad_shown;
    mr__bad_row bad[MR__BAD_SHOWN];
} mr__scan_sums;

mr_status mr__scan_init(mr__scan_sums *s, size_t ncol, size_t nnum, mr__error *err);
void mr__scan_release(mr__scan_sums *s);
void mr__scan_reset(mr__scan_sums *s, size_t ncol, size_t nnum);

/* The block's sums (s is reset first). */
void mr__scan_block(const mr__block *blk, size_t ncol, size_t nnum, mr__scan_sums *s);
/* into += from, in the caller's (block) order. */
void mr__scan_add(mr__scan_sums *into, const mr__scan_sums *from, size_t ncol, size_t nnum);
/* Numeric k's standard deviation over the rows used (divisor n): 0 for a
 * constant column. */
double mr__scan_spread(const mr__scan_sums *s, size_t k);

/* What the first pass can tell about the outcome that makes a fit that
 * runs misleading all the same: at most MR__SCAN_OUTCOME_WARNINGS static
 * messages in out; returns how many.  `proportions_weighted`: the model
 * has a weight or trials column. */
#define MR__SCAN_OUTCOME_WARNINGS 2
size_t mr__scan_outcome_warnings(const mr__scan_sums *s, int family, int proportions_weighted,
                                 const char *out[MR__SCAN_OUTCOME_WARNINGS]);

#endif
