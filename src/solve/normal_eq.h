/* normal_eq.h - solving the p x p weighted normal equations X'WX b = X'Wz.
 *
 * Columns are taken in order; a column whose part not explained by the
 * earlier kept columns is below a relative tolerance is aliased (a linear
 * combination of earlier ones): it gets no coefficient and the rest is
 * solved without it, never a garbage number.  The kept system is solved
 * with the Cholesky factor that aliasing scan leaves (column order, no
 * pivoting) and one step of iterative refinement, and inverted through
 * that factor's own inverse for the covariance.  No LAPACK: OpenBLAS's
 * dpotrf and dpotri take a 128 MiB buffer from an allocator that spins
 * for ever when an address-space limit refuses it, and the factor was
 * computed twice. */
#ifndef MR_NORMAL_EQ_H
#define MR_NORMAL_EQ_H

#include <stddef.h>
#include "common/error.h"

/* Relative size of the unexplained part of a column, in squared terms,
 * below which it counts as aliased: 1e-10 corresponds to a column whose
 * residual norm is below 1e-5 of its norm once the model is centred and
 * scaled. */
#define MR__ALIAS_TOLERANCE 1e-10

/* G: p x p, upper triangle used, column-major; v: p.  On MR_OK: beta (p)
 * with 0 for aliased columns, aliased[j] (0/1), *rank, and when inv is not
 * NULL the inverse of the kept part of G scattered into a full p x p
 * matrix (zero rows/columns for aliased ones). */
mr_status mr__solve_normal(const double *G, const double *v, size_t p, double *beta, int *aliased, size_t *rank,
                           double *inv, mr__error *err);

/* The same, with each column's aliasing tolerance taken relative to
 * ref[j] instead of G's own diagonal (ref NULL: G's).  For G a Schur
 * complement (solve/absorb.h), whose diagonal is what is left of a column
 * once other columns are projected out, the test must stay relative to
 * the column's full size, as in the system before elimination: relative
 * to what is left, rounding noise would pass for information. */
mr_status mr__solve_normal_ref(const double *G, const double *v, size_t p, const double *ref, double *beta,
                               int *aliased, size_t *rank, double *inv, mr__error *err);

/* x' S^-1 x for a k x k covariance S (full, column-major) and x (k): the
 * joint Wald statistic of the coefficients x.  Computed on the correlation
 * scale with the Cholesky above; *out is NaN and the status MR_ERR_NUMERIC
 * when S is not positive definite at MR__ALIAS_TOLERANCE (a non-positive variance,
 * or a coefficient explained by the others to that tolerance), or an
 * entry is not finite.  MR_ERR_NO_MEMORY when out of memory. */
mr_status mr__inverse_quadratic_form(const double *S, const double *x, size_t k, double *out, mr__error *err);

#endif
