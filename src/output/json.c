/* json.c - the fit as JSON, for later commands and other programs.
 *
 * Built with jansson rather than by hand: later commands (scoring, run
 * comparison) read this file back, so quoting and number formatting must
 * be exactly right.  Written to a temporary file beside the target and
 * renamed over it only when complete, so a reader never sees half a file
 * and a failed run leaves any earlier file untouched. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <jansson.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/utf8.h"
#include "family/family.h"
#include "fit/fit.h"
#include "output/json_text.h"

/* jansson's constructors return NULL only when out of memory (text() never
 * hands it malformed UTF-8), and a NULL given to json_pack's "o" fails the
 * pack, so a failure anywhere comes up to the root.  The one other failure
 * is json_pack refusing its format: kept here, so it is not taken for a
 * lack of memory. */
typedef struct builder {
    int refused;
    char why[JSON_ERROR_TEXT_LENGTH];
} builder;

static json_t *pack(builder *b, const char *fmt, ...)
{
    json_error_t e;
    json_t *v;
    va_list ap;
    va_start(ap, fmt);
    v = json_vpack_ex(&e, 0, fmt, ap);
    va_end(ap);
    if (v == NULL && !b->refused && json_error_code(&e) != json_error_out_of_memory &&
        json_error_code(&e) != json_error_null_value) {
        b->refused = 1;
        snprintf(b->why, sizeof b->why, "%s", e.text);
    }
    return v;
}

/* Appends v (stolen) to a; NULL, with a freed, when either is missing or
 * the append fails. */
static json_t *append(json_t *a, json_t *v)
{
    if (a != NULL && json_array_append_new(a, v) == 0) return a;
    if (a == NULL) json_decref(v);
    json_decref(a);
    return NULL;
}

/* Sets o[text] = v (stolen), the key escaped as every text is. */
static json_t *put(json_t *o, const char *key, json_t *v)
{
    char *k = o != NULL && v != NULL ? mr__json_escape(key) : NULL;
    int ok = k != NULL && json_object_set_new(o, k, v) == 0;
    if (k == NULL) json_decref(v);
    mr__free(k);
    if (ok) return o;
    json_decref(o);
    return NULL;
}

/* NaN and infinities have no JSON spelling: they become null. */
static json_t *num(double x) { return isfinite(x) ? json_real(x) : json_null(); }
static json_t *text(const char *s) { return mr__json_text(s); }

static json_t *text_array(char *const *s, size_t n)
{
    json_t *a = json_array();
    size_t i;
    for (i = 0; a != NULL && i < n; i++) a = append(a, text(s[i]));
    return a;
}

static json_t *input_object(builder *b, const mr_fit *f)
{
    char sum[40], delim[2] = {f->delimiter, 0};
    snprintf(sum, sizeof sum, "fnv1a64w:%016llx", (unsigned long long)f->checksum);
    return pack(b, "{s:o, s:I, s:I, s:s, s:s, s:s, s:s}", "path", text(f->path), "bytes", (json_int_t)f->bytes,
                "decompressed_bytes", (json_int_t)f->decompressed_bytes, "compression", f->zstd ? "zstd" : "none",
                "checksum", sum, "delimiter", delim, "delimiter_source", f->delimiter_detected ? "detected" : "option");
}

static json_t *rows_object(builder *b, const mr_fit *f)
{
    json_t *missing = json_object();
    size_t i;
    for (i = 0; missing != NULL && i < f->nmissing; i++)
        missing = put(missing, f->missing_name[i], json_integer((json_int_t)f->missing_count[i]));
    return pack(b, "{s:I, s:I, s:I, s:I, s:I, s:o, s:o}", "read", (json_int_t)f->rows_read, "used",
                (json_int_t)f->rows_used, "left_out", (json_int_t)(f->rows_read - f->rows_used), "bad",
                (json_int_t)f->rows_bad, "zero_weight", (json_int_t)f->zero_weight, "missing_by_column", missing,
                "bad_examples", text_array(f->bad_example, f->nbad_examples));
}

static json_t *model_object(builder *b, const mr_fit *f)
{
    json_t *factors = json_object();
    size_t i;
    for (i = 0; factors != NULL && i < f->nfactors; i++)
        factors = put(factors, f->factor[i].name,
                      pack(b, "{s:o, s:o}", "reference", text(f->factor[i].reference), "levels",
                           text_array(f->factor[i].level, f->factor[i].nlevels)));
    return pack(b, "{s:o, s:o, s:s, s:s, s:o, s:o, s:o, s:b, s:s, s:o, s:o}", "outcome", text(f->outcome), "trials",
                text(f->trials), "family", mr__family_name((mr_family)f->family), "link",
                mr__link_name((mr_link)f->link), "offset", text(f->offset), "exposure", text(f->exposure), "weight",
                text(f->weight), "intercept", f->intercept, "dispersion",
                f->dispersion_estimated ? "estimate" : "fixed", "terms", text_array(f->terms, f->nterms), "factors",
                factors);
}

static json_t *options_object(builder *b, const mr_fit *f)
{
    return pack(b, "{s:i, s:I, s:o, s:i, s:o, s:b, s:b, s:s}", "threads", f->threads, "buffer_size",
                (json_int_t)f->buffer_size, "tolerance", num(f->tolerance), "max_passes", f->max_passes, "level",
                num(f->level), "in_memory", f->in_memory, "cache", f->cached, "on_bad_row",
                f->skip_bad ? "skip" : "fail");
}

static json_t *convergence_object(builder *b, const mr_fit *f)
{
    json_t *ps = json_array();
    size_t i;
    for (i = 0; ps != NULL && i < f->npass_seconds; i++) ps = append(ps, num(f->pass_seconds[i]));
    return pack(b, "{s:b, s:s, s:i, s:i, s:o, s:i, s:b, s:i, s:i, s:i, s:o, s:o, s:o, s:o}", "converged",
                f->converged, "criterion", f->by_decrement ? "newton decrement" : "deviance change", "iterations",
                f->iterations, "passes", f->passes, "relative_change", num(f->rel_change), "step_halvings",
                f->halvings, "warm_start", f->warm_start, "warm_start_iterations", f->warm_iterations,
                "warm_start_blocks", f->warm_blocks, "warm_start_polish_blocks", f->warm_polish_blocks,
                "collapsed_patterns", f->patterns ? json_integer((json_int_t)f->patterns) : json_null(), "seconds",
                num(f->seconds), "pass_seconds", ps, "rows_per_second", num(f->rows_per_second));
}

static json_t *coefficient_object(builder *b, const mr_fit *f, size_t j, int ratio)
{
    json_t *c = pack(b, "{s:o, s:b, s:o, s:o, s:o, s:o, s:o, s:o}", "name", text(f->name[j]), "aliased",
                     f->aliased[j], "estimate", num(f->beta[j]), "std_error", num(f->se[j]), "statistic",
                     num(f->stat[j]), "p_value", num(f->pval[j]), "ci_low", num(f->lo[j]), "ci_high", num(f->hi[j]));
    if (ratio) {
        c = put(c, "ratio", num(exp(f->beta[j])));
        c = put(c, "ratio_ci_low", num(exp(f->lo[j])));
        c = put(c, "ratio_ci_high", num(exp(f->hi[j])));
    }
    return c;
}

static json_t *fit_object(builder *b, const mr_fit *f)
{
    return pack(b, "{s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:o, s:I, s:I}", "deviance", num(f->deviance),
                "df_residual", num(f->df_residual), "null_deviance", num(f->null_deviance), "df_null",
                num(f->df_null), "pearson_chi2", num(f->pearson), "dispersion", num(f->dispersion),
                "log_likelihood", num(f->loglik), "aic", num(f->aic), "bic", num(f->bic), "rank",
                (json_int_t)f->rank, "n", (json_int_t)f->n);
}

static json_t *covariance_array(const mr_fit *f)
{
    json_t *cov = json_array();
    size_t i, j;
    for (i = 0; cov != NULL && i < f->p; i++) {
        json_t *row = json_array();
        for (j = 0; row != NULL && j < f->p; j++) row = append(row, num(f->cov[j * f->p + i]));
        cov = append(cov, row);
    }
    return cov;
}

static json_t *fit_to_json(builder *b, const mr_fit *f)
{
    const char *ratio = mr__fit_ratio_label(f);
    json_t *coefs = json_array();
    size_t j;
    for (j = 0; coefs != NULL && j < f->p; j++) coefs = append(coefs, coefficient_object(b, f, j, ratio != NULL));
    return pack(b, "{s:s, s:i, s:s, s:o, s:o, s:o, s:o, s:o, s:s, s:o, s:o, s:o, s:o, s:o}", "format",
                MR__JSON_FORMAT, "format_version", MR__JSON_FORMAT_VERSION, "millrace_version", MR_VERSION_STRING,
                "input", input_object(b, f), "rows", rows_object(b, f), "model", model_object(b, f), "options",
                options_object(b, f), "convergence", convergence_object(b, f), "statistic",
                mr__fit_statistic_name(f), "ratio_label", ratio ? json_string(ratio) : json_null(), "coefficients",
                coefs, "fit", fit_object(b, f), "covariance", covariance_array(f), "warnings",
                text_array(f->warning, f->nwarnings));
}

static void set_msg(char *msg, size_t cap, const char *fmt, const char *path, const char *why)
{
    if (cap > 0) mr__utf8_mend_cut(msg, cap, snprintf(msg, cap, fmt, path, why));
}

/* jansson hands its output over a few bytes at a time; written straight
 * to the descriptor that was one system call per token (about a million
 * for the covariance of a 1000-column fit), so it is gathered here. */
typedef struct out_buffer {
    int fd, failed;
    size_t len;
    char data[1 << 16];
} out_buffer;

static int flush_out(out_buffer *o)
{
    size_t done = 0;
    while (done < o->len && !o->failed) {
        ssize_t w = write(o->fd, o->data + done, o->len - done);
        if (w < 0 && errno == EINTR) continue;
        if (w < 0) o->failed = 1;
        else done += (size_t)w;
    }
    o->len = 0;
    return o->failed ? -1 : 0;
}

static int gather(const char *buf, size_t size, void *data)
{
    out_buffer *o = data;
    while (size > 0) {
        size_t n = sizeof o->data - o->len < size ? sizeof o->data - o->len : size;
        memcpy(o->data + o->len, buf, n);
        o->len += n;
        buf += n;
        size -= n;
        if (o->len == sizeof o->data && flush_out(o) != 0) return -1;
    }
    return 0;
}

static int dump_to_fd(json_t *root, int fd, out_buffer *o)
{
    o->fd = fd;
    o->failed = 0;
    o->len = 0;
    return json_dump_callback(root, gather, o, JSON_INDENT(1) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER) == 0 &&
           gather("\n", 1, o) == 0 && flush_out(o) == 0;
}

static mr_status write_atomically(json_t *root, const char *path, char *msg, size_t cap)
{
    size_t n = strlen(path);
    char *tmp = mr__malloc(n + 16);
    out_buffer *o = mr__malloc(sizeof *o);
    int fd, ok;
    if (tmp == NULL || o == NULL) {
        mr__free(tmp);
        mr__free(o);
        return MR_ERR_NO_MEMORY;
    }
    memcpy(tmp, path, n);
    memcpy(tmp + n, ".tmp-XXXXXX", 12);
    fd = mkstemp(tmp);
    if (fd < 0) {
        set_msg(msg, cap, "%s: cannot create a temporary file beside it: %s", path, strerror(errno));
        mr__free(tmp);
        mr__free(o);
        return MR_ERR_IO;
    }
    ok = dump_to_fd(root, fd, o) && fsync(fd) == 0;
    ok = close(fd) == 0 && ok;
    if (ok && rename(tmp, path) != 0) ok = 0;
    if (!ok) {
        set_msg(msg, cap, "%s: cannot write: %s", path, strerror(errno));
        unlink(tmp);
    }
    mr__free(tmp);
    mr__free(o);
    return ok ? MR_OK : MR_ERR_IO;
}

mr_status mr_fit_write_json(const mr_fit *fit, const char *path, char *msg, size_t msgcap)
{
    builder b = {0, ""};
    json_t *root = fit_to_json(&b, fit);
    mr_status st;
    if (msgcap > 0) msg[0] = '\0';
    if (root == NULL && b.refused) {
        set_msg(msg, msgcap, "%s: cannot build the JSON (an internal error): %s", path, b.why);
        return MR_ERR_INTERNAL;
    }
    if (root == NULL) {
        set_msg(msg, msgcap, "%s: %s", path, "out of memory building the JSON");
        return MR_ERR_NO_MEMORY;
    }
    st = write_atomically(root, path, msg, msgcap);
    json_decref(root);
    return st;
}
