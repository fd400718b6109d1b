/* gaussian.c - the normal family: V(mu) = 1, any outcome, dispersion
 * estimated. */
#define _DEFAULT_SOURCE /* M_PI */
#include <math.h>

#include "family/unit.h"

static inline double gaussian_variance(double mu)
{
    (void)mu;
    return 1.0;
}

static inline double gaussian_deviance(double y, double mu)
{
    double r = y - mu;
    return r * r;
}

MR__FAMILY_KERNELS(gaussian)

static double clamp_mean(double mu) { return mu; }

static double saturated_term(const mr__family *f, double y)
{
    (void)f;
    return 0.5 * y * y;
}

/* Only the weights enter: sum log(w), the rest is a function of n and the
 * deviance. */
static double loglik_row(const mr__family *f, double y, double w, double t, int has_trials)
{
    double prior = w * t;
    (void)f;
    (void)y;
    (void)has_trials;
    return prior > 0 ? log(prior) : 0.0;
}

static double loglik(const mr__family *f, double dev, double llc, double n, double sw)
{
    (void)f;
    (void)sw;
    return -0.5 * (n * (log(2 * M_PI * dev / n) + 1) - llc);
}

const mr__family_ops mr__gaussian_family = {
    .name = "gaussian",
    .canonical_link = MR_IDENTITY,
    .links = MR__LINK_BIT(MR_IDENTITY) | MR__LINK_BIT(MR_LOG) | MR__LINK_BIT(MR_INVERSE),
    .outcome = {-INFINITY, INFINITY, 0, NULL},
    .mu_lo = -INFINITY,
    .mu_hi = INFINITY,
    .clamp_mean = clamp_mean,
    .mustart_n = mr__mustart_y,
    .variance_n = gaussian_variance_n,
    .unit_deviance_n = gaussian_unit_deviance_n,
    .loglik_row = loglik_row,
    .loglik = loglik,
    .dispersion_estimated = 1,
    .dispersion_counts = 1,
    .saturated_term = saturated_term,
    .ratio_log = "mean ratio",
};
