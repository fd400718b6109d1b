/* check_solver.c - tests of src/solve/normal_eq.c (mr__solve_normal,
 * mr__inverse_quadratic_form).
 *
 * Sources of truth, named beside each check:
 *   - a direct solution computed here, independently of the library and of
 *     LAPACK: Gaussian elimination with partial pivoting in long double,
 *     and least squares by modified Gram-Schmidt QR of X in long double;
 *   - analytic identities: G^-1 G = I; a column built as an exact linear
 *     combination of others adds nothing to the column space, so the least
 *     squares fit without it is the fit of the model;
 *   - the contract in src/solve/normal_eq.h (aliased columns get beta 0
 *     and zero rows/columns in the inverse; only the upper triangle of G
 *     is read; the tolerance MR__ALIAS_TOLERANCE on the squared relative
 *     residual).
 * Random matrices come from a fixed-seed splitmix64 so a failure
 * reproduces.
 */
#include <check.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "solve/normal_eq.h"
#include "check_common.h"

/* ------------------------------------------------------------------ */
/* Deterministic randomness                                            */

typedef struct {
    uint64_t state;
} rng;

static uint64_t rng_next(rng *r) /* splitmix64 */
{
    uint64_t z = (r->state += UINT64_C(0x9E3779B97F4A7C15));
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    return z ^ (z >> 31);
}

/* Uniform on [-1, 1). */
static double rng_unit(rng *r) { return (double)(rng_next(r) >> 11) * 0x1p-52 - 1.0; }

static void *xcalloc(size_t n, size_t size)
{
    void *p = calloc(n ? n : 1, size);
    ck_assert_ptr_nonnull(p);
    return p;
}

/* ------------------------------------------------------------------ */
/* Independent reference solvers (long double)                          */

/* Solves A x = b for a dense n x n A (column-major); A and b are copied. */
static void gauss_solve(size_t n, const double *A, const double *b, long double *x)
{
    long double *M = xcalloc(n * n, sizeof *M), *y = xcalloc(n, sizeof *y);
    size_t i, j, k;
    for (j = 0; j < n; j++)
        for (i = 0; i < n; i++) M[i * n + j] = A[j * n + i]; /* row-major copy */
    for (i = 0; i < n; i++) y[i] = b[i];
    for (k = 0; k < n; k++) {
        size_t piv = k;
        for (i = k + 1; i < n; i++)
            if (fabsl(M[i * n + k]) > fabsl(M[piv * n + k])) piv = i;
        if (piv != k) {
            for (j = 0; j < n; j++) {
                long double t = M[k * n + j];
                M[k * n + j] = M[piv * n + j];
                M[piv * n + j] = t;
            }
            long double t = y[k];
            y[k] = y[piv];
            y[piv] = t;
        }
        for (i = k + 1; i < n; i++) {
            long double f = M[i * n + k] / M[k * n + k];
            for (j = k; j < n; j++) M[i * n + j] -= f * M[k * n + j];
            y[i] -= f * y[k];
        }
    }
    for (k = n; k-- > 0;) {
        long double s = y[k];
        for (j = k + 1; j < n; j++) s -= M[k * n + j] * x[j];
        x[k] = s / M[k * n + k];
    }
    free(M);
    free(y);
}

/* Least squares min |y - X[:, cols] b| by modified Gram-Schmidt QR
 * (n x p X, column-major); b has ncols entries. */
static void qr_least_squares(const double *X, size_t n, const size_t *cols, size_t ncols, const double *y,
                             long double *b)
{
    long double *Q = xcalloc(n * ncols, sizeof *Q), *R = xcalloc(ncols * ncols, sizeof *R);
    long double *r = xcalloc(n, sizeof *r);
    size_t i, j, k;
    for (j = 0; j < ncols; j++)
        for (i = 0; i < n; i++) Q[j * n + i] = X[cols[j] * n + i];
    for (i = 0; i < n; i++) r[i] = y[i];
    for (j = 0; j < ncols; j++) {
        long double norm = 0;
        for (k = 0; k < j; k++) {
            long double d = 0;
            for (i = 0; i < n; i++) d += Q[k * n + i] * Q[j * n + i];
            R[j * ncols + k] = d;
            for (i = 0; i < n; i++) Q[j * n + i] -= d * Q[k * n + i];
        }
        for (i = 0; i < n; i++) norm += Q[j * n + i] * Q[j * n + i];
        norm = sqrtl(norm);
        R[j * ncols + j] = norm;
        for (i = 0; i < n; i++) Q[j * n + i] /= norm;
    }
    /* b = R^-1 Q'y, with Q'y taken against the residual as it shrinks
     * (the modified Gram-Schmidt way of keeping it orthogonal). */
    for (j = 0; j < ncols; j++) {
        long double d = 0;
        for (i = 0; i < n; i++) d += Q[j * n + i] * r[i];
        b[j] = d;
        for (i = 0; i < n; i++) r[i] -= d * Q[j * n + i];
    }
    for (j = ncols; j-- > 0;) {
        long double s = b[j];
        for (k = j + 1; k < ncols; k++) s -= R[k * ncols + j] * b[k];
        b[j] = s / R[j * ncols + j];
    }
    free(Q);
    free(R);
    free(r);
}

/* G = X'X and v = X'y, accumulated in long double and rounded once. */
static void gram(const double *X, size_t n, size_t p, const double *y, double *G, double *v)
{
    size_t i, j, k;
    for (j = 0; j < p; j++) {
        long double s = 0;
        for (k = 0; k < p; k++) {
            long double g = 0;
            for (i = 0; i < n; i++) g += (long double)X[j * n + i] * X[k * n + i];
            G[k * p + j] = (double)g;
        }
        for (i = 0; i < n; i++) s += (long double)X[j * n + i] * y[i];
        v[j] = (double)s;
    }
}

static void random_matrix(rng *r, double *X, size_t n, size_t p, int intercept)
{
    size_t i, j;
    for (j = 0; j < p; j++)
        for (i = 0; i < n; i++) X[j * n + i] = (intercept && j == 0) ? 1.0 : rng_unit(r);
}

/* ------------------------------------------------------------------ */
/* Well-conditioned systems                                             */

typedef struct {
    double *G, *v, *beta, *inv;
    int *aliased;
    size_t p, rank;
} system_;

static void system_alloc(system_ *s, size_t p)
{
    s->p = p;
    s->G = xcalloc(p * p, sizeof *s->G);
    s->v = xcalloc(p, sizeof *s->v);
    s->beta = xcalloc(p, sizeof *s->beta);
    s->inv = xcalloc(p * p, sizeof *s->inv);
    s->aliased = xcalloc(p, sizeof *s->aliased);
}

static void system_free(system_ *s)
{
    free(s->G);
    free(s->v);
    free(s->beta);
    free(s->inv);
    free(s->aliased);
}

static void solve(system_ *s)
{
    mr__error err;
    err.status = MR_OK;
    err.msg[0] = '\0';
    ck_assert_msg(mr__solve_normal(s->G, s->v, s->p, s->beta, s->aliased, &s->rank, s->inv, &err) == MR_OK, "%s",
                  err.msg);
}

/* G = M'M + p I: symmetric positive definite with eigenvalues in
 * [p, p + |M|^2], so its condition number is small. */
static void random_spd(rng *r, system_ *s)
{
    size_t p = s->p, i, j, k;
    double *M = xcalloc(p * p, sizeof *M);
    for (i = 0; i < p * p; i++) M[i] = rng_unit(r);
    for (j = 0; j < p; j++)
        for (k = 0; k < p; k++) {
            long double g = j == k ? (long double)p : 0;
            for (i = 0; i < p; i++) g += (long double)M[j * p + i] * M[k * p + i];
            s->G[k * p + j] = (double)g;
        }
    /* Symmetrise exactly: the two halves round identically anyway. */
    for (j = 0; j < p; j++)
        for (k = 0; k < j; k++) s->G[k * p + j] = s->G[j * p + k];
    for (i = 0; i < p; i++) s->v[i] = 10.0 * rng_unit(r);
    free(M);
}

static double max_abs_ld(const long double *x, size_t n)
{
    long double m = 0;
    size_t i;
    for (i = 0; i < n; i++)
        if (fabsl(x[i]) > m) m = fabsl(x[i]);
    return (double)m;
}

START_TEST(test_spd_matches_direct_solution)
{
    static const size_t sizes[] = {1, 2, 3, 5, 10, 30};
    rng r = {2024};
    size_t t, i, j, k;
    for (t = 0; t < sizeof sizes / sizeof sizes[0]; t++) {
        system_ s;
        size_t p = sizes[t];
        long double *x = xcalloc(p, sizeof *x), err = 0;
        system_alloc(&s, p);
        random_spd(&r, &s);
        solve(&s);
        ck_assert_uint_eq(s.rank, p);
        for (j = 0; j < p; j++) ck_assert_int_eq(s.aliased[j], 0);
        /* Source of truth: Gaussian elimination in long double. */
        gauss_solve(p, s.G, s.v, x);
        for (j = 0; j < p; j++)
            if (fabsl(s.beta[j] - x[j]) > err) err = fabsl(s.beta[j] - x[j]);
        ck_assert_msg(err / max_abs_ld(x, p) < 1e-12, "p = %zu: relative error %g", p, (double)(err / max_abs_ld(x, p)));
        /* Source of truth: the identity G^-1 G = I. */
        for (i = 0; i < p; i++)
            for (j = 0; j < p; j++) {
                long double e = 0;
                for (k = 0; k < p; k++) e += (long double)s.inv[k * p + i] * s.G[j * p + k];
                ck_assert_msg(fabsl(e - (i == j)) < 1e-12, "p = %zu: (inv G)[%zu,%zu] = %.17Lg", p, i, j, e);
                ck_assert(s.inv[j * p + i] == s.inv[i * p + j]);
            }
        free(x);
        system_free(&s);
    }
}
END_TEST

START_TEST(test_only_upper_triangle_read)
{
    /* Source of truth: normal_eq.h ("upper triangle used"): NaN below the
     * diagonal must change nothing. */
    rng r = {99};
    system_ a, b;
    size_t p = 7, i, j;
    system_alloc(&a, p);
    system_alloc(&b, p);
    random_spd(&r, &a);
    memcpy(b.G, a.G, p * p * sizeof *b.G);
    memcpy(b.v, a.v, p * sizeof *b.v);
    for (j = 0; j < p; j++)
        for (i = j + 1; i < p; i++) b.G[j * p + i] = NAN;
    solve(&a);
    solve(&b);
    ck_assert_uint_eq(b.rank, p);
    for (j = 0; j < p; j++) ck_assert(a.beta[j] == b.beta[j]);
    for (j = 0; j < p * p; j++) ck_assert(a.inv[j] == b.inv[j]);
    system_free(&a);
    system_free(&b);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Gram matrices with aliased columns                                   */

#define N_ROWS 60

typedef struct {
    double X[8 * N_ROWS], y[N_ROWS];
    size_t n, p;
} data;

static void random_data(rng *r, data *d, size_t p)
{
    size_t i;
    d->n = N_ROWS;
    d->p = p;
    random_matrix(r, d->X, d->n, p, 1);
    for (i = 0; i < d->n; i++) d->y[i] = 3.0 + 2.0 * d->X[1 * d->n + i] + rng_unit(r);
}

static void set_column(data *d, size_t j, double a, size_t c1, double b, size_t c2)
{
    size_t i;
    for (i = 0; i < d->n; i++) d->X[j * d->n + i] = a * d->X[c1 * d->n + i] + b * d->X[c2 * d->n + i];
}

/* Solves the normal equations of d and checks the aliasing pattern, the
 * zeros, and the other coefficients against least squares on the kept
 * columns of X. */
static void expect_fit(const data *d, const int *want_aliased, double tol)
{
    system_ s;
    size_t keep[8], nkeep = 0, j, a, c;
    long double b[8];
    system_alloc(&s, d->p);
    gram(d->X, d->n, d->p, d->y, s.G, s.v);
    solve(&s);
    for (j = 0; j < d->p; j++) {
        ck_assert_msg(s.aliased[j] == want_aliased[j], "column %zu: aliased = %d, expected %d", j, s.aliased[j],
                      want_aliased[j]);
        if (!want_aliased[j]) keep[nkeep++] = j;
    }
    ck_assert_uint_eq(s.rank, nkeep);
    /* Source of truth: least squares without the aliased columns (QR of X
     * in long double); normal_eq.h: an aliased column's beta is 0. */
    qr_least_squares(d->X, d->n, keep, nkeep, d->y, b);
    for (j = 0; j < d->p; j++)
        if (want_aliased[j]) ck_assert(s.beta[j] == 0.0);
    for (a = 0; a < nkeep; a++)
        ck_assert_msg(fabsl(s.beta[keep[a]] - b[a]) <= tol * max_abs_ld(b, nkeep),
                      "column %zu: beta %.17g, least squares %.17Lg", keep[a], s.beta[keep[a]], b[a]);
    /* Source of truth: normal_eq.h (zero rows and columns for aliased
     * ones) and G_kept^-1 G_kept = I on the rest. */
    for (j = 0; j < d->p; j++)
        for (a = 0; a < d->p; a++)
            if (want_aliased[j] || want_aliased[a]) ck_assert(s.inv[j * d->p + a] == 0.0);
    for (a = 0; a < nkeep; a++)
        for (c = 0; c < nkeep; c++) {
            long double e = 0;
            size_t k;
            for (k = 0; k < nkeep; k++) e += (long double)s.inv[keep[k] * d->p + keep[a]] * s.G[keep[c] * d->p + keep[k]];
            ck_assert_msg(fabsl(e - (a == c)) < 1e-9, "(inv G)[%zu,%zu] = %.17Lg", keep[a], keep[c], e);
        }
    system_free(&s);
}

START_TEST(test_exact_linear_combination_aliased)
{
    /* Column 3 = column 1 + 2 * column 2 (0-based; column 0 is the
     * intercept): it adds nothing to the column space. */
    static const int want[] = {0, 0, 0, 1, 0};
    rng r = {7};
    data d;
    random_data(&r, &d, 5);
    set_column(&d, 3, 1.0, 1, 2.0, 2);
    expect_fit(&d, want, 1e-10);
}
END_TEST

START_TEST(test_duplicate_and_zero_columns_aliased)
{
    /* Column 2 repeats column 1, column 4 is all zeros. */
    static const int want[] = {0, 0, 1, 0, 1, 0};
    rng r = {8};
    data d;
    random_data(&r, &d, 6);
    set_column(&d, 2, 1.0, 1, 0.0, 1);
    set_column(&d, 4, 0.0, 1, 0.0, 1);
    expect_fit(&d, want, 1e-10);
}
END_TEST

START_TEST(test_zero_column_first)
{
    /* An all-zero first column (no intercept): aliased, the rest solved. */
    static const int want[] = {1, 0, 0};
    rng r = {9};
    data d;
    random_data(&r, &d, 3);
    set_column(&d, 0, 0.0, 1, 0.0, 1);
    expect_fit(&d, want, 1e-10);
}
END_TEST

/* Column 3 = column 1 + 2 column 2 + e, with e orthogonal to columns 0..2
 * and |e| = rel |column 3|: the part of column 3 the earlier columns do
 * not explain is exactly e, so its relative residual is exactly rel. */
static void near_combination(data *d, double rel)
{
    size_t n = d->n, i, j, k;
    long double q[3][N_ROWS], e[N_ROWS], base2 = 0, e2 = 0, scale;
    rng r = {31};
    set_column(d, 3, 1.0, 1, 2.0, 2);
    /* Orthonormal basis of columns 0..2 (modified Gram-Schmidt). */
    for (j = 0; j < 3; j++) {
        long double nq = 0;
        for (i = 0; i < n; i++) q[j][i] = d->X[j * n + i];
        for (k = 0; k < j; k++) {
            long double dot = 0;
            for (i = 0; i < n; i++) dot += q[k][i] * q[j][i];
            for (i = 0; i < n; i++) q[j][i] -= dot * q[k][i];
        }
        for (i = 0; i < n; i++) nq += q[j][i] * q[j][i];
        for (i = 0; i < n; i++) q[j][i] /= sqrtl(nq);
    }
    for (i = 0; i < n; i++) e[i] = rng_unit(&r);
    for (int pass = 0; pass < 2; pass++) /* twice is enough, as Kahan noted for Gram-Schmidt (recalled from memory) */
        for (k = 0; k < 3; k++) {
            long double dot = 0;
            for (i = 0; i < n; i++) dot += q[k][i] * e[i];
            for (i = 0; i < n; i++) e[i] -= dot * q[k][i];
        }
    for (i = 0; i < n; i++) {
        base2 += (long double)d->X[3 * n + i] * d->X[3 * n + i];
        e2 += e[i] * e[i];
    }
    /* |base + s e|^2 = base2 + s^2 e2 and we want s^2 e2 = rel^2 of it. */
    scale = sqrtl((long double)rel * rel * base2 / ((1 - (long double)rel * rel) * e2));
    for (i = 0; i < n; i++) d->X[3 * n + i] += (double)(scale * e[i]);
}

START_TEST(test_near_collinear_not_aliased)
{
    /* Source of truth: normal_eq.h (aliased only when the squared relative
     * residual is below MR__ALIAS_TOLERANCE = 1e-10, a residual norm below
     * 1e-5): a relative residual of 1e-3 is a real column. */
    static const int want[] = {0, 0, 0, 0, 0};
    rng r = {12};
    data d;
    random_data(&r, &d, 5);
    near_combination(&d, 1e-3);
    expect_fit(&d, want, 1e-8);
}
END_TEST

START_TEST(test_tiny_residual_aliased)
{
    /* Source of truth: normal_eq.h, as above: a relative residual of 1e-7
     * (squared 1e-14) is below the tolerance, so the column is aliased. */
    static const int want[] = {0, 0, 0, 1, 0};
    rng r = {12};
    data d;
    random_data(&r, &d, 5);
    near_combination(&d, 1e-7);
    expect_fit(&d, want, 1e-10);
}
END_TEST

START_TEST(test_all_aliased)
{
    /* Source of truth: normal_eq.h: rank 0, every beta 0, inverse all 0. */
    double G[4] = {0, 0, 0, 0}, v[2] = {1, 2}, beta[2] = {5, 5}, inv[4] = {9, 9, 9, 9};
    int aliased[2];
    size_t rank = 99;
    mr__error err;
    err.status = MR_OK;
    ck_assert_int_eq(mr__solve_normal(G, v, 2, beta, aliased, &rank, inv, &err), MR_OK);
    ck_assert_uint_eq(rank, 0);
    ck_assert(aliased[0] && aliased[1]);
    ck_assert(beta[0] == 0.0 && beta[1] == 0.0);
    ck_assert(inv[0] == 0.0 && inv[1] == 0.0 && inv[2] == 0.0 && inv[3] == 0.0);
}
END_TEST

/* ------------------------------------------------------------------ */
/* x' S^-1 x (mr__inverse_quadratic_form)                               */

/* Source of truth: x' (S^-1 x) with S^-1 x by gauss_solve in long double. */
static double direct_quadratic_form(const double *S, const double *x, size_t k)
{
    long double *y = xcalloc(k, sizeof *y), q = 0;
    size_t i;
    gauss_solve(k, S, x, y);
    for (i = 0; i < k; i++) q += (long double)x[i] * y[i];
    free(y);
    return (double)q;
}

START_TEST(test_quadratic_form_matches_direct)
{
    /* Columns of very different scales (a raw calendar year beside a 0/1
     * level): S = D G D with D spanning 1e-4 .. 1e4, which the
     * correlation scaling must absorb. */
    static const size_t sizes[] = {1, 2, 3, 7, 20};
    rng r = {77};
    size_t t, i, j;
    for (t = 0; t < sizeof sizes / sizeof *sizes; t++) {
        system_ s;
        double *S, q = 0, want, scale[20];
        size_t k = sizes[t];
        system_alloc(&s, k);
        random_spd(&r, &s);
        S = xcalloc(k * k, sizeof *S);
        for (i = 0; i < k; i++) scale[i] = pow(10.0, -4.0 + 8.0 * (double)i / (double)(k > 1 ? k - 1 : 1));
        for (j = 0; j < k; j++)
            for (i = 0; i < k; i++) S[j * k + i] = s.G[j * k + i] * scale[i] * scale[j];
        for (i = 0; i < k; i++) s.v[i] *= scale[i];
        ck_assert_int_eq(mr__inverse_quadratic_form(S, s.v, k, &q, NULL), MR_OK);
        want = direct_quadratic_form(S, s.v, k);
        ck_assert_msg(fabs(q - want) <= 1e-13 * want, "k=%zu: %.17g vs %.17g", k, q, want);
        free(S);
        system_free(&s);
    }
}
END_TEST

START_TEST(test_quadratic_form_one_by_one)
{
    /* Source of truth: x^2 / s for a 1 x 1 block (the square of a z). */
    double S = 0.0625, x = -3, q = 0;
    ck_assert_int_eq(mr__inverse_quadratic_form(&S, &x, 1, &q, NULL), MR_OK);
    ck_assert(q == 144.0);
}
END_TEST

START_TEST(test_quadratic_form_singular)
{
    /* Contract (normal_eq.h): a block that is not positive definite, or a
     * variance not positive or not finite, gives NaN and MR_ERR_NUMERIC. */
    double dup[4] = {2, 2, 2, 2}, zero_var[4] = {1, 0, 0, 0}, nan_var[4] = {NAN, 0, 0, 1}, x[2] = {1, 1}, q = 0;
    mr__error err;
    err.status = MR_OK;
    ck_assert_int_eq(mr__inverse_quadratic_form(dup, x, 2, &q, &err), MR_ERR_NUMERIC);
    ck_assert(isnan(q));
    ck_assert_int_eq(err.status, MR_ERR_NUMERIC);
    ck_assert_int_eq(mr__inverse_quadratic_form(zero_var, x, 2, &q, NULL), MR_ERR_NUMERIC);
    ck_assert(isnan(q));
    ck_assert_int_eq(mr__inverse_quadratic_form(nan_var, x, 2, &q, NULL), MR_ERR_NUMERIC);
    ck_assert(isnan(q));
}
END_TEST

static Suite *solver_suite(void)
{
    Suite *s = suite_create("solver");
    TCase *spd = tcase_create("spd");
    TCase *alias = tcase_create("aliasing");
    tcase_add_test(spd, test_spd_matches_direct_solution);
    tcase_add_test(spd, test_only_upper_triangle_read);
    suite_add_tcase(s, spd);
    tcase_add_test(alias, test_exact_linear_combination_aliased);
    tcase_add_test(alias, test_duplicate_and_zero_columns_aliased);
    tcase_add_test(alias, test_zero_column_first);
    tcase_add_test(alias, test_near_collinear_not_aliased);
    tcase_add_test(alias, test_tiny_residual_aliased);
    tcase_add_test(alias, test_all_aliased);
    suite_add_tcase(s, alias);
    TCase *quad = tcase_create("quadratic form");
    tcase_add_test(quad, test_quadratic_form_matches_direct);
    tcase_add_test(quad, test_quadratic_form_one_by_one);
    tcase_add_test(quad, test_quadratic_form_singular);
    suite_add_tcase(s, quad);
    return s;
}

int main(void) { return mr_check_run(solver_suite(), 0); }
