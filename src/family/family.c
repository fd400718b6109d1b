/* family.c - GLM error families and link functions.
 *
 * Each link is one inline function giving mu and dmu/deta together, so the
 * array versions (hot path) and the scalar ones (tests, rare paths) share
 * the same arithmetic and agree bit for bit.
 */
#include "common/mathx.h"
#include "family.h"

#include <float.h>
#include <math.h>
#include <string.h>

#include "common/probability.h"

enum { N_FAMILIES = 5, N_LINKS = 8 };

static const char *const FAMILY_NAMES[N_FAMILIES] = {"gaussian", "binomial", "poisson", "gamma",
                                                     "inverse-gaussian"};
static const char *const LINK_NAMES[N_LINKS] = {"identity", "log",    "inverse",
                                                "logit",    "probit", "cloglog",
                                                "sqrt",     "inverse-squared"};

/* The supported pairs, as listed in millrace.h; rows are families, columns
 * links in enum order: identity log inverse logit probit cloglog sqrt inv^2. */
static const unsigned char LINK_ALLOWED[N_FAMILIES][N_LINKS] = {
    [MR_GAUSSIAN] = {1, 1, 1, 0, 0, 0, 0, 0},
    [MR_BINOMIAL] = {0, 1, 0, 1, 1, 1, 0, 0},
    [MR_POISSON] = {1, 1, 0, 0, 0, 0, 1, 0},
    [MR_GAMMA] = {1, 1, 1, 0, 0, 0, 0, 0},
    [MR_INVERSE_GAUSSIAN] = {1, 1, 1, 0, 0, 0, 0, 1},
};

static const mr_link CANONICAL_LINK[N_FAMILIES] = {
    [MR_GAUSSIAN] = MR_IDENTITY, [MR_BINOMIAL] = MR_LOGIT,    [MR_POISSON] = MR_LOG,
    [MR_GAMMA] = MR_INVERSE,     [MR_INVERSE_GAUSSIAN] = MR_INVERSE_SQUARED,
};

static const double INV_SQRT_2PI = 0.398942280401432677939946059934381868;

/* ------------------------------------------------------------------ */
/* Names and the pair table                                             */

static int name_index(const char *const *names, int n, const char *name)
{
    if (name == NULL)
        return -1;
    for (int i = 0; i < n; i++)
        if (strcmp(names[i], name) == 0)
            return i;
    return -1;
}

int mr__family_from_name(const char *name)
{
    return name_index(FAMILY_NAMES, N_FAMILIES, name);
}

int mr__link_from_name(const char *name)
{
    return name_index(LINK_NAMES, N_LINKS, name);
}

static int family_ok(mr_family f)
{
    return (unsigned)f < N_FAMILIES;
}

static int link_ok(mr_link l)
{
    return (unsigned)l < N_LINKS;
}

/* "unknown" rather than NULL for an out-of-range value, so that a message
 * built from it stays printable. */
const char *mr__family_name(mr_family f)
{
    return family_ok(f) ? FAMILY_NAMES[f] : "unknown";
}

const char *mr__link_name(mr_link l)
{
    return link_ok(l) ? LINK_NAMES[l] : "unknown";
}

/* Identity for an out-of-range family: callers validate the family first. */
mr_link mr__canonical_link(mr_family f)
{
    return family_ok(f) ? CANONICAL_LINK[f] : MR_IDENTITY;
}

int mr__link_allowed(mr_family f, mr_link l)
{
    return family_ok(f) && link_ok(l) && LINK_ALLOWED[f][l];
}

/* ------------------------------------------------------------------ */
/* Domains and starting values                                          */

static const mr__outcome_range OUTCOME_RANGE[N_FAMILIES] = {
    [MR_GAUSSIAN] = {-INFINITY, INFINITY, 0, NULL},
    [MR_BINOMIAL] = {0.0, 1.0, 0, "a binary outcome or proportion must lie in [0, 1]"},
    [MR_POISSON] = {0.0, INFINITY, 0, "a count cannot be negative"},
    [MR_GAMMA] = {0.0, INFINITY, 1, "the gamma family needs an outcome > 0"},
    [MR_INVERSE_GAUSSIAN] = {0.0, INFINITY, 1, "the inverse-gaussian family needs an outcome > 0"},
};

/* Any value for an unknown family: callers validate the family first. */
mr__outcome_range mr__family_outcome_range(mr_family f)
{
    return family_ok(f) ? OUTCOME_RANGE[f] : OUTCOME_RANGE[MR_GAUSSIAN];
}

int mr__family_y_valid(mr_family f, double y)
{
    return isfinite(y) && family_ok(f) && mr__outcome_problem(&OUTCOME_RANGE[f], y) == NULL;
}

int mr__family_mu_valid(mr_family f, double mu)
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
size_t mr__count_invalid_n(mr_family f, mr_link l, const double *eta, const double *mu, size_t n)
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
 * signature does not carry: check mr__family_mu_valid on g^-1(eta) too. */
int mr__link_eta_valid(mr_link l, double eta)
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
double mr__family_mustart(mr_family f, double y, double w)
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

/* ------------------------------------------------------------------ */
/* Links                                                                */

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

static inline void inv_identity(double eta, double *mu, double *dmu)
{
    *mu = eta;
    *dmu = 1.0;
}

static inline void inv_log(double eta, double *mu, double *dmu)
{
    double m = at_least_eps(exp(eta));
    *mu = m;
    *dmu = m;
}

static inline void inv_inverse(double eta, double *mu, double *dmu)
{
    *mu = 1.0 / eta;
    *dmu = -1.0 / (eta * eta);
}

/* exp(-|eta|) never overflows, and both branches divide by 1 + e in [1, 2]. */
static inline void inv_logit(double eta, double *mu, double *dmu)
{
    double e = exp(-fabs(eta));
    double one_e = 1.0 + e;
    *mu = clamp_probability(eta >= 0.0 ? 1.0 / one_e : e / one_e);
    *dmu = at_least_eps(e / (one_e * one_e));
}

static inline void inv_probit(double eta, double *mu, double *dmu)
{
    *mu = clamp_probability(mr__normal_cdf(eta));
    *dmu = at_least_eps(INV_SQRT_2PI * exp(-0.5 * eta * eta));
}

/* exp(eta - exp(eta)) rather than exp(eta) * exp(-exp(eta)): no inf * 0. */
static inline void inv_cloglog(double eta, double *mu, double *dmu)
{
    double ee = exp(eta);
    *mu = clamp_probability(-expm1(-ee));
    *dmu = at_least_eps(exp(eta - ee));
}

static inline void inv_sqrt(double eta, double *mu, double *dmu)
{
    *mu = eta * eta;
    *dmu = 2.0 * eta;
}

static inline void inv_inverse_squared(double eta, double *mu, double *dmu)
{
    double r = sqrt(eta);
    *mu = 1.0 / r;
    *dmu = -0.5 / (eta * r);
}

static inline void inv_nan(double eta, double *mu, double *dmu)
{
    (void)eta;
    *mu = NAN;
    *dmu = NAN;
}

static void link_inv_pair(mr_link l, double eta, double *mu, double *dmu)
{
    switch (l) {
    case MR_IDENTITY: inv_identity(eta, mu, dmu); break;
    case MR_LOG: inv_log(eta, mu, dmu); break;
    case MR_INVERSE: inv_inverse(eta, mu, dmu); break;
    case MR_LOGIT: inv_logit(eta, mu, dmu); break;
    case MR_PROBIT: inv_probit(eta, mu, dmu); break;
    case MR_CLOGLOG: inv_cloglog(eta, mu, dmu); break;
    case MR_SQRT: inv_sqrt(eta, mu, dmu); break;
    case MR_INVERSE_SQUARED: inv_inverse_squared(eta, mu, dmu); break;
    default: inv_nan(eta, mu, dmu); break;
    }
}

double mr__link_inv(mr_link l, double eta)
{
    double mu, dmu;
    link_inv_pair(l, eta, &mu, &dmu);
    return mu;
}

double mr__link_mu_eta(mr_link l, double eta)
{
    double mu, dmu;
    link_inv_pair(l, eta, &mu, &dmu);
    return dmu;
}

#define LINK_LOOP(fn)                                                                         \
    for (size_t i = 0; i < n; i++)                                                            \
        fn(eta[i], &mu[i], &mu_eta[i]);                                                       \
    break

void mr__link_inv_n(mr_link l, const double *eta, size_t n, double *mu, double *mu_eta)
{
    switch (l) {
    case MR_IDENTITY: LINK_LOOP(inv_identity);
    case MR_LOG: LINK_LOOP(inv_log);
    case MR_INVERSE: LINK_LOOP(inv_inverse);
    case MR_LOGIT: LINK_LOOP(inv_logit);
    case MR_PROBIT: LINK_LOOP(inv_probit);
    case MR_CLOGLOG: LINK_LOOP(inv_cloglog);
    case MR_SQRT: LINK_LOOP(inv_sqrt);
    case MR_INVERSE_SQUARED: LINK_LOOP(inv_inverse_squared);
    default: LINK_LOOP(inv_nan);
    }
}

/* logit as log(mu) - log1p(-mu): no rounding of mu / (1 - mu), and 1 - mu
 * is exact for mu >= 1/2. */
double mr__link_fun(mr_link l, double mu)
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

/* ------------------------------------------------------------------ */
/* Variance                                                             */

static inline double var_gaussian(double mu)
{
    (void)mu;
    return 1.0;
}

static inline double var_binomial(double mu)
{
    return mu * (1.0 - mu);
}

static inline double var_poisson(double mu)
{
    return mu;
}

static inline double var_gamma(double mu)
{
    return mu * mu;
}

static inline double var_inverse_gaussian(double mu)
{
    return mu * mu * mu;
}

static inline double var_nan(double mu)
{
    (void)mu;
    return NAN;
}

double mr__family_variance(mr_family f, double mu)
{
    switch (f) {
    case MR_GAUSSIAN: return var_gaussian(mu);
    case MR_BINOMIAL: return var_binomial(mu);
    case MR_POISSON: return var_poisson(mu);
    case MR_GAMMA: return var_gamma(mu);
    case MR_INVERSE_GAUSSIAN: return var_inverse_gaussian(mu);
    default: return var_nan(mu);
    }
}

#define VARIANCE_LOOP(fn)                                                                     \
    for (size_t i = 0; i < n; i++)                                                            \
        var[i] = fn(mu[i]);                                                                   \
    break

void mr__family_variance_n(mr_family f, const double *mu, size_t n, double *var)
{
    switch (f) {
    case MR_GAUSSIAN: VARIANCE_LOOP(var_gaussian);
    case MR_BINOMIAL: VARIANCE_LOOP(var_binomial);
    case MR_POISSON: VARIANCE_LOOP(var_poisson);
    case MR_GAMMA: VARIANCE_LOOP(var_gamma);
    case MR_INVERSE_GAUSSIAN: VARIANCE_LOOP(var_inverse_gaussian);
    default: VARIANCE_LOOP(var_nan);
    }
}

/* ------------------------------------------------------------------ */
/* Unit deviance                                                        */


/* y log(y/mu) - (y - mu) >= 0, with 0 log 0 = 0.  Written in this form the
 * deviances below are sums of non-negative terms, so they cannot come out
 * negative, and near y = mu (the converged fit) they keep their relative
 * accuracy instead of being the difference of two nearly equal logs. */
static inline double half_poisson(double y, double mu)
{
    if (y == 0.0)
        return mu;
    double d = mu - y;
    if (fabs(d) <= 0.25 * y)
        return -y * mr__log1pmx_small(d / y);
    return y * log(y / mu) + d;
}

static inline double dev_gaussian(double y, double mu)
{
    double r = y - mu;
    return r * r;
}

/* 2 [y log(y/mu) + (1-y) log((1-y)/(1-mu))]; the linear terms added by
 * half_poisson cancel between the two halves. */
static inline double dev_binomial(double y, double mu)
{
    return 2.0 * (half_poisson(y, mu) + half_poisson(1.0 - y, 1.0 - mu));
}

static inline double dev_poisson(double y, double mu)
{
    return 2.0 * half_poisson(y, mu);
}

/* 2 [(y - mu)/mu - log(y/mu)] = -2 (log1p(u) - u) with u = (y - mu)/mu. */
static inline double dev_gamma(double y, double mu)
{
    double u = (y - mu) / mu;
    if (fabs(u) <= 0.25)
        return -2.0 * mr__log1pmx_small(u);
    return 2.0 * (u - log(y / mu));
}

static inline double dev_inverse_gaussian(double y, double mu)
{
    double r = (y - mu) / mu;
    return r * r / y;
}

static inline double dev_nan(double y, double mu)
{
    (void)y;
    (void)mu;
    return NAN;
}

static double xlogx(double x) { return x > 0 ? x * log(x) : 0.0; }

double mr__family_saturated_term(mr_family f, double y)
{
    switch (f) {
    case MR_GAUSSIAN: return 0.5 * y * y;
    case MR_BINOMIAL: return xlogx(y) + xlogx(1 - y);
    case MR_POISSON: return xlogx(y) - y;
    case MR_GAMMA: return -1 - log(y);
    case MR_INVERSE_GAUSSIAN: return 0.5 / y;
    default: return NAN;
    }
}

double mr__family_unit_deviance(mr_family f, double y, double mu)
{
    switch (f) {
    case MR_GAUSSIAN: return dev_gaussian(y, mu);
    case MR_BINOMIAL: return dev_binomial(y, mu);
    case MR_POISSON: return dev_poisson(y, mu);
    case MR_GAMMA: return dev_gamma(y, mu);
    case MR_INVERSE_GAUSSIAN: return dev_inverse_gaussian(y, mu);
    default: return dev_nan(y, mu);
    }
}

#define DEVIANCE_LOOP(fn)                                                                     \
    for (size_t i = 0; i < n; i++)                                                            \
        dev[i] = fn(y[i], mu[i]);                                                             \
    break

void mr__family_unit_deviance_n(mr_family f, const double *y, const double *mu, size_t n,
                                double *dev)
{
    switch (f) {
    case MR_GAUSSIAN: DEVIANCE_LOOP(dev_gaussian);
    case MR_BINOMIAL: DEVIANCE_LOOP(dev_binomial);
    case MR_POISSON: DEVIANCE_LOOP(dev_poisson);
    case MR_GAMMA: DEVIANCE_LOOP(dev_gamma);
    case MR_INVERSE_GAUSSIAN: DEVIANCE_LOOP(dev_inverse_gaussian);
    default: DEVIANCE_LOOP(dev_nan);
    }
}
