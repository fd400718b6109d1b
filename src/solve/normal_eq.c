#include <lapacke.h>
#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "solve/normal_eq.h"

static double upper(const double *G, size_t p, size_t i, size_t j)
{
    return i <= j ? G[j * p + i] : G[i * p + j];
}

/* Row i of L times row j over the first r kept columns, subtracted from s
 * in column order. */
static double minus_dot(double s, const double *li, const double *lj, size_t r)
{
    size_t k;
    for (k = 0; k < r; k++) s -= li[k] * lj[k];
    return s;
}

/* Left-looking Cholesky that skips aliased columns.  L is scratch p x p
 * held by rows, and row i keeps only the kept columns, in order (entry q
 * is the q-th kept column), so that every inner product runs over
 * contiguous memory with no test per term: held by columns, each step was
 * a cache miss once p passed a few hundred.  Four rows share each pass
 * over row j: four independent sums, each in column order as before. */
static size_t find_aliased(const double *G, size_t p, int *aliased, double *L)
{
    size_t i, j, r = 0;
    memset(L, 0, p * p * sizeof *L);
    for (j = 0; j < p; j++) {
        const double *lj = L + j * p;
        double gjj = upper(G, p, j, j), d = minus_dot(gjj, lj, lj, r), pivot;
        aliased[j] = !(gjj > 0) || !(d > MR__ALIAS_TOLERANCE * gjj);
        if (aliased[j]) continue;
        pivot = sqrt(d);
        L[j * p + r] = pivot;
        for (i = j + 1; i + 4 <= p; i += 4) {
            const double *l0 = L + i * p, *l1 = l0 + p, *l2 = l1 + p, *l3 = l2 + p;
            double s0 = upper(G, p, j, i), s1 = upper(G, p, j, i + 1), s2 = upper(G, p, j, i + 2),
                   s3 = upper(G, p, j, i + 3);
            size_t k;
            for (k = 0; k < r; k++) {
                double x = lj[k];
                s0 -= l0[k] * x;
                s1 -= l1[k] * x;
                s2 -= l2[k] * x;
                s3 -= l3[k] * x;
            }
            L[i * p + r] = s0 / pivot;
            L[(i + 1) * p + r] = s1 / pivot;
            L[(i + 2) * p + r] = s2 / pivot;
            L[(i + 3) * p + r] = s3 / pivot;
        }
        for (; i < p; i++) L[i * p + r] = minus_dot(upper(G, p, j, i), L + i * p, lj, r) / pivot;
        r++;
    }
    return r;
}

static void residual(const double *G, const double *v, size_t p, const size_t *keep, size_t r, const double *b,
                     double *res)
{
    size_t a, c;
    for (a = 0; a < r; a++) {
        long double s = v[keep[a]];
        for (c = 0; c < r; c++) s -= (long double)upper(G, p, keep[a], keep[c]) * b[c];
        res[a] = (double)s;
    }
}

mr_status mr__solve_normal(const double *G, const double *v, size_t p, double *beta, int *aliased, size_t *rank,
                           double *inv, mr__error *err)
{
    double *L = mr__malloc_array(p * p, sizeof *L), *Gs = NULL, *b = NULL, *res = NULL;
    size_t *keep = NULL, r, a, c;
    mr_status st = MR_OK;
    if (L == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    r = find_aliased(G, p, aliased, L);
    *rank = r;
    Gs = mr__malloc_array(r * r + 1, sizeof *Gs);
    b = mr__malloc_array(r + 1, sizeof *b);
    res = mr__malloc_array(r + 1, sizeof *res);
    keep = mr__malloc_array(r + 1, sizeof *keep);
    if (!Gs || !b || !res || !keep) {
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        goto done;
    }
    for (a = 0, c = 0; c < p; c++)
        if (!aliased[c]) keep[a++] = c;
    for (c = 0; c < r; c++) {
        for (a = 0; a < r; a++) Gs[c * r + a] = upper(G, p, keep[a], keep[c]);
        b[c] = v[keep[c]];
    }
    memset(beta, 0, p * sizeof *beta);
    if (r > 0) {
        if (LAPACKE_dpotrf(LAPACK_COL_MAJOR, 'U', (lapack_int)r, Gs, (lapack_int)r) != 0 ||
            LAPACKE_dpotrs(LAPACK_COL_MAJOR, 'U', (lapack_int)r, 1, Gs, (lapack_int)r, b, (lapack_int)r) != 0) {
            st = mr__fail(err, MR_ERR_NUMERIC, "the weighted normal equations are not positive definite");
            goto done;
        }
        /* One refinement step recovers the digits the factorisation lost. */
        residual(G, v, p, keep, r, b, res);
        LAPACKE_dpotrs(LAPACK_COL_MAJOR, 'U', (lapack_int)r, 1, Gs, (lapack_int)r, res, (lapack_int)r);
        for (a = 0; a < r; a++) beta[keep[a]] = b[a] + res[a];
    }
    if (inv != NULL) {
        memset(inv, 0, p * p * sizeof *inv);
        if (r > 0 && LAPACKE_dpotri(LAPACK_COL_MAJOR, 'U', (lapack_int)r, Gs, (lapack_int)r) != 0) {
            st = mr__fail(err, MR_ERR_NUMERIC, "the weighted normal equations could not be inverted");
            goto done;
        }
        for (c = 0; c < r; c++)
            for (a = 0; a <= c; a++) {
                inv[keep[c] * p + keep[a]] = Gs[c * r + a];
                inv[keep[a] * p + keep[c]] = Gs[c * r + a];
            }
    }
done:
    mr__free(L);
    mr__free(Gs);
    mr__free(b);
    mr__free(res);
    mr__free(keep);
    return st;
}

/* On the correlation scale the block's entries are all of one size
 * whatever the columns' units (a raw calendar year beside a 0/1 level),
 * so the factorisation loses no digits to scale; x' S^-1 x is unchanged by
 * it.  The Cholesky is find_aliased's, plain C in a fixed order: the same
 * bits on any machine, from any thread, with any BLAS (a fit read back
 * from its JSON recomputes this and must write the same bytes). */
mr_status mr__inverse_quadratic_form(const double *S, const double *x, size_t k, double *out, mr__error *err)
{
    double *R = mr__malloc_array(k * k + 1, sizeof *R), *L = mr__malloc_array(k * k + 1, sizeof *L);
    double *z = mr__malloc_array(k + 1, sizeof *z), sum = 0;
    int *singular = mr__malloc_array(k + 1, sizeof *singular);
    size_t i, j;
    mr_status st = MR_OK;
    *out = NAN;
    if (!R || !L || !z || !singular) {
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        goto done;
    }
    for (i = 0; i < k; i++) {
        double d = sqrt(S[i * k + i]);
        z[i] = x[i] / d;
        for (j = 0; j < k; j++) R[j * k + i] = S[j * k + i] / (d * sqrt(S[j * k + j]));
        if (!(d > 0) || !isfinite(z[i])) st = MR_ERR_NUMERIC;
    }
    if (st != MR_OK || find_aliased(R, k, singular, L) < k) {
        st = mr__fail(err, MR_ERR_NUMERIC, "the covariance block is not positive definite");
        goto done;
    }
    /* L y = z by rows of L; then the quadratic form is |y|^2 */
    for (i = 0; i < k; i++) {
        z[i] = minus_dot(z[i], L + i * k, z, i) / L[i * k + i];
        sum += z[i] * z[i];
    }
    *out = sum;
done:
    mr__free(R);
    mr__free(L);
    mr__free(z);
    mr__free(singular);
    return st;
}
