/* binomial.c - proportions: V(mu) = mu (1 - mu), 0 <= y <= 1 (or successes
 * of a trials column), dispersion fixed at 1. */
#include <math.h>

#include "common/probability.h"
#include "family/unit.h"

static inline double binomial_variance(double mu) { return mu * (1.0 - mu); }

/* 2 [y log(y/mu) + (1-y) log((1-y)/(1-mu))]; the linear terms added by
 * mr__half_poisson cancel between the two halves. */
static inline double binomial_deviance(double y, double mu)
{
    return 2.0 * (mr__half_poisson(y, mu) + mr__half_poisson(1.0 - y, 1.0 - mu));
}

MR__FAMILY_KERNELS(binomial)

static double clamp_mean(double mu) { return !(mu > 0 && mu < 1) ? (mu <= 0 ? 1e-8 : 1 - 1e-8) : mu; }

/* Half a success and half a failure towards 1/2: a finite logit at y = 0
 * or 1. */
static void mustart_n(const mr__family *f, const double *y, const double *prior, size_t n, double *mu)
{
    (void)f;
    for (size_t i = 0; i < n; i++) {
        double w = prior ? prior[i] : 1.0;
        mu[i] = (w * y[i] + 0.5) / (w + 1.0);
    }
}

static double saturated_term(const mr__family *f, double y)
{
    (void)f;
    return mr__xlogx(y) + mr__xlogx(1 - y);
}

/* log C(m, k) + k log y + (m - k) log(1 - y) for k = m y successes of m,
 * times the weight: m is the trials column, or the weight when there is
 * none (a proportion of w cases). */
static double loglik_row(const mr__family *f, double y, double w, double t, int has_trials)
{
    double m = has_trials ? t : w, c = has_trials ? w : 1.0, k;
    (void)f;
    if (m <= 0) return 0.0;
    /* one binary trial: every term is an exact zero */
    if (m == 1 && c == 1 && (y == 0 || y == 1)) return 0.0;
    k = m * y;
    return c * (mr__log_gamma(m + 1) - mr__log_gamma(k + 1) - mr__log_gamma(m - k + 1) + mr__xlogy(k, y) +
                mr__xlogy(m - k, 1 - y));
}

static size_t count_boundary(const mr__family *f, const double *mu, size_t n)
{
    size_t bad = 0;
    (void)f;
    for (size_t i = 0; i < n; i++)
        bad += mu[i] <= MR__BOUNDARY_EDGE || mu[i] >= 1 - MR__BOUNDARY_EDGE;
    return bad;
}

const mr__family_ops mr__binomial_family = {
    .name = "binomial",
    .canonical_link = MR_LOGIT,
    .links = MR__LINK_BIT(MR_LOG) | MR__LINK_BIT(MR_LOGIT) | MR__LINK_BIT(MR_PROBIT) | MR__LINK_BIT(MR_CLOGLOG),
    .takes_trials = 1,
    .outcome = {0.0, 1.0, 0, "a binary outcome or proportion must lie in [0, 1]"},
    .mu_lo = 0.0,
    .mu_hi = 1.0,
    .clamp_mean = clamp_mean,
    .mustart_n = mustart_n,
    .variance_n = binomial_variance_n,
    .unit_deviance_n = binomial_unit_deviance_n,
    .loglik_row = loglik_row,
    .loglik = mr__loglik_fixed_dispersion,
    .saturated_term = saturated_term,
    .count_boundary = count_boundary,
    .boundary_what = "fitted probabilities are numerically 0 or 1",
    .boundary_why = "possible separation; the estimates and standard errors of the terms involved are unreliable",
    .ratio_log = "risk ratio",
    .ratio_logit = "odds ratio",
};
