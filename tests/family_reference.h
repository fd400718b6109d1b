/* family_reference.h - the family and link functions as they stood before
 * the families became tables of operations (src/family/family.c and
 * loglik.c, and the family rules then in fit/result.c, fit/run.c,
 * fit/fit.c, accum/accumulate.c and model/spec.c), frozen with a ref_
 * prefix: tests/check_family.c holds every descriptor to these bits, values
 * and messages.  Not to be edited: it is the record of the old behaviour. */
#ifndef MR_FAMILY_REFERENCE_H
#define MR_FAMILY_REFERENCE_H

#include <float.h>
#include <math.h>
#include <string.h>

#include "common/mathx.h"
#include "common/probability.h"
#include "family/family.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846 /* glibc's */
#endif

static inline const char *ref_outcome_problem(const mr__outcome_range *r, double y)
{
    return y < r->lo || (r->lo_open && y == r->lo) || y > r->hi ? r->problem : NULL;
}



enum { REF_N_FAMILIES = 5, REF_N_LINKS = 8 };

static const char *const REF_FAMILY_NAMES[REF_N_FAMILIES] = {"gaussian", "binomial", "poisson", "gamma",
                                                     "inverse-gaussian"};
static const char *const REF_LINK_NAMES[REF_N_LINKS] = {"identity", "log",    "inverse",
                                                "logit",    "probit", "cloglog",
                                                "sqrt",     "inverse-squared"};

/* The supported pairs, as listed in millrace.h; rows are families, columns
 * links in enum order: identity log inverse logit probit cloglog sqrt inv^2. */
static const unsigned char REF_LINK_ALLOWED[REF_N_FAMILIES][REF_N_LINKS] = {
    [MR_GAUSSIAN] = {1, 1, 1, 0, 0, 0, 0, 0},
    [MR_BINOMIAL] = {0, 1, 0, 1, 1, 1, 0, 0},
    [MR_POISSON] = {1, 1, 0, 0, 0, 0, 1, 0},
    [MR_GAMMA] = {1, 1, 1, 0, 0, 0, 0, 0},
    [MR_INVERSE_GAUSSIAN] = {1, 1, 1, 0, 0, 0, 0, 1},
};

static const mr_link REF_CANONICAL_LINK[REF_N_FAMILIES] = {
    [MR_GAUSSIAN] = MR_IDENTITY, [MR_BINOMIAL] = MR_LOGIT,    [MR_POISSON] = MR_LOG,
    [MR_GAMMA] = MR_INVERSE,     [MR_INVERSE_GAUSSIAN] = MR_INVERSE_SQUARED,
};

static const double REF_INV_SQRT_2PI = 0.398942280401432677939946059934381868;

/* Names and the pair table                                             */

static inline int ref_name_index(const char *const *names, int n, const char *name)
{
    if (name == NULL)
        return -1;
    for (int i = 0; i < n; i++)
        if (strcmp(names[i], name) == 0)
            return i;
    return -1;
}

static inline int ref_family_from_name(const char *name)
{
    return ref_name_index(REF_FAMILY_NAMES, REF_N_FAMILIES, name);
}

static inline int ref_link_from_name(const char *name)
{
    return ref_name_index(REF_LINK_NAMES, REF_N_LINKS, name);
}

static inline int ref_family_ok(mr_family f)
{
    return (unsigned)f < REF_N_FAMILIES;
}

static inline int ref_link_ok(mr_link l)
{
    return (unsigned)l < REF_N_LINKS;
}

/* "unknown" rather than NULL for an out-of-range value, so that a message
 * built from it stays printable. */
static inline const char *ref_family_name(mr_family f)
{
    return ref_family_ok(f) ? REF_FAMILY_NAMES[f] : "unknown";
}

static inline const char *ref_link_name(mr_link l)
{
    return ref_link_ok(l) ? REF_LINK_NAMES[l] : "unknown";
}

/* Identity for an out-of-range family: callers validate the family first. */
static inline mr_link ref_canonical_link(mr_family f)
{
    return ref_family_ok(f) ? REF_CANONICAL_LINK[f] : MR_IDENTITY;
}

static inline int ref_link_allowed(mr_family f, mr_link l)
{
    return ref_family_ok(f) && ref_link_ok(l) && REF_LINK_ALLOWED[f][l];
}

/* Domains and starting values                                          */

static const mr__outcome_range REF_OUTCOME_RANGE[REF_N_FAMILIES] = {
    [MR_GAUSSIAN] = {-INFINITY, INFINITY, 0, NULL},
    [MR_BINOMIAL] = {0.0, 1.0, 0, "a binary outcome or proportion must lie in [0, 1]"},
    [MR_POISSON] = {0.0, INFINITY, 0, "a count cannot be negative"},
    [MR_GAMMA] = {0.0, INFINITY, 1, "the gamma family needs an outcome > 0"},
    [MR_INVERSE_GAUSSIAN] = {0.0, INFINITY, 1, "the inverse-gaussian family needs an outcome > 0"},
};

/* Any value for an unknown family: callers validate the family first. */
static inline mr__outcome_range ref_family_outcome_range(mr_family f)
{
    return ref_family_ok(f) ? REF_OUTCOME_RANGE[f] : REF_OUTCOME_RANGE[MR_GAUSSIAN];
}

static inline int ref_family_y_valid(mr_family f, double y)
{
    return isfinite(y) && ref_family_ok(f) && ref_outcome_problem(&REF_OUTCOME_RANGE[f], y) == NULL;
}

static inline int ref_family_mu_valid(mr_family f, double mu)
{
    if (!isfinite(mu))
        return 0;
    switch (f) {
    case MR_GAUSSIAN: return 1;
    case MR_BINOMIAL: return mu > 0.0 && mu < 1.0;
    case MR_POISSON:
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return mu > 0.0;
    default: return 0;
    }
}

/* The two checks above over arrays: the family's range as an open
 * interval (lo, hi), the link's needs as two flags, so the loop carries no
 * switch. */
static inline size_t ref_count_invalid_n(mr_family f, mr_link l, const double *eta, const double *mu, size_t n)
{
    const double lo = f == MR_GAUSSIAN ? -INFINITY : 0.0, hi = f == MR_BINOMIAL ? 1.0 : INFINITY;
    const int positive_eta = l == MR_SQRT || l == MR_INVERSE_SQUARED, nonzero_eta = l == MR_INVERSE;
    size_t i, bad = 0;
    for (i = 0; i < n; i++) {
        int ok = isfinite(mu[i]) && mu[i] > lo && mu[i] < hi && isfinite(eta[i]);
        if (positive_eta) ok = ok && eta[i] > 0.0;
        if (nonzero_eta) ok = ok && eta[i] != 0.0;
        bad += !ok;
    }
    return bad;
}

/* Only what the link itself needs: eta must lie in the range of g.  Hence
 * inverse needs eta != 0, inverse-squared eta > 0, and sqrt eta > 0 (for
 * eta < 0, eta^2 is a mean whose g is -eta, not eta).  Whether the
 * family needs mu > 0 (gamma or inverse-gaussian with the inverse link,
 * poisson or gamma with identity) depends on the family, which this
 * signature does not carry: check ref_family_mu_valid on g^-1(eta) too. */
static inline int ref_link_eta_valid(mr_link l, double eta)
{
    if (!isfinite(eta))
        return 0;
    switch (l) {
    case MR_INVERSE: return eta != 0.0;
    case MR_SQRT:
    case MR_INVERSE_SQUARED: return eta > 0.0;
    case MR_IDENTITY:
    case MR_LOG:
    case MR_LOGIT:
    case MR_PROBIT:
    case MR_CLOGLOG: return 1;
    default: return 0;
    }
}

/* The usual IRLS starting means: y itself where it is a valid mean;
 * binomial shrinks towards 1/2 by half a success and half a failure so that
 * y = 0 or 1 gives a finite logit; poisson adds 0.1 so that y = 0 gives a
 * finite log. */
static inline double ref_family_mustart(mr_family f, double y, double w)
{
    switch (f) {
    case MR_GAUSSIAN:
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return y;
    case MR_BINOMIAL: return (w * y + 0.5) / (w + 1.0);
    case MR_POISSON: return y + 0.1;
    default: return NAN;
    }
}

/* Links                                                                */

/* Fitted probabilities are kept in [eps, 1 - eps] and the binomial-link
 * derivatives (and the log link's mean) at or above eps: near separation
 * eta runs off to +-infinity, and an exact 0 or 1 would make the IRLS
 * weight mu_eta^2 / V(mu) equal 0/0.  This is the customary GLM safeguard;
 * it bounds the weights without visibly changing any fit. */
static inline double ref_clamp_probability(double mu)
{
    if (mu < DBL_EPSILON)
        return DBL_EPSILON;
    if (mu > 1.0 - DBL_EPSILON)
        return 1.0 - DBL_EPSILON;
    return mu; /* NaN passes through */
}

static inline double ref_at_least_eps(double v)
{
    return v < DBL_EPSILON ? DBL_EPSILON : v;
}

static inline void ref_inv_identity(double eta, double *mu, double *dmu)
{
    *mu = eta;
    *dmu = 1.0;
}

static inline void ref_inv_log(double eta, double *mu, double *dmu)
{
    double m = ref_at_least_eps(exp(eta));
    *mu = m;
    *dmu = m;
}

static inline void ref_inv_inverse(double eta, double *mu, double *dmu)
{
    *mu = 1.0 / eta;
    *dmu = -1.0 / (eta * eta);
}

/* exp(-|eta|) never overflows, and both branches divide by 1 + e in [1, 2]. */
static inline void ref_inv_logit(double eta, double *mu, double *dmu)
{
    double e = exp(-fabs(eta));
    double one_e = 1.0 + e;
    *mu = ref_clamp_probability(eta >= 0.0 ? 1.0 / one_e : e / one_e);
    *dmu = ref_at_least_eps(e / (one_e * one_e));
}

static inline void ref_inv_probit(double eta, double *mu, double *dmu)
{
    *mu = ref_clamp_probability(mr__normal_cdf(eta));
    *dmu = ref_at_least_eps(REF_INV_SQRT_2PI * exp(-0.5 * eta * eta));
}

/* exp(eta - exp(eta)) rather than exp(eta) * exp(-exp(eta)): no inf * 0. */
static inline void ref_inv_cloglog(double eta, double *mu, double *dmu)
{
    double ee = exp(eta);
    *mu = ref_clamp_probability(-expm1(-ee));
    *dmu = ref_at_least_eps(exp(eta - ee));
}

static inline void ref_inv_sqrt(double eta, double *mu, double *dmu)
{
    *mu = eta * eta;
    *dmu = 2.0 * eta;
}

static inline void ref_inv_inverse_squared(double eta, double *mu, double *dmu)
{
    double r = sqrt(eta);
    *mu = 1.0 / r;
    *dmu = -0.5 / (eta * r);
}

static inline void ref_inv_nan(double eta, double *mu, double *dmu)
{
    (void)eta;
    *mu = NAN;
    *dmu = NAN;
}

static inline void ref_link_inv_pair(mr_link l, double eta, double *mu, double *dmu)
{
    switch (l) {
    case MR_IDENTITY: ref_inv_identity(eta, mu, dmu); break;
    case MR_LOG: ref_inv_log(eta, mu, dmu); break;
    case MR_INVERSE: ref_inv_inverse(eta, mu, dmu); break;
    case MR_LOGIT: ref_inv_logit(eta, mu, dmu); break;
    case MR_PROBIT: ref_inv_probit(eta, mu, dmu); break;
    case MR_CLOGLOG: ref_inv_cloglog(eta, mu, dmu); break;
    case MR_SQRT: ref_inv_sqrt(eta, mu, dmu); break;
    case MR_INVERSE_SQUARED: ref_inv_inverse_squared(eta, mu, dmu); break;
    default: ref_inv_nan(eta, mu, dmu); break;
    }
}

static inline double ref_link_inv(mr_link l, double eta)
{
    double mu, dmu;
    ref_link_inv_pair(l, eta, &mu, &dmu);
    return mu;
}

static inline double ref_link_mu_eta(mr_link l, double eta)
{
    double mu, dmu;
    ref_link_inv_pair(l, eta, &mu, &dmu);
    return dmu;
}

#define REF_LINK_LOOP(fn)                                                                         \
    for (size_t i = 0; i < n; i++)                                                            \
        fn(eta[i], &mu[i], &mu_eta[i]);                                                       \
    break

static inline void ref_link_inv_n(mr_link l, const double *eta, size_t n, double *mu, double *mu_eta)
{
    switch (l) {
    case MR_IDENTITY: REF_LINK_LOOP(ref_inv_identity);
    case MR_LOG: REF_LINK_LOOP(ref_inv_log);
    case MR_INVERSE: REF_LINK_LOOP(ref_inv_inverse);
    case MR_LOGIT: REF_LINK_LOOP(ref_inv_logit);
    case MR_PROBIT: REF_LINK_LOOP(ref_inv_probit);
    case MR_CLOGLOG: REF_LINK_LOOP(ref_inv_cloglog);
    case MR_SQRT: REF_LINK_LOOP(ref_inv_sqrt);
    case MR_INVERSE_SQUARED: REF_LINK_LOOP(ref_inv_inverse_squared);
    default: REF_LINK_LOOP(ref_inv_nan);
    }
}

/* logit as log(mu) - log1p(-mu): no rounding of mu / (1 - mu), and 1 - mu
 * is exact for mu >= 1/2. */
static inline double ref_link_fun(mr_link l, double mu)
{
    switch (l) {
    case MR_IDENTITY: return mu;
    case MR_LOG: return log(mu);
    case MR_INVERSE: return 1.0 / mu;
    case MR_LOGIT: return log(mu) - log1p(-mu);
    case MR_PROBIT: return mr__normal_quantile(mu);
    case MR_CLOGLOG: return log(-log1p(-mu));
    case MR_SQRT: return sqrt(mu);
    case MR_INVERSE_SQUARED: return 1.0 / (mu * mu);
    default: return NAN;
    }
}

/* Variance                                                             */

static inline double ref_var_gaussian(double mu)
{
    (void)mu;
    return 1.0;
}

static inline double ref_var_binomial(double mu)
{
    return mu * (1.0 - mu);
}

static inline double ref_var_poisson(double mu)
{
    return mu;
}

static inline double ref_var_gamma(double mu)
{
    return mu * mu;
}

static inline double ref_var_inverse_gaussian(double mu)
{
    return mu * mu * mu;
}

static inline double ref_var_nan(double mu)
{
    (void)mu;
    return NAN;
}

static inline double ref_family_variance(mr_family f, double mu)
{
    switch (f) {
    case MR_GAUSSIAN: return ref_var_gaussian(mu);
    case MR_BINOMIAL: return ref_var_binomial(mu);
    case MR_POISSON: return ref_var_poisson(mu);
    case MR_GAMMA: return ref_var_gamma(mu);
    case MR_INVERSE_GAUSSIAN: return ref_var_inverse_gaussian(mu);
    default: return ref_var_nan(mu);
    }
}

#define REF_VARIANCE_LOOP(fn)                                                                     \
    for (size_t i = 0; i < n; i++)                                                            \
        var[i] = fn(mu[i]);                                                                   \
    break

static inline void ref_family_variance_n(mr_family f, const double *mu, size_t n, double *var)
{
    switch (f) {
    case MR_GAUSSIAN: REF_VARIANCE_LOOP(ref_var_gaussian);
    case MR_BINOMIAL: REF_VARIANCE_LOOP(ref_var_binomial);
    case MR_POISSON: REF_VARIANCE_LOOP(ref_var_poisson);
    case MR_GAMMA: REF_VARIANCE_LOOP(ref_var_gamma);
    case MR_INVERSE_GAUSSIAN: REF_VARIANCE_LOOP(ref_var_inverse_gaussian);
    default: REF_VARIANCE_LOOP(ref_var_nan);
    }
}

/* Unit deviance                                                        */


/* y log(y/mu) - (y - mu) >= 0, with 0 log 0 = 0.  Written in this form the
 * deviances below are sums of non-negative terms, so they cannot come out
 * negative, and near y = mu (the converged fit) they keep their relative
 * accuracy instead of being the difference of two nearly equal logs. */
static inline double ref_half_poisson(double y, double mu)
{
    if (y == 0.0)
        return mu;
    double d = mu - y;
    if (fabs(d) <= 0.25 * y)
        return -y * mr__log1pmx_small(d / y);
    return y * log(y / mu) + d;
}

static inline double ref_dev_gaussian(double y, double mu)
{
    double r = y - mu;
    return r * r;
}

/* 2 [y log(y/mu) + (1-y) log((1-y)/(1-mu))]; the linear terms added by
 * ref_half_poisson cancel between the two halves. */
static inline double ref_dev_binomial(double y, double mu)
{
    return 2.0 * (ref_half_poisson(y, mu) + ref_half_poisson(1.0 - y, 1.0 - mu));
}

static inline double ref_dev_poisson(double y, double mu)
{
    return 2.0 * ref_half_poisson(y, mu);
}

/* 2 [(y - mu)/mu - log(y/mu)] = -2 (log1p(u) - u) with u = (y - mu)/mu. */
static inline double ref_dev_gamma(double y, double mu)
{
    double u = (y - mu) / mu;
    if (fabs(u) <= 0.25)
        return -2.0 * mr__log1pmx_small(u);
    return 2.0 * (u - log(y / mu));
}

static inline double ref_dev_inverse_gaussian(double y, double mu)
{
    double r = (y - mu) / mu;
    return r * r / y;
}

static inline double ref_dev_nan(double y, double mu)
{
    (void)y;
    (void)mu;
    return NAN;
}

static inline double ref_xlogx(double x) { return x > 0 ? x * log(x) : 0.0; }

static inline double ref_family_saturated_term(mr_family f, double y)
{
    switch (f) {
    case MR_GAUSSIAN: return 0.5 * y * y;
    case MR_BINOMIAL: return ref_xlogx(y) + ref_xlogx(1 - y);
    case MR_POISSON: return ref_xlogx(y) - y;
    case MR_GAMMA: return -1 - log(y);
    case MR_INVERSE_GAUSSIAN: return 0.5 / y;
    default: return NAN;
    }
}

static inline double ref_family_unit_deviance(mr_family f, double y, double mu)
{
    switch (f) {
    case MR_GAUSSIAN: return ref_dev_gaussian(y, mu);
    case MR_BINOMIAL: return ref_dev_binomial(y, mu);
    case MR_POISSON: return ref_dev_poisson(y, mu);
    case MR_GAMMA: return ref_dev_gamma(y, mu);
    case MR_INVERSE_GAUSSIAN: return ref_dev_inverse_gaussian(y, mu);
    default: return ref_dev_nan(y, mu);
    }
}

#define REF_DEVIANCE_LOOP(fn)                                                                     \
    for (size_t i = 0; i < n; i++)                                                            \
        dev[i] = fn(y[i], mu[i]);                                                             \
    break

static inline void ref_family_unit_deviance_n(mr_family f, const double *y, const double *mu, size_t n,
                                double *dev)
{
    switch (f) {
    case MR_GAUSSIAN: REF_DEVIANCE_LOOP(ref_dev_gaussian);
    case MR_BINOMIAL: REF_DEVIANCE_LOOP(ref_dev_binomial);
    case MR_POISSON: REF_DEVIANCE_LOOP(ref_dev_poisson);
    case MR_GAMMA: REF_DEVIANCE_LOOP(ref_dev_gamma);
    case MR_INVERSE_GAUSSIAN: REF_DEVIANCE_LOOP(ref_dev_inverse_gaussian);
    default: REF_DEVIANCE_LOOP(ref_dev_nan);
    }
}



static inline double ref_xlogy(double x, double y) { return x == 0 ? 0.0 : x * log(y); }

static inline double ref_loglik_constant(mr_family family, double y, double w, double t, int has_trials)
{
    double prior = w * t, m, c, k;
    switch (family) {
    case MR_GAUSSIAN: return prior > 0 ? log(prior) : 0.0;
    case MR_POISSON: return prior * (ref_xlogy(y, y) - y - mr__log_gamma(y + 1));
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return prior * log(y);
    case MR_BINOMIAL:
        m = has_trials ? t : w;
        c = has_trials ? w : 1.0;
        if (m <= 0) return 0.0;
        /* one binary trial: every term is an exact zero */
        if (m == 1 && c == 1 && (y == 0 || y == 1)) return 0.0;
        k = m * y;
        return c * (mr__log_gamma(m + 1) - mr__log_gamma(k + 1) - mr__log_gamma(m - k + 1) + ref_xlogy(k, y) + ref_xlogy(m - k, 1 - y));
    default: break; /* families added since: tests of their own */
    }
    return 0.0;
}

/* fit/result.c: the log-likelihood and the AIC's parameter count. */
static inline double ref_log_likelihood(mr_family family, double dev, double n, double llc, double sw)
{
    double a;
    switch (family) {
    case MR_POISSON:
    case MR_BINOMIAL: return llc - dev / 2;
    case MR_GAUSSIAN: return -0.5 * (n * (log(2 * M_PI * dev / n) + 1) - llc);
    case MR_GAMMA:
        a = sw / dev;
        return -sw * mr__log_gamma(a) + a * sw * log(a) - a * dev / 2 - a * sw - llc;
    case MR_INVERSE_GAUSSIAN: return -0.5 * (sw * (1 + log(2 * M_PI * dev / sw)) + 3 * llc);
    default: break; /* families added since: tests of their own */
    }
    return NAN;
}

static inline int ref_dispersion_counts(mr_family f)
{
    return f == MR_GAUSSIAN || f == MR_GAMMA || f == MR_INVERSE_GAUSSIAN;
}

/* fit/result.c: the boundary warnings (count substituted). */
static inline const char *ref_boundary_warning(mr_family f)
{
    if (f == MR_BINOMIAL)
        return "fitted probabilities are numerically 0 or 1 for 7 rows: possible separation; the "
               "estimates and standard errors of the terms involved are unreliable";
    if (f == MR_POISSON)
        return "fitted rates are numerically 0 for 7 rows: a level or cell with no events drives a "
               "coefficient towards minus infinity";
    return NULL;
}

/* fit/run.c: the null start's mean of y moved inside the range. */
static inline double ref_clamp_mean(mr_family fam, double ybar)
{
    if (fam == MR_BINOMIAL && !(ybar > 0 && ybar < 1)) ybar = ybar <= 0 ? 1e-8 : 1 - 1e-8;
    if ((fam == MR_POISSON || fam == MR_GAMMA || fam == MR_INVERSE_GAUSSIAN) && !(ybar > 0)) ybar = 1e-8;
    return ybar;
}

/* fit/run.c: which families collapse with a log-link offset, and whose
 * null intercept is then exact. */
static inline int ref_log_offset_patterns(mr_family f) { return f == MR_POISSON; }

/* accum/accumulate.c */
static inline int ref_at_boundary(int family, double mu)
{
    const double edge = 10 * DBL_EPSILON;
    if (family == MR_BINOMIAL) return mu <= edge || mu >= 1 - edge;
    if (family == MR_POISSON) return mu <= edge;
    return 0;
}

/* fit/fit.c */
static inline const char *ref_ratio_label(mr_family family, mr_link link)
{
    if (link == MR_LOGIT) return family == MR_BINOMIAL ? "odds ratio" : NULL;
    if (link != MR_LOG) return NULL;
    if (family == MR_POISSON) return "rate ratio";
    if (family == MR_BINOMIAL) return "risk ratio";
    return "mean ratio";
}

/* model/spec.c */
static inline int ref_dispersion_estimated(mr_family f) { return !(f == MR_BINOMIAL || f == MR_POISSON); }
static inline int ref_takes_trials(mr_family f) { return f == MR_BINOMIAL; }

#endif
