/* design_fill.c - a block's rows as design columns: the dense block Z,
 * and the accumulation layout (dense columns, one entry per sparse term). */
#include <string.h>

#include "model/design.h"

/* Numeric part k of a term at x. */
static double part_value(const mr__term *t, int k, double x)
{
    if (t->spline[k] != NULL) return mr__spline_value(t->spline[k], t->spline_col[k], x);
    return (x - t->centre[k]) * t->inv_scale[k];
}

/* Row i's column in term t (-1 if none) and, through *v, its value. */
static int32_t term_entry(const mr__term *t, const mr__factor *fac, const double *num, const int32_t *lev,
                          size_t stride_rows, size_t i, double *v)
{
    size_t col = t->col0;
    double x = 1.0;
    int k;
    for (k = 0; k < t->nfac; k++) {
        int32_t c = mr__design_level_code(t, &fac[t->fac[k]], lev[(size_t)t->fac[k] * stride_rows + i]);
        if (c < 0) return -1;
        col += (size_t)c * t->stride[k];
    }
    for (k = 0; k < t->nnum; k++) x *= part_value(t, k, num[(size_t)t->num[k] * stride_rows + i]);
    *v = x;
    return (int32_t)col;
}

static void fill_term(const mr__term *t, const mr__factor *fac, const double *num, const int32_t *lev,
                      size_t stride_rows, size_t n, double *Z, size_t ldz)
{
    size_t i;
    for (i = 0; i < n; i++) {
        double v;
        int32_t col = term_entry(t, fac, num, lev, stride_rows, i, &v);
        if (col >= 0) Z[(size_t)col * ldz + i] = v;
    }
}

void mr__design_fill(const mr__design *d, const double *num, const int32_t *lev, size_t stride_rows, size_t n,
                     double *Z, size_t ldz)
{
    size_t i, j;
    for (j = 0; j < d->p; j++) memset(Z + j * ldz, 0, n * sizeof *Z);
    if (d->intercept)
        for (i = 0; i < n; i++) Z[i] = 1.0;
    for (j = 0; j < d->nterms; j++) fill_term(&d->term[j], d->fac, num, lev, stride_rows, n, Z, ldz);
}

/* The numeric part of a term for rows [0, n): v[i] = prod (x - c) / s. */
static void numeric_part(const mr__term *t, const double *num, size_t stride_rows, size_t n, double *v)
{
    size_t i;
    int k;
    if (t->nnum == 0) {
        for (i = 0; i < n; i++) v[i] = 1.0;
        return;
    }
    if (t->spline[0] != NULL) {
        mr__spline_column(t->spline[0], t->spline_col[0], num + (size_t)t->num[0] * stride_rows, n, v);
    } else {
        const double *x = num + (size_t)t->num[0] * stride_rows, c = t->centre[0], s = t->inv_scale[0];
        for (i = 0; i < n; i++) v[i] = (x[i] - c) * s;
    }
    for (k = 1; k < t->nnum; k++) {
        const double *x = num + (size_t)t->num[k] * stride_rows, c = t->centre[k], s = t->inv_scale[k];
        if (t->spline[k] != NULL)
            for (i = 0; i < n; i++) v[i] *= part_value(t, k, x[i]);
        else
            for (i = 0; i < n; i++) v[i] *= (x[i] - c) * s;
    }
}

/* x if keep, else +0.0, by a mask: the compiler would branch, and for a
 * two-level factor that branch is a coin toss every row. */
static double zero_unless(double x, int keep)
{
    uint64_t bits;
    memcpy(&bits, &x, sizeof bits);
    bits &= (uint64_t)0 - (uint64_t)(keep != 0);
    memcpy(&x, &bits, sizeof x);
    return x;
}

/* A one-factor term's value in each row, 0 where the row has no column
 * (its reference level); col, if not NULL, gets that column or -1. */
static void one_factor_part(const mr__term *t, const double *num, const int32_t *lev, size_t stride_rows, size_t n,
                            double *v, int32_t *col)
{
    const int32_t *l = lev + (size_t)t->fac[0] * stride_rows;
    size_t i;
    numeric_part(t, num, stride_rows, n, v);
    for (i = 0; i < n; i++) {
        int32_t c = t->colmap[l[i]];
        if (col) col[i] = c;
        v[i] = zero_unless(v[i], c >= 0);
    }
}

void mr__design_fill_split(const mr__design *d, const double *num, const int32_t *lev, size_t stride_rows,
                           size_t n, double *D, int32_t *col, double *val)
{
    size_t i, j = 0, s;
    if (d->intercept) {
        for (i = 0; i < n; i++) D[i] = 1.0;
        j = 1;
    }
    for (s = 0; s < d->nterms; s++) {
        const mr__term *t = &d->term[s];
        if (!t->dense) continue;
        if (t->nfac == 0) numeric_part(t, num, stride_rows, n, D + j * n);
        else one_factor_part(t, num, lev, stride_rows, n, D + j * n, NULL);
        j++;
    }
    for (s = 0; s < d->nsparse; s++) {
        const mr__term *t = &d->term[d->sparse_term[s]];
        int32_t *c = col + s * n;
        if (t->colmap == NULL) {
            for (i = 0; i < n; i++) {
                c[i] = term_entry(t, d->fac, num, lev, stride_rows, i, &val[s * n + i]);
                if (c[i] < 0) val[s * n + i] = 0.0;
            }
            continue;
        }
        one_factor_part(t, num, lev, stride_rows, n, val + s * n, c);
    }
}
