/* start.h - a previous fit as the start of a new one (mr_fitter_set_start):
 * what of it the fitter keeps, the check that it is a fit of the same
 * model, and its coefficients moved onto the new design by name. */
#ifndef MR_START_H
#define MR_START_H

#include <stddef.h>
#include "common/error.h"
#include "millrace.h"
#include "model/design.h"
#include "model/spec.h"

typedef struct mr__start_term {
    size_t nparts;
    char *part[MR__MAX_INTERACT];
    int factor[MR__MAX_INTERACT]; /* the part was a factor */
} mr__start_term;

typedef struct mr__start {
    char *label; /* where it came from (a JSON path), for the report */
    char *outcome, *trials;
    int family, link, intercept;
    mr__start_term *term;
    size_t nterms;
    char **factor_name, **factor_ref;
    size_t nfactors;
    char **name;  /* its coefficients, raw scale; NaN when aliased */
    double *beta;
    size_t p;
} mr__start;

/* A copy of what `fit` holds that a start needs; NULL on no memory. */
mr__start *mr__start_copy(const mr_fit *fit, const char *label);
void mr__start_free(mr__start *s);

/* MR_ERR_USAGE, naming the difference, unless `s` fits the model `spec`
 * describes: the same outcome (and trials), family, link, intercept and
 * terms (their parts, in order, each a factor or numeric as before). */
mr_status mr__start_check(const mr__start *s, const mr__spec *spec, mr__error *err);

/* The start on the design's internal scale (p values in `internal`), and
 * how many of the design's coefficients came from `s` (*carried).  What
 * `s` cannot give (*guessed values: a new level's coefficient, an
 * interaction of a factor whose reference moved, the old coefficient of a
 * new reference level) comes from `fill`, internal coefficients of the
 * same design (a sample's fit), or is 0 when it is NULL. */
mr_status mr__start_map(const mr__start *s, const mr__design *d, const double *fill, double *internal,
                        size_t *carried, size_t *guessed, mr__error *err);

#endif
