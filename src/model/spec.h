/* spec.h - a model as the analyst wrote it: directives from the model file
 * and the command line, before any data is seen.  Column names are checked
 * against the file header later (see columns.h). */
#ifndef MR_SPEC_H
#define MR_SPEC_H

#include <stddef.h>
#include "common/error.h"
#include "family/family.h"

#define MR__MAX_INTERACT 3
/* Interior knots of one spline at most (df= up to this plus one). */
#define MR__SPLINE_MAX_KNOTS 40

/* A spline is a numeric column entered through a natural cubic spline
 * basis (model/term_spline.h). */
typedef enum mr__role { MR__ROLE_NUMERIC = 1, MR__ROLE_FACTOR = 2, MR__ROLE_SPLINE = 3 } mr__role;

/* `spline COL df=N [boundary=LO,HI]` or `spline COL knots=K1,K2,...
 * [boundary=LO,HI]`: df 0 when the knots are given.  Without boundary=
 * the boundary knots are the column's minimum and maximum. */
typedef struct mr__spline_spec {
    int df;
    double *knots;
    size_t nknots;
    int has_boundary;
    double boundary[2];
} mr__spline_spec;

typedef struct mr__covariate {
    char *name;
    mr__role role;
    char *ref; /* reference level of a factor, NULL = first in sorted order */
    mr__spline_spec spline; /* MR__ROLE_SPLINE only */
    char *origin; /* the line that last declared it ("falls.model:3"), for messages */
} mr__covariate;

typedef struct mr__interaction {
    int n;
    char *name[MR__MAX_INTERACT];
    char *origin; /* the line that asked for it, for messages */
} mr__interaction;

typedef struct mr__spec {
    char *outcome, *trials, *offset, *exposure, *weight;
    int family;     /* mr_family */
    double family_param; /* the family's own parameter (NAN: none given) */
    int family_estimate; /* it is estimated (family_param NAN) */
    int family_profile;  /* it is chosen by profile likelihood (family_param NAN) */
    int link;       /* mr_link, or -1 for the family's canonical link */
    int intercept;  /* 1 unless "intercept no" */
    int dispersion; /* -1 = family default, 0 = fixed at 1, 1 = estimate */
    mr__covariate *cov;
    size_t ncov, capcov;
    mr__interaction *inter;
    size_t ninter, capinter;
    /* Every line applied, in order and as given (without its line end),
     * with its origin (NULL if none): what a saved fit needs to rebuild
     * the model. */
    char **line, **line_origin;
    size_t nlines, caplines;
} mr__spec;

void mr__spec_init(mr__spec *s);
void mr__spec_release(mr__spec *s);

/* Applies one directive line (comments and blank lines are accepted and do
 * nothing).  `origin` prefixes error messages ("falls.model:3"). */
mr_status mr__spec_line(mr__spec *s, const char *line, const char *origin, mr__error *err);
mr_status mr__spec_file(mr__spec *s, const char *path, mr__error *err);

/* Checks the whole model once every line is in: an outcome, a supported
 * family/link pair, interactions naming declared covariates, and so on. */
mr_status mr__spec_validate(const mr__spec *s, mr__error *err);

/* The link in force (resolves -1 to the canonical link). */
int mr__spec_link(const mr__spec *s);
/* 1 if the dispersion is estimated (Pearson), 0 if fixed at 1. */
int mr__spec_dispersion_estimated(const mr__spec *s);
/* The family as fitted: its operations and parameter. */
mr__family mr__spec_family(const mr__spec *s);

const mr__covariate *mr__spec_find(const mr__spec *s, const char *name);

/* A copy of src made by replaying its lines (dst initialised here; on
 * failure released).  MR_OK, MR_ERR_USAGE, MR_ERR_NO_MEMORY. */
mr_status mr__spec_copy(mr__spec *dst, const mr__spec *src, mr__error *err);
/* Removes term t (covariates in order, then interactions; the order of
 * the design's terms); 0 when there is no term t.  The model's lines are
 * left as they were given. */
int mr__spec_drop_term(mr__spec *s, size_t t);

#endif
