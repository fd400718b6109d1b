/* result.c - from the final IRLS state to the published fit: the map back
 * from internal (centred, scaled) coefficients to those of the raw
 * columns, the dispersion, Wald statistics and intervals, likelihood-based
 * summaries and the warnings an analyst must see. */
#define _DEFAULT_SOURCE /* M_PI */
#include <float.h>
#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "common/clock.h"
#include "common/strbuf.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/irls.h"
#include "fit/many.h"
#include "fit/run.h"
#include "fit/start.h"
#include "common/probability.h"
#include "solve/normal_eq.h"

static char *dup_or_null(const char *s) { return s ? mr__strdup(s) : NULL; }

/* A's non-zeros, column by column: column k's are row[start[k] ..
 * start[k + 1]) with their values.  Centring makes A the identity plus a
 * few entries per column, so the map back costs p times those. */
typedef struct sparse_columns {
    size_t *start, *row;
    double *value;
} sparse_columns;

static void release_sparse(sparse_columns *a)
{
    mr__free(a->start);
    mr__free(a->row);
    mr__free(a->value);
}

static mr_status sparse_from(const double *A, size_t p, sparse_columns *a, mr__error *err)
{
    size_t i, k, n = 0;
    for (i = 0; i < p * p; i++) n += A[i] != 0;
    a->start = mr__malloc_array(p + 1, sizeof *a->start);
    a->row = mr__malloc_array(n + 1, sizeof *a->row);
    a->value = mr__malloc_array(n + 1, sizeof *a->value);
    if (!a->start || !a->row || !a->value) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0, n = 0; k < p; k++) {
        a->start[k] = n;
        for (i = 0; i < p; i++)
            if (A[k * p + i] != 0) {
                a->row[n] = i;
                a->value[n++] = A[k * p + i];
            }
    }
    a->start[p] = n;
    return MR_OK;
}

/* Row j of A over its largest entry a (returned), then the quadratic form
 * of that row with cov_internal: the variance of raw coefficient j is
 * a^2 times it.  For a column that spans 1e200 a is about 1e-198 and the
 * variance is below the range of a double, though its square root is
 * not. */
static double scaled_variance(const sparse_columns *a, const double *cov_s, size_t p, size_t j, double *u,
                              double *amax)
{
    size_t k, l, e;
    double q = 0;
    *amax = 0;
    memset(u, 0, p * sizeof *u);
    for (k = 0; k < p; k++)
        for (e = a->start[k]; e < a->start[k + 1]; e++)
            if (a->row[e] == j) {
                u[k] = a->value[e];
                *amax = fmax(*amax, fabs(u[k]));
            }
    if (!(*amax > 0)) return 0;
    for (k = 0; k < p; k++) u[k] /= *amax;
    for (l = 0; l < p; l++) {
        double s = 0;
        for (k = 0; k < p; k++) s += u[k] * cov_s[l * p + k];
        q += u[l] * s;
    }
    return q;
}

/* Where a variance underflowed (below DBL_MIN, digits lost), the standard
 * error without dispersion goes to se_small[j], computed apart; elsewhere
 * se_small[j] stays 0 and the standard error is the square root of the
 * covariance, as always. */
static void small_variances(const sparse_columns *a, const double *cov_s, const double *cov, size_t p, double *u,
                            double *se_small)
{
    size_t j;
    for (j = 0; j < p; j++) {
        double amax, q;
        if (!(cov[j * p + j] < DBL_MIN)) continue;
        q = scaled_variance(a, cov_s, p, j, u, &amax);
        if (q > 0) se_small[j] = amax * sqrt(q);
    }
}

/* cov_raw = A cov_internal A', beta_raw = A beta_internal, every sum in
 * increasing k.  Own loops rather than BLAS: OpenBLAS's dgemv and dgemm
 * take a 128 MiB buffer from an allocator that spins for ever when an
 * address-space limit refuses it. */
mr_status mr__map_to_raw(const mr__design *d, const double *beta_s, const double *cov_s, double *beta, double *cov,
                            double *se_small, mr__error *err)
{
    size_t p = d->p, i, j, k, e;
    double *T = mr__calloc(p * p + 1, sizeof *T);
    sparse_columns a = {NULL, NULL, NULL};
    mr_status st = T ? sparse_from(d->A, p, &a, err) : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) {
        memset(beta, 0, p * sizeof *beta);
        memset(cov, 0, p * p * sizeof *cov);
        for (k = 0; k < p; k++)
            for (e = a.start[k]; e < a.start[k + 1]; e++) beta[a.row[e]] += a.value[e] * beta_s[k];
        for (j = 0; j < p; j++) /* T = A cov_internal, column j */
            for (k = 0; k < p; k++)
                for (e = a.start[k]; e < a.start[k + 1]; e++) T[j * p + a.row[e]] += a.value[e] * cov_s[j * p + k];
        for (k = 0; k < p; k++) /* cov = T A': column j gains T's column k times A(j, k) */
            for (e = a.start[k]; e < a.start[k + 1]; e++)
                for (i = 0, j = a.row[e]; i < p; i++) cov[j * p + i] += T[k * p + i] * a.value[e];
        small_variances(&a, cov_s, cov, p, T, se_small);
    }
    release_sparse(&a);
    mr__free(T);
    return st;
}

/* The log-likelihood from the deviance and the data-only constant of the
 * first pass (see accum/scan.h); for gaussian, gamma and inverse-gaussian
 * the dispersion in the density is the deviance-based estimate, as is
 * usual for these summaries. */
/* A series density's log-likelihood (family.h, loglik_by_rows): the last
 * pass summed it at the dispersion of the point before, with its first two
 * derivatives in log(dispersion); a second-order Taylor step carries it to
 * the deviance-based dispersion of the last pass itself (their logs differ
 * by about the relative change of the deviance, so the step's error is
 * of the order of its cube).  NaN when the last pass summed none (a fit
 * stopped before its steps were small). */
static double series_loglik(const mr__run *r, double deviance)
{
    const double *fam = r->last.sums.fam;
    double sw = r->first.scan.sw, used = r->loglik_dispersion, step;
    if (isnan(used) || !(sw > 0) || !(deviance > 0)) return NAN;
    step = log(deviance / sw / used);
    return fam[MR__PS_LOGLIK] + step * (fam[MR__PS_SCORE] + 0.5 * step * fam[MR__PS_INFO]);
}

/* The log-likelihood: with the family's parameter estimated, the last
 * pass's own sum; for a series density, series_loglik; else from the
 * deviance.  An estimated parameter counts in AIC and BIC. */
static double fit_loglik(const mr_fit *fit, const mr__run *r, double *extra)
{
    const mr__scan_sums *s = &r->first.scan;
    *extra = r->family.estimate ? 1 : 0;
    if (r->family.estimate) return r->last.sums.fam[MR__PS_LOGLIK];
    if (r->family.ops->loglik_by_rows) return series_loglik(r, fit->deviance);
    return r->family.ops->loglik(&r->family, fit->deviance, s->llc, (double)fit->n, s->sw);
}

static void set_fit_statistics(mr_fit *fit, const mr__run *r)
{
    const mr__scan_sums *s = &r->first.scan;
    const mr__block_sums *last = &r->last.sums;
    double k, extra;
    fit->deviance = last->dev;
    fit->pearson = last->pearson;
    fit->null_deviance = last->null_dev;
    fit->n = s->npos;
    fit->df_residual = (double)fit->n - (double)fit->rank;
    fit->df_null = (double)fit->n - (r->f->spec.intercept ? 1 : 0);
    fit->dispersion = fit->dispersion_estimated ? (fit->df_residual > 0 ? fit->pearson / fit->df_residual : NAN) : 1.0;
    fit->loglik = fit_loglik(fit, r, &extra);
    k = (double)fit->rank + r->family.ops->dispersion_counts + extra;
    fit->aic = -2 * fit->loglik + 2 * k;
    fit->bic = -2 * fit->loglik + log((double)fit->n) * k;
    if (mr__fit_quasi(fit)) fit->loglik = fit->aic = fit->bic = NAN;
}

static void set_inference(mr_fit *fit)
{
    size_t j, p = fit->p;
    double tail = (1 - fit->level) / 2, q;
    int use_t = fit->dispersion_estimated && !fit->robust; /* robust: asymptotic, normal */
    q = use_t ? -mr__t_quantile(tail, fit->df_residual) : -mr__normal_quantile(tail);
    for (j = 0; j < p; j++) {
        double se, z;
        if (fit->aliased[j]) {
            if (fit->robust) fit->robust_se[j] = NAN;
            fit->beta[j] = fit->se[j] = fit->stat[j] = fit->pval[j] = fit->lo[j] = fit->hi[j] = NAN;
            continue;
        }
        /* a variance below the range of a double: computed apart */
        se = fit->se[j] > 0 ? fit->se[j] * sqrt(fit->dispersion) : sqrt(fit->cov[j * p + j]);
        z = fit->beta[j] / se;
        fit->se[j] = se;
        if (fit->robust) z = fit->beta[j] / (se = fit->robust_se[j]); /* they drive the tests when asked */
        fit->stat[j] = z;
        fit->pval[j] = use_t ? 2 * mr__t_sf(fabs(z), fit->df_residual) : 2 * mr__normal_sf(fabs(z));
        fit->lo[j] = fit->beta[j] - q * se;
        fit->hi[j] = fit->beta[j] + q * se;
    }
    for (j = 0; j < p * p; j++)
        if (fit->aliased[j % p] || fit->aliased[j / p]) {
            fit->cov[j] = NAN;
            if (fit->robust) fit->robust_cov[j] = NAN;
        }
}

/* Centring folds lower-order columns into higher ones; if a column that
 * turned out aliased was folded into a kept one, its raw coefficient is not
 * zero and the published table would misstate the fit. */
static void check_alias_folding(mr_fit *fit, const mr__design *d, const double *beta_s)
{
    size_t j, k, p = d->p;
    for (j = 0; j < p; j++) {
        double s = 0;
        if (!fit->aliased[j]) continue;
        for (k = 0; k < p; k++)
            if (k != j && !fit->aliased[k]) s += d->A[k * p + j] * beta_s[k];
        if (s != 0)
            mr__fit_warn(fit,
                         "aliased column '%s' is part of a centred interaction; refit with that interaction or "
                         "the collinear column removed before using the interaction's estimates",
                         fit->name[j]);
    }
}

static mr_status set_coefficients(mr_fit *fit, mr__run *r, mr__error *err)
{
    const mr__design *d = &r->design;
    size_t p = d->p, j;
    double *scratch = mr__malloc_array(p + 1, sizeof *scratch), *cov_s = mr__malloc_array(p * p + 1, sizeof *cov_s);
    mr_status st;
    if (scratch == NULL || cov_s == NULL) {
        mr__free(scratch);
        mr__free(cov_s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    if (d->nabsorb > 0) st = mr__many_solve(fit, r, cov_s, err);
    else st = mr__solve_normal(r->last.sums.xtwx, r->last.sums.xtwz, p, scratch, fit->aliased, &fit->rank, cov_s, err);
    if (st == MR_OK) st = mr__map_to_raw(d, r->beta_final, cov_s, fit->beta, fit->cov, fit->se, err);
    if (st == MR_OK) st = mr__robust_result(fit, r, err);
    mr__free(scratch);
    mr__free(cov_s);
    if (st != MR_OK) return st;
    for (j = 0; j < p; j++)
        if ((fit->name[j] = mr__strdup(d->name[j])) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    check_alias_folding(fit, d, r->beta_final);
    set_fit_statistics(fit, r);
    for (j = 0; j < p * p; j++) fit->cov[j] *= fit->dispersion;
    mr__many_scale(fit);
    set_inference(fit);
    return MR_OK;
}

static char *term_label(const mr__spec *s, size_t i)
{
    mr__strbuf sb;
    int k;
    mr__strbuf_init(&sb);
    if (i < s->ncov) {
        mr__strbuf_printf(&sb, "%s", s->cov[i].name);
    } else {
        const mr__interaction *it = &s->inter[i - s->ncov];
        for (k = 0; k < it->n; k++) mr__strbuf_printf(&sb, "%s%s", k ? " & " : "", it->name[k]);
    }
    return mr__strbuf_take(&sb);
}

/* The spline of a group's first design term, copied into t. */
static mr_status copy_spline(mr__fit_term *t, const mr__term *dt, const mr__spec *s, size_t g)
{
    int k, ni = 0, n = g < s->ncov ? 1 : s->inter[g - s->ncov].n;
    const mr__spline *sp = NULL;
    const char *column = NULL;
    for (k = 0; k < n; k++) {
        const char *name = g < s->ncov ? s->cov[g].name : s->inter[g - s->ncov].name[k];
        const mr__covariate *c = mr__spec_find(s, name);
        if (c->role == MR__ROLE_FACTOR) continue;
        if (dt->spline[ni] != NULL) sp = dt->spline[ni], column = name;
        ni++;
    }
    if (sp == NULL) return MR_OK;
    t->spline = 1;
    t->spline_column = mr__strdup(column);
    t->knots = mr__malloc_array(sp->nknots + 1, sizeof *t->knots);
    t->boundary = mr__malloc_array(2, sizeof *t->boundary);
    if (t->spline_column == NULL || t->knots == NULL || t->boundary == NULL) return MR_ERR_NO_MEMORY;
    memcpy(t->knots, sp->knots, sp->nknots * sizeof *t->knots);
    t->nknots = sp->nknots;
    memcpy(t->boundary, sp->boundary, 2 * sizeof *t->boundary);
    t->nboundary = 2;
    return MR_OK;
}

/* Each term's label, parts, coding and coefficients, from the design,
 * whose terms are the spec's covariates, then its interactions, each a
 * group of one term or of one per spline column. */
static mr_status copy_terms(mr_fit *fit, const mr__run *r)
{
    const mr__spec *s = &r->f->spec;
    size_t i, d = 0;
    int k;
    fit->term = mr__calloc(fit->nterms + 1, sizeof *fit->term);
    if (fit->term == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < fit->nterms; i++) {
        mr__fit_term *t = &fit->term[i];
        /* the `many` factor has no design term: no coefficient here */
        const mr__term *dt = (long)i == r->design.absorb_group ? NULL : &r->design.term[d];
        int nparts = i < s->ncov ? 1 : s->inter[i - s->ncov].n;
        t->full = dt ? dt->full : 0;
        t->first = dt ? dt->col0 : 0;
        for (; dt && d < r->design.nterms && r->design.term[d].group == i; d++) t->ncoef += r->design.term[d].ncols;
        if ((t->label = term_label(s, i)) == NULL) return MR_ERR_NO_MEMORY;
        for (k = 0; k < nparts; k++, t->nparts++)
            if ((t->part[k] = mr__strdup(i < s->ncov ? s->cov[i].name : s->inter[i - s->ncov].name[k])) == NULL)
                return MR_ERR_NO_MEMORY;
        if (dt) MR__TRY(copy_spline(t, dt, s, i));
    }
    return MR_OK;
}

static mr_status copy_lines(mr_fit *fit, const mr__spec *s)
{
    size_t i;
    fit->model_line = mr__calloc(s->nlines + 1, sizeof *fit->model_line);
    fit->model_origin = mr__calloc(s->nlines + 1, sizeof *fit->model_origin);
    if (fit->model_line == NULL || fit->model_origin == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < s->nlines; i++, fit->nmodel_lines++) {
        fit->model_line[i] = mr__strdup(s->line[i]);
        fit->model_origin[i] = dup_or_null(s->line_origin[i]);
        if (fit->model_line[i] == NULL || (s->line_origin[i] != NULL && fit->model_origin[i] == NULL)) {
            fit->nmodel_lines++; /* so that mr_fit_free frees this one too */
            return MR_ERR_NO_MEMORY;
        }
    }
    return MR_OK;
}

static mr_status copy_model(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr__spec *s = &r->f->spec;
    size_t i, l;
    fit->family = s->family;
    fit->family_param = r->family.estimate ? r->family.param : s->family_param;
    fit->family_param_given = !isnan(fit->family_param);
    fit->family_param_estimated = r->family.estimate;
    fit->family_param_se = NAN;
    if (r->family.estimate && r->last.sums.fam[MR__PS_INFO] > 0)
        fit->family_param_se = 1 / sqrt(r->last.sums.fam[MR__PS_INFO]);
    fit->link = mr__spec_link(s);
    fit->intercept = s->intercept;
    fit->dispersion_estimated = mr__spec_dispersion_estimated(s);
    fit->outcome = dup_or_null(s->outcome);
    fit->trials = dup_or_null(s->trials);
    fit->offset = dup_or_null(s->offset);
    fit->exposure = dup_or_null(s->exposure);
    fit->weight = dup_or_null(s->weight);
    fit->nterms = s->ncov + s->ninter;
    fit->nfactors = r->bind.nfac;
    fit->factor = mr__calloc(fit->nfactors + 1, sizeof *fit->factor);
    if (!fit->factor || copy_terms(fit, r) != MR_OK || copy_lines(fit, s) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < fit->nfactors; i++) {
        const mr__factor *f = &r->fac[i];
        mr__fit_factor *o = &fit->factor[i];
        o->name = mr__strdup(f->name);
        o->reference = f->nlevels ? mr__strdup(f->level[f->ref]) : mr__strdup("");
        o->level = mr__calloc(f->nlevels + 1, sizeof *o->level);
        if (!o->name || !o->reference || !o->level) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (l = 0; l < f->nlevels; l++, o->nlevels++)
            if ((o->level[l] = mr__strdup(f->level[l])) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

/* The numeric columns' spread and range, as the first pass found them. */
static mr_status copy_numerics(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    size_t k, n = r->bind.nnum;
    fit->numerics_known = 1;
    if ((fit->numeric = mr__calloc(n + 1, sizeof *fit->numeric)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; k < n; k++, fit->nnumerics++) {
        mr__fit_numeric *o = &fit->numeric[k];
        if ((o->name = mr__strdup(r->bind.col[r->bind.num_col[k]].name)) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        o->mean = r->mean[k];
        o->sd = r->spread[k];
        o->min = s->xmin[k];
        o->max = s->xmax[k];
    }
    return MR_OK;
}

static mr_status copy_data_summary(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    size_t c, i;
    fit->rows_read = s->nread;
    fit->rows_used = s->nused;
    fit->rows_bad = s->nbad;
    fit->rows_incomplete = s->incomplete;
    fit->zero_weight = s->nused - s->npos;
    fit->missing_name = mr__calloc(r->bind.ncol + 1, sizeof *fit->missing_name);
    fit->missing_count = mr__calloc(r->bind.ncol + 1, sizeof *fit->missing_count);
    fit->bad_example = mr__calloc(s->nbad_shown + 1, sizeof *fit->bad_example);
    if (!fit->missing_name || !fit->missing_count || !fit->bad_example)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (c = 0; c < r->bind.ncol; c++) {
        if (s->missing[c] == 0) continue;
        fit->missing_name[fit->nmissing] = mr__strdup(r->bind.col[c].name);
        if (fit->missing_name[fit->nmissing] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->missing_count[fit->nmissing++] = s->missing[c];
    }
    for (i = 0; i < s->nbad_shown; i++) {
        mr__strbuf sb;
        mr__strbuf_init(&sb);
        mr__strbuf_printf(&sb, "%s:%llu:%s", s->bad[i].file ? s->bad[i].file : r->display,
                          (unsigned long long)s->bad[i].line, s->bad[i].msg);
        if ((fit->bad_example[i] = mr__strbuf_take(&sb)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->nbad_examples++;
    }
    return MR_OK;
}

/* Each file of a set as the first pass read it. */
static mr_status record_set(const mr__run *r, mr_fit *fit, mr__error *err)
{
    size_t i;
    if (r->set.n == 0) return MR_OK;
    fit->set_known = 1;
    if ((fit->set_file = mr__calloc(r->first.nfiles + 1, sizeof *fit->set_file)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < r->first.nfiles; i++) {
        const mr__file_identity *id = &r->first.files[i];
        mr__fit_input_file *to = &fit->set_file[i];
        if ((to->path = mr__strdup(r->set.display[i])) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->nset_files++;
        to->size = id->size;
        to->mtime_ns = id->mtime_ns;
        to->bytes = id->raw_bytes;
        to->decompressed_bytes = id->out_bytes;
        to->checksum = id->checksum;
        to->compression = id->compression;
    }
    return MR_OK;
}

static mr_status record_missing_tokens(const mr_fitter *f, mr_fit *fit, mr__error *err)
{
    size_t i;
    fit->missing_known = 1;
    if (f->nmissing == 0) return MR_OK;
    fit->missing_token = mr__calloc(f->nmissing, sizeof *fit->missing_token);
    if (fit->missing_token == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < f->nmissing; i++) {
        if ((fit->missing_token[i] = mr__strdup(f->missing[i])) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->nmissing_tokens++;
    }
    return MR_OK;
}

static mr_status copy_run_info(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr_fitter *f = r->f;
    fit->iterations = r->iterations;
    fit->passes = r->npasses;
    fit->resumed = r->resumed_from > 0;
    fit->resumed_from_pass = r->resumed_from;
    fit->halvings = r->halvings;
    fit->warm_start = r->warm;
    fit->by_step = r->by_step;
    fit->patterns = r->collapsed ? r->npatterns : 0;
    fit->warm_iterations = r->warm_iterations;
    fit->warm_blocks = r->warm ? r->warm_blocks : 0;
    fit->warm_polish_blocks = r->warm ? r->warm_polish_blocks : 0;
    if ((fit->start_given = r->started) != 0) {
        fit->start_carried = r->start_carried;
        fit->start_previous = f->start->p;
        if ((fit->start_from = mr__strdup(f->start->label)) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    fit->converged = r->converged;
    fit->status = r->converged ? MR_OK : MR_ERR_NOT_CONVERGED;
    fit->rel_change = r->rel_change;
    fit->seconds = mr__seconds_now() - r->t0;
    fit->rows_per_second = fit->seconds > 0 ? (double)r->first.scan.nread * r->npasses / fit->seconds : 0;
    fit->pass_seconds = mr__malloc_array((size_t)r->npasses + 1, sizeof *fit->pass_seconds);
    fit->path = mr__strdup(r->display);
    fit->version = mr__strdup(MR_VERSION_STRING);
    if (!fit->pass_seconds || !fit->path || !fit->version) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    /* standard input is kept in a file of our own: it has no identity */
    fit->file_known = strcmp(r->path, "-") != 0;
    fit->file_size = fit->file_known ? r->first.size : 0;
    fit->file_mtime_ns = fit->file_known ? r->first.mtime_ns : 0;
    memcpy(fit->pass_seconds, r->pass_seconds, (size_t)r->npasses * sizeof *fit->pass_seconds);
    fit->npass_seconds = (size_t)r->npasses;
    fit->bytes = r->first.raw_bytes;
    fit->decompressed_bytes = r->first.out_bytes;
    fit->checksum = r->first.checksum;
    fit->compression = r->first.zstd; /* the pass's field holds the mr__compression */
    MR__TRY(record_set(r, fit, err));
    fit->delimiter = r->delim;
    fit->delimiter_detected = r->delim_detected;
    fit->threads = r->nthreads;
    fit->max_passes = f->max_passes;
    fit->in_memory = f->in_memory;
    fit->cached = r->cached;
    fit->skip_bad = f->skip_bad;
    fit->buffer_size = f->buffer_size;
    fit->tolerance = f->tolerance;
    fit->level = f->level;
    return record_missing_tokens(f, fit, err);
}

/* An estimated parameter: the counts it is a likelihood of, and a theta
 * at its bound (fit/irls.h, MR__IRLS_PARAM_MAX). */
static void param_warnings(mr_fit *fit, const mr__run *r)
{
    if (!r->family.estimate) return;
    if (r->first.scan.nnonint > 0)
        mr__fit_warn(fit, "%llu outcome values are not whole numbers: the negative binomial is a distribution of "
                          "counts; theta and the log-likelihood use its gamma-function form, which such values "
                          "fit but which is not their distribution",
                     (unsigned long long)r->first.scan.nnonint);
    if (r->family.param >= MR__IRLS_PARAM_MAX)
        mr__fit_warn(fit, "theta reached %g, its largest value: the counts show no overdispersion beyond poisson's "
                          "(theta's maximum is at infinity), so this is the poisson fit, and theta's standard error "
                          "means nothing",
                     MR__IRLS_PARAM_MAX);
}

static void collect_warnings(mr_fit *fit, const mr__run *r)
{
    size_t j, n = 0;
    mr__strbuf sb;
    const char *outcome[MR__SCAN_OUTCOME_WARNINGS];
    size_t noutcome = mr__scan_outcome_warnings(&r->first.scan, fit->family, r->bind.has_weight || r->bind.has_trials,
                                                outcome);
    for (j = 0; j < noutcome; j++) mr__fit_warn(fit, "%s", outcome[j]);
    param_warnings(fit, r);
    if (!fit->converged)
        mr__fit_warn(fit, "NOT CONVERGED after %d IRLS passes (last step %.3g standard errors, tolerance %.3g): "
                          "the estimates are not a maximum-likelihood fit",
                     fit->iterations, fit->rel_change, fit->tolerance);
    mr__strbuf_init(&sb);
    for (j = 0; j < fit->p; j++)
        if (fit->aliased[j]) mr__strbuf_printf(&sb, "%s'%s'", n++ ? ", " : "", fit->name[j]);
    if (n)
        mr__fit_warn(fit, "%zu coefficient%s aliased (a linear combination of earlier columns, not estimated): %s", n,
                     n == 1 ? "" : "s", sb.data ? sb.data : "");
    mr__strbuf_release(&sb);
    if (r->last.sums.boundary && r->family.ops->boundary_what)
        mr__fit_warn(fit, "%s for %llu rows: %s", r->family.ops->boundary_what,
                     (unsigned long long)r->last.sums.boundary, r->family.ops->boundary_why);
    if (r->cache_note[0]) mr__fit_warn(fit, "%s", r->cache_note);
    if (r->threads_note[0]) mr__fit_warn(fit, "%s", r->threads_note);
    if (fit->rows_bad)
        mr__fit_warn(fit, "%llu malformed rows were skipped (--on-bad-row skip)", (unsigned long long)fit->rows_bad);
    for (j = 0; j < fit->p; j++)
        if (!fit->aliased[j] && fit->se[j] > 0 && !(fit->cov[j * fit->p + j] >= DBL_MIN))
            mr__fit_warn(fit, "the variance of '%s' is below the range of a double (its values are huge): its "
                              "standard error is computed apart, but its covariances read 0; rescale the column",
                         fit->name[j]);
    for (j = 0; j < fit->nfactors; j++)
        if (fit->factor[j].nlevels < 2)
            mr__fit_warn(fit, "factor '%s' has a single level in the rows used: it adds no column", fit->factor[j].name);
}

mr_status mr__build_fit(mr__run *r, mr_fit **out, mr__error *err)
{
    mr_fit *fit = mr__calloc(1, sizeof *fit);
    mr_status st;
    if (fit == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    st = copy_model(fit, r, err);
    if (st == MR_OK) st = copy_run_info(fit, r, err);
    if (st == MR_OK) st = copy_data_summary(fit, r, err);
    if (st == MR_OK) st = copy_numerics(fit, r, err);
    if (st == MR_OK && mr__fit_alloc_coefficients(fit, r->design.p) != MR_OK)
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) st = set_coefficients(fit, r, err);
    if (st == MR_OK) st = mr__fit_calibration(fit, r, err);
    if (st == MR_OK && mr__fit_term_tests(fit) != MR_OK) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st != MR_OK) {
        mr_fit_free(fit);
        return st;
    }
    collect_warnings(fit, r);
    mr__flag_zero_cells(fit, r);
    *out = fit;
    return MR_OK;
}
