#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "fit/many.h"
#include "solve/absorb.h"

mr_status mr__fit_alloc_many(mr_fit *fit, size_t n)
{
    fit->many_given = 1;
    fit->nmany = n;
    fit->many_level = mr__calloc(n + 1, sizeof *fit->many_level);
    fit->many_beta = mr__malloc_array(n + 1, sizeof *fit->many_beta);
    fit->many_se = mr__malloc_array(n + 1, sizeof *fit->many_se);
    fit->many_info = mr__malloc_array(n + 1, sizeof *fit->many_info);
    if (!fit->many_level || !fit->many_beta || !fit->many_se || !fit->many_info)
        return MR_ERR_NO_MEMORY;
    return MR_OK;
}

void mr__fit_free_many(mr_fit *fit)
{
    mr__free(fit->many_factor);
    mr__free(fit->many_reference);
    mr__strings_free(fit->many_level, fit->nmany);
    mr__free(fit->many_beta);
    mr__free(fit->many_se);
    mr__free(fit->many_info);
    mr__free(fit->many_mean_start);
    mr__free(fit->many_mean_col);
    mr__free(fit->many_mean_val);
    fit->many_mean_start = fit->many_mean_col = NULL;
    fit->many_mean_val = NULL;
    fit->many_factor = fit->many_reference = NULL;
    fit->many_level = NULL;
    fit->many_beta = fit->many_se = fit->many_info = NULL;
    fit->nmany = 0;
    fit->many_given = 0;
}

/* The factor's name, reference and level names (the levels other than
 * the reference, in level order: the absorbed numbering). */
static mr_status copy_levels(mr_fit *fit, const mr__design *d, mr__error *err)
{
    const mr__factor *f = &d->fac[d->absorb_var];
    size_t l, k = 0;
    fit->many_factor = mr__strdup(f->name);
    fit->many_reference = mr__strdup(f->level[f->ref]);
    if (!fit->many_factor || !fit->many_reference || mr__fit_alloc_many(fit, d->nabsorb) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (l = 0; l < f->nlevels; l++) {
        if ((int32_t)l == f->ref) continue;
        if ((fit->many_level[k++] = mr__strdup(f->level[l])) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

mr_status mr__fit_grow_many_means(mr_fit *fit, size_t *room)
{
    size_t col_cap = *room, val_cap = *room;
    if (mr__reserve((void **)&fit->many_mean_col, &col_cap, *room + 1, sizeof *fit->many_mean_col) != MR_OK ||
        mr__reserve((void **)&fit->many_mean_val, &val_cap, *room + 1, sizeof *fit->many_mean_val) != MR_OK)
        return MR_ERR_NO_MEMORY;
    *room = col_cap < val_cap ? col_cap : val_cap;
    return MR_OK;
}

/* Raw means come from internal ones by one forward substitution, A being
 * upper triangular (run.h, mr__raw_map): each column's last entry is its
 * diagonal's. */
static mr_status check_upper(const mr__raw_map *a, size_t p, mr__error *err)
{
    size_t k;
    for (k = 0; k < p; k++)
        if (a->start[k + 1] == a->start[k] || a->row[a->start[k + 1] - 1] != k)
            return mr__fail(err, MR_ERR_INTERNAL, "the map to raw columns is not upper triangular");
    return MR_OK;
}

/* One level's weighted means of the raw columns into m[0..p) from its
 * internal sums c (p) and weight w: A' m = c / w. */
static void raw_means(const mr__raw_map *a, size_t p, const double *c, double w, double *m)
{
    size_t k, e;
    for (k = 0; k < p; k++) {
        size_t diagonal = a->start[k + 1] - 1;
        double v = c[k] / w;
        for (e = a->start[k]; e < diagonal; e++) v -= a->value[e] * m[a->row[e]];
        m[k] = v / a->value[diagonal];
    }
}

/* Every level's nonzero means in column order (fit.h, many_mean_*). */
static mr_status level_means(mr_fit *fit, const mr__design *d, const mr__block_sums *t, mr__error *err)
{
    size_t p = d->p, k, j, n = 0, room = 0;
    mr__raw_map a = {NULL, NULL, NULL};
    double *m = mr__malloc_array(p + 1, sizeof *m);
    mr_status st = m ? mr__raw_map_from(d->A, p, &a, err) : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) st = check_upper(&a, p, err);
    if (st == MR_OK && (fit->many_mean_start = mr__malloc_array(d->nabsorb + 1, sizeof(size_t))) == NULL)
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; st == MR_OK && k < d->nabsorb; k++) {
        const double *row = t->lev + k * MR__ABSORB_WIDTH(p);
        fit->many_mean_start[k] = n;
        if (!(row[0] > 0) || !isfinite(row[0])) continue; /* an empty level: no rows, no means */
        raw_means(&a, p, row + 2, row[0], m);
        for (j = 0; st == MR_OK && j < p; j++) {
            if (m[j] == 0) continue;
            if (n == room && mr__fit_grow_many_means(fit, &room) != MR_OK) {
                st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
                break;
            }
            fit->many_mean_col[n] = j;
            fit->many_mean_val[n++] = m[j];
        }
    }
    if (st == MR_OK) fit->many_mean_start[d->nabsorb] = n;
    mr__raw_map_release(&a);
    mr__free(m);
    return st;
}

mr_status mr__many_solve(mr_fit *fit, const mr__run *r, double *cov_s, mr__error *err)
{
    const mr__design *d = &r->design;
    const mr__block_sums *t = &r->last.sums;
    mr__absorb_sums a = {t->nlev, d->p, t->lev, t->xtwx, t->xtwz, mr__sums_reference_row(t, d->p), r->nthreads};
    mr__absorb_solution sol;
    size_t k;
    mr_status st = copy_levels(fit, d, err);
    if (st != MR_OK) return st;
    if (t->lev == NULL || t->nlev != d->nabsorb)
        return mr__fail(err, MR_ERR_NUMERIC, "the last pass has no sums for the factor '%s'", fit->many_factor);
    st = mr__absorb_solve(&a, MR__ABSORB_COV, &sol, err);
    if (st == MR_OK) {
        memcpy(cov_s, sol.cov_rest, d->p * d->p * sizeof *cov_s);
        memcpy(fit->aliased, sol.aliased, d->p * sizeof *fit->aliased);
        fit->rank = sol.rank + d->nabsorb - sol.nempty;
        for (k = 0; k < d->nabsorb; k++) {
            fit->many_beta[k] = sol.empty[k] ? NAN : r->beta_final[d->p + k];
            fit->many_se[k] = sol.var_lev[k];
            fit->many_info[k] = t->lev[k * MR__ABSORB_WIDTH(d->p)];
        }
    }
    mr__absorb_solution_release(&sol);
    return st == MR_OK && r->f->many_means ? level_means(fit, d, t, err) : st;
}

void mr__many_scale(mr_fit *fit)
{
    size_t k;
    for (k = 0; k < fit->nmany; k++) fit->many_se[k] = sqrt(fit->many_se[k] * fit->dispersion);
}

const char *mr_fit_many_factor(const mr_fit *fit) { return fit->many_given ? fit->many_factor : NULL; }

size_t mr_fit_many_nlevels(const mr_fit *fit) { return fit->nmany; }

const char *mr_fit_many_level(const mr_fit *fit, size_t k, double *estimate, double *std_error, double *information)
{
    if (k >= fit->nmany) return NULL;
    if (estimate) *estimate = fit->many_beta[k];
    if (std_error) *std_error = fit->many_se[k];
    if (information) *information = fit->many_info[k];
    return fit->many_level[k];
}
