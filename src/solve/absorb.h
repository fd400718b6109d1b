/* absorb.h - the normal equations with one factor of very many levels
 * eliminated exactly (a Schur complement on the small dense rest).
 *
 * With X = [D | R], D the indicator columns of every level of the factor
 * (all L of them: the factor absorbs the intercept) and R the p_r other
 * columns (no intercept column among them),
 *
 *     X'WX = [ diag(d)  C' ]      X'Wz = [ b_D ]
 *            [ C        A  ]             [ b_R ]
 *
 * d_l = sum of w over level l's rows, C's column l (held here as level l's
 * row c_l of p_r values) = sum of w r over them, A = R'WR.  With
 * g_l = c_l / d_l:
 *
 *     S      = A - sum_l d_l g_l g_l'          (p_r x p_r)
 *     S beta_R = b_R - sum_l g_l b_D,l
 *     beta_D,l = b_D,l / d_l - g_l' beta_R
 *
 * and the inverse of X'WX is, exactly,
 *
 *     cov(beta_R)           = S^-1
 *     cov(beta_R, beta_D,l) = -S^-1 g_l
 *     cov(beta_D,l, beta_D,m) = [l == m] / d_l + g_l' S^-1 g_m
 *
 * so a level's variance costs O(p_r^2) and memory stays linear in L.
 *
 * Aliasing.  The factor's columns count as coming first: a column of R in
 * the span of the levels (a covariate constant within each level) or of
 * the levels and earlier R columns is aliased, tested relative to A's
 * diagonal (the column's size before elimination), exactly the test of
 * mr__solve_normal on the full system with D first.  A level with no
 * weight (d_l not > 0) is empty: no coefficient (0), variance NaN, and it
 * takes no part in S.
 *
 * The usual parametrisation (intercept + treatment coding with reference
 * level `ref`) is a linear map of this one: intercept = beta_D,ref, level
 * l's coefficient = beta_D,l - beta_D,ref; mr__absorb_contrasts gives
 * those with their variances, and mr__absorb_head_cov the covariance of
 * (intercept, rest), so a fit reported either way agrees with the dense
 * fit of the same model. */
#ifndef MR_ABSORB_H
#define MR_ABSORB_H

#include <stddef.h>
#include "common/error.h"

/* A pass's totals for the elimination.  C is level-major: C[l * pr + j]. */
typedef struct mr__absorb_sums {
    size_t nlev, pr;
    double *d, *bD, *C; /* nlev, nlev, nlev * pr */
    double *A, *bR;     /* pr x pr (upper triangle read, column-major), pr */
} mr__absorb_sums;

typedef struct mr__absorb_solution {
    size_t nlev, pr, rank; /* rank of the rest after the levels */
    size_t nempty;
    double *beta_lev, *var_lev; /* nlev */
    int *empty;                 /* nlev */
    double *beta_rest;          /* pr, 0 where aliased */
    int *aliased;               /* pr */
    double *cov_rest;           /* pr x pr: S^-1 on the kept columns, zero rows/columns where aliased */
} mr__absorb_solution;

/* Zeroed totals of nlev levels and pr other columns; release frees them
 * (a zeroed struct is fine to release). */
mr_status mr__absorb_sums_init(mr__absorb_sums *s, size_t nlev, size_t pr, mr__error *err);
void mr__absorb_sums_release(mr__absorb_sums *s);

/* Solves the system; `sol` is allocated here (release it with
 * mr__absorb_solution_release, also after a failure).  The variances and
 * the covariance only when `want_cov`.  Sums are read only. */
mr_status mr__absorb_solve(const mr__absorb_sums *s, int want_cov, mr__absorb_solution *sol, mr__error *err);
void mr__absorb_solution_release(mr__absorb_solution *sol);

/* cov(beta_D,l, beta_D,m) from a solution with its covariance (NaN when
 * either level is empty); `scratch` holds pr doubles. */
double mr__absorb_level_cov(const mr__absorb_sums *s, const mr__absorb_solution *sol, size_t l, size_t m,
                            double *scratch);

/* The treatment-coded parametrisation with reference level `ref` (which
 * must not be empty): *intercept and its variance; coef[l], var[l] the
 * level's difference from the reference (0 and 0 for the reference, NaN
 * variance and 0 coefficient for an empty level, as an aliased column).
 * `scratch` holds pr doubles. */
void mr__absorb_contrasts(const mr__absorb_sums *s, const mr__absorb_solution *sol, size_t ref, double *intercept,
                          double *intercept_var, double *coef, double *var, double *scratch);

/* The (1 + pr) x (1 + pr) covariance (column-major) of (intercept, rest)
 * in that parametrisation.  `scratch` holds pr doubles. */
void mr__absorb_head_cov(const mr__absorb_sums *s, const mr__absorb_solution *sol, size_t ref, double *out,
                         double *scratch);

#endif
