/* poisson.c - counts: V(mu) = mu, y >= 0, dispersion fixed at 1. */
#include <math.h>

#include "common/probability.h"
#include "family/unit.h"

static inline double poisson_variance(double mu) { return mu; }

static inline double poisson_deviance(double y, double mu) { return 2.0 * mr__half_poisson(y, mu); }

MR__FAMILY_KERNELS(poisson)

static double saturated_term(const mr__family *f, double y)
{
    (void)f;
    return mr__xlogx(y) - y;
}

static double loglik_row(const mr__family *f, double y, double w, double t, int has_trials)
{
    double prior = w * t;
    (void)f;
    (void)has_trials;
    return prior * (mr__xlogy(y, y) - y - mr__log_gamma(y + 1));
}

const mr__family_ops mr__poisson_family = {
    .name = "poisson",
    .canonical_link = MR_LOG,
    .links = MR__LINK_BIT(MR_IDENTITY) | MR__LINK_BIT(MR_LOG) | MR__LINK_BIT(MR_SQRT),
    .outcome = {0.0, INFINITY, 0, "a count cannot be negative"},
    .mu_lo = 0.0,
    .mu_hi = INFINITY,
    .clamp_mean = mr__clamp_positive_mean,
    .mustart_n = mr__mustart_count,
    .variance_n = poisson_variance_n,
    .unit_deviance_n = poisson_unit_deviance_n,
    .loglik_row = loglik_row,
    .loglik = mr__loglik_fixed_dispersion,
    .saturated_term = saturated_term,
    .log_offset_patterns = 1,
    .log_offset_null_exact = 1,
    .level_step_by_mean = 1,
    .count_boundary = mr__count_zero_means,
    .boundary_what = "fitted rates are numerically 0",
    .boundary_why = "a level or cell with no events drives a coefficient towards minus infinity",
    .ratio_log = "rate ratio",
};
