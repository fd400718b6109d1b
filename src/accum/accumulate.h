/* accumulate.h - one IRLS pass over one block: the block's share of X'WX,
 * X'Wz, the deviance and the Pearson statistic at the current coefficients.
 *
 * Blocks are summed in block order by the caller, so the totals do not
 * depend on which worker did which block. */
#ifndef MR_ACCUMULATE_H
#define MR_ACCUMULATE_H

#include <stdint.h>
#include "accum/calibration.h"
#include "accum/decode.h"
#include "family/family.h"
#include "model/design.h"

typedef struct mr__irls_point {
    const mr__design *design;
    const mr__family *family;
    const mr__link_ops *link;
    /* internal-scale coefficients, then the eliminated factor's levels'
     * (design.h); NULL = start from mustart */
    const double *beta;
    int null_intercept; /* the null model has an intercept */
    int null_skip;      /* its sums are known already: leave them out */
    double null_b0;     /* its current value */
    int calibrate;      /* bin the fitted means (accum/calibration.h) */
    int calib_unit;     /* the means lie in (0, 1) */
    int calib_rate;     /* bin by g^-1(eta - offset) (calibration.h) */
    /* The bins alone, as a pass that calibrates puts them (a block with
     * rows outside the family's domain adds none), and no other sum:
     * passes in memory bin only once their last point is known. */
    int calib_only;
} mr__irls_point;

typedef struct mr__block_sums {
    /* A pass's totals: p x p, upper triangle, column-major.  A block's:
     * the design's nnz entries that can be non-zero, packed
     * (mr__design_packed_index). */
    double *xtwx;
    double *xtwz; /* p */
    double dev, pearson, null_dev, null_sw, null_swz;
    uint64_t invalid;  /* rows whose eta or mu left the family's domain */
    uint64_t boundary; /* rows fitted at the edge of the domain */
    /* A pass's totals with a design's eliminated factor (design.h): its
     * nlev levels' rows of p + 2 doubles (d, b_D, c: see solve/absorb.h,
     * accum/levelsums.h), then the reference level's own row
     * (mr__sums_reference_row); NULL otherwise.  Owned. */
    double *lev;
    size_t nlev;
    mr__calib calib;   /* observed and expected by fitted mean (not encoded) */
    /* the family's own sums (family.h, MR__PS_*): zero for a family that
     * has none to add at this point */
    double fam[MR__PARAM_SUMS];
} mr__block_sums;

/* The reference level's own row, after the levels' (solve/absorb.h,
 * "Precision"), or NULL without an eliminated factor. */
static inline const double *mr__sums_reference_row(const mr__block_sums *s, size_t p)
{
    return s->lev != NULL ? s->lev + s->nlev * (p + 2) : NULL;
}

/* Scratch space a worker owns: one block of the design and per-row
 * vectors. */
typedef struct mr__workspace {
    size_t p;
    double *D, *sval, *dd, *bd, *sd;
    double *lanes; /* scratch of the dense cross products */
    double *tile;  /* rows of dense values (sparse_cross_products) */
    double *bs;    /* 0, then the coefficients (linear_predictor) */
    int32_t *scol;
    double *eta, *mu, *mu_eta, *var, *dev, *w;
} mr__workspace;

mr_status mr__workspace_init(mr__workspace *ws, const mr__design *d, mr__error *err);
void mr__workspace_release(mr__workspace *ws);

/* Totals (p x p) and a block's packed sums, zeroed. */
mr_status mr__sums_init(mr__block_sums *s, size_t p, mr__error *err);
mr_status mr__sums_init_block(mr__block_sums *s, const mr__design *d, mr__error *err);
/* The same with calibration bins only where `bins` (a pass that does not
 * calibrate has no use for their 192 KiB each, zeroed per slot and pass). */
mr_status mr__sums_init_pass(mr__block_sums *s, size_t p, int bins, mr__error *err);
mr_status mr__sums_init_block_pass(mr__block_sums *s, const mr__design *d, int bins, mr__error *err);
void mr__sums_release(mr__block_sums *s);
/* A block's sums back to zero. */
void mr__sums_zero(mr__block_sums *s, const mr__design *d);
/* Totals += a block's sums, in place in the p x p upper triangle. */
void mr__sums_add(mr__block_sums *into, const mr__block_sums *from, const mr__design *d);
/* Totals += totals (p x p, upper triangle): a group's total into a pass's
 * (accum/partial.h). */
void mr__sums_add_totals(mr__block_sums *into, const mr__block_sums *from, size_t p);
/* Totals (p x p) back to zero. */
void mr__sums_zero_totals(mr__block_sums *s, size_t p);

/* Computes the block's sums into out (overwritten). */
void mr__accumulate_block(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws,
                          mr__block_sums *out);

/* Robust standard errors.  mr__block_scores fills the workspace for the
 * block at pt's coefficients: the design's values (ws->D, scol, sval, the
 * dense columns unscaled) and each row's score factor
 * u = prior (y - mu) mu_eta / V(mu) in ws->w, so that the row's score is
 * u x.  mr__accumulate_scores then forms, in out (overwritten), the
 * block's sum of u^2 x x' (xtwx, packed) and of u x (xtwz); it scales
 * ws->D's dense columns by u. */
void mr__block_scores(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws);
void mr__accumulate_scores(const mr__design *d, const mr__block *blk, mr__workspace *ws, mr__block_sums *out);

#endif
