/* inverse_gaussian.c - positive, right-skewed outcomes: V(mu) = mu^3,
 * y > 0, dispersion estimated. */
#define _DEFAULT_SOURCE /* M_PI */
#include <math.h>

#include "family/unit.h"

static inline double inverse_gaussian_variance(double mu) { return mu * mu * mu; }

static inline double inverse_gaussian_deviance(double y, double mu)
{
    double r = (y - mu) / mu;
    return r * r / y;
}

MR__FAMILY_KERNELS(inverse_gaussian)

static double saturated_term(const mr__family *f, double y)
{
    (void)f;
    return 0.5 / y;
}

static double loglik(const mr__family *f, double dev, double llc, double n, double sw)
{
    (void)f;
    (void)n;
    return -0.5 * (sw * (1 + log(2 * M_PI * dev / sw)) + 3 * llc);
}

const mr__family_ops mr__inverse_gaussian_family = {
    .name = "inverse-gaussian",
    .canonical_link = MR_INVERSE_SQUARED,
    .links = MR__LINK_BIT(MR_IDENTITY) | MR__LINK_BIT(MR_LOG) | MR__LINK_BIT(MR_INVERSE) |
             MR__LINK_BIT(MR_INVERSE_SQUARED),
    .outcome = {0.0, INFINITY, 1, "the inverse-gaussian family needs an outcome > 0"},
    .mu_lo = 0.0,
    .mu_hi = INFINITY,
    .clamp_mean = mr__clamp_positive_mean,
    .mustart_n = mr__mustart_y,
    .variance_n = inverse_gaussian_variance_n,
    .unit_deviance_n = inverse_gaussian_unit_deviance_n,
    .loglik_row = mr__loglik_row_log_y,
    .loglik = loglik,
    .dispersion_estimated = 1,
    .dispersion_counts = 1,
    .saturated_term = saturated_term,
    .ratio_log = "mean ratio",
};
