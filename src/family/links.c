/* links.c - the link functions, one mr__link_ops each.
 *
 * Each link's inverse is one inline function giving mu and dmu/deta
 * together, and its g one inline function; the array kernels loop over
 * them, so one value through a kernel gives the bits of a block's.
 */
#include <float.h>
#include <math.h>

#include "common/probability.h"
#include "family/family.h"

static const double INV_SQRT_2PI = 0.398942280401432677939946059934381868;

/* Fitted probabilities are kept in [eps, 1 - eps] and the binomial-link
 * derivatives (and the log link's mean) at or above eps: near separation
 * eta runs off to +-infinity, and an exact 0 or 1 would make the IRLS
 * weight mu_eta^2 / V(mu) equal 0/0.  This is the customary GLM safeguard;
 * it bounds the weights without visibly changing any fit. */
static inline double clamp_probability(double mu)
{
    if (mu < DBL_EPSILON)
        return DBL_EPSILON;
    if (mu > 1.0 - DBL_EPSILON)
        return 1.0 - DBL_EPSILON;
    return mu; /* NaN passes through */
}

static inline double at_least_eps(double v)
{
    return v < DBL_EPSILON ? DBL_EPSILON : v;
}

static inline void identity_inv(double eta, double *mu, double *dmu)
{
    *mu = eta;
    *dmu = 1.0;
}

static inline double identity_fun(double mu) { return mu; }

static inline void log_inv(double eta, double *mu, double *dmu)
{
    double m = at_least_eps(exp(eta));
    *mu = m;
    *dmu = m;
}

static inline double log_fun(double mu) { return log(mu); }

static inline void inverse_inv(double eta, double *mu, double *dmu)
{
    *mu = 1.0 / eta;
    *dmu = -1.0 / (eta * eta);
}

static inline double inverse_fun(double mu) { return 1.0 / mu; }

/* exp(-|eta|) never overflows, and both branches divide by 1 + e in [1, 2]. */
static inline void logit_inv(double eta, double *mu, double *dmu)
{
    double e = exp(-fabs(eta));
    double one_e = 1.0 + e;
    *mu = clamp_probability(eta >= 0.0 ? 1.0 / one_e : e / one_e);
    *dmu = at_least_eps(e / (one_e * one_e));
}

/* log(mu) - log1p(-mu): no rounding of mu / (1 - mu), and 1 - mu is exact
 * for mu >= 1/2. */
static inline double logit_fun(double mu) { return log(mu) - log1p(-mu); }

static inline void probit_inv(double eta, double *mu, double *dmu)
{
    *mu = clamp_probability(mr__normal_cdf(eta));
    *dmu = at_least_eps(INV_SQRT_2PI * exp(-0.5 * eta * eta));
}

static inline double probit_fun(double mu) { return mr__normal_quantile(mu); }

/* exp(eta - exp(eta)) rather than exp(eta) * exp(-exp(eta)): no inf * 0. */
static inline void cloglog_inv(double eta, double *mu, double *dmu)
{
    double ee = exp(eta);
    *mu = clamp_probability(-expm1(-ee));
    *dmu = at_least_eps(exp(eta - ee));
}

static inline double cloglog_fun(double mu) { return log(-log1p(-mu)); }

static inline void sqrt_inv(double eta, double *mu, double *dmu)
{
    *mu = eta * eta;
    *dmu = 2.0 * eta;
}

static inline double sqrt_fun(double mu) { return sqrt(mu); }

static inline void inverse_squared_inv(double eta, double *mu, double *dmu)
{
    double r = sqrt(eta);
    *mu = 1.0 / r;
    *dmu = -0.5 / (eta * r);
}

static inline double inverse_squared_fun(double mu) { return 1.0 / (mu * mu); }

#define LINK(prefix, link_name, positive, nonzero)                                                  \
    static void prefix##_fun_n(const double *mu, size_t n, double *eta)                             \
    {                                                                                               \
        for (size_t i = 0; i < n; i++)                                                              \
            eta[i] = prefix##_fun(mu[i]);                                                           \
    }                                                                                               \
    static void prefix##_inv_n(const double *eta, size_t n, double *mu, double *mu_eta)             \
    {                                                                                               \
        for (size_t i = 0; i < n; i++)                                                              \
            prefix##_inv(eta[i], &mu[i], &mu_eta[i]);                                               \
    }                                                                                               \
    static const mr__link_ops prefix##_link = {link_name, prefix##_fun_n, prefix##_inv_n, positive, nonzero};

LINK(identity, "identity", 0, 0)
LINK(log, "log", 0, 0)
LINK(inverse, "inverse", 0, 1)
LINK(logit, "logit", 0, 0)
LINK(probit, "probit", 0, 0)
LINK(cloglog, "cloglog", 0, 0)
LINK(sqrt, "sqrt", 1, 0)
LINK(inverse_squared, "inverse-squared", 1, 0)

static const mr__link_ops *const LINKS[] = {
    [MR_IDENTITY] = &identity_link, [MR_LOG] = &log_link,         [MR_INVERSE] = &inverse_link,
    [MR_LOGIT] = &logit_link,       [MR_PROBIT] = &probit_link,   [MR_CLOGLOG] = &cloglog_link,
    [MR_SQRT] = &sqrt_link,         [MR_INVERSE_SQUARED] = &inverse_squared_link,
};

const mr__link_ops *mr__link_ops_of(mr_link l)
{
    return (unsigned)l < sizeof LINKS / sizeof LINKS[0] ? LINKS[l] : NULL;
}
