/* term_spline.h - natural cubic spline terms: a numeric column entered
 * through the basis of natural cubic splines with given knots.
 *
 * The basis is the one of Hastie's construction as R's splines::ns()
 * builds it (without an intercept column), so that coefficients compare
 * one by one: the cubic B-splines on the knots (boundary knots four times
 * over, Cox-de Boor recursion), less the first; the two conditions "second
 * derivative 0 at each boundary knot" written as a 2 x m matrix C; the
 * Householder QR of C' (LINPACK's dqrdc2 conventions: each reflector's
 * vector scaled so that its first entry is 1 + |x_ll| / norm); and the
 * basis is the B-spline row times the columns 3.. of Q, which span the
 * B-spline combinations meeting the two conditions.  Outside the boundary
 * knots each column goes on as the straight line of its value and slope
 * at the nearer boundary knot.  With k interior knots there are k + 1
 * columns.
 *
 * In the design a spline of df columns is df terms of one numeric part
 * each (the part's values are basis column j, never centred or scaled:
 * they lie in about [-1, 1] inside the boundary), so the accumulation
 * layout sees only one-column numeric terms; an interaction with factors
 * is df terms of the factors' columns times basis column j. */
#ifndef MR_TERM_SPLINE_H
#define MR_TERM_SPLINE_H

#include <stddef.h>
#include "common/error.h"
#include "common/valuecount.h"
#include "model/spec.h"

#define MR__SPLINE_MAX_COLS (MR__SPLINE_MAX_KNOTS + 1)
#define MR__SPLINE_MAX_BSPLINES (MR__SPLINE_MAX_KNOTS + 3) /* less the first */

typedef struct mr__spline {
    size_t nknots, ncols;
    double knots[MR__SPLINE_MAX_KNOTS];
    double boundary[2];
    double t[MR__SPLINE_MAX_KNOTS + 8]; /* the knot sequence, boundary knots four times */
    size_t nt;
    /* B-spline i + 1 (i < ncols + 2) enters column c with weight m[i][c] */
    double m[MR__SPLINE_MAX_BSPLINES][MR__SPLINE_MAX_COLS];
    double value_at[2][MR__SPLINE_MAX_COLS], slope_at[2][MR__SPLINE_MAX_COLS]; /* at each boundary knot */
} mr__spline;

/* The basis for these interior knots (strictly increasing, strictly
 * between the boundary knots lo < hi).  MR_ERR_USAGE otherwise. */
mr_status mr__spline_make(mr__spline *sp, const double *knots, size_t nknots, const double boundary[2],
                          const char *column, mr__error *err);

/* The knots of column `column` as the model line asks, from the first
 * pass's count of its values (finished here: mr__counts_finish): with df,
 * df - 1 interior knots at the quantiles k / df (R's type 7) of the values
 * between the boundary knots, which are given or the column's minimum and
 * maximum. */
mr_status mr__spline_settle(mr__spline *sp, const char *column, const mr__spline_spec *spec,
                            mr__value_counts *counts, mr__error *err);

/* Basis column `col` at x. */
double mr__spline_value(const mr__spline *sp, size_t col, double x);
/* out[i] = basis column col at x[i], i < n. */
void mr__spline_column(const mr__spline *sp, size_t col, const double *x, size_t n, double *out);

#endif
