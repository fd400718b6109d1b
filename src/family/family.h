/* family.h - GLM error families and link functions.
 *
 * Everything the IRLS loop needs per row: g, g^-1, dmu/deta, V(mu), the unit
 * deviance, domain checks and starting values.  Hot-path functions work on
 * arrays so the switch on family/link happens once per block, not per row.
 */
#ifndef MR_FAMILY_H
#define MR_FAMILY_H

#include <stddef.h>
#include "millrace.h" /* mr_family, mr_link enums */

/* Names as written in model files: "gaussian", "binomial", "poisson",
 * "gamma", "inverse-gaussian"; links "identity", "log", "inverse", "logit",
 * "probit", "cloglog", "sqrt", "inverse-squared".  Return -1 if unknown. */
int mr__family_from_name(const char *name);
int mr__link_from_name(const char *name);
const char *mr__family_name(mr_family f);
const char *mr__link_name(mr_link l);

mr_link mr__canonical_link(mr_family f);
/* 1 if the pair is supported (see the table in millrace.h), else 0. */
int mr__link_allowed(mr_family f, mr_link l);

/* The outcome values a family can take (y on the response scale, i.e. a
 * proportion for binomial): gaussian any; binomial 0<=y<=1; poisson y>=0;
 * gamma and inverse-gaussian y>0.  One range per family, read by the
 * decoder for every row (mr__outcome_problem, inline: no call per row)
 * and by mr__family_y_valid. */
typedef struct mr__outcome_range {
    double lo, hi;       /* y < lo or y > hi is outside */
    int lo_open;         /* y == lo is outside too */
    const char *problem; /* the message for a value outside; NULL = none */
} mr__outcome_range;

mr__outcome_range mr__family_outcome_range(mr_family f);

/* The range's message when y lies outside it, else NULL (NaN lies inside:
 * the number parser never gives one). */
static inline const char *mr__outcome_problem(const mr__outcome_range *r, double y)
{
    return y < r->lo || (r->lo_open && y == r->lo) || y > r->hi ? r->problem : NULL;
}

/* A finite y inside the family's range; 0 for an unknown family. */
int mr__family_y_valid(mr_family f, double y);

/* Valid fitted mean: gaussian any finite; binomial 0<mu<1; poisson mu>0;
 * gamma, inverse-gaussian mu>0. */
int mr__family_mu_valid(mr_family f, double mu);
/* Valid linear predictor for the link where the link restricts it
 * (inverse, inverse-squared: eta>0 ... see family.c), else finite. */
int mr__link_eta_valid(mr_link l, double eta);

/* Starting mean for IRLS from the outcome (proportion for binomial) and the
 * prior weight (trials times weight for binomial). */
double mr__family_mustart(mr_family f, double y, double w);

/* Scalar versions (tests, rare paths). */
double mr__link_fun(mr_link l, double mu);      /* eta = g(mu) */
double mr__link_inv(mr_link l, double eta);     /* mu = g^-1(eta) */
double mr__link_mu_eta(mr_link l, double eta);  /* dmu/deta at eta */
double mr__family_variance(mr_family f, double mu);
/* Unit deviance d(y, mu) for prior weight 1 (limits taken at y=0 etc). */
double mr__family_unit_deviance(mr_family f, double y, double mu);

/* h(y) = y theta(y) - b(theta(y)), the part of the unit deviance that
 * depends on y alone: d(y, mu) = 2 [h(y) - y theta(mu) + b(theta(mu))].
 * Collapsed covariate patterns use it to recover the deviance within a
 * pattern from sums. */
double mr__family_saturated_term(mr_family f, double y);

/* One row's data-only log-likelihood term (family/loglik.c): outcome y (a
 * proportion for binomial), weight w and trials t as read.  The first pass
 * sums it; see accum/scan.h. */
double mr__loglik_constant(mr_family family, double y, double w, double t, int has_trials);

/* How many rows have an eta or a mu outside the link's or the family's
 * range (the array form of the two checks above). */
size_t mr__count_invalid_n(mr_family f, mr_link l, const double *eta, const double *mu, size_t n);

/* Array versions for the hot path: mu[i] = g^-1(eta[i]),
 * mu_eta[i] = dmu/deta(eta[i]); var[i] = V(mu[i]); dev[i] = d(y[i], mu[i]). */
void mr__link_inv_n(mr_link l, const double *eta, size_t n, double *mu, double *mu_eta);
void mr__family_variance_n(mr_family f, const double *mu, size_t n, double *var);
void mr__family_unit_deviance_n(mr_family f, const double *y, const double *mu, size_t n, double *dev);

#endif
