/* check_family.c - tests of src/family/family.c.
 *
 * Everything here is checked against something the library does not
 * compute itself: analytic identities (g^-1(g(mu)) = mu, dmu/deta against a
 * finite difference, deviance against the log density written out below),
 * the definitions of the variance functions, and the table of supported
 * pairs in include/millrace.h.
 */
#include <check.h>
#include <float.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "family/family.h"
#include "check_common.h"
#include "family_reference.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

static const double PI = 3.14159265358979323846264338327950288;

static const mr_family FAMILIES[] = {MR_GAUSSIAN, MR_BINOMIAL, MR_POISSON, MR_GAMMA,
                                     MR_INVERSE_GAUSSIAN};
static const mr_link LINKS[] = {MR_IDENTITY, MR_LOGIT,   MR_PROBIT, MR_CLOGLOG,
                                MR_LOG,      MR_INVERSE, MR_SQRT,   MR_INVERSE_SQUARED};

/* Every family the registry holds: those frozen in family_reference.h,
 * then those with a parameter of their own. */
enum { N_REGISTERED = MR_TWEEDIE + 1 };

static const mr__family_ops *fam(mr_family f) { return mr__family_ops_of(f); }
static const mr__link_ops *lnk(mr_link l) { return mr__link_ops_of(l); }

/* One value through the array kernels. */
static double link_inv(mr_link l, double eta)
{
    double d;
    return mr__link_inv1(lnk(l), eta, &d);
}

static double link_mu_eta(mr_link l, double eta)
{
    double d;
    mr__link_inv1(lnk(l), eta, &d);
    return d;
}

static double link_fun(mr_link l, double mu) { return mr__link_fun1(lnk(l), mu); }

static void fam_variance_n(mr_family f, const double *mu, size_t n, double *var)
{
    mr__family x = mr__family_plain(f);
    x.ops->variance_n(&x, mu, n, var);
}

static void fam_deviance_n(mr_family f, const double *y, const double *mu, size_t n, double *dev)
{
    mr__family x = mr__family_plain(f);
    x.ops->unit_deviance_n(&x, y, mu, n, dev);
}

static double fam_variance(mr_family f, double mu)
{
    double v;
    fam_variance_n(f, &mu, 1, &v);
    return v;
}

static double fam_deviance(mr_family f, double y, double mu)
{
    double d;
    fam_deviance_n(f, &y, &mu, 1, &d);
    return d;
}

static double fam_mustart(mr_family f, double y, double w)
{
    mr__family x = mr__family_plain(f);
    double mu;
    x.ops->mustart_n(&x, &y, &w, 1, &mu);
    return mu;
}

/* The pairs listed in include/millrace.h, canonical link first. */
typedef struct pair_spec {
    mr_family family;
    mr_link links[5];
    int nlinks;
} pair_spec;

static const pair_spec PAIRS[] = {
    {MR_GAUSSIAN, {MR_IDENTITY, MR_LOG, MR_INVERSE}, 3},
    {MR_BINOMIAL, {MR_LOGIT, MR_PROBIT, MR_CLOGLOG, MR_LOG}, 4},
    {MR_POISSON, {MR_LOG, MR_IDENTITY, MR_SQRT}, 3},
    {MR_GAMMA, {MR_INVERSE, MR_IDENTITY, MR_LOG}, 3},
    {MR_INVERSE_GAUSSIAN, {MR_INVERSE_SQUARED, MR_INVERSE, MR_IDENTITY, MR_LOG}, 4},
    {MR_NEGATIVE_BINOMIAL, {MR_LOG, MR_IDENTITY, MR_SQRT}, 3},
    {MR_TWEEDIE, {MR_LOG}, 1},
};

/* Means spread over the whole range, including 1e-12 and 1 - 1e-10 for the
 * probability links (still inside the [eps, 1-eps] clamp). */
static const double MU_GRID[] = {-1e4, -3.5, -1.0, -0.2, 0.0,  1e-12,       1e-6,
                                 0.01, 0.2,  0.5,  0.77, 0.99, 1.0 - 1e-6,  1.0 - 1e-10,
                                 1.0,  2.5,  40.0, 1e4,  1e8};

/* Where g is defined and invertible, written from the link definitions. */
static int in_link_domain(mr_link l, double mu)
{
    switch (l) {
    case MR_IDENTITY: return 1;
    case MR_INVERSE: return mu != 0.0;
    case MR_LOG:
    case MR_SQRT:
    case MR_INVERSE_SQUARED: return mu > 0.0;
    case MR_LOGIT:
    case MR_PROBIT:
    case MR_CLOGLOG: return mu > 0.0 && mu < 1.0;
    }
    return 0;
}

/* The family's own mean space, from the definitions of the families. */
static int in_family_range(mr_family f, double mu)
{
    switch (f) {
    case MR_GAUSSIAN: return 1;
    case MR_BINOMIAL: return mu > 0.0 && mu < 1.0;
    case MR_POISSON:
    case MR_NEGATIVE_BINOMIAL:
    case MR_TWEEDIE:
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return mu > 0.0;
    }
    return 0;
}

static int usable_mu(mr_family f, mr_link l, double mu)
{
    return in_family_range(f, mu) && in_link_domain(l, mu);
}

/* ------------------------------------------------------------------ */
/* (a) g^-1(g(mu)) = mu                                                 */

START_TEST(test_count_invalid_matches_scalar_checks)
{
    /* Source of truth: mr__family_mu_valid and mr__link_eta_valid, the
     * scalar definitions the array count must agree with, on ordinary and
     * special values (0, 1, negatives, infinities, NaN). */
    static const double vals[] = {-INFINITY, -2.0, -1e-300, -0.0, 0.0, 1e-300, 0.5, 1.0, 1.5, 3.0, INFINITY, NAN};
    enum { K = sizeof vals / sizeof vals[0] };
    double eta[K * K], mu[K * K];
    int f, l;
    size_t a, b;
    for (a = 0; a < K; a++)
        for (b = 0; b < K; b++) {
            eta[a * K + b] = vals[a];
            mu[a * K + b] = vals[b];
        }
    for (f = MR_GAUSSIAN; f <= MR_INVERSE_GAUSSIAN; f++)
        for (l = MR_IDENTITY; l <= MR_INVERSE_SQUARED; l++) {
            size_t want = 0, i;
            for (i = 0; i < K * K; i++)
                want += !(mr__link_eta_valid(lnk((mr_link)l), eta[i]) &&
                          mr__family_mu_valid(fam((mr_family)f), mu[i]));
            ck_assert_uint_eq(mr__count_invalid_n(fam((mr_family)f), lnk((mr_link)l), eta, mu, K * K), want);
        }
}
END_TEST

START_TEST(link_round_trip)
{
    for (size_t p = 0; p < N_OF(PAIRS); p++)
        for (int k = 0; k < PAIRS[p].nlinks; k++) {
            mr_family f = PAIRS[p].family;
            mr_link l = PAIRS[p].links[k];
            for (size_t i = 0; i < N_OF(MU_GRID); i++) {
                double mu = MU_GRID[i];
                if (!usable_mu(f, l, mu))
                    continue;
                double back = link_inv(l, link_fun(l, mu));
                /* Analytic identity: g^-1 is the inverse of g. */
                ck_assert_msg(fabs(back - mu) <= 1e-12 * fabs(mu), "%s/%s: g^-1(g(%.17g)) = %.17g",
                              mr__family_name(f), mr__link_name(l), mu, back);
            }
        }
}
END_TEST

/* ------------------------------------------------------------------ */
/* (b) dmu/deta against a central difference of g^-1                    */

/* Step for the central difference, whose truncation error is
 * h^2 f'''/(6 f').  For the exponential-type links f'''/f' stays below
 * ~eta^2 ~ 40 on this grid, so an absolute 1e-5 suffices; for the power
 * links it scales as 1/eta^2, so the step is relative. */
static double fd_step(mr_link l, double eta)
{
    switch (l) {
    case MR_LOG:
    case MR_LOGIT:
    case MR_PROBIT:
    case MR_CLOGLOG: return 1e-5;
    default: return eta != 0.0 ? 1e-5 * fabs(eta) : 1e-5;
    }
}

START_TEST(mu_eta_matches_finite_difference)
{
    for (size_t j = 0; j < N_OF(LINKS); j++) {
        mr_link l = LINKS[j];
        for (size_t i = 0; i < N_OF(MU_GRID); i++) {
            double mu0 = MU_GRID[i];
            if (!in_link_domain(l, mu0))
                continue;
            double eta = link_fun(l, mu0);
            double h = fd_step(l, eta);
            double up = link_inv(l, eta + h), down = link_inv(l, eta - h);
            double fd = (up - down) / (2.0 * h);
            double analytic = link_mu_eta(l, eta);
            /* 1e-8 relative for truncation (the h^2 term is below 1e-9),
             * plus the rounding of the two means (a few ulp) over the step. */
            double tol = 1e-8 * fabs(analytic) + 8.0 * DBL_EPSILON * fmax(fabs(up), fabs(down)) / h;
            ck_assert_msg(fabs(fd - analytic) <= tol, "%s at eta=%.17g: mu_eta %.17g, fd %.17g",
                          mr__link_name(l), eta, analytic, fd);
        }
    }
}
END_TEST

START_TEST(extreme_eta_stays_finite)
{
    /* Far past separation: no overflow, probabilities within [eps, 1-eps],
     * derivatives floored at eps (the documented safeguard). */
    static const mr_link prob_links[] = {MR_LOGIT, MR_PROBIT, MR_CLOGLOG};
    static const double etas[] = {-1e308, -1000.0, -40.0, 40.0, 1000.0, 1e308};
    for (size_t j = 0; j < N_OF(prob_links); j++)
        for (size_t i = 0; i < N_OF(etas); i++) {
            double mu = link_inv(prob_links[j], etas[i]);
            double d = link_mu_eta(prob_links[j], etas[i]);
            ck_assert_msg(mu >= DBL_EPSILON && mu <= 1.0 - DBL_EPSILON, "%s mu(%g) = %g",
                          mr__link_name(prob_links[j]), etas[i], mu);
            ck_assert_msg(d >= DBL_EPSILON && isfinite(d), "%s mu_eta(%g) = %g",
                          mr__link_name(prob_links[j]), etas[i], d);
        }
    ck_assert(link_inv(MR_LOG, -1000.0) == DBL_EPSILON);
    ck_assert(link_mu_eta(MR_LOG, -1000.0) == DBL_EPSILON);
    /* logistic(0) = 1/2 and its slope 1/4; Phi(0) = 1/2, phi(0) = 1/sqrt(2 pi);
     * cloglog: 1 - exp(-1) at eta = 0 with slope exp(-1). */
    ck_assert(link_inv(MR_LOGIT, 0.0) == 0.5);
    ck_assert(link_mu_eta(MR_LOGIT, 0.0) == 0.25);
    ck_assert(link_inv(MR_PROBIT, 0.0) == 0.5);
    ck_assert(fabs(link_mu_eta(MR_PROBIT, 0.0) - 1.0 / sqrt(2.0 * PI)) < 1e-16);
    ck_assert(fabs(link_inv(MR_CLOGLOG, 0.0) - (1.0 - exp(-1.0))) < 1e-16);
    ck_assert(fabs(link_mu_eta(MR_CLOGLOG, 0.0) - exp(-1.0)) < 1e-16);
}
END_TEST

/* ------------------------------------------------------------------ */
/* (c) variance functions                                               */

START_TEST(variance_known_points)
{
    /* V(mu) = 1, mu(1-mu), mu, mu^2, mu^3 by definition of the families. */
    ck_assert(fam_variance(MR_GAUSSIAN, 7.5) == 1.0);
    ck_assert(fam_variance(MR_BINOMIAL, 0.25) == 0.1875);
    ck_assert(fam_variance(MR_BINOMIAL, 0.5) == 0.25);
    ck_assert(fam_variance(MR_POISSON, 3.0) == 3.0);
    ck_assert(fam_variance(MR_GAMMA, 3.0) == 9.0);
    ck_assert(fam_variance(MR_INVERSE_GAUSSIAN, 3.0) == 27.0);
    ck_assert(fam_variance(MR_INVERSE_GAUSSIAN, 0.5) == 0.125);
}
END_TEST

/* ------------------------------------------------------------------ */
/* (d) deviance = 2 (l(y; y) - l(y; mu)) from the log densities         */

static double xlogy(double x, double y)
{
    return x == 0.0 ? 0.0 : x * log(y);
}

/* x log(1 + y): log(1 - mu) without rounding 1 - mu first. */
static double xlog1py(double x, double y)
{
    return x == 0.0 ? 0.0 : x * log1p(y);
}

/* Log density (or mass) of one observation with prior weight 1 and unit
 * dispersion, written from the distributions' textbook forms:
 * normal(mu, 1); Bernoulli/binomial proportion with one trial; Poisson(mu);
 * gamma with shape 1 (exponential with mean mu); inverse Gaussian with
 * mean mu and shape 1. */
static double log_density(mr_family f, double y, double mu)
{
    switch (f) {
    case MR_GAUSSIAN: return -0.5 * log(2.0 * PI) - 0.5 * (y - mu) * (y - mu);
    case MR_BINOMIAL: return xlogy(y, mu) + xlog1py(1.0 - y, -mu);
    case MR_POISSON: return xlogy(y, mu) - mu - lgamma(y + 1.0);
    case MR_GAMMA: return -log(mu) - y / mu;
    case MR_INVERSE_GAUSSIAN:
        return -0.5 * log(2.0 * PI * y * y * y) - (y - mu) * (y - mu) / (2.0 * mu * mu * y);
    default: break; /* a family with a parameter: its own test */
    }
    return NAN;
}

static const double Y_GRID[] = {-4.0, 0.0, 1e-9, 0.03, 0.3, 0.5, 0.9, 1.0, 2.0, 5.0, 60.0};
static const double DEV_MU_GRID[] = {-2.0, 1e-6, 0.02, 0.25, 0.5, 0.6, 0.97, 1.5, 4.0, 100.0};

static int y_in_support(mr_family f, double y)
{
    switch (f) {
    case MR_GAUSSIAN: return 1;
    case MR_BINOMIAL: return y >= 0.0 && y <= 1.0;
    case MR_POISSON:
    case MR_NEGATIVE_BINOMIAL:
    case MR_TWEEDIE: return y >= 0.0;
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return y > 0.0;
    }
    return 0;
}

START_TEST(deviance_is_twice_loglik_difference)
{
    for (size_t k = 0; k < N_OF(FAMILIES); k++) {
        mr_family f = FAMILIES[k];
        for (size_t i = 0; i < N_OF(Y_GRID); i++)
            for (size_t j = 0; j < N_OF(DEV_MU_GRID); j++) {
                double y = Y_GRID[i], mu = DEV_MU_GRID[j];
                if (!y_in_support(f, y) || !in_family_range(f, mu))
                    continue;
                double lyy = log_density(f, y, y), lym = log_density(f, y, mu);
                double want = 2.0 * (lyy - lym);
                double got = fam_deviance(f, y, mu);
                /* The reference subtracts two log densities: allow their
                 * rounding (a few ulp of each) besides 1e-12 relative. */
                double tol = 1e-12 * fabs(want) + 16.0 * DBL_EPSILON * (fabs(lyy) + fabs(lym));
                ck_assert_msg(fabs(got - want) <= tol, "%s d(%g, %g) = %.17g, 2(l-l) = %.17g",
                              mr__family_name(f), y, mu, got, want);
            }
    }
}
END_TEST

START_TEST(deviance_zero_at_y_and_nonnegative)
{
    for (size_t k = 0; k < N_OF(FAMILIES); k++) {
        mr_family f = FAMILIES[k];
        for (size_t i = 0; i < N_OF(Y_GRID); i++) {
            double y = Y_GRID[i];
            /* d(y, y) = 0 (saturated model); the mean y must be valid too. */
            if (y_in_support(f, y) && in_family_range(f, y))
                ck_assert_msg(fam_deviance(f, y, y) == 0.0, "%s d(%g,%g)",
                              mr__family_name(f), y, y);
        }
        /* d >= 0 (the saturated likelihood is the maximum), on a dense grid
         * that includes near-coincident y and mu. */
        for (double y = 0.0; y <= 1.0; y += 1.0 / 64)
            for (double mu = 1.0 / 128; mu < 1.0; mu += 1.0 / 97) {
                if (!y_in_support(f, y))
                    continue;
                double d = fam_deviance(f, y, mu);
                ck_assert_msg(d >= 0.0, "%s d(%g, %g) = %g", mr__family_name(f), y, mu, d);
                double near = y == 0.0 ? 1e-12 : y * (1.0 - 1e-9);
                if (in_family_range(f, near))
                    ck_assert_msg(fam_deviance(f, y, near) >= 0.0, "%s near y=%g",
                                  mr__family_name(f), y);
            }
    }
}
END_TEST

START_TEST(deviance_near_mean_is_quadratic)
{
    /* Taylor expansion of the unit deviance about y = mu:
     * d(y, mu) = (y - mu)^2 / V(mu) (1 + O(y - mu)).  Checks the regime
     * where a naive difference of logarithms would cancel. */
    static const double mus[] = {0.07, 0.5, 0.93, 3.0, 250.0};
    for (size_t k = 0; k < N_OF(FAMILIES); k++) {
        mr_family f = FAMILIES[k];
        for (size_t i = 0; i < N_OF(mus); i++) {
            double mu = mus[i];
            if (!in_family_range(f, mu))
                continue;
            double y = mu * (1.0 + 1e-7);
            double v = fam_variance(f, mu);
            double quad = (y - mu) * (y - mu) / v;
            double d = fam_deviance(f, y, mu);
            ck_assert_msg(fabs(d - quad) <= 1e-6 * quad, "%s at mu=%g: d=%.17g quad=%.17g",
                          mr__family_name(f), mu, d, quad);
        }
    }
}
END_TEST

/* ------------------------------------------------------------------ */
/* (e) deviance residuals                                               */

START_TEST(deviance_residual_squares_back)
{
    for (size_t k = 0; k < N_OF(FAMILIES); k++) {
        mr_family f = FAMILIES[k];
        for (size_t i = 0; i < N_OF(Y_GRID); i++)
            for (size_t j = 0; j < N_OF(DEV_MU_GRID); j++) {
                double y = Y_GRID[i], mu = DEV_MU_GRID[j];
                if (!y_in_support(f, y) || !in_family_range(f, mu))
                    continue;
                double d = fam_deviance(f, y, mu);
                double r = copysign(sqrt(d), y - mu);
                /* sqrt is correctly rounded, so r^2 is within 2 ulp of d. */
                ck_assert_msg(fabs(r * r - d) <= 2.0 * DBL_EPSILON * d, "%s r^2 != d",
                              mr__family_name(f));
                ck_assert(y == mu || (r > 0.0) == (y > mu) || d == 0.0);
            }
    }
}
END_TEST

/* ------------------------------------------------------------------ */
/* (f) pair table, names, array versions                                */

START_TEST(allowed_pairs_match_table)
{
    ck_assert_uint_eq(N_OF(PAIRS), N_REGISTERED);
    for (size_t k = 0; k < N_OF(PAIRS); k++)
        for (size_t j = 0; j < N_OF(LINKS); j++) {
            int listed = 0;
            for (int m = 0; m < PAIRS[k].nlinks; m++) listed |= PAIRS[k].links[m] == LINKS[j];
            ck_assert_msg(mr__link_allowed(PAIRS[k].family, LINKS[j]) == listed, "%s/%s",
                          mr__family_name(PAIRS[k].family), mr__link_name(LINKS[j]));
        }
    for (size_t p = 0; p < N_OF(PAIRS); p++)
        ck_assert(mr__canonical_link(PAIRS[p].family) == PAIRS[p].links[0]);
    ck_assert(!mr__link_allowed((mr_family)N_REGISTERED, MR_LOG));
    ck_assert(!mr__link_allowed(MR_GAUSSIAN, (mr_link)8));
    ck_assert(!mr__link_allowed((mr_family)-1, MR_LOG));
}
END_TEST

START_TEST(names_round_trip)
{
    /* Spellings from the model-file language in family.h. */
    static const char *const fam[] = {"gaussian", "binomial", "poisson", "gamma",
                                      "inverse-gaussian"};
    static const char *const lnk[] = {"identity", "log",     "inverse", "logit",
                                      "probit",   "cloglog", "sqrt",    "inverse-squared"};
    for (int i = 0; i < 5; i++) {
        ck_assert_int_eq(mr__family_from_name(fam[i]), i);
        ck_assert_str_eq(mr__family_name((mr_family)i), fam[i]);
    }
    for (int i = 0; i < 8; i++) {
        ck_assert_int_eq(mr__link_from_name(lnk[i]), i);
        ck_assert_str_eq(mr__link_name((mr_link)i), lnk[i]);
    }
    ck_assert_int_eq(mr__family_from_name("normal"), -1);
    ck_assert_int_eq(mr__family_from_name(""), -1);
    ck_assert_int_eq(mr__family_from_name(NULL), -1);
    ck_assert_int_eq(mr__link_from_name("Logit"), -1);
    ck_assert_int_eq(mr__link_from_name("inverse-squared "), -1);
    ck_assert_int_eq(mr__link_from_name(NULL), -1);
}
END_TEST

START_TEST(arrays_equal_scalars_bitwise)
{
    enum { N = 257 };
    double eta[N], mu[N], dmu[N], y[N], out[N];
    for (int i = 0; i < N; i++) {
        eta[i] = -40.0 + 80.0 * i / (N - 1) + 1e-3 * sin(i); /* includes near 0 */
        y[i] = 0.01 + 0.98 * fabs(cos(0.37 * i));
    }
    eta[0] = -800.0;
    eta[N - 1] = 800.0;
    for (size_t j = 0; j < N_OF(LINKS); j++) {
        mr_link l = LINKS[j];
        lnk(l)->inv_n(eta, N, mu, dmu);
        for (int i = 0; i < N; i++) {
            ck_assert_msg(same_bits(mu[i], link_inv(l, eta[i])), "%s mu[%d]",
                          mr__link_name(l), i);
            ck_assert_msg(same_bits(dmu[i], link_mu_eta(l, eta[i])), "%s mu_eta[%d]",
                          mr__link_name(l), i);
        }
    }
    for (size_t k = 0; k < N_OF(FAMILIES); k++) {
        mr_family f = FAMILIES[k];
        lnk(MR_LOGIT)->inv_n(eta, N, mu, dmu); /* means in (0, 1) */
        fam_variance_n(f, mu, N, out);
        for (int i = 0; i < N; i++)
            ck_assert(same_bits(out[i], fam_variance(f, mu[i])));
        fam_deviance_n(f, y, mu, N, out);
        for (int i = 0; i < N; i++)
            ck_assert_msg(same_bits(out[i], fam_deviance(f, y[i], mu[i])), "%s dev[%d]",
                          mr__family_name(f), i);
    }
}
END_TEST

/* ------------------------------------------------------------------ */
/* Domains and starting values                                          */

/* The decoder's row check and mr__family_y_valid read one range: each
 * family's boundary value goes the same way in both, and the decoder's
 * messages are the family's. */
START_TEST(outcome_range_is_the_domain)
{
    static const double ys[] = {-1.0, -1e-300, 0.0, 1e-300, 0.5, 1.0, 1.0000001, 7.0};
    for (int f = MR_GAUSSIAN; f <= MR_INVERSE_GAUSSIAN; f++) {
        mr__outcome_range r = fam((mr_family)f)->outcome;
        for (size_t i = 0; i < sizeof ys / sizeof ys[0]; i++)
            ck_assert_msg((mr__outcome_problem(&r, ys[i]) == NULL) == mr__family_y_valid(fam((mr_family)f), ys[i]),
                          "%s at %g", mr__family_name((mr_family)f), ys[i]);
    }
    mr__outcome_range pois = fam(MR_POISSON)->outcome, gam = fam(MR_GAMMA)->outcome;
    ck_assert_str_eq(mr__outcome_problem(&pois, -1.0), "a count cannot be negative");
    ck_assert_ptr_null(mr__outcome_problem(&pois, 0.0));
    ck_assert_str_eq(mr__outcome_problem(&gam, 0.0), "the gamma family needs an outcome > 0");
    mr__outcome_range gauss = fam(MR_GAUSSIAN)->outcome;
    ck_assert_ptr_null(mr__outcome_problem(&gauss, -INFINITY));
}
END_TEST

START_TEST(domains)
{
    ck_assert(mr__family_y_valid(fam(MR_GAUSSIAN), -3.0));
    ck_assert(!mr__family_y_valid(fam(MR_GAUSSIAN), NAN));
    ck_assert(mr__family_y_valid(fam(MR_BINOMIAL), 0.0) && mr__family_y_valid(fam(MR_BINOMIAL), 1.0));
    ck_assert(!mr__family_y_valid(fam(MR_BINOMIAL), 1.0000001));
    ck_assert(mr__family_y_valid(fam(MR_POISSON), 0.0) && !mr__family_y_valid(fam(MR_POISSON), -1e-300));
    ck_assert(!mr__family_y_valid(fam(MR_GAMMA), 0.0) && mr__family_y_valid(fam(MR_GAMMA), 1e-300));
    ck_assert(!mr__family_y_valid(fam(MR_INVERSE_GAUSSIAN), 0.0));
    ck_assert(!mr__family_y_valid(fam(MR_POISSON), INFINITY));

    ck_assert(!mr__family_mu_valid(fam(MR_BINOMIAL), 0.0) && !mr__family_mu_valid(fam(MR_BINOMIAL), 1.0));
    ck_assert(mr__family_mu_valid(fam(MR_BINOMIAL), 0.5));
    ck_assert(!mr__family_mu_valid(fam(MR_POISSON), 0.0) && mr__family_mu_valid(fam(MR_POISSON), 2.0));
    ck_assert(!mr__family_mu_valid(fam(MR_GAMMA), -1.0));
    ck_assert(mr__family_mu_valid(fam(MR_GAUSSIAN), -1.0));

    ck_assert(mr__link_eta_valid(lnk(MR_LOGIT), -700.0) && !mr__link_eta_valid(lnk(MR_LOGIT), INFINITY));
    ck_assert(!mr__link_eta_valid(lnk(MR_INVERSE), 0.0) && mr__link_eta_valid(lnk(MR_INVERSE), -2.0));
    ck_assert(!mr__link_eta_valid(lnk(MR_INVERSE_SQUARED), -1.0));
    ck_assert(!mr__link_eta_valid(lnk(MR_INVERSE_SQUARED), 0.0));
    ck_assert(!mr__link_eta_valid(lnk(MR_SQRT), 0.0) && mr__link_eta_valid(lnk(MR_SQRT), 0.1));
    ck_assert(!mr__link_eta_valid(lnk(MR_IDENTITY), NAN));
}
END_TEST

START_TEST(starting_values)
{
    /* The customary starts: y; (w y + 1/2) / (w + 1); y + 0.1; y; y. */
    ck_assert(fam_mustart(MR_GAUSSIAN, -2.5, 1.0) == -2.5);
    ck_assert(fam_mustart(MR_BINOMIAL, 0.0, 1.0) == 0.25);
    ck_assert(fam_mustart(MR_BINOMIAL, 1.0, 3.0) == 0.875);
    ck_assert(fam_mustart(MR_POISSON, 0.0, 1.0) == 0.1);
    ck_assert(fam_mustart(MR_GAMMA, 4.0, 2.0) == 4.0);
    ck_assert(fam_mustart(MR_INVERSE_GAUSSIAN, 0.3, 2.0) == 0.3);
    /* Every start is a valid mean whose canonical eta is valid. */
    for (size_t k = 0; k < N_OF(FAMILIES); k++) {
        mr_family f = FAMILIES[k];
        double y = f == MR_BINOMIAL ? 1.0 : (f == MR_POISSON ? 0.0 : 2.0);
        double m = fam_mustart(f, y, 5.0);
        ck_assert(in_family_range(f, m));
        mr_link l = mr__canonical_link(f);
        ck_assert(mr__link_eta_valid(lnk(l), link_fun(l, m)));
    }
}
END_TEST

/* ------------------------------------------------------------------ */
/* The tables against the code they replaced (tests/family_reference.h) */

/* A grid over every family's range and past its edges. */
static const double WIDE_Y[] = {-2.0,  -1e-300, 0.0,          1e-300, 1e-12, 1e-6, 0.01, 0.3,  0.5,
                                0.77,  0.99,    1.0 - 1e-10,  1.0,    1.5,   2.0,  7.25, 40.0, 1e6};
static const double W_GRID[] = {0.0, 0.5, 1.0, 3.0, 12.0, 1e3};

static int same_text(const char *a, const char *b) { return a == b || (a && b && strcmp(a, b) == 0); }

START_TEST(descriptors_are_complete)
{
    for (int f = 0; f < REF_N_FAMILIES; f++) {
        const mr__family_ops *o = mr__family_ops_of((mr_family)f);
        ck_assert_ptr_nonnull(o);
        ck_assert_msg(o->name && o->clamp_mean && o->mustart_n && o->variance_n && o->unit_deviance_n &&
                          o->loglik_row && o->loglik,
                      "family %d lacks a hook", f);
        ck_assert_str_eq(o->name, ref_family_name((mr_family)f));
        ck_assert((o->count_boundary != NULL) == (o->boundary_what != NULL));
        ck_assert((o->boundary_what != NULL) == (o->boundary_why != NULL));
        ck_assert(o->links >> o->canonical_link & 1u);
        ck_assert(o->links < 1u << REF_N_LINKS);
        ck_assert(o->mu_lo < o->mu_hi);
        /* collapsing with an offset needs the sums of the form without */
        ck_assert(!o->log_offset_patterns || o->saturated_term != NULL);
        ck_assert_ptr_null(o->parse_param); /* none of these takes a parameter */
        mr__family plain = mr__family_plain((mr_family)f);
        ck_assert(plain.ops == o && isnan(plain.param));
    }
    ck_assert_ptr_null(mr__family_ops_of((mr_family)N_REGISTERED));
    ck_assert_ptr_null(mr__family_ops_of((mr_family)-1));
    for (int l = 0; l < REF_N_LINKS; l++) {
        const mr__link_ops *o = mr__link_ops_of((mr_link)l);
        ck_assert_ptr_nonnull(o);
        ck_assert(o->name && o->fun_n && o->inv_n);
        ck_assert_str_eq(o->name, ref_link_name((mr_link)l));
    }
    ck_assert_ptr_null(mr__link_ops_of((mr_link)REF_N_LINKS));
    ck_assert_ptr_null(mr__link_ops_of((mr_link)-1));
}
END_TEST

START_TEST(tables_match_before)
{
    /* families added since have tests of their own (below) */
    for (int f = -1; f <= REF_N_FAMILIES; f++) {
        if (f == REF_N_FAMILIES) f = N_REGISTERED;
        ck_assert_int_eq(mr__canonical_link((mr_family)f), ref_canonical_link((mr_family)f));
        ck_assert_str_eq(mr__family_name((mr_family)f), ref_family_name((mr_family)f));
        for (int l = -1; l <= REF_N_LINKS; l++)
            ck_assert_int_eq(mr__link_allowed((mr_family)f, (mr_link)l), ref_link_allowed((mr_family)f, (mr_link)l));
    }
    for (int f = 0; f < REF_N_FAMILIES; f++) {
        const mr__family_ops *o = fam((mr_family)f);
        ck_assert_int_eq(o->dispersion_estimated, ref_dispersion_estimated((mr_family)f));
        ck_assert_int_eq(o->dispersion_counts, ref_dispersion_counts((mr_family)f));
        ck_assert_int_eq(o->takes_trials, ref_takes_trials((mr_family)f));
        ck_assert_int_eq(o->log_offset_patterns, ref_log_offset_patterns((mr_family)f));
        ck_assert_int_eq(o->log_offset_null_exact, ref_log_offset_patterns((mr_family)f));
        ck_assert(same_text(o->ratio_logit, ref_ratio_label((mr_family)f, MR_LOGIT)));
        ck_assert(same_text(o->ratio_log, ref_ratio_label((mr_family)f, MR_LOG)));
        if (o->boundary_what) {
            char msg[400];
            snprintf(msg, sizeof msg, "%s for %llu rows: %s", o->boundary_what, 7ULL, o->boundary_why);
            ck_assert_str_eq(msg, ref_boundary_warning((mr_family)f));
        } else {
            ck_assert_ptr_null(ref_boundary_warning((mr_family)f));
        }
    }
}
END_TEST

/* The decoder's check of each outcome: the same values refused, with the
 * same message; and the same valid means. */
START_TEST(outcome_checks_match_before)
{
    static const double extra[] = {-INFINITY, INFINITY, NAN, 1.0 + DBL_EPSILON, -0.0};
    double ys[N_OF(WIDE_Y) + N_OF(extra)];
    memcpy(ys, WIDE_Y, sizeof WIDE_Y);
    memcpy(ys + N_OF(WIDE_Y), extra, sizeof extra);
    for (int f = 0; f < REF_N_FAMILIES; f++) {
        mr__outcome_range old = ref_family_outcome_range((mr_family)f);
        for (size_t i = 0; i < N_OF(ys); i++) {
            ck_assert_msg(same_text(mr__outcome_problem(&fam((mr_family)f)->outcome, ys[i]),
                                    ref_outcome_problem(&old, ys[i])),
                          "%s at %g", ref_family_name((mr_family)f), ys[i]);
            ck_assert_int_eq(mr__family_y_valid(fam((mr_family)f), ys[i]), ref_family_y_valid((mr_family)f, ys[i]));
            ck_assert_int_eq(mr__family_mu_valid(fam((mr_family)f), ys[i]), ref_family_mu_valid((mr_family)f, ys[i]));
        }
    }
    for (int l = 0; l < REF_N_LINKS; l++)
        for (size_t i = 0; i < N_OF(ys); i++)
            ck_assert_int_eq(mr__link_eta_valid(lnk((mr_link)l), ys[i]), ref_link_eta_valid((mr_link)l, ys[i]));
}
END_TEST

/* Every kernel over the whole grid at once against the old scalar
 * function at each point: the same bits. */
START_TEST(family_kernels_match_before)
{
    enum { NY = N_OF(WIDE_Y), NM = N_OF(MU_GRID), NW = N_OF(W_GRID) };
    double y[NY * NM], mu[NY * NM], out[NY * NM], yw[NY * NW], w[NY * NW];
    for (size_t a = 0; a < NY; a++) {
        for (size_t b = 0; b < NM; b++) {
            y[a * NM + b] = WIDE_Y[a];
            mu[a * NM + b] = MU_GRID[b];
        }
        for (size_t b = 0; b < NW; b++) {
            yw[a * NW + b] = WIDE_Y[a];
            w[a * NW + b] = W_GRID[b];
        }
    }
    for (int f = 0; f < REF_N_FAMILIES; f++) {
        const mr_family ff = (mr_family)f;
        mr__family x = mr__family_plain(ff);
        const char *name = ref_family_name(ff);
        x.ops->variance_n(&x, mu, NY * NM, out);
        for (size_t i = 0; i < NY * NM; i++)
            ck_assert_msg(same_bits(out[i], ref_family_variance(ff, mu[i])), "%s V(%g)", name, mu[i]);
        x.ops->unit_deviance_n(&x, y, mu, NY * NM, out);
        for (size_t i = 0; i < NY * NM; i++)
            ck_assert_msg(same_bits(out[i], ref_family_unit_deviance(ff, y[i], mu[i])), "%s d(%g, %g)", name, y[i],
                          mu[i]);
        x.ops->mustart_n(&x, yw, w, NY * NW, out);
        for (size_t i = 0; i < NY * NW; i++)
            ck_assert_msg(same_bits(out[i], ref_family_mustart(ff, yw[i], w[i])), "%s start(%g, %g)", name, yw[i],
                          w[i]);
        x.ops->mustart_n(&x, yw, NULL, NY * NW, out); /* no weights: 1 each */
        for (size_t i = 0; i < NY * NW; i++) ck_assert(same_bits(out[i], ref_family_mustart(ff, yw[i], 1.0)));
        for (size_t i = 0; i < NY; i++) {
            ck_assert_msg(same_bits(x.ops->saturated_term(&x, WIDE_Y[i]), ref_family_saturated_term(ff, WIDE_Y[i])),
                          "%s h(%g)", name, WIDE_Y[i]);
            ck_assert(same_bits(x.ops->clamp_mean(WIDE_Y[i]), ref_clamp_mean(ff, WIDE_Y[i])));
        }
        ck_assert(same_bits(x.ops->clamp_mean(NAN), ref_clamp_mean(ff, NAN)));
        for (size_t i = 0; i < NY * NW; i++)
            for (size_t k = 0; k < NW; k++)
                for (int trials = 0; trials < 2; trials++)
                    ck_assert_msg(same_bits(x.ops->loglik_row(&x, yw[i], w[i], W_GRID[k], trials),
                                            ref_loglik_constant(ff, yw[i], w[i], W_GRID[k], trials)),
                                  "%s llc(%g, %g, %g, %d)", name, yw[i], w[i], W_GRID[k], trials);
    }
}
END_TEST

START_TEST(likelihood_and_boundary_match_before)
{
    static const double devs[] = {1e-3, 0.5, 10.0, 1234.5}, llcs[] = {-3.0, 0.0, 17.25};
    static const double ns[] = {5.0, 1000.0}, sws[] = {2.5, 1000.0, 1e6};
    static const double edge_mu[] = {-1.0, 0.0, 1e-16, 10 * DBL_EPSILON, 2.3e-15, 0.5, 1 - 10 * DBL_EPSILON,
                                     1 - 1e-16, 1.0, 2.0, NAN};
    for (int f = 0; f < REF_N_FAMILIES; f++) {
        mr__family x = mr__family_plain((mr_family)f);
        size_t want = 0;
        for (size_t a = 0; a < N_OF(devs); a++)
            for (size_t b = 0; b < N_OF(llcs); b++)
                for (size_t c = 0; c < N_OF(ns); c++)
                    for (size_t d = 0; d < N_OF(sws); d++)
                        ck_assert(same_bits(x.ops->loglik(&x, devs[a], llcs[b], ns[c], sws[d]),
                                            ref_log_likelihood((mr_family)f, devs[a], ns[c], llcs[b], sws[d])));
        for (size_t i = 0; i < N_OF(edge_mu); i++) want += ref_at_boundary(f, edge_mu[i]);
        ck_assert_uint_eq(x.ops->count_boundary ? x.ops->count_boundary(&x, edge_mu, N_OF(edge_mu)) : 0, want);
    }
}
END_TEST

START_TEST(link_kernels_match_before)
{
    enum { NE = 64 };
    double eta[NE], mu[NE], dmu[NE], g[N_OF(MU_GRID)];
    for (int i = 0; i < NE; i++) eta[i] = -40.0 + 80.0 * i / (NE - 1) + 1e-3 * sin(i);
    eta[0] = -800.0;
    eta[1] = 0.0;
    eta[NE - 1] = 800.0;
    for (int l = 0; l < REF_N_LINKS; l++) {
        const mr__link_ops *o = lnk((mr_link)l);
        o->inv_n(eta, NE, mu, dmu);
        for (int i = 0; i < NE; i++) {
            ck_assert_msg(same_bits(mu[i], ref_link_inv((mr_link)l, eta[i])), "%s mu(%g)", o->name, eta[i]);
            ck_assert_msg(same_bits(dmu[i], ref_link_mu_eta((mr_link)l, eta[i])), "%s dmu(%g)", o->name, eta[i]);
        }
        o->fun_n(MU_GRID, N_OF(MU_GRID), g);
        for (size_t i = 0; i < N_OF(MU_GRID); i++)
            ck_assert_msg(same_bits(g[i], ref_link_fun((mr_link)l, MU_GRID[i])), "%s g(%g)", o->name, MU_GRID[i]);
        for (int f = 0; f < REF_N_FAMILIES; f++)
            ck_assert_uint_eq(mr__count_invalid_n(fam((mr_family)f), o, eta, mu, NE),
                              ref_count_invalid_n((mr_family)f, (mr_link)l, eta, mu, NE));
    }
}
END_TEST


/* ------------------------------------------------------------------ */
/* Families with a parameter of their own                              */

static mr__family with_param(mr_family f, double param)
{
    mr__family x = {mr__family_ops_of(f), param, 0, NAN};
    return x;
}

static double kernel1(const mr__family *x, double y, double mu, double *var)
{
    double d;
    x->ops->variance_n(x, &mu, 1, var);
    x->ops->unit_deviance_n(x, &y, &mu, 1, &d);
    return d;
}

/* The negative binomial log density written out with libm's lgamma:
 * log Gamma(y+k) - log Gamma(k) - log y! + k log(k/(k+mu)) + y log(mu/(k+mu)). */
static double nb_log_density(double y, double mu, double k)
{
    double ylog = y > 0 ? y * log(mu / (k + mu)) : 0.0;
    return lgamma(y + k) - lgamma(k) - lgamma(y + 1) + k * log(k / (k + mu)) + ylog;
}

static const double NB_THETA[] = {0.05, 0.7, 2.0, 31.0, 1e4};
static const double NB_Y[] = {0.0, 1.0, 2.0, 3.0, 7.0, 40.0, 0.5};
static const double NB_MU[] = {0.01, 0.4, 1.0, 2.5, 9.0, 60.0};

/* V(mu) = mu + mu^2/theta; the deviance is twice the log density at
 * mu = y less that at mu; the log-likelihood is the rows' data-only terms
 * less half the deviance (what the fit computes) and equals the density
 * written out. */
START_TEST(negative_binomial_against_density)
{
    for (size_t t = 0; t < N_OF(NB_THETA); t++) {
        double k = NB_THETA[t];
        mr__family x = with_param(MR_NEGATIVE_BINOMIAL, k);
        for (size_t i = 0; i < N_OF(NB_Y); i++)
            for (size_t j = 0; j < N_OF(NB_MU); j++) {
                double y = NB_Y[i], mu = NB_MU[j], var, dev = kernel1(&x, y, mu, &var);
                double want = 2 * (nb_log_density(y, y, k) - nb_log_density(y, mu, k));
                double ll = x.ops->loglik(&x, dev, x.ops->loglik_row(&x, y, 1.0, 1.0, 0), 1, 1);
                ck_assert_double_eq_tol(var, mu + mu * mu / k, 1e-15 * var);
                ck_assert_msg(fabs(dev - want) <= 1e-10 * fmax(fabs(want), 1e-3), "theta %g d(%g, %g) %.17g vs %.17g",
                              k, y, mu, dev, want);
                ck_assert_msg(dev >= 0, "d(%g, %g) < 0", y, mu);
                ck_assert_msg(fabs(ll - nb_log_density(y, mu, k)) <= 1e-10 * fmax(1, fabs(ll)),
                              "theta %g ll(%g, %g) %.17g vs %.17g", k, y, mu, ll, nb_log_density(y, mu, k));
                /* a prior weight multiplies the row's data-only term */
                ck_assert_double_eq_tol(x.ops->loglik_row(&x, y, 3.0, 1.0, 0),
                                        3 * x.ops->loglik_row(&x, y, 1.0, 1.0, 0), 1e-12 * fmax(1, fabs(ll)));
            }
    }
}
END_TEST

/* Rows collapse into a pattern exactly (family.h, saturated_term): the
 * rows' summed deviance at a common mean is the pattern's at the mean
 * outcome plus twice sum w h(y) - a h(ybar), whatever the mean; the
 * log-likelihood's data-only terms are summed row by row in the first
 * pass, so they need no such identity. */
static void pattern_identity(const mr__family *x)
{
    static const double y[] = {0, 0, 1, 3, 4.25, 9, 17}, w[] = {1, 2.5, 1, 1, 0.5, 1, 3};
    double a = 0, b = 0, hsum = 0;
    for (size_t i = 0; i < N_OF(y); i++) {
        a += w[i];
        b += w[i] * y[i];
        hsum += w[i] * x->ops->saturated_term(x, y[i]);
    }
    for (size_t j = 0; j < N_OF(NB_MU); j++) {
        double mu = NB_MU[j], rows = 0, var, pattern;
        for (size_t i = 0; i < N_OF(y); i++) rows += w[i] * kernel1(x, y[i], mu, &var);
        pattern = a * kernel1(x, b / a, mu, &var) + 2 * (hsum - a * x->ops->saturated_term(x, b / a));
        ck_assert_msg(fabs(rows - pattern) <= 1e-11 * rows, "%s %g mu %g: %.17g vs %.17g", x->ops->name, x->param,
                      mu, rows, pattern);
    }
}

START_TEST(patterns_exact)
{
    static const double powers[] = {1.01, 1.3, 1.5, 1.99};
    for (size_t t = 0; t < N_OF(NB_THETA); t++) {
        mr__family x = with_param(MR_NEGATIVE_BINOMIAL, NB_THETA[t]);
        pattern_identity(&x);
    }
    for (size_t t = 0; t < N_OF(powers); t++) {
        mr__family x = with_param(MR_TWEEDIE, powers[t]);
        pattern_identity(&x);
    }
}
END_TEST

/* The unit deviance's definition, 2 int_mu^y (y - t)/V(t) dt: 0 at
 * mu = y, and d/dmu d(y, mu) = -2 (y - mu)/V(mu) (a central difference);
 * at y = 0 the integral is 2 mu^(2-p)/(2-p). */
START_TEST(tweedie_deviance_definition)
{
    static const double powers[] = {1.01, 1.3, 1.5, 1.99}, ys[] = {0.0, 0.3, 1.0, 2.5, 40.0};
    for (size_t t = 0; t < N_OF(powers); t++) {
        double p = powers[t];
        mr__family x = with_param(MR_TWEEDIE, p);
        for (size_t i = 0; i < N_OF(ys); i++) {
            double y = ys[i], var;
            ck_assert(y == 0 || kernel1(&x, y, y, &var) <= 1e-13 * y);
            for (size_t j = 0; j < N_OF(NB_MU); j++) {
                double mu = NB_MU[j], h = 1e-5 * mu, v2;
                double slope = (kernel1(&x, y, mu + h, &var) - kernel1(&x, y, mu - h, &var)) / (2 * h);
                double d = kernel1(&x, y, mu, &v2);
                ck_assert_double_eq_tol(v2, pow(mu, p), 1e-15 * v2);
                ck_assert_msg(fabs(slope + 2 * (y - mu) / v2) <= 1e-6 * fmax(1, fabs(slope)), "p %g d'(%g, %g) %g", p,
                              y, mu, slope);
                if (y == 0) ck_assert_double_eq_tol(d, 2 * pow(mu, 2 - p) / (2 - p), 1e-14 * d);
            }
        }
        /* no closed-form density: the log-likelihood is NaN, not a number that is not one */
        ck_assert(isnan(x.ops->loglik(&x, 10.0, x.ops->loglik_row(&x, 1.0, 1.0, 1.0, 0), 5, 5)));
    }
}
END_TEST

typedef struct word_case {
    const char *word, *says;
} word_case;

/* `good` reads as `want`; each of bad[] is MR_ERR_USAGE with its message,
 * which begins with the line's origin. */
static void check_parameter_words(mr_family f, const char *good, double want, const word_case *bad, size_t nbad)
{
    char msg[256];
    double v = 0;
    mr__error err;
    mr__error_clear(&err);
    ck_assert_int_eq(mr__family_ops_of(f)->parse_param(&v, good, "m:1", &err), MR_OK);
    ck_assert(v == want);
    for (size_t i = 0; i < nbad; i++) {
        mr__error_clear(&err);
        ck_assert_int_eq(mr__family_ops_of(f)->parse_param(&v, bad[i].word, "m:1", &err), MR_ERR_USAGE);
        mr__error_export(&err, msg, sizeof msg);
        ck_assert_msg(strstr(msg, bad[i].says) != NULL && strncmp(msg, "m:1: ", 5) == 0, "%s: '%s'", bad[i].word,
                      msg);
    }
}

START_TEST(tweedie_parameter)
{
    static const word_case bad[] = {{"power=1", "strictly between 1 and 2, got '1'"}, {"power=2", "strictly between 1 and 2"},
               {"power=0.5", "strictly between 1 and 2"},        {"power=3", "strictly between 1 and 2"},
               {"power=x", "power takes a number"},              {"theta=1.5", "takes power=VALUE"}};
    const mr__family_ops *o = mr__family_ops_of(MR_TWEEDIE);
    ck_assert_str_eq(o->name, "tweedie");
    ck_assert_str_eq(o->param_name, "power");
    ck_assert_int_eq(mr__family_from_name("tweedie"), MR_TWEEDIE);
    ck_assert_int_eq(o->dispersion_estimated, 1);
    ck_assert_int_eq(o->log_offset_patterns, 0);
    ck_assert_int_eq(mr__canonical_link(MR_TWEEDIE), MR_LOG);
    ck_assert_ptr_null(mr__outcome_problem(&o->outcome, 0.0));
    ck_assert_ptr_nonnull(mr__outcome_problem(&o->outcome, -0.5));
    check_parameter_words(MR_TWEEDIE, "power=1.5", 1.5, bad, N_OF(bad));
}
END_TEST

/* One row's log density and its derivatives in log(phi) through the
 * family's kernel (weight 1). */
static void tweedie_row(double p, double y, double mu, double phi, double out[3])
{
    mr__family f = {mr__family_ops_of(MR_TWEEDIE), p, 0, phi};
    double sums[MR__PARAM_SUMS] = {0};
    f.ops->param_sums_n(&f, &y, &mu, NULL, 1, sums);
    out[0] = sums[MR__PS_LOGLIK], out[1] = sums[MR__PS_SCORE], out[2] = sums[MR__PS_INFO];
}

/* The Tweedie series density, by analytic identities: the mass at 0 and
 * the density over y > 0 make 1, and its mean is mu (Simpson's rule in
 * t = y^(1/4), which takes out the density's y^(-a-1) at 0+, integrable
 * but unbounded for p > 4/3; the integrand negligible past y = 60); the
 * derivatives in log(phi) match central differences of the log density. */
START_TEST(tweedie_series_density)
{
    static const double cases[][3] = {{1.2, 2.0, 1.5}, {1.5, 1.0, 2.0}, {1.8, 3.0, 0.8}, {1.5, 0.3, 0.5}};
    for (size_t c = 0; c < N_OF(cases); c++) {
        const int n = 40000;
        double p = cases[c][0], mu = cases[c][1], phi = cases[c][2], d[3], lo[3], hi[3], mass, mean = 0;
        double h = pow(60.0, 0.25) / n;
        tweedie_row(p, 0.0, mu, phi, d);
        mass = exp(d[0]);
        for (int i = 1; i <= n; i++) { /* t = 0 adds a term of order h: left out */
            double t = i * h, y = t * t * t * t, wgt = i == n ? 1 : (i % 2 ? 4 : 2), g;
            tweedie_row(p, y, mu, phi, d);
            g = h / 3 * wgt * exp(d[0]) * 4 * t * t * t;
            mass += g;
            mean += g * y;
        }
        ck_assert_msg(fabs(mass - 1) < 1e-6, "p %g: total mass %.10g", p, mass);
        ck_assert_msg(fabs(mean - mu) < 1e-6 * mu, "p %g: mean %.10g, mu %g", p, mean, mu);
        for (double y = 0; y < 5; y += 1.3) {
            double e = 1e-4;
            tweedie_row(p, y, mu, phi, d);
            tweedie_row(p, y, mu, phi * exp(-e), lo);
            tweedie_row(p, y, mu, phi * exp(e), hi);
            ck_assert_msg(fabs((hi[0] - lo[0]) / (2 * e) - d[1]) < 1e-6 * (1 + fabs(d[1])), "p %g y %g: d1", p, y);
            ck_assert_msg(fabs((hi[0] - 2 * d[0] + lo[0]) / (e * e) - d[2]) < 1e-3 * (1 + fabs(d[2])), "p %g y %g: d2",
                          p, y);
        }
    }
}
END_TEST

START_TEST(negative_binomial_parameter)
{
    static const word_case bad[] = {{"theta=0", "theta must be > 0"},     {"theta=-2", "theta must be > 0"},
               {"theta=", "theta takes a number"},    {"theta=2x", "theta takes a number"},
               {"theta=nan", "theta takes a number"}, {"power=2", "takes theta=VALUE"},
               {"theta", "takes theta=VALUE"}};
    const mr__family_ops *o = mr__family_ops_of(MR_NEGATIVE_BINOMIAL);
    ck_assert_str_eq(o->name, "negative-binomial");
    ck_assert_str_eq(o->param_name, "theta");
    ck_assert_int_eq(mr__family_from_name("negative-binomial"), MR_NEGATIVE_BINOMIAL);
    ck_assert_int_eq(o->dispersion_estimated, 0);
    ck_assert_int_eq(o->dispersion_counts, 0); /* theta is fixed: not a parameter of the AIC */
    ck_assert_int_eq(o->log_offset_patterns, 0); /* the score is not poisson's */
    ck_assert_int_eq(mr__canonical_link(MR_NEGATIVE_BINOMIAL), MR_LOG);
    ck_assert(mr__link_allowed(MR_NEGATIVE_BINOMIAL, MR_IDENTITY) && mr__link_allowed(MR_NEGATIVE_BINOMIAL, MR_SQRT));
    ck_assert(!mr__link_allowed(MR_NEGATIVE_BINOMIAL, MR_LOGIT));
    check_parameter_words(MR_NEGATIVE_BINOMIAL, "theta=2.5", 2.5, bad, N_OF(bad));
    check_parameter_words(MR_NEGATIVE_BINOMIAL, "theta=1e-3", 1e-3, bad, 0);
}
END_TEST

static Suite *family_suite(void)
{
    Suite *s = suite_create("family");
    TCase *links = tcase_create("links");
    tcase_add_test(links, test_count_invalid_matches_scalar_checks);
    tcase_add_test(links, link_round_trip);
    tcase_add_test(links, mu_eta_matches_finite_difference);
    tcase_add_test(links, extreme_eta_stays_finite);
    suite_add_tcase(s, links);
    TCase *fam = tcase_create("families");
    tcase_add_test(fam, variance_known_points);
    tcase_add_test(fam, deviance_is_twice_loglik_difference);
    tcase_add_test(fam, deviance_zero_at_y_and_nonnegative);
    tcase_add_test(fam, deviance_near_mean_is_quadratic);
    tcase_add_test(fam, deviance_residual_squares_back);
    suite_add_tcase(s, fam);
    TCase *tables = tcase_create("tables");
    tcase_add_test(tables, allowed_pairs_match_table);
    tcase_add_test(tables, names_round_trip);
    tcase_add_test(tables, arrays_equal_scalars_bitwise);
    tcase_add_test(tables, domains);
    tcase_add_test(tables, outcome_range_is_the_domain);
    tcase_add_test(tables, starting_values);
    suite_add_tcase(s, tables);
    TCase *before = tcase_create("as before");
    tcase_add_test(before, descriptors_are_complete);
    tcase_add_test(before, tables_match_before);
    tcase_add_test(before, outcome_checks_match_before);
    tcase_add_test(before, family_kernels_match_before);
    tcase_add_test(before, likelihood_and_boundary_match_before);
    tcase_add_test(before, link_kernels_match_before);
    suite_add_tcase(s, before);
    TCase *param = tcase_create("with a parameter");
    tcase_add_test(param, negative_binomial_against_density);
    tcase_add_test(param, patterns_exact);
    tcase_add_test(param, tweedie_deviance_definition);
    tcase_add_test(param, tweedie_parameter);
    tcase_add_test(param, tweedie_series_density);
    tcase_add_test(param, negative_binomial_parameter);
    suite_add_tcase(s, param);
    return s;
}

int main(void) { return mr_check_run(family_suite(), 0); }
