/* spec_many.c - the checks on a factor declared `many` (spec.h): its
 * levels leave the design's columns for the Schur complement of
 * solve/absorb.h, which takes one set of mutually exclusive indicator
 * columns beside an intercept. */
#include <string.h>

#include "model/spec.h"

long mr__spec_many(const mr__spec *s)
{
    size_t i;
    for (i = 0; i < s->ncov; i++)
        if (s->cov[i].role == MR__ROLE_FACTOR && s->cov[i].many) return (long)i;
    return -1;
}

mr_status mr__spec_validate_many(const mr__spec *s, mr__error *err)
{
    long m = mr__spec_many(s);
    const mr__covariate *c;
    size_t i;
    int k;
    if (m < 0) return MR_OK;
    c = &s->cov[m];
    for (i = (size_t)m + 1; i < s->ncov; i++)
        if (s->cov[i].role == MR__ROLE_FACTOR && s->cov[i].many)
            return mr__fail(err, MR_ERR_USAGE, "%s: only one factor can be 'many' ('%s' is already)",
                            s->cov[i].origin ? s->cov[i].origin : "model", c->name);
    if (!s->intercept)
        return mr__fail(err, MR_ERR_USAGE, "%s: a 'many' factor needs the intercept (its levels are coded "
                        "against the reference level)", c->origin ? c->origin : "model");
    for (i = 0; i < s->ninter; i++)
        for (k = 0; k < s->inter[i].n; k++)
            if (strcmp(s->inter[i].name[k], c->name) == 0)
                return mr__fail(err, MR_ERR_USAGE, "%s: the 'many' factor '%s' cannot be in an interaction",
                                s->inter[i].origin ? s->inter[i].origin : "model", c->name);
    return MR_OK;
}
