/* settle.c - what the first pass learned, made into the fit's factors,
 * centring and design (or the error that there is nothing to fit). */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "fit/run.h"
#include "model/design.h"
static mr_status no_usable_rows(mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    char detail[600] = "";
    size_t c, o = 0;
    for (c = 0; c < r->bind.ncol && o < sizeof detail - 80; c++)
        if (s->missing[c])
            o += (size_t)snprintf(detail + o, sizeof detail - o, "%s'%s' missing in %llu", o ? ", " : "",
                                  r->bind.col[c].name, (unsigned long long)s->missing[c]);
    if (s->nbad) snprintf(detail + o, sizeof detail - o, "%s%llu bad rows", o ? ", " : "", (unsigned long long)s->nbad);
    return mr__fail(err, MR_ERR_NO_DATA, "%s: no usable rows: all %llu data rows were left out (%s)", r->display,
                    (unsigned long long)s->nread, detail);
}

/* Rows of prior weight 0 are read and checked but carry nothing: with no
 * other row there is no fit (rank 0, a null deviance on -1 df). */
static mr_status no_weighted_rows(mr__run *r, mr__error *err)
{
    const mr__spec *s = &r->f->spec;
    char what[300];
    if (s->weight && s->trials) snprintf(what, sizeof what, "weight '%s' times trials '%s'", s->weight, s->trials);
    else snprintf(what, sizeof what, "%s '%s'", s->weight ? "weight" : "trials", s->weight ? s->weight : s->trials);
    return mr__fail(err, MR_ERR_NO_DATA, "%s: no usable rows: the prior weight (%s) is 0 in all %llu complete rows",
                    r->display, what, (unsigned long long)r->first.scan.nused);
}

static mr_status settle_factor(mr__run *r, size_t f, mr__error *err)
{
    const mr__levelset **sets = mr__calloc(r->first.nworkers ? r->first.nworkers : 1, sizeof *sets);
    const mr__covariate *cov;
    mr__factor *fac = &r->fac[f];
    size_t w, i;
    int rc;
    if (sets == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (w = 0; w < r->first.nworkers; w++) sets[w] = &r->first.worker_levels[w][f];
    rc = mr__levelset_merge_sorted(sets, r->first.nworkers, &r->levels[f], &r->level_names[f]);
    mr__free(sets);
    if (rc != 0) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    fac->name = r->bind.col[r->bind.fac_col[f]].name;
    fac->level = r->level_names[f];
    fac->nlevels = r->levels[f].n;
    fac->ref = 0;
    cov = mr__spec_find(&r->f->spec, fac->name);
    if (cov == NULL || cov->ref == NULL) return MR_OK;
    for (i = 0; i < fac->nlevels; i++)
        if (strcmp(fac->level[i], cov->ref) == 0) {
            fac->ref = (int32_t)i;
            return MR_OK;
        }
    return mr__fail(err, MR_ERR_USAGE, "model: reference level '%s' of factor '%s' does not occur in the data%s",
                    cov->ref, fac->name, fac->nlevels ? "" : " (the factor has no levels)");
}

mr_status mr__settle_scan(mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    size_t f, k, nfac = r->bind.nfac, nnum = r->bind.nnum;
    if (s->nread == 0) return mr__fail(err, MR_ERR_NO_DATA, "%s: the file has a header but no data rows", r->display);
    if (s->nused == 0) return no_usable_rows(r, err);
    if (s->npos == 0) return no_weighted_rows(r, err);
    r->levels = mr__calloc(nfac + 1, sizeof *r->levels);
    r->level_names = mr__calloc(nfac + 1, sizeof *r->level_names);
    r->fac = mr__calloc(nfac + 1, sizeof *r->fac);
    r->mean = mr__calloc(nnum + 1, sizeof *r->mean);
    r->spread = mr__calloc(nnum + 1, sizeof *r->spread);
    if (!r->levels || !r->level_names || !r->fac || !r->mean || !r->spread)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (f = 0; f < nfac; f++) MR__TRY(settle_factor(r, f, err));
    for (k = 0; k < nnum; k++) {
        r->mean[k] = s->sx[k] / (double)s->nused;
        r->spread[k] = mr__scan_spread(s, k);
    }
    r->dcfg.levels = r->levels;
    return mr__design_build(&r->design, &r->f->spec, &r->bind, r->fac, r->mean, r->spread,
                            s->counts_failed ? NULL : s->counts, err);
}
