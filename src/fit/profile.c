/* profile.c - a family's parameter chosen by profile likelihood (a Tweedie
 * power=profile): one whole fit for each value of the family's grid, one
 * after another, each reading the data as any fit does; the fit of the
 * largest log-likelihood is the answer, carrying the grid's values and
 * their log-likelihoods, and its AIC and BIC count the parameter.  Fitting
 * every value in one read is other work; this costs the grid's size in
 * fits. */
#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/fitter.h"

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

/* Fits at each value; *best the one of the largest log-likelihood (a fit
 * without one, NaN, is never chosen), the others freed. */
static mr_status fit_grid(mr_fitter *f, const char *path, const mr__family_ops *ops, double *loglik, mr_fit **best)
{
    int i;
    for (i = 0; i < ops->profile_n; i++) {
        mr_fit *fit = NULL;
        f->spec.family_param = ops->profile_grid[i];
        MR__TRY(mr__fit_file(f, path, &fit));
        loglik[i] = fit->loglik;
        if (*best == NULL || (isnan((*best)->loglik) && !isnan(fit->loglik)) || fit->loglik > (*best)->loglik) {
            mr_fit_free(*best);
            *best = fit;
        } else {
            mr_fit_free(fit);
        }
    }
    return MR_OK;
}

mr_status mr__fit_profile(mr_fitter *f, const char *path, mr_fit **out)
{
    const mr__family_ops *ops = mr__family_ops_of((mr_family)f->spec.family);
    double loglik[64];
    mr_fit *best = NULL;
    mr_status st;
    int keep;
    if (ops == NULL || ops->profile_grid == NULL || ops->profile_n > 64)
        return mr__fail(&f->err, MR_ERR_INTERNAL, "no grid to profile the family's parameter over");
    if (strcmp(path, "-") == 0)
        return mr__fail(&f->err, MR_ERR_USAGE,
                        "<stdin>: %s=profile fits the data once for each %s, so it needs a file to read again, not "
                        "standard input",
                        ops->param_name, ops->param_name);
    f->spec.family_profile = 0;
    /* each value's fit has a checkpoint of its own, which the next value's
     * could not take up: it goes as that fit ends, kept or not */
    keep = f->checkpoint_keep;
    f->checkpoint_keep = 0;
    st = fit_grid(f, path, ops, loglik, &best);
    f->checkpoint_keep = keep;
    f->spec.family_profile = 1;
    f->spec.family_param = NAN;
    if (st == MR_OK) st = record_profile(best, ops, loglik, &f->err);
    if (st != MR_OK) {
        mr_fit_free(best);
        return st;
    }
    *out = best;
    return MR_OK;
}
