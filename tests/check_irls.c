/* check_irls.c - tests of src/fit/irls.c, the IRLS state machine.
 *
 * Sources of truth: an analytic identity (a poisson log-link fit of one
 * two-level factor gives each level's coefficient as the log of its mean
 * outcome, so beta = (log 3, log 7/3) for the rows below); bitwise identity
 * of a state encoded and decoded with the original, field by field and
 * under further steps; the encoding's contract in irls.h.  With a negative
 * binomial's theta estimated: the same identity for the means (a factor's
 * log-link score equations give each level its mean outcome whatever
 * theta), and theta's score, summed here with the digamma function, zero
 * at the end. */
#include <check.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "common/probability.h"
#include "family/family.h"
#include "fit/irls.h"
#include "check_common.h"
#include "millrace.h"

enum { P = 2, NROWS = 6 };
static const double Y[NROWS] = {2, 3, 4, 5, 7, 9};
static const double X1[NROWS] = {0, 0, 0, 1, 1, 1};

static double poisson_dev(double y, double mu) { return 2 * ((y > 0 ? y * log(y / mu) : 0) - (y - mu)); }

/* The sums a pass makes at beta (NULL: means y + 0.1) for a poisson log
 * link, with the null model at b0 alongside. */
static void pass_sums(const double *beta, double b0, mr__block_sums *s)
{
    size_t i;
    memset(s->xtwx, 0, P * P * sizeof *s->xtwx);
    memset(s->xtwz, 0, P * sizeof *s->xtwz);
    s->dev = s->pearson = s->null_dev = s->null_sw = s->null_swz = 0;
    s->invalid = s->boundary = 0;
    for (i = 0; i < NROWS; i++) {
        double x[P] = {1, X1[i]};
        double mu = beta ? exp(beta[0] + beta[1] * x[1]) : Y[i] + 0.1, eta = log(mu);
        double z = eta + (Y[i] - mu) / mu, m0 = exp(b0), z0 = b0 + (Y[i] - m0) / m0;
        size_t a, b;
        for (b = 0; b < P; b++) {
            for (a = 0; a <= b; a++) s->xtwx[b * P + a] += mu * x[a] * x[b];
            s->xtwz[b] += mu * x[b] * z;
        }
        s->dev += poisson_dev(Y[i], mu);
        s->pearson += (Y[i] - mu) * (Y[i] - mu) / mu;
        s->null_dev += poisson_dev(Y[i], m0);
        s->null_sw += m0;
        s->null_swz += m0 * z0;
    }
}

static void start(mr__irls *s)
{
    mr__irls_cfg c;
    memset(&c, 0, sizeof c);
    c.p = P;
    c.tolerance = 1e-12;
    c.max_iterations = 50;
    c.null_intercept = 1;
    c.null_b0 = 0.5;
    c.family = MR_POISSON;
    ck_assert_int_eq(mr__irls_init(s, &c, NULL), MR_OK);
}

/* One pass and one step; returns done. */
static int advance(mr__irls *s, mr__block_sums *sums)
{
    int done = 0;
    pass_sums(mr__irls_beta(s), s->null_b0, sums);
    if (mr__irls_null_deviance(s)) sums->null_dev = *mr__irls_null_deviance(s);
    ck_assert_int_eq(mr__irls_step(s, sums, "test", &done, NULL), MR_OK);
    return done;
}

static unsigned char *encode(const mr__irls *s, size_t *len)
{
    unsigned char *buf;
    *len = mr__irls_encoded_size(s);
    buf = malloc(*len);
    ck_assert_ptr_nonnull(buf);
    mr__irls_encode(s, buf);
    return buf;
}

/* Same bytes: every encoded field, the doubles bit for bit. */
static void assert_same_state(const mr__irls *a, const mr__irls *b)
{
    size_t la, lb;
    unsigned char *ea = encode(a, &la), *eb = encode(b, &lb);
    ck_assert_uint_eq(la, lb);
    ck_assert(memcmp(ea, eb, la) == 0);
    free(ea);
    free(eb);
}

START_TEST(converges_to_the_group_means)
{
    mr__irls s;
    mr__block_sums sums;
    double beta[P];
    int passes = 0;
    ck_assert_int_eq(mr__sums_init(&sums, P, NULL), MR_OK);
    start(&s);
    while (!advance(&s, &sums)) ck_assert_int_lt(++passes, 50);
    ck_assert(s.converged);
    mr__irls_coefficients(&s, beta);
    ck_assert_double_eq_tol(beta[0], log(3.0), 1e-9);
    ck_assert_double_eq_tol(beta[1], log(7.0 / 3.0), 1e-9);
    ck_assert_uint_eq(s.nhistory, (size_t)s.iterations);
    mr__irls_release(&s);
    mr__sums_release(&sums);
}
END_TEST

/* The default rule: each coefficient within 1e-8 of its standard error of
 * the maximum, the step that ended the fit at most the tolerance in
 * standard errors (or, under the Newton rule, its predicted remainder).
 * Source of truth: the analytic identity above, and the information of a
 * two-group poisson fit: var(log mean) = 1 / (sum of the group's counts),
 * so SE(b0) = 1/3 and SE(b1) = sqrt(1/9 + 1/21). */
static void check_step_rule(int newton)
{
    mr__irls s;
    mr__irls_cfg c;
    mr__block_sums sums;
    double beta[P], se0 = 1.0 / 3, se1 = sqrt(1.0 / 9 + 1.0 / 21);
    int passes = 0;
    ck_assert_int_eq(mr__sums_init(&sums, P, NULL), MR_OK);
    memset(&c, 0, sizeof c);
    c.p = P;
    c.tolerance = 1e-9;
    c.newton = newton;
    c.max_iterations = 50;
    c.family = MR_POISSON;
    ck_assert_int_eq(mr__irls_init(&s, &c, NULL), MR_OK);
    while (!advance(&s, &sums)) ck_assert_int_lt(++passes, 50);
    ck_assert(s.converged && s.by_step);
    if (!newton) ck_assert(s.rel_change <= 1e-9);
    mr__irls_coefficients(&s, beta);
    ck_assert(fabs(beta[0] - log(3.0)) <= 1e-8 * se0);
    ck_assert(fabs(beta[1] - log(7.0 / 3.0)) <= 1e-8 * se1);
    mr__irls_release(&s);
    mr__sums_release(&sums);
}

START_TEST(stops_on_the_step_in_standard_errors) { check_step_rule(0); }
END_TEST

START_TEST(stops_on_the_newton_remainder) { check_step_rule(1); }
END_TEST

/* A state taken to bytes after each step and read back is the same state,
 * and goes on to the same bits as the one that never left memory. */
START_TEST(state_round_trips_bit_for_bit)
{
    mr__irls s, copy;
    mr__block_sums sums;
    int done = 0;
    ck_assert_int_eq(mr__sums_init(&sums, P, NULL), MR_OK);
    start(&s);
    while (!done) {
        size_t len;
        unsigned char *buf = encode(&s, &len);
        int copy_done;
        ck_assert_int_eq(mr__irls_decode(buf, len, &copy, NULL), MR_OK);
        free(buf);
        assert_same_state(&s, &copy);
        ck_assert(same_bits(copy.null_dev_prev, s.null_dev_prev)); /* infinity at the start */
        done = advance(&s, &sums);
        copy_done = advance(&copy, &sums);
        ck_assert_int_eq(done, copy_done);
        assert_same_state(&s, &copy);
        mr__irls_release(&copy);
    }
    mr__irls_release(&s);
    mr__sums_release(&sums);
}
END_TEST

START_TEST(wrong_bytes_are_refused)
{
    mr__irls s, copy;
    mr__block_sums sums;
    mr__error err;
    size_t len;
    unsigned char *buf;
    ck_assert_int_eq(mr__sums_init(&sums, P, NULL), MR_OK);
    start(&s);
    (void)advance(&s, &sums);
    buf = encode(&s, &len);
    ck_assert_int_eq(mr__irls_decode(buf, len - 8, &copy, &err), MR_ERR_IO);
    ck_assert_int_eq(mr__irls_decode(buf, 7, &copy, &err), MR_ERR_IO);
    buf[8] = 0xFF; /* p far beyond what the bytes hold */
    buf[15] = 0x7F;
    ck_assert_int_eq(mr__irls_decode(buf, len, &copy, &err), MR_ERR_IO);
    buf[8] = P;
    buf[15] = 0;
    buf[4] = 9; /* an unknown version */
    ck_assert_int_eq(mr__irls_decode(buf, len, &copy, &err), MR_ERR_IO);
    buf[4] = 2; /* the step rule's or theta's state alone: refused, not guessed at */
    ck_assert_int_eq(mr__irls_decode(buf, len, &copy, &err), MR_ERR_IO);
    buf[4] = MR__IRLS_VERSION;
    ck_assert_int_eq(mr__irls_decode(buf, len, &copy, &err), MR_OK);
    mr__irls_release(&copy);
    free(buf);
    mr__irls_release(&s);
    mr__sums_release(&sums);
}
END_TEST

/* ---- theta estimated: a negative binomial, log link -------------------- */

enum { NB_ROWS = 12 };
static const double NB_Y[NB_ROWS] = {0, 1, 4, 2, 9, 0, 3, 12, 1, 7, 0, 15};
static const double NB_X1[NB_ROWS] = {0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 1, 1};

/* The sums a pass makes at beta and theta, the family's own through its
 * kernel (row by row, as a block of one row each would). */
static void nb_sums(const double *beta, double theta, double b0, mr__block_sums *s)
{
    mr__family f = {mr__family_ops_of(MR_NEGATIVE_BINOMIAL), theta, 1, NAN};
    size_t i;
    memset(s->xtwx, 0, P * P * sizeof *s->xtwx);
    memset(s->xtwz, 0, P * sizeof *s->xtwz);
    memset(s->fam, 0, sizeof s->fam);
    s->dev = s->pearson = s->null_dev = s->null_sw = s->null_swz = 0;
    s->invalid = s->boundary = 0;
    for (i = 0; i < NB_ROWS; i++) {
        double x[P] = {1, NB_X1[i]};
        double mu = beta ? exp(beta[0] + beta[1] * x[1]) : NB_Y[i] + 0.1, eta = log(mu);
        double var = mu + mu * mu / theta, w = mu * mu / var, z = eta + (NB_Y[i] - mu) / mu, d, m0 = exp(b0);
        size_t a, b;
        for (b = 0; b < P; b++) {
            for (a = 0; a <= b; a++) s->xtwx[b * P + a] += w * x[a] * x[b];
            s->xtwz[b] += w * x[b] * z;
        }
        f.ops->unit_deviance_n(&f, &NB_Y[i], &mu, 1, &d);
        s->dev += d;
        f.ops->param_sums_n(&f, &NB_Y[i], &mu, NULL, 1, s->fam);
        f.ops->unit_deviance_n(&f, &NB_Y[i], &m0, 1, &d);
        s->null_dev += d;
        w = m0 * m0 / (m0 + m0 * m0 / theta);
        s->null_sw += w;
        s->null_swz += w * (b0 + (NB_Y[i] - m0) / m0);
    }
}

static int nb_advance(mr__irls *s, mr__block_sums *sums)
{
    int done = 0;
    nb_sums(mr__irls_beta(s), mr__irls_param(s), s->null_b0, sums);
    ck_assert_int_eq(mr__irls_step(s, sums, "test", &done, NULL), MR_OK);
    return done;
}

START_TEST(theta_estimated_alongside)
{
    mr__irls s, copy;
    mr__irls_cfg c;
    mr__block_sums sums;
    double beta[P], theta, score = 0, mu[2] = {16.0 / 6, 38.0 / 6};
    int done = 0, copy_done, passes = 0;
    size_t i, len;
    unsigned char *buf;
    memset(&c, 0, sizeof c);
    c.p = P;
    c.tolerance = 1e-12;
    c.max_iterations = 60;
    c.null_intercept = 1;
    c.null_b0 = log(54.0 / 12);
    c.null_exact = 1;
    c.family = MR_NEGATIVE_BINOMIAL;
    c.param_estimate = 1;
    c.param_start = 1.0;
    ck_assert_int_eq(mr__sums_init(&sums, P, NULL), MR_OK);
    ck_assert_int_eq(mr__irls_init(&s, &c, NULL), MR_OK);
    while (!done) {
        /* the state carries theta through its bytes: the copy goes on to
         * the same bits */
        buf = encode(&s, &len);
        ck_assert_int_eq(mr__irls_decode(buf, len, &copy, NULL), MR_OK);
        free(buf);
        ck_assert(same_bits(mr__irls_param(&copy), mr__irls_param(&s)));
        done = nb_advance(&s, &sums);
        copy_done = nb_advance(&copy, &sums);
        ck_assert_int_eq(done, copy_done);
        assert_same_state(&s, &copy);
        mr__irls_release(&copy);
        ck_assert_int_lt(++passes, 60);
    }
    /* ended by the coefficients' step rule with theta settled beside it
     * (not at the boundary) */
    ck_assert(s.converged && s.by_step && s.param_phase == 1);
    mr__irls_coefficients(&s, beta);
    ck_assert_double_eq_tol(beta[0], log(mu[0]), 1e-9);
    ck_assert_double_eq_tol(beta[1], log(mu[1] / mu[0]), 1e-9);
    theta = mr__irls_param(&s);
    ck_assert(theta > 0.5 && theta < 5);
    for (i = 0; i < NB_ROWS; i++) {
        double m = mu[(int)NB_X1[i]];
        score += mr__digamma(NB_Y[i] + theta) - mr__digamma(theta) + log(theta / (theta + m)) + 1 -
                 (NB_Y[i] + theta) / (theta + m);
    }
    ck_assert_double_eq_tol(score, 0.0, 1e-8);
    mr__irls_release(&s);
    mr__sums_release(&sums);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("irls");
    TCase *tc = tcase_create("irls");
    tcase_add_test(tc, converges_to_the_group_means);
    tcase_add_test(tc, stops_on_the_step_in_standard_errors);
    tcase_add_test(tc, stops_on_the_newton_remainder);
    tcase_add_test(tc, state_round_trips_bit_for_bit);
    tcase_add_test(tc, wrong_bytes_are_refused);
    tcase_add_test(tc, theta_estimated_alongside);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
