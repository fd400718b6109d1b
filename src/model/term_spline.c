/* term_spline.c - the natural cubic spline basis (see term_spline.h).
 *
 * The B-spline values follow de Boor's recursion in the form of his
 * BSPLVB (values) and BVALUE (derivatives, by differencing coefficients),
 * on the interval found as "the first knot right of x", the right boundary
 * knot itself belonging to the last interval. */
#include <math.h>
#include <string.h>

#include "model/term_spline.h"

/* The first knot index right of x; the right boundary knot counts as in
 * the last interval. */
static size_t cursor(const mr__spline *sp, double x)
{
    size_t lo = 0, hi = sp->nt;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        if (sp->t[mid] > x) hi = mid;
        else lo = mid + 1;
    }
    if (lo > sp->nt - 4 && x == sp->t[sp->nt - 4]) lo = sp->nt - 4;
    return lo;
}

/* b[r]: the cubic B-spline curs - 4 + r at x, r < 4. */
static void bspline_values(const mr__spline *sp, size_t curs, double x, double b[4])
{
    double rdel[3], ldel[3];
    int i, j, r;
    for (i = 0; i < 3; i++) {
        rdel[i] = sp->t[curs + (size_t)i] - x;
        ldel[i] = x - sp->t[curs - (size_t)i - 1];
    }
    b[0] = 1.0;
    for (j = 1; j <= 3; j++) {
        double saved = 0.0;
        for (r = 0; r < j; r++) {
            double den = rdel[r] + ldel[j - 1 - r];
            if (den != 0) {
                double term = b[r] / den;
                b[r] = saved + rdel[r] * term;
                saved = ldel[j - 1 - r] * term;
            } else {
                if (r != 0 || rdel[r] != 0.0) b[r] = saved;
                saved = 0.0;
            }
        }
        b[j] = saved;
    }
}

/* The nder-th derivative at x of the spline with local coefficients a
 * (the four B-splines curs - 4 ..), a overwritten. */
static double bspline_derivative(const mr__spline *sp, size_t curs, double x, double a[4], int nder)
{
    const double *ti = sp->t + curs;
    double rdel[3], ldel[3];
    int outer = 3, inner, i;
    while (nder--) {
        for (i = 0; i < outer; i++) a[i] = outer * (a[i + 1] - a[i]) / (ti[i] - ti[i - outer]);
        outer--;
    }
    for (i = 0; i < outer; i++) {
        rdel[i] = ti[i] - x;
        ldel[i] = x - ti[-(i + 1)];
    }
    while (outer--)
        for (inner = 0; inner <= outer; inner++)
            a[inner] = (a[inner + 1] * ldel[outer - inner] + a[inner] * rdel[inner]) / (rdel[inner] + ldel[outer - inner]);
    return a[0];
}

/* d[i]: the nder-th derivative at x of B-spline i + 1 (the first is left
 * out), i < nb. */
static void bspline_row(const mr__spline *sp, double x, int nder, double *d, size_t nb)
{
    size_t curs = cursor(sp, x);
    double b[4];
    int r;
    memset(d, 0, nb * sizeof *d);
    if (nder == 0) bspline_values(sp, curs, x, b);
    for (r = 0; r < 4; r++) {
        size_t f = curs - 4 + (size_t)r;
        if (nder > 0) {
            double a[4] = {0, 0, 0, 0};
            a[r] = 1.0;
            b[r] = bspline_derivative(sp, curs, x, a, nder);
        }
        if (f >= 1 && f - 1 < nb) d[f - 1] = b[r];
    }
}

/* Householder QR of the nb x 2 matrix X (column-major) in LINPACK's
 * dqrdc2 form: X holds the reflectors below and on the diagonal with
 * qraux their first entries.  Full rank here: the two conditions involve
 * different B-splines. */
static void householder_qr(double *X, size_t nb, double qraux[2])
{
    size_t l, i;
    for (l = 0; l < 2; l++) {
        double *x = X + l * nb, norm = 0;
        for (i = l; i < nb; i++) norm += x[i] * x[i];
        norm = sqrt(norm);
        if (norm == 0.0) {
            qraux[l] = 0.0;
            continue;
        }
        if (x[l] != 0.0) norm = copysign(norm, x[l]);
        for (i = l; i < nb; i++) x[i] *= 1.0 / norm;
        x[l] = 1.0 + x[l];
        if (l == 0) {
            double *y = X + nb, dot = 0;
            for (i = 0; i < nb; i++) dot += x[i] * y[i];
            for (i = 0; i < nb; i++) y[i] += -dot / x[0] * x[i];
        }
        qraux[l] = x[l];
        x[l] = -norm;
    }
}

/* y := Q' y, as LINPACK's dqrsl applies the reflectors. */
static void apply_qt(const double *X, size_t nb, const double qraux[2], double *y)
{
    size_t j, i;
    for (j = 0; j < 2; j++) {
        const double *v = X + j * nb;
        double dot = qraux[j] * y[j], t;
        if (qraux[j] == 0.0) continue;
        for (i = j + 1; i < nb; i++) dot += v[i] * y[i];
        t = -dot / qraux[j];
        y[j] += t * qraux[j];
        for (i = j + 1; i < nb; i++) y[i] += t * v[i];
    }
}

/* A row of B-spline values (or derivatives) in the basis: row . m. */
static double project(const mr__spline *sp, const double *row, size_t col)
{
    size_t i;
    double s = 0;
    for (i = 0; i < sp->ncols + 2; i++) s += row[i] * sp->m[i][col];
    return s;
}

static void build_projection(mr__spline *sp)
{
    const size_t nb = sp->ncols + 2;
    double X[2 * MR__SPLINE_MAX_BSPLINES], e[MR__SPLINE_MAX_BSPLINES], qraux[2];
    double row[MR__SPLINE_MAX_BSPLINES];
    size_t i, c, side;
    bspline_row(sp, sp->boundary[0], 2, X, nb);
    bspline_row(sp, sp->boundary[1], 2, X + nb, nb);
    householder_qr(X, nb, qraux);
    for (i = 0; i < nb; i++) {
        memset(e, 0, nb * sizeof *e);
        e[i] = 1.0;
        apply_qt(X, nb, qraux, e);
        for (c = 0; c < sp->ncols; c++) sp->m[i][c] = e[c + 2];
    }
    for (side = 0; side < 2; side++) {
        bspline_row(sp, sp->boundary[side], 0, row, nb);
        for (c = 0; c < sp->ncols; c++) sp->value_at[side][c] = project(sp, row, c);
        bspline_row(sp, sp->boundary[side], 1, row, nb);
        for (c = 0; c < sp->ncols; c++) sp->slope_at[side][c] = project(sp, row, c);
    }
}

mr_status mr__spline_make(mr__spline *sp, const double *knots, size_t nknots, const double boundary[2],
                          const char *column, mr__error *err)
{
    size_t i;
    memset(sp, 0, sizeof *sp);
    if (!(boundary[0] < boundary[1]) || !isfinite(boundary[0]) || !isfinite(boundary[1]))
        return mr__fail(err, MR_ERR_USAGE, "model: spline '%s': the boundary knots %.17g and %.17g must be finite "
                        "and increasing", column, boundary[0], boundary[1]);
    if (nknots > MR__SPLINE_MAX_KNOTS)
        return mr__fail(err, MR_ERR_USAGE, "model: spline '%s': more than %d interior knots", column,
                        MR__SPLINE_MAX_KNOTS);
    for (i = 0; i < nknots; i++) {
        if (!(knots[i] > boundary[0] && knots[i] < boundary[1]))
            return mr__fail(err, MR_ERR_USAGE, "model: spline '%s': knot %.17g is not inside the boundary knots "
                            "%.17g and %.17g", column, knots[i], boundary[0], boundary[1]);
        if (i > 0 && !(knots[i] > knots[i - 1]))
            return mr__fail(err, MR_ERR_USAGE, "model: spline '%s': the knots must be strictly increasing (%.17g "
                            "then %.17g)", column, knots[i - 1], knots[i]);
    }
    sp->nknots = nknots;
    sp->ncols = nknots + 1;
    if (nknots > 0) memcpy(sp->knots, knots, nknots * sizeof *knots);
    sp->boundary[0] = boundary[0];
    sp->boundary[1] = boundary[1];
    for (i = 0; i < 4; i++) sp->t[sp->nt++] = boundary[0];
    for (i = 0; i < nknots; i++) sp->t[sp->nt++] = knots[i];
    for (i = 0; i < 4; i++) sp->t[sp->nt++] = boundary[1];
    build_projection(sp);
    return MR_OK;
}

/* Interior knots at the quantiles k / df of the values in the boundary,
 * as R's ns() takes them (probabilities k * (1 / df)). */
static mr_status quantile_knots(const char *column, const mr__spline_spec *spec, const mr__value_counts *c,
                                const double boundary[2], double *knots, mr__error *err)
{
    const double step = 1.0 / spec->df;
    uint64_t inside = mr__counts_within(c, boundary[0], boundary[1]), distinct = 0;
    size_t i;
    int k;
    for (i = 0; i < c->n; i++) distinct += c->value[i] >= boundary[0] && c->value[i] <= boundary[1];
    if (distinct < (uint64_t)spec->df + 1)
        return mr__fail(err, MR_ERR_USAGE, "model: spline '%s' df=%d needs at least %d distinct values within the "
                        "boundary knots; the column has %llu there (give fewer df, or knots=)", column, spec->df,
                        spec->df + 1, (unsigned long long)distinct);
    for (k = 1; k < spec->df; k++) knots[k - 1] = mr__counts_quantile(c, boundary[0], boundary[1], k * step);
    for (k = 0; k + 1 < spec->df; k++)
        if (!(knots[k] > boundary[0] && knots[k] < boundary[1]) || (k > 0 && !(knots[k] > knots[k - 1])))
            return mr__fail(err, MR_ERR_USAGE, "model: spline '%s' df=%d: the quantile knots are not distinct and "
                            "inside the boundary knots (knot %d is %.17g; %llu values, most of them tied?): give "
                            "fewer df, or knots=", column, spec->df, k + 1, knots[k], (unsigned long long)inside);
    return MR_OK;
}

mr_status mr__spline_settle(mr__spline *sp, const char *column, const mr__spline_spec *spec,
                            mr__value_counts *counts, mr__error *err)
{
    double boundary[2], knots[MR__SPLINE_MAX_KNOTS];
    if (spec->df == 0 && spec->has_boundary)
        return mr__spline_make(sp, spec->knots, spec->nknots, spec->boundary, column, err);
    if (counts != NULL) mr__counts_finish(counts);
    if (counts == NULL || counts->failed) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    boundary[0] = spec->has_boundary ? spec->boundary[0] : counts->min;
    boundary[1] = spec->has_boundary ? spec->boundary[1] : counts->max;
    if (!spec->has_boundary && !(boundary[0] < boundary[1]))
        return mr__fail(err, MR_ERR_USAGE, "model: spline '%s': the column takes %s value over the rows used, so it "
                        "has no range for a spline", column, counts->total ? "a single" : "no");
    if (spec->df == 0) return mr__spline_make(sp, spec->knots, spec->nknots, boundary, column, err);
    if (counts->over)
        return mr__fail(err, MR_ERR_USAGE, "model: spline '%s' df=%d: the column has more than %d distinct values, "
                        "too many to find its quantiles exactly; give the knots (knots=K1,K2,...)", column, spec->df,
                        MR__COUNT_MAX_DISTINCT);
    MR__TRY(quantile_knots(column, spec, counts, boundary, knots, err));
    return mr__spline_make(sp, knots, (size_t)spec->df - 1, boundary, column, err);
}

double mr__spline_value(const mr__spline *sp, size_t col, double x)
{
    size_t curs, r;
    double b[4], s = 0;
    if (x < sp->boundary[0]) return sp->value_at[0][col] + (x - sp->boundary[0]) * sp->slope_at[0][col];
    if (x > sp->boundary[1]) return sp->value_at[1][col] + (x - sp->boundary[1]) * sp->slope_at[1][col];
    curs = cursor(sp, x);
    bspline_values(sp, curs, x, b);
    for (r = 0; r < 4; r++) {
        size_t f = curs - 4 + r;
        if (f >= 1) s += b[r] * sp->m[f - 1][col];
    }
    return s;
}

void mr__spline_column(const mr__spline *sp, size_t col, const double *x, size_t n, double *out)
{
    size_t i;
    for (i = 0; i < n; i++) out[i] = mr__spline_value(sp, col, x[i]);
}
