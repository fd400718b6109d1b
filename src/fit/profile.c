/* profile.c - a family's parameter chosen by profile likelihood (a Tweedie
 * power=profile): a fit for each value of the family's grid, all of them
 * from one read of the data (their first pass shared, fit/multi.h; each
 * then goes on over its own cache), the fit of the largest
 * log-likelihood the answer, carrying the grid's values and their
 * log-likelihoods; its AIC and BIC count the parameter. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/fitter.h"
#include "fit/multi.h"

/* Values a grid may have. */
#define MR__PROFILE_MAX 64

/* The chosen fit takes the profile; the parameter counts in AIC and BIC. */
static mr_status record_profile(mr_fit *best, const mr__family_ops *ops, const double *loglik, mr__error *err)
{
    size_t i, n = (size_t)ops->profile_n;
    best->profile = mr__malloc_array(n, sizeof *best->profile);
    if (best->profile == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < n; i++) {
        best->profile[i].value = ops->profile_grid[i];
        best->profile[i].loglik = loglik[i];
    }
    best->nprofile = n;
    best->family_param_profiled = 1;
    best->aic += 2;
    best->bic += log((double)best->n);
    return MR_OK;
}

/* The grid's fitters: f's settings, each with its own copy of the model
 * at its value, none checkpointed: the runs go side by side, and one path
 * cannot hold their states. */
static mr_status grid_fitters(mr_fitter *f, const mr__family_ops *ops, mr_fitter **g)
{
    int i;
    for (i = 0; i < ops->profile_n; i++) {
        if ((g[i] = mr__fitter_twin(f, &f->err)) == NULL) return f->err.status;
        g[i]->checkpoint = NULL;
        g[i]->spec.family_profile = 0;
        g[i]->spec.family_param = ops->profile_grid[i];
    }
    return MR_OK;
}

static void release_fitters(mr_fitter **g, int n)
{
    int i;
    for (i = 0; i < n; i++) mr__fitter_twin_free(g[i]);
}

/* *best the fit of the largest log-likelihood (a fit without one, NaN, is
 * never chosen), the others freed. */
static void choose(mr_fit **fits, int n, double *loglik, mr_fit **best)
{
    int i;
    for (i = 0; i < n; i++) {
        mr_fit *fit = fits[i];
        loglik[i] = fit->loglik;
        if (*best == NULL || (isnan((*best)->loglik) && !isnan(fit->loglik)) || fit->loglik > (*best)->loglik) {
            mr_fit_free(*best);
            *best = fit;
        } else {
            mr_fit_free(fit);
        }
        fits[i] = NULL;
    }
}

/* Every value fitted from one read of the data (fit/multi.h): each run's
 * own passes after it, the same bits as that value's fit alone. */
static mr_status fit_grid(mr_fitter *f, const char *path, const mr__family_ops *ops, double *loglik, mr_fit **best)
{
    mr_fitter *g[MR__PROFILE_MAX] = {NULL};
    mr_fit *fits[MR__PROFILE_MAX] = {NULL};
    size_t failed;
    mr_status st = grid_fitters(f, ops, g);
    if (st == MR_OK) {
        st = mr__fit_shared(g, (size_t)ops->profile_n, path, fits, &failed);
        if (st != MR_OK) f->err = g[failed < (size_t)ops->profile_n ? failed : 0]->err;
    }
    if (st == MR_OK) choose(fits, ops->profile_n, loglik, best);
    release_fitters(g, ops->profile_n);
    return st;
}

mr_status mr__fit_profile(mr_fitter *f, const char *path, mr_fit **out)
{
    const mr__family_ops *ops = mr__family_ops_of((mr_family)f->spec.family);
    double loglik[MR__PROFILE_MAX];
    mr_fit *best = NULL;
    mr_status st;
    if (ops == NULL || ops->profile_grid == NULL || ops->profile_n > MR__PROFILE_MAX)
        return mr__fail(&f->err, MR_ERR_INTERNAL, "no grid to profile the family's parameter over");
    if (f->checkpoint != NULL)
        snprintf(f->checkpoint_note, sizeof f->checkpoint_note,
                 "checkpoint %s: not written: the %s profile's fits run side by side from one read", f->checkpoint,
                 ops->param_name);
    st = fit_grid(f, path, ops, loglik, &best);
    if (st == MR_OK) st = record_profile(best, ops, loglik, &f->err);
    if (st != MR_OK) {
        mr_fit_free(best);
        return st;
    }
    *out = best;
    return MR_OK;
}
