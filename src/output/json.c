/* json.c - the fit as JSON, for later commands and other programs.
 *
 * Built with jansson rather than by hand: later commands (scoring, run
 * comparison) read this file back, so quoting and number formatting must
 * be exactly right.  Written through common/outfile.c: a temporary file
 * beside the target, renamed over it only when complete, so a reader never
 * sees half a file and a failed run leaves any earlier file untouched. */
#define _POSIX_C_SOURCE 200809L
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/clock.h"
#include "common/outfile.h"
#include "common/strbuf.h"
#include "common/error.h"
#include "family/family.h"
#include "fit/fit.h"
#include "input/codec.h"
#include "output/json_schema.h"
#include "output/json_text.h"
#include "output/json_util.h"

/* The walk over json_schema.c's tables.  jansson's constructors return
 * NULL only when out of memory (text never reaches them other than as
 * well-formed UTF-8, numbers only finite): a NULL anywhere comes up to
 * the root, and means exactly that. */

static json_t *append(json_t *a, json_t *v) { return mr__json_append(a, v); }
static json_t *put(json_t *o, const char *key, json_t *v) { return mr__json_put(o, key, v); }
static json_t *num(double x) { return mr__json_num(x); }

static json_t *text_array(char *const *s, size_t n)
{
    json_t *a = json_array();
    size_t i;
    for (i = 0; a != NULL && i < n; i++) a = append(a, mr__json_text(s[i]));
    return a;
}

/* "2026-12-04T21:46:04.000000000Z" */
static json_t *utc_time(int64_t ns)
{
    char buf[MR__UTC_TEXT_CAP];
    return mr__utc_text(ns, buf, sizeof buf) == 0 ? json_string(buf) : json_null();
}

static const char *term_kind(const mr_fit *f, const mr__fit_term *t)
{
    if (t->nparts > 1) return "interaction";
    if (t->spline) return "spline";
    return mr__fit_find_factor(f, t->part[0]) >= 0 ? "factor" : "numeric";
}

/* The term's joint Wald test; null when it has no estimated coefficient.
 * The keys are the same for chi-square and F tests, so that a reader needs
 * no case of its own: denominator_df is null for chi-square. */
static json_t *term_test(const mr_fit *f, const mr__fit_term *t)
{
    json_t *o;
    /* robust standard errors: asymptotic, chi-square (term_test.c) */
    int is_f = f->dispersion_estimated && !f->robust;
    if (t->test_df == 0) return json_null();
    o = json_object();
    o = put(o, "distribution", json_string(is_f ? "F" : "chi-square"));
    o = put(o, "df", json_integer((json_int_t)t->test_df));
    o = put(o, "denominator_df", is_f ? num(f->df_residual) : json_null());
    o = put(o, "statistic", num(t->test_stat));
    o = put(o, "chi2", num(t->test_chi2));
    return put(o, "p_value", num(t->test_p));
}

/* A derived field, or NULL with *skip set when it is not written. */
static json_t *derived(const mr_fit *f, int which, const void *base, size_t j, int *skip)
{
    const char *ratio = mr__fit_ratio_label(f);
    *skip = 0;
    switch (which) {
    case MR__JD_FORMAT: return json_string(MR__JSON_FORMAT);
    case MR__JD_FORMAT_VERSION: return json_integer(MR__JSON_FORMAT_VERSION);
    case MR__JD_LEFT_OUT: return json_integer((json_int_t)(f->rows_read - f->rows_used));
    case MR__JD_STATISTIC: return json_string(mr__fit_statistic_name(f));
    case MR__JD_RATIO_LABEL: return ratio ? json_string(ratio) : json_null();
    case MR__JD_MODIFIED: return utc_time(f->file_mtime_ns);
    case MR__JD_TERM_KIND: return json_string(term_kind(f, base));
    case MR__JD_TERM_TEST: return term_test(f, base);
    case MR__JD_FAMILY_PARAM_NAME: return mr__fit_family_param_name(f) ? json_string(mr__fit_family_param_name(f)) : json_null();
    }
    *skip = ratio == NULL;
    if (*skip) return NULL;
    switch (which) {
    case MR__JD_RATIO: return num(exp(f->beta[j]));
    case MR__JD_RATIO_LOW: return num(exp(f->lo[j]));
    default: return num(exp(f->hi[j]));
    }
}

/* The levels of factor `fac` that have columns in term t. */
static json_t *levels_used(const mr__fit_factor *fac, const mr__fit_term *t)
{
    json_t *a = json_array();
    size_t l;
    for (l = 0; a != NULL && l < fac->nlevels; l++)
        if (t->full || strcmp(fac->level[l], fac->reference) != 0) a = append(a, mr__json_text(fac->level[l]));
    return a;
}

static json_t *term_columns(const mr_fit *f, const mr__fit_term *t)
{
    json_t *a = json_array();
    size_t k;
    for (k = 0; a != NULL && k < t->nparts; k++) {
        long fi = mr__fit_find_factor(f, t->part[k]);
        json_t *c = json_object();
        c = put(c, "name", mr__json_text(t->part[k]));
        c = put(c, "type", json_string(mr__fit_part_type(f, t, k)));
        if (fi >= 0) {
            c = put(c, "reference", mr__json_text(f->factor[fi].reference));
            c = put(c, "levels", levels_used(&f->factor[fi], t));
        }
        a = append(a, c);
    }
    return a;
}

static json_t *covariance(const mr_fit *f, const double *m)
{
    json_t *cov = json_array();
    size_t i, j;
    for (i = 0; cov != NULL && i < f->p; i++) {
        json_t *row = json_array();
        for (j = 0; row != NULL && j < f->p; j++) row = append(row, num(m[j * f->p + i]));
        cov = append(cov, row);
    }
    return cov;
}

/* Level k's nonzero means, keyed by their coefficients' names. */
static json_t *level_means(const mr_fit *f, size_t k)
{
    json_t *o = json_object();
    size_t e;
    for (e = f->many_mean_start[k]; o != NULL && e < f->many_mean_start[k + 1]; e++)
        o = put(o, f->name[f->many_mean_col[e]], num(f->many_mean_val[e]));
    return o;
}

static json_t *special(const mr_fit *f, int which, const void *base, size_t index, int *skip)
{
    json_t *o;
    size_t i;
    if (which == MR__JS_LEVEL_MEANS) {
        *skip = f->many_mean_start == NULL;
        return *skip ? NULL : level_means(f, index);
    }
    if (which == MR__JS_COVARIANCE) return covariance(f, f->cov);
    if (which == MR__JS_ROBUST_COVARIANCE) return covariance(f, f->robust_cov);
    if (which == MR__JS_TERM_COLUMNS) return term_columns(f, base);
    o = json_object();
    for (i = 0; o != NULL && i < f->nmissing; i++)
        o = put(o, f->missing_name[i], json_integer((json_int_t)f->missing_count[i]));
    return o;
}

static json_t *scalar(const mr__jfield *fl, const void *v)
{
    char buf[40];
    switch (fl->kind) {
    case MR__J_INT: return json_integer(*(const int *)v);
    case MR__J_SIZE:
    case MR__J_COUNT_OR_NULL:
        if (fl->kind == MR__J_COUNT_OR_NULL && *(const size_t *)v == 0) return json_null();
        return json_integer((json_int_t) * (const size_t *)v);
    case MR__J_U64: return json_integer((json_int_t) * (const uint64_t *)v);
    case MR__J_I64: return json_integer((json_int_t) * (const int64_t *)v);
    case MR__J_REAL: return num(*(const double *)v);
    case MR__J_BOOL:
    case MR__J_BOOL_ADDED: return json_boolean(*(const int *)v);
    case MR__J_TEXT:
    case MR__J_TEXT_OR_NULL: return mr__json_text(*(char *const *)v);
    case MR__J_CHOICE: return json_string(*(const int *)v ? fl->yes : fl->no);
    case MR__J_FAMILY: return json_string(mr__family_name((mr_family) * (const int *)v));
    case MR__J_LINK: return json_string(mr__link_name((mr_link) * (const int *)v));
    case MR__J_COMPRESSION: return json_string(mr__compression_name(*(const int *)v));
    case MR__J_CHECKSUM:
        snprintf(buf, sizeof buf, "fnv1a64w:%016llx", (unsigned long long)*(const uint64_t *)v);
        return json_string(buf);
    default: /* MR__J_CHAR */
        buf[0] = *(const char *)v;
        buf[1] = '\0';
        return mr__json_text(buf);
    }
}

static json_t *object(const mr_fit *f, const mr__jfield *fields, const void *base, size_t index);

static json_t *array_of(const mr_fit *f, const mr__jfield *fl, const void *base)
{
    size_t n = *(const size_t *)((const char *)base + fl->count), i;
    const char *elems = *(char *const *)((const char *)base + fl->at);
    json_t *a = fl->kind == MR__J_KEYED ? json_object() : json_array();
    for (i = 0; a != NULL && i < n; i++) {
        if (fl->kind == MR__J_RECORDS) a = append(a, object(f, fl->sub, base, i));
        else if (fl->kind == MR__J_STRUCTS) a = append(a, object(f, fl->sub, elems + i * fl->size, 0));
        else if (fl->kind == MR__J_KEYED)
            a = put(a, *(char *const *)(elems + i * fl->size + fl->key_at), object(f, fl->sub, elems + i * fl->size, 0));
        else if (fl->kind == MR__J_REALS) a = append(a, num(((const double *)elems)[i]));
    }
    return a;
}

static json_t *value(const mr_fit *f, const mr__jfield *fl, const void *base, size_t index, int *skip)
{
    const char *b = base;
    *skip = 0;
    switch (fl->kind) {
    case MR__J_DERIVED: return derived(f, fl->which, base, index, skip);
    case MR__J_SPECIAL: return special(f, fl->which, base, index, skip);
    case MR__J_OBJECT: return object(f, fl->sub, base, index);
    case MR__J_OBJECT_ADDED:
    case MR__J_OBJECT_OR_NULL: return *(const int *)(b + fl->count) ? object(f, fl->sub, base, index) : json_null();
    case MR__J_OBJECT_OPTIONAL:
        *skip = !*(const int *)(b + fl->count);
        return *skip ? NULL : object(f, fl->sub, base, index);
    case MR__J_TEXTS: return text_array(*(char *const *const *)(b + fl->at), *(const size_t *)(b + fl->count));
    case MR__J_REALS:
    case MR__J_RECORDS:
    case MR__J_STRUCTS:
    case MR__J_KEYED: return array_of(f, fl, base);
    case MR__J_RECORDS_APART: return json_array(); /* its records come apart: mr_fit_write_json */
    default: return scalar(fl, mr__jfield_slot(fl, base, index));
    }
}

static json_t *object(const mr_fit *f, const mr__jfield *fields, const void *base, size_t index)
{
    json_t *o = json_object();
    const mr__jfield *fl;
    for (fl = fields; o != NULL && fl->key != NULL; fl++) {
        int skip;
        json_t *v = value(f, fl, base, index, &skip);
        if (skip) continue;
        if (v == NULL || json_object_set_new(o, fl->key, v) != 0) {
            json_decref(o);
            o = NULL;
        }
    }
    return o;
}

/* The `many` levels, up to 10^6 of them, are written one at a time into
 * the rest of the document, which is dumped with their array empty: a
 * jansson tree of them all took 630 MB at 10^6 levels (the fit itself
 * 380).  The rest's dump is cut where that array stands (json_schema.h,
 * MR__JSON_APART_AT); each level is dumped alone and indented as the
 * whole tree's dump indents it, so the bytes are the tree's. */
static const char apart_after[] = MR__JSON_APART_AFTER, apart_at[] = MR__JSON_APART_AT;
#define APART_DEPTH MR__JSON_APART_DEPTH

/* A level alone, its lines indented for its place in the array. */
static mr_status put_level(const mr_fit *f, size_t k, mr__outfile *out, mr__strbuf *b, mr__error *err)
{
    json_t *o = object(f, mr__json_many_level_fields, f, k);
    char *text = o != NULL ? json_dumps(o, MR__JSON_FILE_FLAGS) : NULL;
    const char *p;
    json_decref(o);
    if (text == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory writing the JSON");
    b->len = 0;
    mr__strbuf_append(b, k > 0 ? ",\n" : "\n", k > 0 ? 2 : 1);
    mr__strbuf_append(b, "    ", APART_DEPTH + 1);
    for (p = text; *p != '\0';) {
        const char *nl = strchr(p, '\n');
        size_t n = nl != NULL ? (size_t)(nl - p) + 1 : strlen(p);
        mr__strbuf_append(b, p, n);
        if (nl != NULL) mr__strbuf_append(b, "    ", APART_DEPTH + 1);
        p += n;
    }
    free(text);
    if (b->failed) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory writing the JSON");
    return mr__outfile_write(out, b->data, b->len, err);
}

static mr_status put_levels(const mr_fit *f, mr__outfile *out, mr__error *err)
{
    mr__strbuf b;
    size_t k;
    mr_status st = MR_OK;
    mr__strbuf_init(&b);
    for (k = 0; st == MR_OK && k < f->nmany; k++) st = put_level(f, k, out, &b, err);
    mr__strbuf_release(&b);
    /* the array's close on a line of its own at its depth (none when empty: "[]") */
    if (st == MR_OK && f->nmany > 0) st = mr__outfile_write(out, "\n    ", 1 + APART_DEPTH, err);
    return st;
}

/* Where the rest's text is cut: just after the empty array's '[' (NULL
 * for a fit without the factor). */
static mr_status split_rest(const mr_fit *f, const char *text, const char **cut, mr__error *err)
{
    const char *after = f->many_given ? strstr(text, apart_after) : NULL;
    *cut = after != NULL ? strstr(after, apart_at) : NULL;
    if (f->many_given && (*cut == NULL || (*cut)[sizeof apart_at - 1] != ']'))
        return mr__fail(err, MR_ERR_INTERNAL, "the JSON's many_factor levels were not where expected");
    if (*cut != NULL) *cut += sizeof apart_at - 1;
    return MR_OK;
}

static mr_status write_document(const mr_fit *fit, json_t *root, mr__outfile *out, mr__error *err)
{
    char *text = json_dumps(root, MR__JSON_FILE_FLAGS);
    const char *cut = NULL;
    mr_status st = text != NULL ? split_rest(fit, text, &cut, err)
                                : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory writing the JSON");
    if (st == MR_OK && cut == NULL) st = mr__outfile_write(out, text, strlen(text), err);
    if (st == MR_OK && cut != NULL) {
        st = mr__outfile_write(out, text, (size_t)(cut - text), err);
        if (st == MR_OK) st = put_levels(fit, out, err);
        if (st == MR_OK) st = mr__outfile_write(out, cut, strlen(cut), err);
    }
    if (st == MR_OK) st = mr__outfile_write(out, "\n", 1, err);
    free(text);
    return st;
}

mr_status mr_fit_write_json(const mr_fit *fit, const char *path, char *msg, size_t msgcap)
{
    json_t *root = object(fit, mr__json_fit_fields, fit, 0);
    const char *input = strcmp(fit->path, "<stdin>") == 0 ? "-" : fit->path;
    mr__outfile *out = NULL;
    mr__error err;
    mr__error_clear(&err);
    if (root == NULL) mr__fail(&err, MR_ERR_NO_MEMORY, "%s: out of memory building the JSON", path);
    else if (mr__outfile_open(&out, path, &input, 1, &err) == MR_OK) {
        if (write_document(fit, root, out, &err) == MR_OK) mr__outfile_commit(out, &err);
        else mr__outfile_abort(out);
    }
    json_decref(root);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
