/* json_read.c - a fit read back from the JSON json.c writes, by the same
 * tables (json_schema.c): every field that is not derived or optional is required and
 * checked for its type, so a damaged or foreign file is one clear error
 * naming the file and the field (or jansson's line and column when the
 * text is not JSON at all), never a half-filled fit. */
#define _POSIX_C_SOURCE 200809L /* O_CLOEXEC */
#include <jansson.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdarg.h>
#include <string.h>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/fileio.h"
#include "common/utf8.h"
#include "family/family.h"
#include "fit/fit.h"
#include "input/codec.h"
#include "output/json_schema.h"
#include "output/json_text.h"
#include "output/json_upgrade.h"

typedef struct reader {
    const char *path;
    mr_fit *fit;
    char *msg;
    size_t cap;
    char where[512]; /* the field being read, e.g. model.terms[2].label */
    size_t len;
    size_t mean_room; /* entries of fit->many_mean_col and _val */
    /* The `many` levels' records read apart (mr_fit_read_json): their
     * text [apart_lo, apart_hi) in the file, NULL when read in the tree;
     * apart_broken: that text is not as json.c lays it out (read the
     * whole tree instead) */
    const char *apart_lo, *apart_hi;
    int apart_broken;
} reader;

static mr_status say(reader *r, mr_status st, const char *fmt, ...) __attribute__((format(printf, 3, 4)));

static mr_status say(reader *r, mr_status st, const char *fmt, ...)
{
    va_list ap;
    if (r->cap == 0) return st;
    va_start(ap, fmt);
    mr__utf8_mend_cut(r->msg, r->cap, vsnprintf(r->msg, r->cap, fmt, ap));
    va_end(ap);
    return st;
}

static mr_status bad(reader *r, const char *what)
{
    return say(r, MR_ERR_FORMAT, "%s: '%s' %s", r->path, r->where, what);
}

static mr_status no_memory(reader *r) { return say(r, MR_ERR_NO_MEMORY, "%s: out of memory reading the fit", r->path); }

/* Descends into a key or an array element; returns where to come back to. */
static size_t enter_at(reader *r, int n, size_t at)
{
    size_t room = sizeof r->where - at;
    r->len = n < 0 || (size_t)n >= room ? mr__utf8_cut(r->where, sizeof r->where - 1) : at + (size_t)n;
    r->where[r->len] = '\0';
    return at;
}

static size_t enter(reader *r, const char *key)
{
    size_t at = r->len;
    return enter_at(r, snprintf(r->where + at, sizeof r->where - at, "%s%s", at ? "." : "", key), at);
}

static size_t enter_item(reader *r, size_t i)
{
    size_t at = r->len;
    return enter_at(r, snprintf(r->where + at, sizeof r->where - at, "[%zu]", i), at);
}

static void leave(reader *r, size_t at)
{
    r->len = at;
    r->where[at] = '\0';
}

static mr_status unescape(reader *r, const char *s, size_t n, char **out)
{
    mr_status st = mr__json_unescape(s, n, out);
    if (st == MR_ERR_NO_MEMORY) return no_memory(r);
    return st == MR_OK ? MR_OK : bad(r, "holds a backslash that begins neither \\\\ nor \\xHH (HH not 00)");
}

static mr_status read_text(reader *r, json_t *v, char **out)
{
    if (!json_is_string(v)) return bad(r, "should be a string");
    return unescape(r, json_string_value(v), json_string_length(v), out);
}

static mr_status read_integer(reader *r, json_t *v, json_int_t lo, json_int_t hi, json_int_t *out)
{
    if (!json_is_integer(v)) return bad(r, "should be a whole number");
    *out = json_integer_value(v);
    if (*out < lo || *out > hi) return bad(r, "is out of range");
    return MR_OK;
}

/* The convergence criterion's words before the step in standard errors:
 * the Newton decrement's fits took their last step without a pass, as
 * the step rule's do; the deviance change's stopped at their last pass,
 * as a fit stopped at the boundary does. */
static int earlier_criterion(const char *w, int *out)
{
    if (strcmp(w, "newton decrement") == 0) *out = 1;
    else if (strcmp(w, "deviance change") == 0) *out = 0;
    else return 0;
    return 1;
}

static mr_status read_word(reader *r, json_t *v, const char **out)
{
    if (!json_is_string(v)) return bad(r, "should be a string");
    *out = json_string_value(v);
    return MR_OK;
}

static mr_status read_named(reader *r, const mr__jfield *fl, json_t *v, int *out)
{
    const char *w = "";
    int k;
    MR__TRY(read_word(r, v, &w));
    switch (fl->kind) {
    case MR__J_CHOICE:
        if (strcmp(fl->key, "criterion") == 0 && earlier_criterion(w, out)) return MR_OK;
        if (strcmp(w, fl->yes) != 0 && strcmp(w, fl->no) != 0) return bad(r, "is not one of its two words");
        *out = strcmp(w, fl->yes) == 0;
        return MR_OK;
    case MR__J_FAMILY: k = mr__family_from_name(w); break;
    case MR__J_COMPRESSION:
        k = mr__compression_from_name(w);
        if (k < 0) return bad(r, "names no compression this library knows");
        break;
    default: k = mr__link_from_name(w); break;
    }
    if (k < 0) return bad(r, "names no family or link this library knows");
    *out = k;
    return MR_OK;
}

static mr_status read_checksum(reader *r, json_t *v, uint64_t *out)
{
    const char *w = "", *prefix = "fnv1a64w:";
    size_t i, n = strlen(prefix);
    uint64_t x = 0;
    MR__TRY(read_word(r, v, &w));
    if (strncmp(w, prefix, n) != 0 || strlen(w) != n + 16) return bad(r, "should be fnv1a64w: and 16 hex digits");
    for (i = n; i < n + 16; i++) {
        const char *d = strchr("0123456789abcdef", w[i]);
        if (w[i] == '\0' || d == NULL) return bad(r, "should be fnv1a64w: and 16 hex digits");
        x = x << 4 | (uint64_t)(d - "0123456789abcdef");
    }
    *out = x;
    return MR_OK;
}

/* Whole numbers, by the width of their slot. */
static mr_status read_whole(reader *r, const mr__jfield *fl, json_t *v, void *slot)
{
    json_int_t i = 0;
    switch (fl->kind) {
    case MR__J_INT:
        MR__TRY(read_integer(r, v, INT_MIN, INT_MAX, &i));
        *(int *)slot = (int)i;
        return MR_OK;
    case MR__J_I64:
        MR__TRY(read_integer(r, v, LLONG_MIN, LLONG_MAX, &i));
        *(int64_t *)slot = i;
        return MR_OK;
    case MR__J_U64:
        MR__TRY(read_integer(r, v, 0, LLONG_MAX, &i));
        *(uint64_t *)slot = (uint64_t)i;
        return MR_OK;
    default: /* SIZE, COUNT_OR_NULL (0 is written as null) */
        *(size_t *)slot = 0;
        if (fl->kind == MR__J_COUNT_OR_NULL && json_is_null(v)) return MR_OK;
        MR__TRY(read_integer(r, v, fl->kind == MR__J_SIZE ? 0 : 1, LLONG_MAX, &i));
        *(size_t *)slot = (size_t)i;
        return MR_OK;
    }
}

static mr_status read_char(reader *r, json_t *v, char *slot)
{
    char *t;
    size_t n;
    MR__TRY(read_text(r, v, &t));
    *slot = t[0];
    n = strlen(t);
    mr__free(t);
    return n == 1 ? MR_OK : bad(r, "should be one character");
}

static mr_status read_scalar(reader *r, const mr__jfield *fl, json_t *v, void *slot)
{
    switch (fl->kind) {
    case MR__J_INT:
    case MR__J_SIZE:
    case MR__J_U64:
    case MR__J_I64:
    case MR__J_COUNT_OR_NULL: return read_whole(r, fl, v, slot);
    case MR__J_REAL:
        if (!json_is_null(v) && !json_is_number(v)) return bad(r, "should be a number or null");
        *(double *)slot = json_is_null(v) ? NAN : json_number_value(v);
        return MR_OK;
    case MR__J_BOOL:
    case MR__J_BOOL_ADDED:
        if (!json_is_boolean(v)) return bad(r, "should be true or false");
        *(int *)slot = json_is_true(v);
        return MR_OK;
    case MR__J_TEXT_OR_NULL:
        if (json_is_null(v)) return MR_OK;
        /* fall through */
    case MR__J_TEXT: return read_text(r, v, (char **)slot);
    case MR__J_CHECKSUM: return read_checksum(r, v, slot);
    case MR__J_CHAR: return read_char(r, v, slot);
    default: return read_named(r, fl, v, slot);
    }
}

static mr_status read_object(reader *r, json_t *o, const mr__jfield *fields, void *base, size_t index);

/* An array of n elements: room for them, zeroed, at `at` of base (and the
 * count set, so that the fit frees whatever was read when a later one
 * fails). */
static mr_status make_room(reader *r, json_t *v, const mr__jfield *fl, void *base, size_t unit, char **out)
{
    size_t n = json_is_object(v) ? json_object_size(v) : json_array_size(v);
    if (fl->kind == MR__J_KEYED ? !json_is_object(v) : !json_is_array(v))
        return bad(r, fl->kind == MR__J_KEYED ? "should be an object" : "should be an array");
    *out = mr__calloc(n + 1, unit);
    if (*out == NULL) return no_memory(r);
    *(char **)((char *)base + fl->at) = *out;
    *(size_t *)((char *)base + fl->count) = fl->kind == MR__J_TEXTS ? 0 : n;
    return MR_OK;
}

static mr_status read_list(reader *r, const mr__jfield *fl, json_t *v, void *base)
{
    char *room;
    size_t i, unit = fl->kind == MR__J_TEXTS ? sizeof(char *) : fl->kind == MR__J_REALS ? sizeof(double) : fl->size;
    mr__jfield item = {NULL, fl->kind == MR__J_TEXTS ? MR__J_TEXT : MR__J_REAL, 0, 0, 0, 0, 0, 0, NULL, NULL, NULL};
    MR__TRY(make_room(r, v, fl, base, unit, &room));
    for (i = 0; i < json_array_size(v); i++) {
        size_t back = enter_item(r, i);
        mr_status st = fl->kind == MR__J_STRUCTS ? read_object(r, json_array_get(v, i), fl->sub, room + i * unit, 0)
                                                  : read_scalar(r, &item, json_array_get(v, i), room + i * unit);
        if (st != MR_OK) return st;
        if (fl->kind == MR__J_TEXTS) (*(size_t *)((char *)base + fl->count))++;
        leave(r, back);
    }
    return MR_OK;
}

static mr_status read_keyed(reader *r, const mr__jfield *fl, json_t *v, void *base)
{
    char *room;
    const char *key;
    json_t *value;
    size_t i = 0;
    MR__TRY(make_room(r, v, fl, base, fl->size, &room));
    json_object_foreach(v, key, value) {
        char *elem = room + i++ * fl->size;
        size_t back = enter(r, key);
        MR__TRY(unescape(r, key, strlen(key), (char **)(elem + fl->key_at)));
        MR__TRY(read_object(r, value, fl->sub, elem, 0));
        leave(r, back);
    }
    return MR_OK;
}

/* Records: each indexed field of `sub` gets its array, then each element. */
static mr_status read_records(reader *r, const mr__jfield *fl, json_t *v, void *base)
{
    const mr__jfield *s;
    size_t i, n = json_array_size(v);
    if (!json_is_array(v)) return bad(r, "should be an array");
    *(size_t *)((char *)base + fl->count) = n;
    for (s = fl->sub; s->key != NULL; s++)
        if (s->indexed && (*(void **)((char *)base + s->at) = mr__calloc(n + 1, mr__jfield_unit(s->kind))) == NULL)
            return no_memory(r);
    for (i = 0; i < n; i++) {
        size_t back = enter_item(r, i);
        MR__TRY(read_object(r, json_array_get(v, i), fl->sub, base, i));
        leave(r, back);
    }
    return MR_OK;
}

/* The records of the array read apart, in the layout json.c writes:
 * ",\n   {...\n   }" a record (no comma before the first), then "\n  ".
 * Each is parsed alone; text laid out otherwise, or not JSON, marks the
 * reading broken (the caller then reads the whole tree). */
static const char rec_open[] = "\n   {", rec_close[] = "\n   }";

static size_t count_apart(const reader *r)
{
    const char *p = r->apart_lo;
    size_t n = 0, len = sizeof rec_open - 1;
    /* the text is NUL-ended and JSON holds no NUL: a NUL inside ends the
     * count early, and the reading finds the text broken */
    while ((p = strstr(p, rec_open)) != NULL && p < r->apart_hi) n++, p += len;
    return n;
}

static mr_status broken(reader *r)
{
    r->apart_broken = 1;
    return MR_ERR_FORMAT;
}

static mr_status read_records_apart(reader *r, const mr__jfield *fl, void *base)
{
    const mr__jfield *s;
    const char *p = r->apart_lo;
    size_t i, n = count_apart(r);
    *(size_t *)((char *)base + fl->count) = n;
    for (s = fl->sub; s->key != NULL; s++)
        if (s->indexed && (*(void **)((char *)base + s->at) = mr__calloc(n + 1, mr__jfield_unit(s->kind))) == NULL)
            return no_memory(r);
    for (i = 0; i < n; i++) {
        const char *end;
        json_t *rec;
        size_t back;
        mr_status st;
        if (i > 0 && *p++ != ',') return broken(r);
        if ((size_t)(r->apart_hi - p) < sizeof rec_open || memcmp(p, rec_open, sizeof rec_open - 1) != 0)
            return broken(r);
        p += sizeof rec_open - 2; /* at the '{' */
        end = strstr(p, rec_close);
        if (end == NULL || end >= r->apart_hi) return broken(r);
        end += sizeof rec_close - 1; /* after the '}' */
        if ((rec = json_loadb(p, (size_t)(end - p), JSON_REJECT_DUPLICATES, NULL)) == NULL) return broken(r);
        back = enter_item(r, i);
        st = read_object(r, rec, fl->sub, base, i);
        json_decref(rec);
        if (st != MR_OK) return st;
        leave(r, back);
        p = end;
    }
    if ((size_t)(r->apart_hi - p) != (n > 0 ? 1 + MR__JSON_APART_DEPTH : 0) || (n > 0 && *p != '\n')) return broken(r);
    return MR_OK;
}

static mr_status read_missing(reader *r, json_t *v, mr_fit *f)
{
    const char *key;
    json_t *value;
    size_t n = json_object_size(v);
    if (!json_is_object(v)) return bad(r, "should be an object");
    f->missing_name = mr__calloc(n + 1, sizeof *f->missing_name);
    f->missing_count = mr__calloc(n + 1, sizeof *f->missing_count);
    if (f->missing_name == NULL || f->missing_count == NULL) return no_memory(r);
    json_object_foreach(v, key, value) {
        size_t back = enter(r, key);
        json_int_t c = 0;
        MR__TRY(read_integer(r, value, 0, LLONG_MAX, &c));
        MR__TRY(unescape(r, key, strlen(key), &f->missing_name[f->nmissing]));
        f->missing_count[f->nmissing++] = (uint64_t)c;
        leave(r, back);
    }
    return MR_OK;
}

static mr_status read_covariance(reader *r, json_t *v, mr_fit *f, double **out)
{
    size_t i, j, p = f->p;
    double *cov;
    if (!json_is_array(v) || json_array_size(v) != p) return bad(r, "should be one row per coefficient");
    if ((cov = *out = mr__malloc_array(p * p + 1, sizeof *cov)) == NULL) return no_memory(r);
    for (i = 0; i < p; i++) {
        json_t *row = json_array_get(v, i);
        size_t back = enter_item(r, i);
        if (!json_is_array(row) || json_array_size(row) != p) return bad(r, "should hold one number per coefficient");
        for (j = 0; j < p; j++) {
            json_t *x = json_array_get(row, j);
            if (!json_is_null(x) && !json_is_number(x)) return bad(r, "should hold numbers or null");
            cov[j * p + i] = json_is_null(x) ? NAN : json_number_value(x);
        }
        leave(r, back);
    }
    return MR_OK;
}

/* A term's parts: their names in order; a part is a factor exactly when
 * the fit has a factor of that name (model.factors comes first). */
static mr_status read_term_columns(reader *r, json_t *v, mr_fit *f, mr__fit_term *t)
{
    size_t k;
    if (!json_is_array(v) || json_array_size(v) < 1 || json_array_size(v) > MR__MAX_INTERACT)
        return bad(r, "should be an array of 1 to 3 columns");
    for (k = 0; k < json_array_size(v); k++) {
        json_t *c = json_array_get(v, k);
        size_t back = enter_item(r, k), inner;
        const char *type = "";
        if (!json_is_object(c)) return bad(r, "should be an object");
        inner = enter(r, "name");
        MR__TRY(read_text(r, json_object_get(c, "name"), &t->part[k]));
        t->nparts++;
        leave(r, inner);
        inner = enter(r, "type");
        MR__TRY(read_word(r, json_object_get(c, "type"), &type));
        if (strcmp(type, mr__fit_part_type(f, t, k)) != 0)
            return bad(r, "does not agree with model.factors and the term's spline");
        leave(r, inner);
        leave(r, back);
    }
    return MR_OK;
}

/* The coefficient named by the JSON key `key` (escaped, json_text.h), at
 * *col or after it; f->p when none is. */
static mr_status find_coefficient(reader *r, const mr_fit *f, const char *key, size_t *col)
{
    char *name = NULL;
    MR__TRY(unescape(r, key, strlen(key), &name));
    while (*col < f->p && strcmp(f->name[*col], name) != 0) ++*col;
    mr__free(name);
    return MR_OK;
}

/* Level `index`'s weighted means (json.c, level_means): on every level or
 * on none, a fit written before they were kept. */
static mr_status read_level_means(reader *r, json_t *v, mr_fit *f, size_t index)
{
    const char *key;
    json_t *value;
    size_t col = 0, n;
    if (index == 0 && v != NULL &&
        (f->many_mean_start = mr__calloc(f->nmany + 1, sizeof *f->many_mean_start)) == NULL)
        return no_memory(r);
    if ((v != NULL) != (f->many_mean_start != NULL))
        return bad(r, v != NULL ? "is given here but not on the first level" : "is missing (the first level has it)");
    if (v == NULL) return MR_OK;
    if (!json_is_object(v)) return bad(r, "should be an object");
    n = f->many_mean_start[index];
    json_object_foreach(v, key, value) {
        size_t back = enter(r, key);
        MR__TRY(find_coefficient(r, f, key, &col));
        if (col == f->p) return bad(r, "should name a coefficient, in the coefficients' order");
        if (!json_is_number(value)) return bad(r, "should be a number");
        if (n == r->mean_room && mr__fit_grow_many_means(f, &r->mean_room) != MR_OK) return no_memory(r);
        f->many_mean_col[n] = col++;
        f->many_mean_val[n++] = json_number_value(value);
        leave(r, back);
    }
    f->many_mean_start[index + 1] = n;
    return MR_OK;
}

static mr_status read_value(reader *r, const mr__jfield *fl, json_t *v, void *base, size_t index)
{
    mr_fit *f = r->fit;
    switch (fl->kind) {
    case MR__J_SPECIAL:
        if (fl->which == MR__JS_MISSING) return read_missing(r, v, f);
        if (fl->which == MR__JS_COVARIANCE) return read_covariance(r, v, f, &f->cov);
        if (fl->which == MR__JS_ROBUST_COVARIANCE) return read_covariance(r, v, f, &f->robust_cov);
        if (fl->which == MR__JS_LEVEL_MEANS) return read_level_means(r, v, f, index);
        return read_term_columns(r, v, f, base);
    case MR__J_OBJECT_OPTIONAL:
        *(int *)((char *)base + fl->count) = 1;
        return read_object(r, v, fl->sub, base, index);
    case MR__J_OBJECT_ADDED:
    case MR__J_OBJECT_OR_NULL:
        *(int *)((char *)base + fl->count) = !json_is_null(v);
        if (json_is_null(v)) return MR_OK;
        /* fall through */
    case MR__J_OBJECT: return read_object(r, v, fl->sub, base, index);
    case MR__J_TEXTS:
    case MR__J_REALS:
    case MR__J_STRUCTS: return read_list(r, fl, v, base);
    case MR__J_KEYED: return read_keyed(r, fl, v, base);
    case MR__J_RECORDS_APART:
        if (r->apart_lo != NULL) return read_records_apart(r, fl, base);
        /* fall through */
    case MR__J_RECORDS: return read_records(r, fl, v, base);
    default: return read_scalar(r, fl, v, mr__jfield_slot(fl, base, index));
    }
}

static mr_status read_object(reader *r, json_t *o, const mr__jfield *fields, void *base, size_t index)
{
    const mr__jfield *fl;
    if (!json_is_object(o)) return bad(r, "should be an object");
    for (fl = fields; fl->key != NULL; fl++) {
        size_t back;
        json_t *v = json_object_get(o, fl->key);
        if (fl->kind == MR__J_DERIVED || (fl->kind == MR__J_OBJECT_OPTIONAL && v == NULL)) continue;
        back = enter(r, fl->key);
        if (v == NULL && fl->kind == MR__J_OBJECT_ADDED) v = json_null();
        if (v == NULL && fl->kind == MR__J_BOOL_ADDED) v = json_false();
        if (v == NULL && fl->kind == MR__J_SPECIAL && fl->which == MR__JS_LEVEL_MEANS) {
            MR__TRY(read_level_means(r, NULL, r->fit, index));
            leave(r, back);
            continue;
        }
        if (v == NULL) return bad(r, "is missing");
        MR__TRY(read_value(r, fl, v, base, index));
        leave(r, back);
    }
    return MR_OK;
}

static mr_status check_format(reader *r, json_t *root)
{
    json_t *format = json_object_get(root, "format"), *version = json_object_get(root, "format_version");
    if (!json_is_object(root) || !json_is_string(format) || strcmp(json_string_value(format), MR__JSON_FORMAT) != 0)
        return say(r, MR_ERR_FORMAT, "%s: not a fit written by millrace (no \"format\": \"%s\")", r->path,
                   MR__JSON_FORMAT);
    if (!json_is_integer(version) || json_integer_value(version) < MR__JSON_FORMAT_VERSION_OLDEST ||
        json_integer_value(version) > MR__JSON_FORMAT_VERSION)
        return say(r, MR_ERR_FORMAT, "%s: format_version is not %d to %d, the ones this library reads", r->path,
                   MR__JSON_FORMAT_VERSION_OLDEST, MR__JSON_FORMAT_VERSION);
    if (json_integer_value(version) < MR__JSON_FORMAT_VERSION) {
        int up = mr__json_upgrade(root);
        if (up > 0)
            return say(r, MR_ERR_FORMAT, "%s: a format_version 2 fit with both '(intercept)' and a coefficient named "
                                         "'intercept': refit it with that column renamed", r->path);
        if (up < 0) return no_memory(r);
    }
    return MR_OK;
}

/* A spline's knots as mr__spline_make takes them (a scorer rebuilds the
 * basis from them). */
static int spline_knots_ok(const mr__fit_term *t)
{
    size_t k;
    if (t->nboundary != 2 || !(t->boundary[0] < t->boundary[1])) return 0;
    for (k = 0; k < t->nknots; k++)
        if (!(t->knots[k] > t->boundary[0] && t->knots[k] < t->boundary[1]) ||
            (k > 0 && !(t->knots[k] > t->knots[k - 1])))
            return 0;
    return 1;
}

/* What the types alone do not say: terms within the coefficients, spline
 * knots in order, a family's parameter where it has one and only there. */
static mr_status check_consistent(reader *r)
{
    mr_fit *f = r->fit;
    size_t i;
    int takes_param = mr__family_ops_of((mr_family)f->family)->param_name != NULL;
    if (takes_param != f->family_param_given || (takes_param && isnan(f->family_param))) {
        enter(r, "model.family_parameter");
        return bad(r, takes_param ? "is missing or null: the family needs its parameter"
                                  : "is given for a family without one");
    }
    if (!takes_param) f->family_param = NAN;
    if (f->family_param_estimated && !mr__family_ops_of((mr_family)f->family)->param_estimable) {
        enter(r, "model.family_parameter.estimated");
        return bad(r, "is given for a parameter the family does not estimate");
    }
    if (!f->family_param_estimated) f->family_param_se = NAN;
    if (f->family_param_profiled && (mr__family_ops_of((mr_family)f->family)->profile_grid == NULL || f->nprofile == 0)) {
        enter(r, "model.family_parameter.profile");
        return bad(r, "is given for a parameter the family does not profile, or holds no point");
    }
    if (mr__fit_quasi(f)) f->loglik = f->aic = f->bic = NAN; /* numbers a version 2 file may hold */
    if (f->rank > f->p + f->nmany) {
        enter(r, "fit.rank");
        return bad(r, "exceeds the number of coefficients");
    }
    if (f->robust && (f->nrobust_se != f->p || f->robust_cov == NULL ||
                      (strcmp(f->robust_type, "HC0") != 0 && strcmp(f->robust_type, "HC1") != 0))) {
        enter(r, "robust");
        return bad(r, "should be of type HC0 or HC1 with one standard error per coefficient and a covariance");
    }
    for (i = 0; i < f->nterms; i++) {
        const mr__fit_term *t = &f->term[i];
        if (t->first > f->p || t->ncoef > f->p - t->first) {
            enter(r, "model.terms");
            enter_item(r, i);
            return bad(r, "names coefficients the fit does not have");
        }
        if (t->spline && !spline_knots_ok(t)) {
            enter(r, "model.terms");
            enter_item(r, i);
            enter(r, "spline");
            return bad(r, "needs two boundary knots and increasing knots between them");
        }
    }
    return MR_OK;
}

static mr_status load_failed(reader *r, const json_error_t *e)
{
    switch (json_error_code(e)) {
    case json_error_cannot_open_file: return say(r, MR_ERR_IO, "%s", e->text); /* it names the file and why */
    case json_error_out_of_memory: return no_memory(r);
    default: return say(r, MR_ERR_FORMAT, "%s:%d:%d: not a JSON fit: %s", r->path, e->line, e->column, e->text);
    }
}

/* jansson reads a directory as an empty file. */
static mr_status readable(reader *r)
{
    struct stat sb;
    if (stat(r->path, &sb) == 0 && S_ISDIR(sb.st_mode)) return say(r, MR_ERR_IO, "%s: is a directory", r->path);
    return MR_OK;
}

/* The file's text, NUL-ended; NULL when it cannot be read whole (the tree
 * reader then says why). */
static char *file_text(const char *path, size_t *n)
{
    struct stat sb;
    char *text = NULL;
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0) return NULL;
    if (fstat(fd, &sb) == 0 && S_ISREG(sb.st_mode) && (text = mr__malloc((size_t)sb.st_size + 1)) != NULL &&
        mr__pread_full(fd, text, (size_t)sb.st_size, 0) != MR_OK) {
        mr__free(text);
        text = NULL;
    }
    close(fd);
    if (text != NULL) text[*n = (size_t)sb.st_size] = '\0';
    return text;
}

/* The `many` levels' array in text laid out as json.c writes it: the
 * rest of the document, its content left out, into *rest (NULL: no such
 * array), its content [*lo, *hi) in text. */
static mr_status cut_apart(const char *text, size_t n, char **rest, const char **lo, const char **hi)
{
    const char *after = strstr(text, MR__JSON_APART_AFTER), *at = after ? strstr(after, MR__JSON_APART_AT) : NULL;
    const char *close;
    size_t head, tail;
    *rest = NULL;
    if (at == NULL) return MR_OK;
    *lo = at + sizeof MR__JSON_APART_AT - 1;
    close = **lo == ']' ? *lo : strstr(*lo, "\n  ]");
    if (close == NULL) return MR_OK;
    *hi = **lo == ']' ? *lo : close + 1 + MR__JSON_APART_DEPTH;
    head = (size_t)(*lo - text);
    tail = n - (size_t)(*hi - text);
    if ((*rest = mr__malloc(head + tail + 1)) == NULL) return MR_ERR_NO_MEMORY;
    memcpy(*rest, text, head);
    memcpy(*rest + head, *hi, tail);
    (*rest)[head + tail] = '\0';
    return MR_OK;
}

/* The document's tree from the file's text, read once: with a `many`
 * factor of 10^6 levels (186 MB of JSON) a tree of it all took 1 GB, so
 * with `apart` the levels' records are left out of it, to be read one at
 * a time (read_records_apart), when the file is laid out as json.c writes
 * it; otherwise, or when that rest is not JSON, the whole text. */
static json_t *load_tree(reader *r, const char *text, size_t n, int apart, json_error_t *e)
{
    char *rest = NULL;
    json_t *root = NULL;
    /* a file that cannot be read whole: jansson's own reading says why */
    if (text == NULL) return json_load_file(r->path, JSON_REJECT_DUPLICATES, e);
    if (apart && cut_apart(text, n, &rest, &r->apart_lo, &r->apart_hi) == MR_OK && rest != NULL) {
        root = json_loads(rest, JSON_REJECT_DUPLICATES, e);
        mr__free(rest);
    }
    if (root != NULL) return root;
    r->apart_lo = r->apart_hi = NULL;
    return json_loadb(text, n, JSON_REJECT_DUPLICATES, e);
}

static mr_status read_fit(reader *r, const char *text, size_t n, int apart)
{
    json_error_t e;
    json_t *root = load_tree(r, text, n, apart, &e);
    mr_status st;
    if (root == NULL) return load_failed(r, &e);
    if ((r->fit = mr__calloc(1, sizeof *r->fit)) == NULL) st = no_memory(r);
    else st = check_format(r, root);
    if (st == MR_OK) st = read_object(r, root, mr__json_fit_fields, r->fit, 0);
    if (st == MR_OK) st = check_consistent(r);
    /* the term tests are written, never read: the same code gives the same bits from the same numbers */
    if (st == MR_OK && mr__fit_term_tests(r->fit) != MR_OK) st = no_memory(r);
    json_decref(root);
    if (st != MR_OK) {
        mr_fit_free(r->fit);
        r->fit = NULL;
    }
    return st;
}

mr_status mr_fit_read_json(const char *path, mr_fit **out, char *msg, size_t msgcap)
{
    reader r = {path, NULL, msg, msgcap, "", 0, 0, NULL, NULL, 0};
    size_t n = 0;
    char *text;
    mr_status st;
    *out = NULL;
    if (msgcap > 0) msg[0] = '\0';
    MR__TRY(readable(&r));
    text = file_text(path, &n);
    st = read_fit(&r, text, n, 1);
    if (st != MR_OK && r.apart_broken) {
        /* not laid out as written here: the whole tree, as any JSON */
        reader again = {path, NULL, msg, msgcap, "", 0, 0, NULL, NULL, 0};
        r = again;
        st = read_fit(&r, text, n, 0);
    }
    mr__free(text);
    if (st != MR_OK) return st;
    r.fit->status = r.fit->converged ? MR_OK : MR_ERR_NOT_CONVERGED;
    *out = r.fit;
    return MR_OK;
}
