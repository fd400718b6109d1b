/* tweedie.c - outcomes >= 0 with a mass at 0 and a continuous part
 * (claim amounts), a known power p (the family's parameter), 1 < p < 2:
 * V(mu) = mu^p, dispersion estimated (Pearson).  An exponential family in
 * t(mu) = mu^(1-p)/(1-p), b = mu^(2-p)/(2-p), so its deviance has the form
 * rows collapse by (family.h, saturated_term).
 *
 * No log-likelihood: the density has no closed form (a series over the
 * number of gamma summands at each y > 0), so the fit reports NaN for it
 * and for the AIC and BIC rather than a number that is not one. */
#include <math.h>

#include "family/unit.h"

static inline double tweedie_variance(double p, double mu) { return pow(mu, p); }

/* y^(2-p)/((1-p)(2-p)): y t(y) - b(t(y)); 0 at y = 0. */
static inline double tweedie_h(double p, double y) { return pow(y, 2 - p) / ((1 - p) * (2 - p)); }

/* 2 [h(y) - y mu^(1-p)/(1-p) + mu^(2-p)/(2-p)] */
static inline double tweedie_deviance(double p, double y, double mu)
{
    double d = 2.0 * (tweedie_h(p, y) - y * pow(mu, 1 - p) / (1 - p) + pow(mu, 2 - p) / (2 - p));
    return d < 0 ? 0.0 : d; /* rounding near y = mu */
}

MR__FAMILY_PARAM_KERNELS(tweedie)

static double saturated_term(const mr__family *f, double y) { return tweedie_h(f->param, y); }

static double loglik_row(const mr__family *f, double y, double w, double t, int has_trials)
{
    (void)f;
    (void)y;
    (void)w;
    (void)t;
    (void)has_trials;
    return 0.0;
}

static double loglik(const mr__family *f, double dev, double llc, double n, double sw)
{
    (void)f;
    (void)dev;
    (void)llc;
    (void)n;
    (void)sw;
    return NAN;
}

static mr_status parse_param(double *param, const char *word, const char *origin, mr__error *err)
{
    MR__TRY(mr__family_param_value("tweedie", "power", word, param, origin, err));
    if (!(*param > 1 && *param < 2))
        return mr__fail(err, MR_ERR_USAGE, "%s: power must lie strictly between 1 and 2, got '%s'", origin, word + 6);
    return MR_OK;
}

const mr__family_ops mr__tweedie_family = {
    .name = "tweedie",
    .canonical_link = MR_LOG, /* the default link: the canonical one is a power of mu */
    .links = MR__LINK_BIT(MR_LOG),
    .outcome = {0.0, INFINITY, 0, "a tweedie outcome cannot be negative"},
    .mu_lo = 0.0,
    .mu_hi = INFINITY,
    .clamp_mean = mr__clamp_positive_mean,
    .mustart_n = mr__mustart_count,
    .variance_n = tweedie_variance_n,
    .unit_deviance_n = tweedie_unit_deviance_n,
    .loglik_row = loglik_row,
    .loglik = loglik,
    .no_loglik = 1,
    .dispersion_estimated = 1,
    .dispersion_counts = 1,
    .saturated_term = saturated_term,
    .count_boundary = mr__count_zero_means,
    .boundary_what = "fitted means are numerically 0",
    .boundary_why = "a level or cell whose outcomes are all 0 drives a coefficient towards minus infinity",
    .ratio_log = "mean ratio",
    .parse_param = parse_param,
    .param_name = "power",
};
