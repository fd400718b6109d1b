/* drift.h - the struct behind mr_drift: two fits of one model compared
 * (drift.c), said as text (drift_report.c) and written as JSON and CSV
 * (drift_write.c). */
#ifndef MR_DRIFT_H
#define MR_DRIFT_H

#include <stddef.h>
#include <stdint.h>

#include "fit/fit.h"

/* Where a coefficient is. */
typedef enum mr__drift_kind {
    MR__DRIFT_BOTH,     /* estimated in both fits */
    MR__DRIFT_NEW,      /* only in the new fit */
    MR__DRIFT_VANISHED, /* only in the old fit */
    MR__DRIFT_ALIASED   /* in both, aliased in one or both: no estimate to compare */
} mr__drift_kind;

typedef struct mr__drift_coef {
    const char *name; /* the fits' own */
    mr__drift_kind kind;
    double old_est, new_est, change, old_se, new_se;
    double se;      /* the one the change is measured in: the larger of the two */
    double z;       /* change / se */
    double z_indep; /* change / sqrt(old_se^2 + new_se^2), as if the samples were independent */
    int flagged;
} mr__drift_coef;

/* A factor level in one fit and not in the other. */
typedef struct mr__drift_level {
    const char *factor, *level;
    int added; /* 1: only in the new fit; 0: only in the old */
} mr__drift_level;

/* A count of rows in each fit: by name ("read", "left_out", a column). */
typedef struct mr__drift_count {
    const char *name;
    uint64_t old_n, new_n;
} mr__drift_count;

struct mr_drift {
    const mr_fit *old_fit, *new_fit; /* borrowed */
    double threshold;
    mr__drift_coef *coef;
    size_t ncoef;
    mr__drift_level *level;
    size_t nlevels;
    mr__drift_count *rows;    /* read, used, left out, ... */
    size_t nrows;
    mr__drift_count *missing; /* rows left out for a missing value, per column */
    size_t nmissing;
    size_t nflagged_coef;
};

/* "the larger of the two standard errors": how the report names the rule. */
#define MR__DRIFT_SE_RULE "larger of the two fits' standard errors"

/* Whether the input changed at all: its checksum or its sizes differ. */
int mr__drift_input_changed(const mr_drift *d);
/* Deviance per row used. */
double mr__drift_deviance_per_row(const mr_fit *f);

#endif
