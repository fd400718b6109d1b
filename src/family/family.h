/* family.h - GLM error families and link functions, each one table of
 * operations.
 *
 * A family is an mr__family_ops (in the manner of a file system's method
 * table): constants and function pointers holding every rule the engine
 * follows for it - the outcome values it takes and the message for one
 * outside, its starting means, its array kernels (variance, unit deviance),
 * the data-only term of its log-likelihood and the log-likelihood itself,
 * how its rows collapse into covariate patterns, where its fitted means
 * count as on the boundary, its default dispersion and whether that is a
 * parameter of the AIC, the labels of exp(coefficient), and room for a
 * parameter of its own (a negative binomial's theta, a Tweedie power) read
 * from the model line.  Callers never switch on the family: they call
 * through the table.  A link is an mr__link_ops likewise.
 *
 * Hot paths call an array kernel once per block, never once per row; the
 * kernels of one family are built from one inline function per formula, so
 * a kernel over n rows and over one row give the same bits.
 *
 * Adding a family: one file src/family/NAME.c defining its
 * mr__family_ops, its value at the end of mr_family (millrace.h), and one
 * line in the registry (FAMILY_LIST in family.c).
 */
#ifndef MR_FAMILY_H
#define MR_FAMILY_H

#include <stddef.h>
#include "common/error.h"
#include "millrace.h" /* mr_family, mr_link enums */

/* The outcome values a family can take (y on the response scale, i.e. a
 * proportion for binomial), read by the decoder for every row
 * (mr__outcome_problem, inline: no call per row). */
typedef struct mr__outcome_range {
    double lo, hi;       /* y < lo or y > hi is outside */
    int lo_open;         /* y == lo is outside too */
    const char *problem; /* the message for a value outside; NULL = none */
} mr__outcome_range;

/* The range's message when y lies outside it, else NULL (NaN lies inside:
 * the number parser never gives one). */
static inline const char *mr__outcome_problem(const mr__outcome_range *r, double y)
{
    return y < r->lo || (r->lo_open && y == r->lo) || y > r->hi ? r->problem : NULL;
}

typedef struct mr__family_ops mr__family_ops;

/* A family as fitted: its operations and its parameter (NAN where the
 * family has none).  `estimate`: the parameter is estimated by maximum
 * likelihood, and param holds its current value, which the fit moves from
 * pass to pass.  `dispersion`: where a family sums its density over the
 * rows (param_sums_n), the dispersion to sum it at (NaN: not this pass). */
typedef struct mr__family {
    const mr__family_ops *ops;
    double param;
    int estimate;
    double dispersion;
} mr__family;

/* What a family's param_sums_n adds up over rows, in this order.  A
 * negative binomial with theta estimated: the log-likelihood, theta's
 * score and observed information (with the means fixed), and the sums of
 * w ((y - mu)^2 - y) and w mu^2, whose ratio estimates 1/theta by moments
 * (E (y - mu)^2 - y = mu^2 / theta).  A family
 * whose log-likelihood is a series (tweedie): the log-likelihood at
 * f->dispersion and its first and second derivatives in log(dispersion),
 * which carry it to the dispersion the pass itself gives. */
enum { MR__PS_LOGLIK, MR__PS_SCORE, MR__PS_INFO, MR__PS_MOMENT, MR__PS_WEIGHT, MR__PARAM_SUMS };

struct mr__family_ops {
    const char *name;        /* as in model files */
    mr_link canonical_link;
    /* canonical_link is only the default link: the canonical one depends
     * on the family's parameter, so IRLS on it is not Newton's method */
    int link_default_only;
    unsigned links;          /* bit l set: the family takes link l */
    int takes_trials;        /* outcome may be successes of a trials column */

    /* Outcomes and means. */
    mr__outcome_range outcome;
    double mu_lo, mu_hi;     /* a valid mean is finite and in (mu_lo, mu_hi) */
    /* A mean of y moved just inside (mu_lo, mu_hi): the null start. */
    double (*clamp_mean)(double mu);
    /* IRLS starting means from y and the prior weight (NULL: 1 each). */
    void (*mustart_n)(const mr__family *f, const double *y, const double *prior, size_t n, double *mu);

    /* Array kernels: var[i] = V(mu[i]); dev[i] = d(y[i], mu[i]), the unit
     * deviance for prior weight 1. */
    void (*variance_n)(const mr__family *f, const double *mu, size_t n, double *var);
    void (*unit_deviance_n)(const mr__family *f, const double *y, const double *mu, size_t n, double *dev);

    /* Log-likelihood: each row's data-only term (y as read, a proportion
     * for binomial; weight w, trials t), summed by the first pass; and the
     * log-likelihood of a fit from its deviance, that sum, the count of
     * rows of positive weight and the sum of prior weights.  The dispersion
     * where it enters is the deviance-based estimate, as is usual. */
    double (*loglik_row)(const mr__family *f, double y, double w, double t, int has_trials);
    double (*loglik)(const mr__family *f, double dev, double llc, double n, double sw);
    int no_loglik;            /* no closed-form density: loglik gives NaN,
                                 and the report says why */
    int dispersion_estimated; /* default: 1 estimated, 0 fixed at 1 */
    int dispersion_counts;    /* the dispersion is a parameter of AIC and BIC */

    /* Covariate patterns (accum/patterns.h).  h(y) = y theta(y) - b(theta(y)),
     * the part of the unit deviance that depends on y alone:
     * d(y, mu) = 2 [h(y) - y theta(mu) + b(theta(mu))], so a pattern's sum
     * w, w y, w y^2 and w h(y) give its rows' deviance and Pearson statistic.
     * NULL: the deviance is not of that form and rows do not collapse. */
    double (*saturated_term)(const mr__family *f, double y);
    /* Under the log link the score is sum w (y - mu) x: with an offset or
     * exposure, rows still collapse (to sum w y and sum w e^offset) and the
     * null model's intercept is log of their ratio. */
    int log_offset_patterns;
    int log_offset_null_exact;
    /* With an eliminated factor on the canonical link, a level's Newton
     * step t is taken as log(1 + t): a level's step moves its mean by
     * 1 + t where the mean is the whole story of its score (fit/irls.c,
     * level_steps_by_mean). */
    int level_step_by_mean;

    /* Fitted means at the edge of the range: how many in mu[0..n) (NULL:
     * none can be), and the warning "WHAT for N rows: WHY". */
    size_t (*count_boundary)(const mr__family *f, const double *mu, size_t n);
    const char *boundary_what, *boundary_why;

    /* exp(coefficient) under the log and the logit link (NULL: none). */
    const char *ratio_log, *ratio_logit;

    /* The family's own parameter from a word "NAME=VALUE" of its model
     * line into *param; NULL: the family takes none (and its line takes one
     * word).  param_name is NAME ("theta"): a family that has one needs it
     * on its line (mr__spec_validate), and reports and the JSON name it. */
    mr_status (*parse_param)(double *param, const char *word, const char *origin, mr__error *err);
    const char *param_name;
    /* The parameter may be estimated: a line without it, or with
     * NAME=estimate, asks for that (parse_param gives NaN for the word). */
    int param_estimable;
    /* Sums over rows the fit needs beyond the IRLS sums (MR__PS_*), added
     * to sums[] (NULL: none).  A kernel that has nothing to add for f (a
     * fixed parameter, no dispersion yet) returns at once. */
    void (*param_sums_n)(const mr__family *f, const double *y, const double *mu, const double *prior, size_t n,
                         double sums[MR__PARAM_SUMS]);
    /* The log-likelihood has no closed form in the deviance: it is
     * param_sums_n's series, summed over rows at a dispersion (tweedie).
     * Such rows never collapse into covariate patterns, whose sums lose
     * each row's y; nor do a family's whose parameter is estimated. */
    int loglik_by_rows;
    /* The parameter may be chosen by profile likelihood over this grid of
     * values, one fit after another (NAME=profile on the line; NULL: not). */
    const double *profile_grid;
    int profile_n;
};

/* The value of a word "NAME=VALUE" of a family's line into *value: a
 * finite number, or MR_ERR_USAGE naming the line, the family and the word
 * (a family's parse_param then checks the range). */
mr_status mr__family_param_value(const char *family, const char *name, const char *word, double *value,
                                 const char *origin, mr__error *err);

/* A link: eta = g(mu) and its inverse with dmu/deta, as array kernels,
 * and which eta the link can take (finite, and > 0 or != 0 where g's
 * range ends there: inverse eta != 0; sqrt and inverse-squared eta > 0,
 * since for eta < 0 sqrt's eta^2 is a mean whose g is -eta, not eta). */
typedef struct mr__link_ops {
    const char *name;
    void (*fun_n)(const double *mu, size_t n, double *eta);
    void (*inv_n)(const double *eta, size_t n, double *mu, double *mu_eta);
    int eta_positive, eta_nonzero;
} mr__link_ops;

/* The registries; NULL for a value that names none. */
const mr__family_ops *mr__family_ops_of(mr_family f);
const mr__link_ops *mr__link_ops_of(mr_link l);
/* The family as fitted with no parameter given. */
mr__family mr__family_plain(mr_family f);

/* Names as written in model files: "gaussian", "binomial", "poisson",
 * "gamma", "inverse-gaussian", "negative-binomial", "tweedie"; links "identity", "log", "inverse", "logit",
 * "probit", "cloglog", "sqrt", "inverse-squared".  Return -1 if unknown. */
int mr__family_from_name(const char *name);
int mr__link_from_name(const char *name);
/* "unknown" for a value that names none. */
const char *mr__family_name(mr_family f);
const char *mr__link_name(mr_link l);

/* Identity for an unknown family: callers validate the family first. */
mr_link mr__canonical_link(mr_family f);
/* 1 if the pair is supported (see the table in millrace.h), else 0. */
int mr__link_allowed(mr_family f, mr_link l);

/* A finite y inside the family's outcome range. */
int mr__family_y_valid(const mr__family_ops *f, double y);
/* A finite mean in (mu_lo, mu_hi). */
int mr__family_mu_valid(const mr__family_ops *f, double mu);
/* A finite eta the link can take (see mr__link_ops).  Whether the family
 * needs mu > 0 on top (gamma with the inverse link, poisson with
 * identity) is mr__family_mu_valid's on g^-1(eta). */
int mr__link_eta_valid(const mr__link_ops *l, double eta);

/* How many rows have an eta or a mu outside the link's or the family's
 * range (the array form of the two checks above). */
size_t mr__count_invalid_n(const mr__family_ops *f, const mr__link_ops *l, const double *eta, const double *mu,
                           size_t n);

/* One value through a link's kernels (rare paths: a start, a null model
 * without offset). */
static inline double mr__link_fun1(const mr__link_ops *l, double mu)
{
    double eta;
    l->fun_n(&mu, 1, &eta);
    return eta;
}

static inline double mr__link_inv1(const mr__link_ops *l, double eta, double *mu_eta)
{
    double mu;
    l->inv_n(&eta, 1, &mu, mu_eta);
    return mu;
}

#endif
