/* fit.h - what a finished fit holds (the struct behind mr_fit). */
#ifndef MR_FIT_H
#define MR_FIT_H

#include <stddef.h>
#include <stdint.h>
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
    size_t first, ncoef;
} mr__fit_term;

struct mr_fit {
    mr_status status;
    /* coefficients, on the scale of the raw columns */
    size_t p, rank;
    char **name;
    int *aliased;
    double *beta, *se, *cov, *stat, *pval, *lo, *hi;
    /* model */
    int family, link, intercept, dispersion_estimated;
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
    int iterations, passes, halvings, converged, warm_start, warm_iterations, by_decrement;
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
    int zstd;
    char delimiter;
    int delimiter_detected;
    int threads, max_passes, in_memory, skip_bad, cached;
    size_t buffer_size;
    double tolerance, level;
    char **warning;
    size_t nwarnings;
};

/* The per-coefficient arrays for p coefficients, zeroed (the fit's p set). */
mr_status mr__fit_alloc_coefficients(mr_fit *fit, size_t p);
/* The index of the factor named `name`, or -1. */
long mr__fit_find_factor(const mr_fit *fit, const char *name);

/* Adds a warning (copied); silently drops it when out of memory. */
void mr__fit_warn(mr_fit *fit, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

/* "rate ratio", "odds ratio", ... for links where exp(estimate) is a
 * ratio; NULL otherwise. */
const char *mr__fit_ratio_label(const mr_fit *fit);
/* "z" when the dispersion is fixed, "t" when it is estimated. */
const char *mr__fit_statistic_name(const mr_fit *fit);

#endif
