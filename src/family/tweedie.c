/* tweedie.c - outcomes >= 0 with a mass at 0 and a continuous part
 * (claim amounts), a known power p (the family's parameter), 1 < p < 2:
 * V(mu) = mu^p, dispersion estimated (Pearson).  An exponential family in
 * t(mu) = mu^(1-p)/(1-p), b = mu^(2-p)/(2-p), so its deviance has the form
 * rows collapse by (family.h, saturated_term).
 *
 * The log-likelihood: the density has no closed form (a compound Poisson
 * sum of gamma variables), so it is evaluated row by row by the series
 * method of Dunn and Smyth (Series evaluation of Tweedie exponential
 * dispersion model densities, Statistics and Computing 15, 2005): for
 * y > 0, f = W(y, phi) / y exp((y t(mu) - b(t(mu))) / phi) with
 * W = sum over j >= 1 of W_j,
 *   W_j = y^(-j a) (p-1)^(j a) / (phi^(j (1-a)) (2-p)^j j! Gamma(-j a)),
 *   a = (2-p)/(1-p) < 0,
 * summed outwards from the largest term, near j = y^(2-p) / (phi (2-p)),
 * until the terms fall below 1e-16 of it; f(0) = exp(-b(t(mu)) / phi).
 * Rows then never collapse into patterns (the density needs each y).
 * The prior weight multiplies a row's log density (a frequency, as the
 * other families' log-likelihoods take it) and the dispersion is the
 * deviance over the sum of weights (the deviance-based estimate, as the
 * gamma family's log-likelihood takes it). */
#include <math.h>

#include "common/probability.h"
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

/* Not from the deviance: the fit takes param_sums_n's sums (fit/result.c). */
static double loglik(const mr__family *f, double dev, double llc, double n, double sw)
{
    (void)f;
    (void)dev;
    (void)llc;
    (void)n;
    (void)sw;
    return NAN;
}

/* log W_j, its largest term's j near y^(2-p) / (phi (2-p)) (Dunn and Smyth). */
typedef struct series {
    double c, a; /* log W_j = j c - log j! - log Gamma(-j a) */
} series;

static double series_term(const series *s, double j) { return j * s->c - mr__log_gamma(j + 1) - mr__log_gamma(-j * s->a); }

/* Adds the terms from j on, stepping by `step` (+1 or -1), while they are
 * above 1e-16 (e^-37) of the largest, as exp(log W_j - top): sums of 1, j
 * and j^2 for log W and its derivatives in log(phi).  log W_j is concave
 * in j, so the terms only fall from there; at most 10^7 of them (the
 * terms that matter span a few times sqrt(j) about the largest). */
static void series_run(const series *s, double j, double step, double top, double acc[3])
{
    double end = j + 1e7 * step;
    for (; j >= 1 && j != end; j += step) {
        double e = series_term(s, j) - top;
        if (!(e >= -37)) break; /* NaN too */
        e = exp(e);
        acc[0] += e;
        acc[1] += j * e;
        acc[2] += j * j * e;
    }
}

/* log f(y) and its first two derivatives in log(phi) (a row of weight 1). */
static void tweedie_log_density(double p, double y, double mu, double phi, double out[3])
{
    double a = (2 - p) / (1 - p), e;
    e = -pow(mu, 2 - p) / ((2 - p) * phi);
    out[0] = e, out[1] = -e, out[2] = e;
    if (y > 0) {
        series s;
        double acc[3] = {0, 0, 0}, j0, top, m1, m2;
        s.a = a;
        s.c = -a * log(y) + a * log(p - 1) - (1 - a) * log(phi) - log(2 - p);
        j0 = fmax(1.0, round(pow(y, 2 - p) / ((2 - p) * phi)));
        top = series_term(&s, j0);
        series_run(&s, j0, 1, top, acc);
        series_run(&s, j0 - 1, -1, top, acc);
        m1 = acc[1] / acc[0];
        m2 = acc[2] / acc[0] - m1 * m1;
        e = y * pow(mu, 1 - p) / ((1 - p) * phi);
        out[0] += top + log(acc[0]) - log(y) + e;
        out[1] += -(1 - a) * m1 - e;
        out[2] += (1 - a) * (1 - a) * m2 + e;
    }
}

static void param_sums_n(const mr__family *f, const double *y, const double *mu, const double *prior, size_t n,
                         double sums[MR__PARAM_SUMS])
{
    size_t i;
    if (isnan(f->dispersion)) return;
    for (i = 0; i < n; i++) {
        double w = prior ? prior[i] : 1.0, d[3];
        if (!(w > 0)) continue;
        tweedie_log_density(f->param, y[i], mu[i], f->dispersion, d);
        sums[MR__PS_LOGLIK] += w * d[0];
        sums[MR__PS_SCORE] += w * d[1];
        sums[MR__PS_INFO] += w * d[2];
    }
}

/* power=profile: the powers fitted one after another (fit/profile.c). */
static const double profile_grid[] = {1.1, 1.2, 1.3, 1.4, 1.5, 1.6, 1.7, 1.8, 1.9};

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
    .link_default_only = 1,
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
    .dispersion_estimated = 1,
    .dispersion_counts = 1,
    .saturated_term = saturated_term,
    .count_boundary = mr__count_zero_means,
    .boundary_what = "fitted means are numerically 0",
    .boundary_why = "a level or cell whose outcomes are all 0 drives a coefficient towards minus infinity",
    .ratio_log = "mean ratio",
    .parse_param = parse_param,
    .param_name = "power",
    .param_sums_n = param_sums_n,
    .loglik_by_rows = 1,
    .profile_grid = profile_grid,
    .profile_n = (int)(sizeof profile_grid / sizeof profile_grid[0]),
};
