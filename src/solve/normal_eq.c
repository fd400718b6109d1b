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
static size_t find_aliased(const double *G, size_t p, const double *ref, int *aliased, double *L)
{
    size_t i, j, r = 0;
    memset(L, 0, p * p * sizeof *L);
    for (j = 0; j < p; j++) {
        const double *lj = L + j * p;
        double gjj = upper(G, p, j, j), d = minus_dot(gjj, lj, lj, r), pivot;
        double size = ref ? ref[j] : gjj;
        aliased[j] = !(gjj > 0) || !(size > 0) || !(d > MR__ALIAS_TOLERANCE * size);
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

/* x := (L L')^-1 x for the kept factor K (r x r, lower, by rows): forward
 * substitution by rows, then back substitution by columns, so that both
 * walk contiguous memory. */
static void solve_factored(const double *K, size_t r, double *x)
{
    size_t a, c;
    for (a = 0; a < r; a++) x[a] = minus_dot(x[a], K + a * r, x, a) / K[a * r + a];
    for (c = r; c-- > 0;) {
        x[c] /= K[c * r + c];
        for (a = 0; a < c; a++) x[a] -= K[c * r + a] * x[c];
    }
}

/* (L L')^-1 = M' M with M = L^-1, lower triangular.  M is built a column
 * at a time (held by columns: column j at M + j * r), each entry a dot
 * product of a row of L and a column of M over contiguous memory; then
 * entry (a, c) of the inverse is the dot product of columns a and c of M.
 * Own loops rather than LAPACK's dpotri: OpenBLAS's takes a 128 MiB
 * working buffer from its allocator, which spins for ever when an address
 * space limit refuses it. */
static void invert_factored(const double *K, size_t r, double *M, double *inv, size_t p, const size_t *keep)
{
    size_t i, j, a, c, k;
    memset(M, 0, r * r * sizeof *M);
    for (j = 0; j < r; j++) {
        double *m = M + j * r;
        m[j] = 1.0 / K[j * r + j];
        for (i = j + 1; i < r; i++) m[i] = minus_dot(0.0, K + i * r + j, m + j, i - j) / K[i * r + i];
    }
    for (c = 0; c < r; c++)
        for (a = 0; a <= c; a++) {
            const double *ma = M + a * r, *mc = M + c * r;
            double s = 0;
            for (k = c; k < r; k++) s += ma[k] * mc[k];
            inv[keep[c] * p + keep[a]] = s;
            inv[keep[a] * p + keep[c]] = s;
        }
}

mr_status mr__solve_normal(const double *G, const double *v, size_t p, double *beta, int *aliased, size_t *rank,
                           double *inv, mr__error *err)
{
    return mr__solve_normal_ref(G, v, p, NULL, beta, aliased, rank, inv, err);
}

mr_status mr__solve_normal_ref(const double *G, const double *v, size_t p, const double *ref, double *beta,
                               int *aliased, size_t *rank, double *inv, mr__error *err)
{
    double *L = mr__malloc_array(p * p, sizeof *L), *K = NULL, *b = NULL, *res = NULL;
    size_t *keep = NULL, r, a, c;
    mr_status st = MR_OK;
    if (L == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    r = find_aliased(G, p, ref, aliased, L);
    *rank = r;
    K = mr__malloc_array(r * r + 1, sizeof *K);
    b = mr__malloc_array(r + 1, sizeof *b);
    res = mr__malloc_array(r + 1, sizeof *res);
    keep = mr__malloc_array(r + 1, sizeof *keep);
    if (!K || !b || !res || !keep) {
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        goto done;
    }
    for (a = 0, c = 0; c < p; c++)
        if (!aliased[c]) keep[a++] = c;
    /* the kept rows of the aliasing scan's factor: G's kept part is K K' */
    for (a = 0; a < r; a++) {
        memcpy(K + a * r, L + keep[a] * p, (a + 1) * sizeof *K);
        memset(K + a * r + a + 1, 0, (r - a - 1) * sizeof *K);
        b[a] = v[keep[a]];
    }
    memset(beta, 0, p * sizeof *beta);
    solve_factored(K, r, b);
    /* One refinement step recovers the digits the factorisation lost. */
    residual(G, v, p, keep, r, b, res);
    solve_factored(K, r, res);
    for (a = 0; a < r; a++) beta[keep[a]] = b[a] + res[a];
    if (inv != NULL) {
        memset(inv, 0, p * p * sizeof *inv);
        /* L is free now: p x p holds M's r x r */
        invert_factored(K, r, L, inv, p, keep);
    }
done:
    mr__free(L);
    mr__free(K);
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
    if (st != MR_OK || find_aliased(R, k, NULL, singular, L) < k) {
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
