/* fit.h - what a finished fit holds (the struct behind mr_fit). */
#ifndef MR_FIT_H
#define MR_FIT_H

#include <stddef.h>
#include <stdint.h>
#include "accum/calibration.h"
#include "millrace.h"
#include "model/spec.h"

typedef struct mr__fit_factor {
    char *name, *reference;
    char **level;
    size_t nlevels;
} mr__fit_factor;

/* A term as the design laid it out: its parts (column names, in the order
 * written; a part is a factor when a factor of that name is in the fit),
 * its coding and its coefficients first .. first + ncoef - 1.  Under
 * treatment coding a factor's levels other than the reference have a
 * column; under full coding (no intercept, first lone factor) every level
 * has.  Columns run over the factors' levels, the first factor slowest. */
typedef struct mr__fit_term {
    char *label;
    char *part[MR__MAX_INTERACT];
    size_t nparts;
    int full;
    /* A term with a spline part (at most one): that column, its interior
     * knots and its two boundary knots, all a scorer needs to rebuild the
     * basis (model/term_spline.h).  Its coefficients run over the basis
     * columns, slowest, then over the factors' levels. */
    int spline;
    char *spline_column;
    double *knots, *boundary;
    size_t nknots, nboundary;
    size_t first, ncoef;
    /* The joint Wald test of the term's estimated coefficients
     * (term_test.c): never read from the JSON but recomputed, so always
     * that of the coefficients and covariance at hand.  test_df is the
     * number of them (0: none, no test); chi2 = b' V^-1 b; stat is chi2,
     * or chi2 / test_df (F) when the dispersion is estimated; chi2, stat
     * and p are NaN without a test or when V is numerically singular. */
    size_t test_df;
    double test_chi2, test_stat, test_p;
} mr__fit_term;

typedef struct mr__fit_profile_point {
    double value, loglik;
} mr__fit_profile_point;

/* A numeric column over the rows used (the first pass's sums): its mean
 * and standard deviation (divisor n), least and greatest value. */
typedef struct mr__fit_numeric {
    char *name;
    double mean, sd, min, max;
} mr__fit_numeric;

struct mr_fit {
    mr_status status;
    /* coefficients, on the scale of the raw columns */
    size_t p, rank;
    char **name;
    int *aliased;
    int *inestimable; /* not estimable in practice: a zero cell, or its SE grew
                         at every pass (result.c, zero_cells.c) */
    double *beta, *se, *cov, *stat, *pval, *lo, *hi;
    /* model */
    int family, link, intercept, dispersion_estimated;
    /* the family's own parameter (theta, a power) where it has one
     * (family_param_given 1), else NaN */
    double family_param;
    int family_param_given;
    /* it was estimated (maximum likelihood), with this standard error
     * (from its observed information at the final means), else NaN */
    int family_param_estimated;
    double family_param_se;
    /* it was chosen by profile likelihood (fit/profile.c): each value of
     * the grid and the log-likelihood of its fit */
    int family_param_profiled;
    mr__fit_profile_point *profile;
    size_t nprofile;
    char *outcome, *trials, *offset, *exposure, *weight;
    mr__fit_term *term;
    size_t nterms;
    mr__fit_factor *factor;
    size_t nfactors;
    char **model_line, **model_origin; /* the model's lines as given (origin may be NULL) */
    size_t nmodel_lines;
    /* fit statistics */
    double dispersion, deviance, null_deviance, df_residual, df_null, pearson, loglik, aic, bic;
    /* data */
    uint64_t rows_read, rows_used, rows_bad, rows_incomplete, n, zero_weight;
    char **missing_name;
    uint64_t *missing_count;
    size_t nmissing;
    char **bad_example;
    size_t nbad_examples;
    /* convergence */
    int iterations, passes, halvings, converged, warm_start, warm_iterations, by_step;
    int warm_blocks, warm_polish_blocks; /* sample blocks the warm start used (0: none) */
    int start_given;       /* started from a previous fit (mr_fitter_set_start) */
    char *start_from;      /* its label; NULL when none */
    size_t start_carried, start_previous; /* coefficients taken from it; it had */
    size_t patterns; /* covariate patterns the rows collapsed into; 0 = not collapsed */
    double rel_change, seconds, rows_per_second;
    double *pass_seconds;
    size_t npass_seconds;
    /* input and options */
    char *version; /* of the library that made the fit */
    char *path;
    int file_known;        /* 0 for standard input */
    uint64_t file_size;    /* the file's identity when the first pass read it */
    int64_t file_mtime_ns; /* since the epoch */
    uint64_t bytes, decompressed_bytes, checksum;
    int compression; /* an mr__compression (input/codec.h) */
    /* a set of files (input/inputset.h): each one's identity; set_known 0
     * for a single input (then no "set" in the JSON) */
    int set_known;
    struct mr__fit_input_file *set_file;
    size_t nset_files;
    char delimiter;
    int delimiter_detected;
    int threads, max_passes, in_memory, skip_bad, cached;
    size_t buffer_size;
    double tolerance, level;
    /* the missing-value tokens the rows were read with ("" the empty
     * cell), so that scoring reads new rows as the fit read its own;
     * missing_known 0 for a fit read back from a JSON written before they
     * were kept (then the defaults, "" and "NA") */
    int missing_known;
    char **missing_token;
    size_t nmissing_tokens;
    char **warning;
    size_t nwarnings;
    /* the run's audit trail (fitter.c): 0 in run_known for a fit read back
     * from a JSON written before there was one */
    int run_known;
    char **command_line; /* the words given to mr_fitter_set_command_line */
    size_t ncommand_line;
    char *started, *ended, *host; /* ISO 8601 UTC; the machine's name */
    /* The factor declared `many` (model/design.h), NULL when none: its
     * levels other than the reference (nmany, in level order) are not in
     * the coefficients above, whose covariance leaves them out; each has
     * its estimate (the difference from the reference level, on the link
     * scale), standard error (NaN: no information) and information (the
     * sum of the IRLS weights of its rows, the last pass's). */
    int many_given; /* 1 when there is one (the JSON's "many_factor") */
    char *many_factor, *many_reference;
    size_t nmany;
    char **many_level;
    double *many_beta, *many_se, *many_info;
    /* Each level's rows' weighted means of the coefficients' columns (the
     * last pass's IRLS weights, raw scale), nonzero ones only: level k's
     * are many_mean_col / many_mean_val [many_mean_start[k] ..
     * many_mean_start[k + 1]), in column order.  A prediction's variance
     * in level k is then (x - m_k)' cov (x - m_k) + dispersion /
     * information_k (solve/absorb.h, cov(beta_R, beta_D,l)).  NULL for a
     * fit read from a JSON written before they were kept. */
    size_t *many_mean_start, *many_mean_col;
    double *many_mean_val;
    /* observed and expected by tenths of the fitted mean (calibrate.c);
     * 0 in calib_known for a fit read back from a JSON without them */
    int calib_known;
    char *calib_basis;
    mr__calib_group *calib;
    size_t ncalib;
    /* the numeric columns (numerics_known 0 for a fit read back from a
     * JSON written before they were saved) */
    int numerics_known;
    mr__fit_numeric *numeric;
    size_t nnumerics;
    /* robust standard errors (robust.c), when asked (robust 1): the type
     * ("HC0", "HC1"), the cluster column (NULL: by rows) and its clusters,
     * the small-sample factor applied, the standard errors (nrobust_se =
     * p) and the covariance (p x p), raw scale; they then drive stat,
     * pval, lo, hi and the term tests, while se and cov stay model-based. */
    int robust;
    char *robust_type, *cluster;
    uint64_t nclusters;
    double robust_adjustment;
    double *robust_se, *robust_cov;
    size_t nrobust_se;
    /* taken up from a checkpoint after pass resumed_from_pass (resumed 1) */
    int resumed, resumed_from_pass;
};

/* The `many` factor's arrays for n levels, names NULL (many.c); MR_OK or
 * MR_ERR_NO_MEMORY. */
mr_status mr__fit_alloc_many(mr_fit *fit, size_t n);
void mr__fit_free_many(mr_fit *fit);
/* Room for more of its levels' means (many_mean_col and _val, *room
 * entries, grown to a larger *room); MR_OK or MR_ERR_NO_MEMORY. */
mr_status mr__fit_grow_many_means(mr_fit *fit, size_t *room);

/* One file of a set as the first pass read it. */
typedef struct mr__fit_input_file {
    char *path;
    uint64_t size;
    int64_t mtime_ns;
    uint64_t bytes, decompressed_bytes, checksum;
    int compression;
} mr__fit_input_file;

/* Numeric column `name`, or NULL (unknown or not a numeric). */
const mr__fit_numeric *mr__fit_find_numeric(const mr_fit *fit, const char *name);

/* The per-coefficient arrays for p coefficients, zeroed (the fit's p set). */
mr_status mr__fit_alloc_coefficients(mr_fit *fit, size_t p);
/* The index of the factor named `name`, or -1. */
long mr__fit_find_factor(const mr_fit *fit, const char *name);
/* Part k of term t: "factor", "spline" (the term's spline column) or
 * "numeric". */
const char *mr__fit_part_type(const mr_fit *fit, const mr__fit_term *t, size_t k);

/* Adds a warning (copied); silently drops it when out of memory. */
void mr__fit_warn(mr_fit *fit, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

/* Each term's joint Wald test from the fit's coefficients, covariance and
 * residual df (term_test.c).  MR_OK or MR_ERR_NO_MEMORY. */
mr_status mr__fit_term_tests(mr_fit *fit);

/* 1 when the fit estimates a dispersion its family fixes at 1 (poisson,
 * binomial, negative binomial with `dispersion estimate`): a quasi family,
 * fitted by its mean and variance alone, with no likelihood, so no
 * log-likelihood, AIC or BIC (they are NaN). */
int mr__fit_quasi(const mr_fit *fit);

/* "rate ratio", "odds ratio", ... for links where exp(estimate) is a
 * ratio; NULL otherwise. */
const char *mr__fit_ratio_label(const mr_fit *fit);
/* The name of the family's own parameter ("theta"), NULL where it has
 * none. */
const char *mr__fit_family_param_name(const mr_fit *fit);
/* " (NAME VALUE, how it was had)" for a family with a parameter of its
 * own: fixed, maximum likelihood with its standard error, or chosen by
 * profile likelihood over its grid; nothing for another family (the
 * report and the HTML page). */
struct mr__strbuf;
void mr__fit_family_param_text(const mr_fit *fit, struct mr__strbuf *b);
/* "z" when the dispersion is fixed, "t" when it is estimated. */
const char *mr__fit_statistic_name(const mr_fit *fit);

#endif
