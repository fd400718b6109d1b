#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/error.h"
#include "common/strbuf.h"
#include "common/utf8.h"
#include "family/family.h"
#include "fit/fit.h"

static void free_strings(char **s, size_t n) { mr__strings_free(s, n); }

/* The model's description: terms, model lines, factors. */
static void free_model_parts(mr_fit *fit)
{
    size_t i, k;
    for (i = 0; fit->term && i < fit->nterms; i++) {
        mr__free(fit->term[i].label);
        for (k = 0; k < MR__MAX_INTERACT; k++) mr__free(fit->term[i].part[k]);
        mr__free(fit->term[i].spline_column);
        mr__free(fit->term[i].knots);
        mr__free(fit->term[i].boundary);
    }
    mr__free(fit->term);
    free_strings(fit->model_line, fit->nmodel_lines);
    free_strings(fit->model_origin, fit->nmodel_lines);
    for (i = 0; fit->factor && i < fit->nfactors; i++) {
        mr__free(fit->factor[i].name);
        mr__free(fit->factor[i].reference);
        free_strings(fit->factor[i].level, fit->factor[i].nlevels);
    }
    mr__free(fit->factor);
    for (i = 0; fit->numeric && i < fit->nnumerics; i++) mr__free(fit->numeric[i].name);
    mr__free(fit->numeric);
}

/* Where the fit came from: its input, run and command. */
static void free_run_parts(mr_fit *fit)
{
    size_t i;
    free_strings(fit->missing_name, fit->nmissing);
    mr__free(fit->missing_count);
    free_strings(fit->bad_example, fit->nbad_examples);
    free_strings(fit->missing_token, fit->nmissing_tokens);
    mr__free(fit->pass_seconds);
    mr__free(fit->path);
    for (i = 0; fit->set_file && i < fit->nset_files; i++) mr__free(fit->set_file[i].path);
    mr__free(fit->set_file);
    mr__free(fit->start_from);
    mr__free(fit->version);
    free_strings(fit->warning, fit->nwarnings);
    free_strings(fit->command_line, fit->ncommand_line);
    mr__free(fit->started);
    mr__free(fit->ended);
    mr__free(fit->host);
}

void mr_fit_free(mr_fit *fit)
{
    if (fit == NULL) return;
    free_strings(fit->name, fit->p);
    mr__free(fit->aliased);
    mr__free(fit->inestimable);
    mr__free(fit->beta);
    mr__free(fit->se);
    mr__free(fit->cov);
    mr__free(fit->robust_type);
    mr__free(fit->cluster);
    mr__free(fit->robust_se);
    mr__free(fit->robust_cov);
    mr__free(fit->stat);
    mr__free(fit->pval);
    mr__free(fit->lo);
    mr__free(fit->hi);
    mr__free(fit->outcome);
    mr__free(fit->trials);
    mr__free(fit->offset);
    mr__free(fit->exposure);
    mr__free(fit->weight);
    mr__free(fit->calib_basis);
    mr__free(fit->calib);
    mr__free(fit->profile);
    free_model_parts(fit);
    free_run_parts(fit);
    mr__fit_free_many(fit);
    mr__free(fit);
}

mr_status mr__fit_alloc_coefficients(mr_fit *fit, size_t p)
{
    fit->p = p;
    fit->name = mr__calloc(p + 1, sizeof *fit->name);
    fit->aliased = mr__calloc(p + 1, sizeof *fit->aliased);
    fit->inestimable = mr__calloc(p + 1, sizeof *fit->inestimable);
    fit->beta = mr__calloc(p + 1, sizeof(double));
    fit->se = mr__calloc(p + 1, sizeof(double));
    fit->cov = mr__calloc(p * p + 1, sizeof(double));
    fit->stat = mr__calloc(p + 1, sizeof(double));
    fit->pval = mr__calloc(p + 1, sizeof(double));
    fit->lo = mr__calloc(p + 1, sizeof(double));
    fit->hi = mr__calloc(p + 1, sizeof(double));
    if (!fit->name || !fit->aliased || !fit->inestimable || !fit->beta || !fit->se || !fit->cov || !fit->stat || !fit->pval || !fit->lo ||
        !fit->hi)
        return MR_ERR_NO_MEMORY;
    return MR_OK;
}

const char *mr__fit_part_type(const mr_fit *fit, const mr__fit_term *t, size_t k)
{
    if (mr__fit_find_factor(fit, t->part[k]) >= 0) return "factor";
    if (t->spline && strcmp(t->part[k], t->spline_column) == 0) return "spline";
    return "numeric";
}

long mr__fit_find_factor(const mr_fit *fit, const char *name)
{
    size_t i;
    for (i = 0; i < fit->nfactors; i++)
        if (strcmp(fit->factor[i].name, name) == 0) return (long)i;
    return -1;
}

void mr__fit_warn(mr_fit *fit, const char *fmt, ...)
{
    char raw[1024], buf[1024], *copy, **grown;
    va_list ap;
    va_start(ap, fmt);
    mr__utf8_mend_cut(raw, sizeof raw, vsnprintf(raw, sizeof raw, fmt, ap));
    va_end(ap);
    /* warnings quote level and column names from the file, escaped as
     * every message is (mr__escape_text) */
    mr__escape_text(buf, sizeof buf, raw, strlen(raw));
    grown = mr__realloc(fit->warning, (fit->nwarnings + 1) * sizeof *grown);
    if (grown == NULL) return;
    fit->warning = grown;
    copy = mr__strdup(buf);
    if (copy == NULL) return;
    fit->warning[fit->nwarnings++] = copy;
}

const char *mr__fit_ratio_label(const mr_fit *fit)
{
    const mr__family_ops *ops = mr__family_ops_of((mr_family)fit->family);
    if (ops == NULL) return NULL;
    if (fit->link == MR_LOGIT) return ops->ratio_logit;
    return fit->link == MR_LOG ? ops->ratio_log : NULL;
}

int mr__fit_quasi(const mr_fit *fit)
{
    const mr__family_ops *ops = mr__family_ops_of((mr_family)fit->family);
    return ops != NULL && fit->dispersion_estimated && !ops->dispersion_estimated;
}

const char *mr__fit_family_param_name(const mr_fit *fit)
{
    const mr__family_ops *ops = mr__family_ops_of((mr_family)fit->family);
    return ops != NULL && fit->family_param_given ? ops->param_name : NULL;
}

void mr__fit_family_param_text(const mr_fit *f, mr__strbuf *b)
{
    const char *param = mr__fit_family_param_name(f);
    if (param == NULL) return;
    if (f->family_param_profiled && f->nprofile > 0)
        mr__strbuf_printf(b, " (%s %.15g, chosen by profile likelihood over %.15g to %.15g)", param, f->family_param,
                          f->profile[0].value, f->profile[f->nprofile - 1].value);
    else if (f->family_param_estimated)
        mr__strbuf_printf(b, " (%s %.10g, standard error %.4g, maximum likelihood)", param, f->family_param,
                          f->family_param_se);
    else
        mr__strbuf_printf(b, " (%s %.15g, fixed)", param, f->family_param);
}

/* robust standard errors are asymptotic: read against the normal */
const char *mr__fit_statistic_name(const mr_fit *fit) { return fit->dispersion_estimated && !fit->robust ? "t" : "z"; }

mr_status mr_fit_status(const mr_fit *fit) { return fit->status; }
size_t mr_fit_ncoef(const mr_fit *fit) { return fit->p; }
const char *mr_fit_coef_name(const mr_fit *fit, size_t j) { return j < fit->p ? fit->name[j] : NULL; }
int mr_fit_coef_aliased(const mr_fit *fit, size_t j) { return j < fit->p ? fit->aliased[j] : 0; }
int mr_fit_coef_not_estimable(const mr_fit *fit, size_t j) { return j < fit->p ? fit->inestimable[j] : 0; }
double mr_fit_coef(const mr_fit *fit, size_t j) { return j < fit->p ? fit->beta[j] : NAN; }
double mr_fit_std_error(const mr_fit *fit, size_t j) { return j < fit->p ? fit->se[j] : NAN; }

double mr_fit_p_value(const mr_fit *fit, size_t j) { return j < fit->p ? fit->pval[j] : NAN; }
double mr_fit_conf_low(const mr_fit *fit, size_t j) { return j < fit->p ? fit->lo[j] : NAN; }
double mr_fit_conf_high(const mr_fit *fit, size_t j) { return j < fit->p ? fit->hi[j] : NAN; }

double mr_fit_covariance(const mr_fit *fit, size_t i, size_t j)
{
    if (i >= fit->p || j >= fit->p) return NAN;
    return fit->cov[j * fit->p + i];
}

double mr_fit_stat(const mr_fit *fit, mr_stat which)
{
    switch (which) {
    case MR_STAT_DEVIANCE: return fit->deviance;
    case MR_STAT_NULL_DEVIANCE: return fit->null_deviance;
    case MR_STAT_DF_RESIDUAL: return fit->df_residual;
    case MR_STAT_DF_NULL: return fit->df_null;
    case MR_STAT_PEARSON_CHI2: return fit->pearson;
    case MR_STAT_DISPERSION: return fit->dispersion;
    case MR_STAT_LOG_LIKELIHOOD: return fit->loglik;
    case MR_STAT_AIC: return fit->aic;
    case MR_STAT_BIC: return fit->bic;
    case MR_STAT_ROWS_READ: return (double)fit->rows_read;
    case MR_STAT_ROWS_USED: return (double)fit->rows_used;
    case MR_STAT_ITERATIONS: return fit->iterations;
    case MR_STAT_PASSES: return fit->passes;
    case MR_STAT_RELATIVE_CHANGE: return fit->rel_change;
    case MR_STAT_SECONDS: return fit->seconds;
    case MR_STAT_RANK: return (double)fit->rank;
    case MR_STAT_LEVEL: return fit->level;
    case MR_STAT_FAMILY_PARAMETER: return fit->family_param_given ? fit->family_param : NAN;
    case MR_STAT_START_CARRIED: return fit->start_given ? (double)fit->start_carried : NAN;
    case MR_STAT_FAMILY_PARAMETER_SE: return fit->family_param_estimated ? fit->family_param_se : NAN;
    }
    return NAN;
}

size_t mr_fit_nwarnings(const mr_fit *fit) { return fit->nwarnings; }
int mr_fit_resumed_after_pass(const mr_fit *fit) { return fit->resumed ? fit->resumed_from_pass : 0; }
const char *mr_fit_warning(const mr_fit *fit, size_t i) { return i < fit->nwarnings ? fit->warning[i] : NULL; }

const mr__fit_numeric *mr__fit_find_numeric(const mr_fit *fit, const char *name)
{
    size_t i;
    for (i = 0; fit->numeric && i < fit->nnumerics; i++)
        if (strcmp(fit->numeric[i].name, name) == 0) return &fit->numeric[i];
    return NULL;
}
