/* absorb.h - the normal equations with one factor of very many levels
 * eliminated exactly (a Schur complement on the small dense rest).
 *
 * With X = [D | R], D indicator columns no two of which are 1 in one row
 * (a factor's levels) and R the p_r other columns,
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
 * Precision.  With the intercept as column 0 of R, c_l's entry 0 is d_l,
 * so S's row 0 is A's less every level's c_l: exactly the reference
 * level's own sums (its weight, and its w x_j), and the right-hand side's
 * entry 0 is its sum of w z.  Computed by the subtractions, it would be
 * the reference's weight left after L of them, carrying about L eps times
 * the whole weight: for 150,000 levels of two rows, the intercept (the
 * reference level's rate) off by about 1e-7 relative.  Given the
 * reference's row (`ref`), S's row 0 and that entry are taken from it. 
 *
 * Any set of mutually exclusive indicator columns will do: the fit takes
 * the factor's levels other than its reference, and keeps the intercept
 * among the other columns, so the coefficients are those of the usual
 * treatment coding and agree with the dense fit of the same model. */
#ifndef MR_ABSORB_H
#define MR_ABSORB_H

#include <stddef.h>
#include "common/error.h"
#include "common/threads.h"

/* A pass's totals for the elimination: level l's row lev[l * (pr + 2) ..]
 * holds d_l, b_D,l, then c_l (MR__ABSORB_WIDTH(pr) doubles a level). */
#define MR__ABSORB_WIDTH(pr) ((pr) + 2)
typedef struct mr__absorb_sums {
    size_t nlev, pr;
    const double *lev; /* nlev rows */
    const double *A;   /* pr x pr, upper triangle read, column-major */
    const double *bR;  /* pr */
    /* NULL, or the reference level's own row, laid out as a level's, when
     * column 0 of R is the intercept (1 on every row): see "Precision". */
    const double *ref;
    /* Threads the solve may use (0 or 1: the calling thread alone).  The
     * levels' terms of S are summed in parts of consecutive levels, each
     * part from +0, and the parts added to A in order: how many parts
     * depends on L and p_r alone (mr__absorb_parts), so the bits do not
     * depend on the threads. */
    int threads;
} mr__absorb_sums;

/* The parts S's level terms are summed in (see `threads` above): one per
 * MR__ABSORB_PART_LEVELS levels, as many as fit MR__ABSORB_PART_BYTES of
 * p_r x p_r partial sums, at least one (so past 1,448 other columns one
 * part's p_r x p_r is held beside S). */
#define MR__ABSORB_PART_LEVELS 4096
#define MR__ABSORB_MAX_THREADS MR__THREADS_MAX
#define MR__ABSORB_PART_BYTES ((size_t)16 << 20)
size_t mr__absorb_parts(size_t nlev, size_t pr);

typedef struct mr__absorb_solution {
    size_t nlev, pr, rank; /* rank of the rest after the levels */
    size_t nempty;
    double *beta_lev, *var_lev; /* nlev */
    int *empty;                 /* nlev */
    double *beta_rest;          /* pr, 0 where aliased */
    int *aliased;               /* pr */
    double *cov_rest;           /* pr x pr: S^-1 on the kept columns, zero rows/columns where aliased */
} mr__absorb_solution;

/* What mr__absorb_solve computes beside the estimates: nothing; S^-1 and
 * each level's variance (O(L nnz^2), nnz a level's nonzero entries of
 * c); or S^-1 and, for a level, 1/d_l, its variance with the other
 * coefficients held (below the whole one by g_l' S^-1 g_l, which for a
 * level of a few rows among many is a small part of it), at O(L). */
enum { MR__ABSORB_NO_COV = 0, MR__ABSORB_COV = 1, MR__ABSORB_COV_OWN = 2 };

/* Solves the system; `sol` is allocated here (release it with
 * mr__absorb_solution_release, also after a failure).  The variances and
 * the covariance as `want_cov` says.  Sums are read only. */
mr_status mr__absorb_solve(const mr__absorb_sums *s, int want_cov, mr__absorb_solution *sol, mr__error *err);
void mr__absorb_solution_release(mr__absorb_solution *sol);

/* One IRLS step: the solution as one vector `next` (the rest's pr, then
 * the levels'), aliased[] likewise (a level: empty), the rank of the
 * whole system and, when `var` is not NULL, each coefficient's variance
 * at unit dispersion (S^-1's diagonal, then each level's own, 1/d_l: what
 * the fit's check for coefficients running off needs, MR__ABSORB_COV_OWN;
 * 0 where aliased or empty). */
mr_status mr__absorb_step(const mr__absorb_sums *s, double *next, int *aliased, double *var, size_t *rank,
                          mr__error *err);

/* d' X'WX d for the whole system, d laid out as the rest's pr, then the
 * levels' nlev (the step's size in the fit's stopping rule). */
double mr__absorb_quadratic(const mr__absorb_sums *s, const double *d);

#endif
