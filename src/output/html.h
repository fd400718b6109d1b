/* html.h - what the page's files share (html.c writes the page,
 * html_fit.c each fit's tables, html_plots.c the rows of its plots, svg.c draws them). */
#ifndef MR_HTML_H
#define MR_HTML_H

#include <stddef.h>

#include "common/error.h"
#include "common/strbuf.h"
#include "fit/fit.h"

typedef struct mr__html_page {
    const mr_fit *const *fit;
    const char *const *source; /* each fit's file, or NULL */
    size_t nfits;
    char **at_name;            /* numeric covariates' values for the effect plots */
    double *at_value;
    size_t nat;
    int digits;
    const char *groups_path;   /* a scoring run's group table (JSON), or NULL */
    mr__strbuf funnel;         /* its section, built before the page */
} mr__html_page;

/* Fit k's section: its tables, then its plots (html_fit.c); "Fit K:
 * FILE", the name the page gives fit k; an AIC or BIC as the page writes
 * it (buf: 32 bytes), or what a fit without one has instead. */
void mr__html_fit_section(mr__strbuf *b, const mr__html_page *pg, size_t k);
void mr__html_fit_name(mr__strbuf *b, const mr__html_page *pg, size_t k);
const char *mr__html_criterion(char buf[32], const mr_fit *f, double v);

/* The plots of fit k: ratios (or coefficients) by term; fitted values
 * across the levels of each factor. */
void mr__html_forest(mr__strbuf *b, const mr__html_page *pg, size_t k);
void mr__html_effects(mr__strbuf *b, const mr__html_page *pg, size_t k);
/* Each later fit's coefficients against the first fit's. */
void mr__html_changes(mr__strbuf *b, const mr__html_page *pg);

/* A fit's calibration groups as plain arrays of n each (value holds
 * them all): the rows, the total weight, the range of the fitted mean,
 * the observed and expected totals of each group. */
typedef struct mr__html_calibration_data {
    char *basis; /* how the groups were formed, in words */
    size_t n;
    double *rows, *weight, *mean_low, *mean_high, *observed, *expected;
    double *value;
} mr__html_calibration_data;

/* The calibration plot of fit k from c (html_calibration.c). */
void mr__html_calibration_plot(mr__strbuf *b, const mr__html_page *pg, size_t k, const mr__html_calibration_data *c);
/* The calibration section of fit k when its data are at hand: 1, else 0
 * (nothing written). */
int mr__html_calibration(mr__strbuf *b, const mr__html_page *pg, size_t k);
void mr__html_calibration_release(mr__html_calibration_data *c);

/* The section of a scoring run's group table at `path`: a funnel plot
 * of O/E against the expected count (html_funnel.c).  MR_ERR_IO or
 * MR_ERR_FORMAT when the file cannot be read as one. */
mr_status mr__html_funnel(mr__strbuf *b, const char *path, int digits, mr__error *err);
/* min{k : P(X <= k) >= p} for X ~ Poisson(e), e > 0 (0 otherwise). */
double mr__poisson_quantile(double p, double e);

/* Shared by the plots (html_plots.c): a numeric covariate's value (--at,
 * else its mean when the fit records it, else 0); eta = x'beta and its
 * standard error (NaN when x uses an aliased column); the inverse link;
 * the scale and axis label of fitted values (a rate per a power of ten
 * of the exposure, a probability in %, a mean) for a typical value m0;
 * the held covariates in words (all but factor fi and numeric skip). */
double mr__html_numeric_value(const mr__html_page *pg, const mr_fit *f, const char *name);
void mr__html_linear_predictor(const mr_fit *f, const double *x, double *eta, double *se);
double mr__html_inverse_link(const mr_fit *f, double eta);
double mr__html_effect_scale(const mr_fit *f, double m0, mr__strbuf *axis);
void mr__html_held_at(const mr__html_page *pg, const mr_fit *f, long fi, const char *skip, mr__strbuf *d);
/* A profile: factor `factor` (-1: none) at level `level`, the other
 * factors at their references; numeric `var` (NULL: none) at `value`, the
 * others held (mr__html_numeric_value); spline bases by term. */
struct mr__spline;
typedef struct mr__html_profile {
    const mr__html_page *pg;
    const mr_fit *fit;
    long factor;
    size_t level;
    const char *var;
    double value;
    const struct mr__spline *spline;
} mr__html_profile;
/* Its design row x (p entries; scratch: p more). */
void mr__html_design_row(const mr__html_profile *p, double *x, double *scratch);
/* The basis of each spline term, indexed by term (free with mr__free);
 * NULL when out of memory or knots that make none. */
struct mr__spline *mr__html_splines(const mr_fit *f);
/* Fitted values along each numeric and spline column (html_curves.c). */
void mr__html_curves(mr__strbuf *b, const mr__html_page *pg, size_t k);

/* The two-sided quantile of the fit's intervals: Student's t on the
 * residual df when the dispersion is estimated, else the normal. */
double mr__html_quantile(const mr_fit *f);

#endif
