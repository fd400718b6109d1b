/* gamma.c - positive outcomes with constant coefficient of variation:
 * V(mu) = mu^2, y > 0, dispersion estimated. */
#include <math.h>

#include "common/probability.h"
#include "family/unit.h"

static inline double gamma_variance(double mu) { return mu * mu; }

/* 2 [(y - mu)/mu - log(y/mu)] = -2 (log1p(u) - u) with u = (y - mu)/mu. */
static inline double gamma_deviance(double y, double mu)
{
    double u = (y - mu) / mu;
    if (fabs(u) <= 0.25)
        return -2.0 * mr__log1pmx_small(u);
    return 2.0 * (u - log(y / mu));
}

MR__FAMILY_KERNELS(gamma)

static double saturated_term(const mr__family *f, double y)
{
    (void)f;
    return -1 - log(y);
}

/* The shape a = 1 / dispersion taken as sw / deviance. */
static double loglik(const mr__family *f, double dev, double llc, double n, double sw)
{
    double a = sw / dev;
    (void)f;
    (void)n;
    return -sw * mr__log_gamma(a) + a * sw * log(a) - a * dev / 2 - a * sw - llc;
}

const mr__family_ops mr__gamma_family = {
    .name = "gamma",
    .canonical_link = MR_INVERSE,
    .links = MR__LINK_BIT(MR_IDENTITY) | MR__LINK_BIT(MR_LOG) | MR__LINK_BIT(MR_INVERSE),
    .outcome = {0.0, INFINITY, 1, "the gamma family needs an outcome > 0"},
    .mu_lo = 0.0,
    .mu_hi = INFINITY,
    .clamp_mean = mr__clamp_positive_mean,
    .mustart_n = mr__mustart_y,
    .variance_n = gamma_variance_n,
    .unit_deviance_n = gamma_unit_deviance_n,
    .loglik_row = mr__loglik_row_log_y,
    .loglik = loglik,
    .dispersion_estimated = 1,
    .dispersion_counts = 1,
    .saturated_term = saturated_term,
    .ratio_log = "mean ratio",
};
