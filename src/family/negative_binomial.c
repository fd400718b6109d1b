/* negative_binomial.c - overdispersed counts, theta the family's
 * parameter: V(mu) = mu + mu^2 / theta, y >= 0, dispersion fixed at 1.
 * With theta fixed this is an exponential family in
 * t(mu) = log(mu / (mu + theta)), b = theta log((mu + theta) / theta), so its
 * deviance has the form rows collapse by (family.h, saturated_term) and
 * its log-likelihood is a data-only sum less half the deviance.
 *
 * With theta estimated (no theta on the line, or theta=estimate) each
 * pass also sums theta's score and observed information at the pass's
 * means and the log-likelihood itself (param_sums_n); the fit takes a
 * Newton step in theta beside each coefficient step (fit/irls.c). */
#include <math.h>
#include <string.h>

#include "common/probability.h"
#include "family/unit.h"

static inline double nb_variance(double theta, double mu) { return mu + mu * mu / theta; }

/* 2 [y log(y/mu) - (y + theta) log((y + theta)/(mu + theta))]: the linear
 * terms mr__half_poisson adds to each half are both y - mu and cancel. */
static inline double nb_deviance(double theta, double y, double mu)
{
    return 2.0 * (mr__half_poisson(y, mu) - mr__half_poisson(y + theta, mu + theta));
}

MR__FAMILY_PARAM_KERNELS(nb)

/* h(y) = y t(y) - b(t(y)) = y log(y/(y + theta)) - theta log(1 + y/theta):
 * of the size of y, where the three logs of the plain form are each of
 * the size of theta log theta. */
static double saturated_term(const mr__family *f, double y)
{
    double theta = f->param;
    return mr__xlogy(y, y / (y + theta)) - theta * log1p(y / theta);
}

/* log Gamma(y + theta) - log Gamma(theta) - log y! plus h(y): the density's
 * data-only part, so that the log-likelihood is its sum less half the
 * deviance. */
static double loglik_row(const mr__family *f, double y, double w, double t, int has_trials)
{
    double theta = f->param, prior = w * t;
    (void)has_trials;
    return prior * (mr__log_gamma_ratio(theta, y) - mr__log_gamma(y + 1) + saturated_term(f, y));
}

/* One row's log density, theta's score and information with mu fixed:
 * log Gamma(y + theta) - log Gamma(theta) - log y! + theta log(theta/(theta + mu))
 *   + y log(mu/(theta + mu)), its derivative in theta
 * psi(y + theta) - psi(theta) + log(theta/(theta + mu)) + 1 - (y + theta)/(theta + mu),
 * and minus its second derivative
 * psi'(theta) - psi'(y + theta) - 1/theta + 2/(theta + mu) - (y + theta)/(theta + mu)^2.
 * Written so that no term cancels: the differences of the gamma functions
 * by their own routines (common/polygamma.c), log(theta/(theta + mu)) as
 * -log1p(mu/theta), 1 - (y + theta)/(theta + mu) as (mu - y)/(theta + mu),
 * and the last three terms of the information as
 * -(mu^2/theta + y)/(theta + mu)^2.  The score is then a sum of terms of
 * the size of mu/theta whose total is of the size of mu/theta^2: it keeps
 * about 1e-16 theta of its relative precision, enough up to the bound on
 * theta (fit/irls.h), where the plain form had kept none by theta = 10^7. */
static void nb_row_sums(double theta, double y, double mu, double w, double *s)
{
    double tm = theta + mu, l1 = log1p(mu / theta);
    double ll = mr__log_gamma_ratio(theta, y) - mr__log_gamma(y + 1) - theta * l1;
    double r = y - mu;
    if (y > 0) ll += y * log(mu / tm);
    s[MR__PS_LOGLIK] += w * ll;
    s[MR__PS_SCORE] += w * (mr__digamma_diff(theta, y) - l1 - r / tm);
    s[MR__PS_INFO] += w * (mr__trigamma_diff(theta, y) - (mu * mu / theta + y) / (tm * tm));
    s[MR__PS_MOMENT] += w * (r * r - y);
    s[MR__PS_WEIGHT] += w * mu * mu;
}

static void param_sums_n(const mr__family *f, const double *y, const double *mu, const double *prior, size_t n,
                         double sums[MR__PARAM_SUMS])
{
    size_t i;
    if (!f->estimate) return;
    for (i = 0; i < n; i++) {
        double w = prior ? prior[i] : 1.0;
        if (w > 0) nb_row_sums(f->param, y[i], mu[i], w, sums);
    }
}

/* "theta=estimate" leaves NaN: the fit estimates it (as a line without
 * theta does). */
static mr_status parse_param(double *param, const char *word, const char *origin, mr__error *err)
{
    if (strcmp(word, "theta=estimate") == 0) {
        *param = NAN;
        return MR_OK;
    }
    MR__TRY(mr__family_param_value("negative-binomial", "theta", word, param, origin, err));
    if (!(*param > 0))
        return mr__fail(err, MR_ERR_USAGE, "%s: theta must be > 0, got '%s'", origin, word + 6);
    return MR_OK;
}

const mr__family_ops mr__negative_binomial_family = {
    .name = "negative-binomial",
    .canonical_link = MR_LOG, /* the default link: the canonical one depends on theta */
    .link_default_only = 1,
    .links = MR__LINK_BIT(MR_IDENTITY) | MR__LINK_BIT(MR_LOG) | MR__LINK_BIT(MR_SQRT),
    .outcome = {0.0, INFINITY, 0, "a count cannot be negative"},
    .mu_lo = 0.0,
    .mu_hi = INFINITY,
    .clamp_mean = mr__clamp_positive_mean,
    .mustart_n = mr__mustart_count,
    .variance_n = nb_variance_n,
    .unit_deviance_n = nb_unit_deviance_n,
    .loglik_row = loglik_row,
    .loglik = mr__loglik_fixed_dispersion,
    .saturated_term = saturated_term,
    .count_boundary = mr__count_zero_means,
    .boundary_what = "fitted rates are numerically 0",
    .boundary_why = "a level or cell with no events drives a coefficient towards minus infinity",
    .ratio_log = "rate ratio",
    .parse_param = parse_param,
    .param_name = "theta",
    .param_estimable = 1,
    .param_sums_n = param_sums_n,
};
