/* score.h - a fitted model applied to the rows of a file, as a pass job
 * (job_score.c): each row's design row from the model's terms and levels,
 * its linear predictor, standard error, fitted mean and interval and,
 * when the outcome is there, residuals; one CSV line per data row, written
 * by the job's add in input order.
 *
 * The model comes on the scale of the raw columns (the fit's published
 * coefficients and covariance), so a design row here is plain: 1, the
 * numeric values, factor indicators, their products.  Aliased
 * coefficients come as 0 in beta and cov.  Who builds the configuration
 * (fit/scorer.c) binds the names to fields at the header, before the
 * engine's start. */
#ifndef MR_SCORE_H
#define MR_SCORE_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"
#include "common/levels.h"
#include "model/spec.h"

typedef struct mr__score_term {
    int nparts;
    int is_factor[MR__MAX_INTERACT];
    size_t var[MR__MAX_INTERACT];    /* index into fac or num */
    size_t stride[MR__MAX_INTERACT]; /* factor parts: columns per level code */
    int full;                        /* every level has a column */
    size_t first;                    /* its first coefficient */
    int many;                        /* the `many` factor's: no columns (many_beta) */
} mr__score_term;

typedef struct mr__score_factor {
    const char *name;
    mr__levelset levels; /* ids are the fit's level numbers */
    int32_t ref;
    size_t field;
} mr__score_factor;

typedef struct mr__score_numeric {
    const char *name;
    size_t field;
} mr__score_numeric;

/* A role column's field, or -1 when the model has none or the file lacks it. */
enum { MR__SCORE_OUTCOME, MR__SCORE_TRIALS, MR__SCORE_WEIGHT, MR__SCORE_OFFSET, MR__SCORE_EXPOSURE, MR__SCORE_ROLES };

/* Where the job's lines go, in input order, from the calling thread. */
typedef mr_status (*mr__score_write_fn)(void *user, const char *p, size_t n, mr__error *err);

typedef struct mr__score_cfg {
    size_t p;
    const double *beta, *cov; /* p and p x p; aliased entries 0 */
    /* A factor declared `many`: fac[many_var] (-1: none), each of its
     * levels' estimate (the reference's 0; NaN: none in the fit).  A row
     * of level l other than the reference has the variance
     * (x - m_l)' V (x - m_l) + many_own_var[l]: m_l the level's weighted
     * means of the columns, its entries many_mean_col / many_mean_val
     * [many_mean_span[2 l] .. many_mean_span[2 l + 1]), and the own
     * variance dispersion / information (fit.h, many_mean_*).  NaN there:
     * no standard error (a fit written before it kept the means). */
    long many_var;
    int32_t many_ref;
    double *many_beta, *many_own_var;
    const size_t *many_mean_col;
    const double *many_mean_val;
    size_t *many_mean_span;
    int intercept;
    mr__family family;         /* as fitted, with its parameter */
    const mr__link_ops *link;
    mr__score_term *term;
    size_t nterms;
    mr__score_factor *fac;
    size_t nfac;
    mr__score_numeric *num;
    size_t nnum;
    const char *role_name[MR__SCORE_ROLES]; /* NULL: not in the model */
    long role_field[MR__SCORE_ROLES];
    size_t nkeep;
    size_t *keep_field;
    const char *const *keep_name; /* columns passed through, as named */
    size_t nfields;  /* of the header */
    char delim;
    /* the tokens that mean a missing cell, the fit's ("" the empty cell) */
    const char *const *missing_token;
    size_t nmissing_tokens;
    const char *display;
    double z;        /* normal quantile of the interval */
    unsigned columns; /* bit k: computed column k asked for; 0: every one */
    int blank_unscorable; /* 1: an unseen level or missing value writes empty predictions */
    mr__score_write_fn write;
    void *write_user;
    /* Observed and expected by group (nby > 0): the groups met, in order
     * of first appearance, their key cells as one string each (each cell
     * as its 4-byte little-endian length and bytes), and their totals,
     * added on the calling thread in input order. */
    size_t nby;
    size_t *by_field;
    mr__levelset groups; /* its limit: the most groups held */
    double *g_obs, *g_exp, *g_expo;
    double *g_prior; /* sum of prior weights (weight x trials: a binomial's trials) */
    uint64_t *g_rows;
    size_t g_cap;
    /* counts, by the job's add */
    uint64_t rows, scored, unseen, missing;
} mr__score_cfg;

/* The computed columns, in output order: eta, se_eta, mean, mean_low,
 * mean_high, then the residuals (resid_response, resid_pearson,
 * resid_deviance) when the outcome is bound. */
enum {
    MR__SCORE_ETA = 0,
    MR__SCORE_SE_ETA = 1,
    MR__SCORE_MEAN = 2,
    MR__SCORE_MEAN_LOW = 3,
    MR__SCORE_MEAN_HIGH = 4,
    MR__SCORE_FIRST_RESIDUAL = 5,
    MR__SCORE_NCOLUMNS = 8
};
const char *mr__score_column_name(int k);
/* Column k's number by its name, or -1. */
int mr__score_column_index(const char *name);
/* Whether column k is written (the outcome bound for a residual, and
 * among those asked for when any were). */
int mr__score_column_written(const mr__score_cfg *c, int k);

#endif
