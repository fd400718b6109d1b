/* drift_write.c - a comparison of two fits for programs: JSON (everything)
 * and CSV (the coefficients, one row each), both written atomically
 * through common/outfile.c. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "output/csv_cells.h"
#include "output/drift.h"
#include "output/json_text.h"
#include "output/json_util.h"

#define DRIFT_FORMAT "millrace-drift"
#define DRIFT_FORMAT_VERSION 2 /* 2: standard_error for std_error in key and column names */

static const char *status_word(mr__drift_kind k)
{
    switch (k) {
    case MR__DRIFT_NEW: return "new";
    case MR__DRIFT_VANISHED: return "vanished";
    case MR__DRIFT_ALIASED: return "aliased";
    default: return "both";
    }
}

static json_t *checksum(uint64_t x)
{
    char buf[40];
    snprintf(buf, sizeof buf, "fnv1a64w:%016llx", (unsigned long long)x);
    return json_string(buf);
}

static json_t *input(const mr_fit *f)
{
    json_t *o = json_object(), *file = f->file_known ? json_object() : json_null();
    if (f->file_known) {
        file = mr__json_put(file, "size", json_integer((json_int_t)f->file_size));
        file = mr__json_put(file, "mtime_ns", json_integer((json_int_t)f->file_mtime_ns));
    }
    o = mr__json_put(o, "path", mr__json_text(f->path));
    o = mr__json_put(o, "bytes", json_integer((json_int_t)f->bytes));
    o = mr__json_put(o, "decompressed_bytes", json_integer((json_int_t)f->decompressed_bytes));
    o = mr__json_put(o, "checksum", checksum(f->checksum));
    o = mr__json_put(o, "file", file);
    return mr__json_put(o, "fitted", mr__json_text(f->run_known ? f->started : NULL));
}

static json_t *counted(const mr__drift_count *c)
{
    json_t *o = json_object();
    o = mr__json_put(o, "old", json_integer((json_int_t)c->old_n));
    o = mr__json_put(o, "new", json_integer((json_int_t)c->new_n));
    return mr__json_put(o, "change", json_integer((json_int_t)(c->new_n - c->old_n)));
}

static json_t *counts(const mr__drift_count *c, size_t n)
{
    json_t *o = json_object();
    size_t i;
    for (i = 0; o != NULL && i < n; i++) o = mr__json_put(o, c[i].name, counted(&c[i]));
    return o;
}

static json_t *real_pair(double old_x, double new_x)
{
    json_t *o = json_object();
    o = mr__json_put(o, "old", mr__json_num(old_x));
    o = mr__json_put(o, "new", mr__json_num(new_x));
    return mr__json_put(o, "change", mr__json_num(new_x - old_x));
}

static json_t *coefficient(const mr__drift_coef *c)
{
    json_t *o = json_object();
    o = mr__json_put(o, "name", mr__json_text(c->name));
    o = mr__json_put(o, "status", json_string(status_word(c->kind)));
    o = mr__json_put(o, "old_estimate", mr__json_num(c->old_est));
    o = mr__json_put(o, "new_estimate", mr__json_num(c->new_est));
    o = mr__json_put(o, "change", mr__json_num(c->change));
    o = mr__json_put(o, "old_standard_error", mr__json_num(c->old_se));
    o = mr__json_put(o, "new_standard_error", mr__json_num(c->new_se));
    o = mr__json_put(o, "standard_error_used", mr__json_num(c->se));
    o = mr__json_put(o, "z", mr__json_num(c->z));
    o = mr__json_put(o, "z_independent", mr__json_num(c->z_indep));
    return mr__json_put(o, "flagged", json_boolean(c->flagged));
}

static json_t *coefficients(const mr_drift *d)
{
    json_t *a = json_array();
    size_t i;
    for (i = 0; i < d->ncoef; i++) a = mr__json_append(a, coefficient(&d->coef[i]));
    return a;
}

static json_t *levels(const mr_drift *d)
{
    json_t *a = json_array();
    size_t i;
    for (i = 0; i < d->nlevels; i++) {
        json_t *l = json_object();
        l = mr__json_put(l, "factor", mr__json_text(d->level[i].factor));
        l = mr__json_put(l, "level", mr__json_text(d->level[i].level));
        a = mr__json_append(a, mr__json_put(l, "status", json_string(d->level[i].added ? "new" : "vanished")));
    }
    return a;
}

static json_t *drift_json(const mr_drift *d)
{
    const mr_fit *o = d->old_fit, *n = d->new_fit;
    json_t *root = json_object();
    root = mr__json_put(root, "format", json_string(DRIFT_FORMAT));
    root = mr__json_put(root, "format_version", json_integer(DRIFT_FORMAT_VERSION));
    root = mr__json_put(root, "millrace_version", json_string(MR_VERSION_STRING));
    root = mr__json_put(root, "threshold", mr__json_num(d->threshold));
    root = mr__json_put(root, "standard_error_rule", json_string(MR__DRIFT_SE_RULE));
    root = mr__json_put(root, "flagged", json_integer((json_int_t)mr_drift_nflagged(d)));
    root = mr__json_put(root, "old", input(o));
    root = mr__json_put(root, "new", input(n));
    root = mr__json_put(root, "input_changed", json_boolean(mr__drift_input_changed(d)));
    root = mr__json_put(root, "rows", counts(d->rows, d->nrows));
    root = mr__json_put(root, "missing_by_column", counts(d->missing, d->nmissing));
    root = mr__json_put(root, "deviance_per_row",
                        real_pair(mr__drift_deviance_per_row(o), mr__drift_deviance_per_row(n)));
    root = mr__json_put(root, "dispersion", real_pair(o->dispersion, n->dispersion));
    root = mr__json_put(root, "coefficients", coefficients(d));
    return mr__json_put(root, "levels", levels(d));
}

mr_status mr_drift_write_json(const mr_drift *d, const char *path, const char *const *inputs, size_t ninputs,
                              char *msg, size_t msgcap)
{
    json_t *root = drift_json(d);
    mr__error err;
    mr__error_clear(&err);
    if (root == NULL) mr__fail(&err, MR_ERR_NO_MEMORY, "%s: out of memory building the JSON", path);
    else mr__json_write_file(root, path, inputs, ninputs, &err);
    json_decref(root);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}

static char *drift_csv(const mr_drift *d)
{
    mr__strbuf b;
    size_t i;
    mr__strbuf_init(&b);
    mr__strbuf_printf(&b, "name,status,old_estimate,new_estimate,change,old_standard_error,new_standard_error,standard_error_used,"
                          "z,z_independent,flagged\r\n");
    for (i = 0; i < d->ncoef; i++) {
        const mr__drift_coef *c = &d->coef[i];
        mr__strbuf_append_csv(&b, c->name, strlen(c->name));
        mr__strbuf_printf(&b, ",%s", status_word(c->kind));
        mr__csv_number(&b, c->old_est);
        mr__csv_number(&b, c->new_est);
        mr__csv_number(&b, c->change);
        mr__csv_number(&b, c->old_se);
        mr__csv_number(&b, c->new_se);
        mr__csv_number(&b, c->se);
        mr__csv_number(&b, c->z);
        mr__csv_number(&b, c->z_indep);
        mr__strbuf_printf(&b, ",%d\r\n", c->flagged);
    }
    return mr__strbuf_take(&b);
}

mr_status mr_drift_write_csv(const mr_drift *d, const char *path, const char *const *inputs, size_t ninputs,
                             char *msg, size_t msgcap)
{
    return mr__csv_write(drift_csv(d), path, inputs, ninputs, msg, msgcap);
}
