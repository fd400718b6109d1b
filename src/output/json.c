/* json.c - the fit as JSON, for later commands and other programs.
 *
 * Built with jansson rather than by hand: later commands (scoring, run
 * comparison) read this file back, so quoting and number formatting must
 * be exactly right.  Written through src/common/outfile.c (atomic, never
 * over an input or anything but a regular file). */
#define _POSIX_C_SOURCE 200809L
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/outfile.h"
#include "family/family.h"
#include "fit/fit.h"

#define FORMAT_VERSION 1

/* NaN and infinities have no JSON spelling: they become null. */
static json_t *num(double x) { return isfinite(x) ? json_real(x) : json_null(); }
static json_t *str_or_null(const char *s) { return s ? json_string(s) : json_null(); }

static json_t *string_array(char *const *s, size_t n)
{
    json_t *a = json_array();
    size_t i;
    for (i = 0; i < n; i++) json_array_append_new(a, json_string(s[i]));
    return a;
}

static json_t *input_object(const mr_fit *f)
{
    char sum[40], delim[2] = {f->delimiter, 0};
    snprintf(sum, sizeof sum, "fnv1a64w:%016llx", (unsigned long long)f->checksum);
    return json_pack("{s:s, s:I, s:I, s:s, s:s, s:s, s:s}", "path", f->path, "bytes", (json_int_t)f->bytes,
                     "decompressed_bytes", (json_int_t)f->decompressed_bytes, "compression", f->zstd ? "zstd" : "none",
                     "checksum", sum, "delimiter", delim, "delimiter_source", f->delimiter_detected ? "detected" : "option");
}

static json_t *rows_object(const mr_fit *f)
{
    json_t *missing = json_object();
    size_t i;
    for (i = 0; i < f->nmissing; i++) json_object_set_new(missing, f->missing_name[i], json_integer((json_int_t)f->missing_count[i]));
    return json_pack("{s:I, s:I, s:I, s:I, s:I, s:o, s:o}", "read", (json_int_t)f->rows_read, "used",
                     (json_int_t)f->rows_used, "left_out", (json_int_t)(f->rows_read - f->rows_used), "bad",
                     (json_int_t)f->rows_bad, "zero_weight", (json_int_t)f->zero_weight, "missing_by_column", missing,
                     "bad_examples", string_array(f->bad_example, f->nbad_examples));
}

static json_t *model_object(const mr_fit *f)
{
    json_t *factors = json_object();
    size_t i;
    for (i = 0; i < f->nfactors; i++)
        json_object_set_new(factors, f->factor[i].name,
                            json_pack("{s:s, s:o}", "reference", f->factor[i].reference, "levels",
                                      string_array(f->factor[i].level, f->factor[i].nlevels)));
    return json_pack("{s:s, s:o, s:s, s:s, s:o, s:o, s:o, s:b, s:s, s:o, s:o}", "outcome", f->outcome, "trials",
                     str_or_null(f->trials), "family", mr__family_name((mr_family)f->family), "link",
                     mr__link_name((mr_link)f->link), "offset", str_or_null(f->offset), "exposure",
                     str_or_null(f->exposure), "weight", str_or_null(f->weight), "intercept", f->intercept,
                     "dispersion", f->dispersion_estimated ? "estimate" : "fixed", "terms",
                     string_array(f->terms, f->nterms), "factors", factors);
}

static json_t *options_object(const mr_fit *f)
{
    return json_pack("{s:i, s:I, s:o, s:i, s:o, s:b, s:b, s:s}", "threads", f->threads, "buffer_size",
                     (json_int_t)f->buffer_size, "tolerance", num(f->tolerance), "max_passes", f->max_passes, "level",
                     num(f->level), "in_memory", f->in_memory, "cache", f->cached, "on_bad_row",
                     f->skip_bad ? "skip" : "fail");
}

static json_t *convergence_object(const mr_fit *f)
{
    json_t *ps = json_array();
    size_t i;
    for (i = 0; i < f->npass_seconds; i++) json_array_append_new(ps, num(f->pass_seconds[i]));
    return json_pack("{s:b, s:s, s:i, s:i, s:o, s:i, s:b, s:i, s:i, s:i, s:o, s:o, s:o, s:o}", "converged", f->converged,
                     "criterion", f->by_decrement ? "newton decrement" : "deviance change", "iterations",
                     f->iterations, "passes", f->passes, "relative_change", num(f->rel_change),
                     "step_halvings", f->halvings, "warm_start", f->warm_start, "warm_start_iterations",
                     f->warm_iterations, "warm_start_blocks", f->warm_blocks, "warm_start_polish_blocks",
                     f->warm_polish_blocks, "collapsed_patterns",
                     f->patterns ? json_integer((json_int_t)f->patterns) : json_null(), "seconds", num(f->seconds),
                     "pass_seconds", ps, "rows_per_second", num(f->rows_per_second));
}

static json_t *coefficient_object(const mr_fit *f, size_t j, int ratio)
{
    json_t *c = json_pack("{s:s, s:b, s:o, s:o, s:o, s:o, s:o, s:o}", "name", f->name[j], "aliased", f->aliased[j],
                          "estimate", num(f->beta[j]), "std_error", num(f->se[j]), "statistic", num(f->stat[j]),
                          "p_value", num(f->pval[j]), "ci_low", num(f->lo[j]), "ci_high", num(f->hi[j]));
    if (ratio) {
        json_object_set_new(c, "ratio", num(exp(f->beta[j])));
        json_object_set_new(c, "ratio_ci_low", num(exp(f->lo[j])));
        json_object_set_new(c, "ratio_ci_high", num(exp(f->hi[j])));
    }
    return c;
}

static json_t *fit_object(const mr_fit *f)
{
    return json_pack("{s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:I, s:I}", "deviance", num(f->deviance),
                     "df_residual", num(f->df_residual), "null_deviance", num(f->null_deviance), "df_null",
                     num(f->df_null), "pearson_chi2", num(f->pearson), "dispersion", num(f->dispersion),
                     "log_likelihood", num(f->loglik), "aic", num(f->aic), "bic", num(f->bic), "rank",
                     (json_int_t)f->rank, "n", (json_int_t)f->n);
}

static json_t *fit_to_json(const mr_fit *f)
{
    const char *ratio = mr__fit_ratio_label(f);
    json_t *coefs = json_array(), *cov = json_array(), *root;
    size_t i, j;
    for (j = 0; j < f->p; j++) json_array_append_new(coefs, coefficient_object(f, j, ratio != NULL));
    for (i = 0; i < f->p; i++) {
        json_t *row = json_array();
        for (j = 0; j < f->p; j++) json_array_append_new(row, num(f->cov[j * f->p + i]));
        json_array_append_new(cov, row);
    }
    root = json_pack("{s:s, s:i, s:s, s:o, s:o, s:o, s:o, s:o, s:s, s:o, s:o, s:o, s:o, s:o}", "format",
                     "millrace-fit", "format_version", FORMAT_VERSION, "millrace_version", MR_VERSION_STRING, "input",
                     input_object(f), "rows", rows_object(f), "model", model_object(f), "options", options_object(f),
                     "convergence", convergence_object(f), "statistic", mr__fit_statistic_name(f), "ratio_label",
                     str_or_null(ratio), "coefficients", coefs, "fit", fit_object(f), "covariance", cov, "warnings",
                     string_array(f->warning, f->nwarnings));
    return root;
}

/* jansson hands its output over a few bytes at a time; the output file
 * gathers them into large writes. */
typedef struct json_sink {
    mr__outfile *out;
    mr__error *err;
} json_sink;

static int to_outfile(const char *buf, size_t size, void *data)
{
    json_sink *s = data;
    return mr__outfile_write(s->out, buf, size, s->err) == MR_OK ? 0 : -1;
}

static mr_status write_json(json_t *root, const char *path, const char *input, mr__error *err)
{
    const size_t flags = JSON_INDENT(1) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER;
    json_sink sink = {NULL, err};
    MR__TRY(mr__outfile_open(&sink.out, path, &input, 1, err));
    if (json_dump_callback(root, to_outfile, &sink, flags) != 0 || to_outfile("\n", 1, &sink) != 0) {
        /* jansson fails on its own only for want of memory */
        if (err->status == MR_OK) mr__fail(err, MR_ERR_NO_MEMORY, "%s: out of memory writing the JSON", path);
        mr__outfile_abort(sink.out);
        return err->status;
    }
    return mr__outfile_commit(sink.out, err);
}

mr_status mr_fit_write_json(const mr_fit *fit, const char *path, char *msg, size_t msgcap)
{
    json_t *root = fit_to_json(fit);
    mr__error err;
    mr__error_clear(&err);
    if (root == NULL)
        mr__fail(&err, MR_ERR_NO_MEMORY, "%s: out of memory building the JSON", path);
    else
        write_json(root, path, strcmp(fit->path, "<stdin>") == 0 ? "-" : fit->path, &err);
    json_decref(root);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
