/* result.c - from the final IRLS state to the published fit: the map back
 * from internal (centred, scaled) coefficients to those of the raw
 * columns, the dispersion, Wald statistics and intervals, likelihood-based
 * summaries; what the fit records beside them is result_record.c's, the
 * warnings an analyst must see result_warnings.c's. */
#define _DEFAULT_SOURCE /* M_PI */
#include <float.h>
#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/irls.h"
#include "fit/many.h"
#include "fit/run.h"
#include "common/probability.h"
#include "solve/normal_eq.h"

void mr__raw_map_release(mr__raw_map *a)
{
    mr__free(a->start);
    mr__free(a->row);
    mr__free(a->value);
}

mr_status mr__raw_map_from(const double *A, size_t p, mr__raw_map *a, mr__error *err)
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
static double scaled_variance(const mr__raw_map *a, const double *cov_s, size_t p, size_t j, double *u,
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
static void small_variances(const mr__raw_map *a, const double *cov_s, const double *cov, size_t p, double *u,
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
    mr__raw_map a = {NULL, NULL, NULL};
    mr_status st = T ? mr__raw_map_from(d->A, p, &a, err) : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
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
    mr__raw_map_release(&a);
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

mr_status mr__build_fit(mr__run *r, mr_fit **out, mr__error *err)
{
    mr_fit *fit = mr__calloc(1, sizeof *fit);
    mr_status st;
    if (fit == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    st = mr__result_copy_model(fit, r, err);
    if (st == MR_OK) st = mr__result_copy_run_info(fit, r, err);
    if (st == MR_OK) st = mr__result_copy_data_summary(fit, r, err);
    if (st == MR_OK) st = mr__result_copy_numerics(fit, r, err);
    if (st == MR_OK && mr__fit_alloc_coefficients(fit, r->design.p) != MR_OK)
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) st = set_coefficients(fit, r, err);
    if (st == MR_OK) st = mr__fit_calibration(fit, r, err);
    if (st == MR_OK && mr__fit_term_tests(fit) != MR_OK) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st != MR_OK) {
        mr_fit_free(fit);
        return st;
    }
    mr__result_warnings(fit, r);
    mr__flag_zero_cells(fit, r);
    *out = fit;
    return MR_OK;
}
