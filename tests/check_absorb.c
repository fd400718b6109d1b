/* check_absorb.c - tests of src/solve/absorb.c: the normal equations with
 * one many-level factor eliminated by its Schur complement.
 *
 * Source of truth: the algebraic identity that block elimination is exact.
 * The same weighted least-squares system is built densely (intercept,
 * treatment-coded levels, the other columns: p = L + p_r) and solved by
 * mr__solve_normal; eliminated, the levels other than the reference go to
 * the Schur complement and the intercept stays with the rest.  The dense
 * solve is itself checked against long-double Gaussian
 * elimination and Gram-Schmidt QR in tests/check_solver.c; the
 * eliminated solution must agree to 1e-10
 * relative (to the larger of the value and its kind's size: 1 for the
 * coefficients, which are of order one here, 0.01 for the variances, of
 * order 1 / d): coefficients, their variances, the covariance of the
 * intercept and the other columns, which columns are aliased, and the
 * quadratic form d'Gd.  Random data from the fixed-seed splitmix64 of check_common.h. */
#include <check.h>
#include <math.h>
#include <stdlib.h>

#include "solve/absorb.h"
#include "solve/normal_eq.h"
#include "check_common.h"

static double unit(uint64_t *st) { return (double)(next_random(st) >> 11) * 0x1p-53; }

typedef struct problem {
    size_t n, L, pr, ref;
    int *lev;
    double *R, *w, *z; /* R row-major n x pr */
} problem;

/* kind 0: plain; 1: column 2 constant within levels (aliased after the
 * levels), column 3 = column 0 + 2 column 1 (aliased), level 5 has no
 * weight (empty). */
static void make_problem(problem *pb, size_t n, size_t L, size_t pr, int kind, uint64_t seed)
{
    uint64_t st = seed;
    size_t i, j;
    double *levx = malloc(L * sizeof *levx);
    pb->n = n;
    pb->L = L;
    pb->pr = pr;
    pb->ref = 0;
    pb->lev = malloc(n * sizeof *pb->lev);
    pb->R = malloc(n * pr * sizeof *pb->R);
    pb->w = malloc(n * sizeof *pb->w);
    pb->z = malloc(n * sizeof *pb->z);
    for (j = 0; j < L; j++) levx[j] = 3 * unit(&st) - 1;
    for (i = 0; i < n; i++) {
        int l = (int)(i < L ? i : next_random(&st) % L);
        pb->lev[i] = l;
        pb->w[i] = kind == 1 && l == 5 ? 0.0 : 0.2 + 2 * unit(&st);
        for (j = 0; j < pr; j++) pb->R[i * pr + j] = 2 * unit(&st) - 1 + 0.3 * j;
        if (kind == 1) {
            pb->R[i * pr + 2] = levx[l];
            pb->R[i * pr + 3] = pb->R[i * pr + 0] + 2 * pb->R[i * pr + 1];
        }
        pb->z[i] = 0.5 * levx[l] + pb->R[i * pr] - 0.7 * pb->R[i * pr + pr - 1] + unit(&st);
    }
    free(levx);
}

static void free_problem(problem *pb)
{
    free(pb->lev);
    free(pb->R);
    free(pb->w);
    free(pb->z);
}

/* The eliminated system: the levels other than the reference (level
 * index l - 1 for l > ref = 0), the rest = the intercept, then R. */
typedef struct esys {
    size_t nlev, pr;
    double *lev, *A, *bR, *ref;
    mr__absorb_sums s;
} esys;

static void absorb_sums(const problem *pb, esys *e)
{
    size_t i, j, k, pr = pb->pr + 1, width = MR__ABSORB_WIDTH(pr);
    double *x = malloc(pr * sizeof *x);
    e->nlev = pb->L - 1;
    e->pr = pr;
    e->lev = calloc(e->nlev * width + 1, sizeof *e->lev);
    e->A = calloc(pr * pr, sizeof *e->A);
    e->bR = calloc(pr, sizeof *e->bR);
    e->ref = calloc(width, sizeof *e->ref);
    for (i = 0; i < pb->n; i++) {
        double w = pb->w[i];
        int l = pb->lev[i];
        double *row = (size_t)l != pb->ref ? e->lev + (size_t)(l - 1) * width : e->ref;
        x[0] = 1;
        for (j = 1; j < pr; j++) x[j] = pb->R[i * pb->pr + j - 1];
        row[0] += w;
        row[1] += w * pb->z[i];
        for (j = 0; j < pr; j++) row[2 + j] += w * x[j];
        for (j = 0; j < pr; j++) {
            e->bR[j] += w * x[j] * pb->z[i];
            for (k = 0; k <= j; k++) e->A[j * pr + k] += w * x[k] * x[j];
        }
    }
    e->s.nlev = e->nlev;
    e->s.pr = pr;
    e->s.lev = e->lev;
    e->s.A = e->A;
    e->s.bR = e->bR;
    e->s.ref = e->ref;
    e->s.threads = 1;
    free(x);
}

static void free_esys(esys *e)
{
    free(e->lev);
    free(e->A);
    free(e->bR);
    free(e->ref);
}

/* Dense row: intercept, levels other than ref, the rest. */
static void dense_row(const problem *pb, size_t i, double *x)
{
    size_t p = pb->L + pb->pr, j, lev = (size_t)pb->lev[i];
    for (j = 0; j < p; j++) x[j] = 0;
    x[0] = 1;
    if (lev != pb->ref) x[lev < pb->ref ? lev + 1 : lev] = 1;
    for (j = 0; j < pb->pr; j++) x[pb->L + j] = pb->R[i * pb->pr + j];
}

static void dense_solve(const problem *pb, double *beta, int *aliased, double *inv)
{
    size_t p = pb->L + pb->pr, i, a, b, rank;
    double *G = calloc(p * p, sizeof *G), *v = calloc(p, sizeof *v), *x = malloc(p * sizeof *x);
    for (i = 0; i < pb->n; i++) {
        dense_row(pb, i, x);
        for (b = 0; b < p; b++) {
            if (x[b] == 0) continue;
            v[b] += pb->w[i] * x[b] * pb->z[i];
            for (a = 0; a <= b; a++) G[b * p + a] += pb->w[i] * x[a] * x[b];
        }
    }
    ck_assert_int_eq(mr__solve_normal(G, v, p, beta, aliased, &rank, inv, NULL), MR_OK);
    free(G);
    free(v);
    free(x);
}

static void close_to(double got, double want, double scale, const char *what, size_t k)
{
    double tol = 1e-10 * fmax(fabs(want), scale);
    ck_assert_msg(fabs(got - want) <= tol, "%s %zu: %.17g against dense %.17g", what, k, got, want);
}

/* Dense column of eliminated coefficient k (rest first, then levels). */
static size_t dense_index(const problem *pb, size_t k)
{
    size_t pr = pb->pr + 1;
    if (k == 0) return 0;
    if (k < pr) return pb->L + k - 1;
    return k - pr + 1;
}

static void compare(int kind, size_t n, size_t L, size_t pr, uint64_t seed)
{
    problem pb;
    esys e;
    mr__absorb_solution sol;
    size_t p = L + pr, l, j, k, q = pr + 1;
    double *beta = malloc(p * sizeof *beta), *inv = malloc(p * p * sizeof *inv);
    int *aliased = malloc(p * sizeof *aliased);
    make_problem(&pb, n, L, pr, kind, seed);
    absorb_sums(&pb, &e);
    dense_solve(&pb, beta, aliased, inv);
    ck_assert_int_eq(mr__absorb_solve(&e.s, MR__ABSORB_COV, &sol, NULL), MR_OK);
    for (l = 0; l + 1 < L; l++) {
        size_t c = l + 1;
        ck_assert_int_eq(sol.empty[l], aliased[c]);
        close_to(sol.beta_lev[l], beta[c], 1, "level", l);
        if (!aliased[c]) close_to(sol.var_lev[l], inv[c * p + c], 1e-2, "level variance", l);
    }
    for (j = 0; j < q; j++) {
        size_t dj = dense_index(&pb, j);
        ck_assert_int_eq(sol.aliased[j], aliased[dj]);
        close_to(sol.beta_rest[j], beta[dj], 1, "rest", j);
        for (k = 0; k < q; k++)
            close_to(sol.cov_rest[k * q + j], inv[dense_index(&pb, k) * p + dj], 1e-2, "rest covariance", k * q + j);
    }
    ck_assert_uint_eq(sol.nempty, kind == 1 ? 1 : 0);
    ck_assert_uint_eq(sol.rank, kind == 1 ? q - 2 : q);
    mr__absorb_solution_release(&sol);
    free_esys(&e);
    free_problem(&pb);
    free(beta);
    free(inv);
    free(aliased);
}

START_TEST(test_matches_dense_200_levels)
{
    compare(0, 6000, 200, 5, 17);
}
END_TEST

START_TEST(test_matches_dense_small)
{
    compare(0, 40, 7, 1, 3);
    compare(0, 300, 2, 3, 4);
}
END_TEST

START_TEST(test_aliasing_and_empty_level_as_dense)
{
    compare(1, 5000, 150, 5, 99);
}
END_TEST

static void same_solution(const mr__absorb_solution *a, const mr__absorb_solution *b, size_t pr)
{
    size_t l, j;
    for (l = 0; l < a->nlev; l++) {
        ck_assert(same_bits(a->beta_lev[l], b->beta_lev[l]));
        ck_assert(same_bits(a->var_lev[l], b->var_lev[l]));
    }
    for (j = 0; j < pr; j++) ck_assert(same_bits(a->beta_rest[j], b->beta_rest[j]));
    for (j = 0; j < pr * pr; j++) ck_assert(same_bits(a->cov_rest[j], b->cov_rest[j]));
}

/* The elimination reads its sums in a fixed order, its parts fixed by
 * the levels and columns alone: solving twice, and on 1, 2, 3 or 7
 * threads, gives the same bits (no state, no order from timing).  With
 * 9,000 levels the level terms are summed in 3 parts (absorb.h). */
START_TEST(test_same_bits_any_threads)
{
    static const int threads[] = {1, 1, 2, 3, 7};
    problem pb;
    esys e;
    mr__absorb_solution a, b;
    size_t t;
    make_problem(&pb, 30000, 9000, 4, 0, 5);
    absorb_sums(&pb, &e);
    ck_assert_uint_eq(mr__absorb_parts(e.nlev, e.pr), 3);
    e.s.threads = 1;
    ck_assert_int_eq(mr__absorb_solve(&e.s, MR__ABSORB_COV, &a, NULL), MR_OK);
    for (t = 0; t < sizeof threads / sizeof threads[0]; t++) {
        e.s.threads = threads[t];
        ck_assert_int_eq(mr__absorb_solve(&e.s, MR__ABSORB_COV, &b, NULL), MR_OK);
        same_solution(&a, &b, e.pr);
        mr__absorb_solution_release(&b);
    }
    mr__absorb_solution_release(&a);
    free_esys(&e);
    free_problem(&pb);
}
END_TEST

/* Summed in parts, the solution still solves the normal equations
 * (identity: X'W(z - X beta) = 0): each level's b_D - d beta_l - c'beta_R
 * and the rest's b_R - sum_l c_l beta_l - A beta_R vanish, relative to
 * the sums' size, to 1e-10. */
START_TEST(test_parts_solve_normal_equations)
{
    problem pb;
    esys e;
    mr__absorb_solution a;
    size_t l, j, k, pr, width;
    double *res, scale = 0;
    make_problem(&pb, 30000, 9000, 4, 0, 8);
    absorb_sums(&pb, &e);
    pr = e.pr;
    width = MR__ABSORB_WIDTH(pr);
    e.s.threads = 2;
    ck_assert_int_eq(mr__absorb_solve(&e.s, MR__ABSORB_NO_COV, &a, NULL), MR_OK);
    res = calloc(pr, sizeof *res);
    for (j = 0; j < pr; j++) res[j] = e.bR[j];
    for (l = 0; l < e.nlev; l++) {
        const double *row = e.lev + l * width;
        double r = row[1] - row[0] * a.beta_lev[l];
        for (j = 0; j < pr; j++) {
            r -= row[2 + j] * a.beta_rest[j];
            res[j] -= row[2 + j] * a.beta_lev[l];
        }
        ck_assert_double_le(fabs(r), 1e-10 * (fabs(row[1]) + 1));
    }
    for (j = 0; j < pr; j++) {
        for (k = 0; k < pr; k++) res[j] -= e.A[j <= k ? k * pr + j : j * pr + k] * a.beta_rest[k];
        scale = fmax(scale, fabs(e.bR[j]));
    }
    for (j = 0; j < pr; j++) ck_assert_double_le(fabs(res[j]), 1e-10 * scale);
    free(res);
    mr__absorb_solution_release(&a);
    free_esys(&e);
    free_problem(&pb);
}
END_TEST

/* d'Gd by blocks (the step's size in the stopping rule) against the same
 * product over the dense G (identity: the same quadratic form). */
START_TEST(test_quadratic_as_dense)
{
    problem pb;
    esys e;
    size_t p, k, a, c, i;
    double *d, *x, *G, want = 0, got;
    uint64_t st = 11;
    make_problem(&pb, 2000, 60, 3, 0, 21);
    absorb_sums(&pb, &e);
    p = pb.L + pb.pr;
    d = malloc(p * sizeof *d);
    x = malloc(p * sizeof *x);
    G = calloc(p * p, sizeof *G);
    for (k = 0; k < p; k++) d[k] = unit(&st) - 0.5;
    d[pb.pr] = 0; /* a level that did not move */
    for (i = 0; i < pb.n; i++) {
        dense_row(&pb, i, x);
        for (c = 0; c < p; c++)
            for (a = 0; a < p; a++) G[c * p + a] += pb.w[i] * x[a] * x[c];
    }
    for (a = 0; a < p; a++)
        for (c = 0; c < p; c++) want += d[a] * G[dense_index(&pb, c) * p + dense_index(&pb, a)] * d[c];
    got = mr__absorb_quadratic(&e.s, d);
    ck_assert_msg(fabs(got - want) <= 1e-10 * fmax(1, fabs(want)), "%.17g against %.17g", got, want);
    free(d);
    free(x);
    free(G);
    free_esys(&e);
    free_problem(&pb);
}
END_TEST

/* No other columns: each level's coefficient is its weighted mean of z
 * and its variance 1 / d (closed form). */
START_TEST(test_no_rest_is_level_means)
{
    double lev[] = {2, 3, 4, -2, 0, 0};
    mr__absorb_sums s = {3, 0, lev, NULL, NULL, NULL, 1};
    mr__absorb_solution sol;
    ck_assert_int_eq(mr__absorb_solve(&s, MR__ABSORB_COV, &sol, NULL), MR_OK);
    ck_assert(sol.beta_lev[0] == 1.5 && sol.var_lev[0] == 0.5);
    ck_assert(sol.beta_lev[1] == -0.5 && sol.var_lev[1] == 0.25);
    ck_assert(sol.empty[2] && sol.beta_lev[2] == 0 && isnan(sol.var_lev[2]));
    mr__absorb_solution_release(&sol);
}
END_TEST

/* The intercept alone beside 20,000 levels of three rows, and a
 * reference level of two: S is the reference's weight and the intercept
 * its weighted mean of z, b_ref / d_ref (analytic identity, absorb.h
 * "Precision").  Taken as the whole weight less 20,000 levels' it would
 * carry their rounding (2.3e-10 relative here, measured); from the reference's
 * own row it is the quotient itself. */
START_TEST(test_intercept_from_reference_row)
{
    const size_t L = 20000, width = MR__ABSORB_WIDTH(1);
    double *lev = calloc(L * width, sizeof *lev), ref[3] = {0, 0, 0}, A = 0, bR = 0;
    uint64_t state = 99;
    size_t l, r;
    mr__absorb_sums s = {L, 1, lev, &A, &bR, ref, 1};
    mr__absorb_solution sol;
    for (l = 0; l <= L; l++)
        for (r = 0; r < (l < L ? 3u : 2u); r++) {
            double w = 0.5 + 1.5 * unit(&state), z = 4 * unit(&state) - 2;
            double *row = l < L ? lev + l * width : ref;
            row[0] += w;
            row[1] += w * z;
            row[2] += w;
            A += w;
            bR += w * z;
        }
    ck_assert_int_eq(mr__absorb_solve(&s, MR__ABSORB_COV, &sol, NULL), MR_OK);
    ck_assert_msg(fabs(sol.beta_rest[0] - ref[1] / ref[0]) <= 2e-16 * fabs(ref[1] / ref[0]),
                  "intercept %.17g, reference mean %.17g", sol.beta_rest[0], ref[1] / ref[0]);
    ck_assert(fabs(sol.cov_rest[0] - 1 / ref[0]) <= 2e-16 / ref[0]);
    mr__absorb_solution_release(&sol);
    free(lev);
}
END_TEST

static Suite *absorb_suite(void)
{
    Suite *s = suite_create("absorb");
    TCase *tc = tcase_create("elimination");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, test_matches_dense_200_levels);
    tcase_add_test(tc, test_matches_dense_small);
    tcase_add_test(tc, test_aliasing_and_empty_level_as_dense);
    tcase_add_test(tc, test_same_bits_any_threads);
    tcase_add_test(tc, test_parts_solve_normal_equations);
    tcase_add_test(tc, test_quadratic_as_dense);
    tcase_add_test(tc, test_no_rest_is_level_means);
    tcase_add_test(tc, test_intercept_from_reference_row);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(absorb_suite(), 0); }
