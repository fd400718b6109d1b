/* survey_report.c - a survey (fit/survey.h) as text and as JSON: per
 * column its kind, missing cells, numbers' range and mean, distinct
 * values and the most frequent. */
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "fit/survey.h"
#include "output/json_text.h"
#include "output/json_util.h"

#define TOP 5

/* integer: every non-missing cell is an integer; decimal: a number; text:
 * some cell is not; empty: every cell is missing. */
static const char *kind(const mr__survey_col *c, uint64_t cells)
{
    uint64_t present = cells - c->missing;
    if (present == 0) return "empty";
    if (c->numbers < present) return "text";
    return c->integers == present ? "integer" : "decimal";
}

static uint64_t cells(const mr_survey *s) { return s->c.rows - s->c.malformed; }

/* The ids of the TOP most frequent values: most first, then first met. */
static size_t top_values(const mr__survey_col *c, size_t top[TOP])
{
    size_t n = 0, j, i;
    if (c->over) return 0;
    for (j = 0; j < c->values.n; j++) {
        for (i = n; i > 0 && c->count[top[i - 1]] < c->count[j]; i--)
            if (i < TOP) top[i] = top[i - 1];
        if (i < TOP) top[i] = j;
        if (n < TOP) n++;
    }
    return n;
}

static char *value_text(const mr__survey_col *c, size_t id)
{
    const mr__level_name *v = &c->values.name[id];
    char *t = mr__malloc(v->len + 1);
    if (t) memcpy(t, v->str, v->len), t[v->len] = '\0';
    return t;
}

static void text_column(mr__strbuf *b, const mr_survey *s, size_t k)
{
    const mr__survey_col *c = &s->c.col[k];
    size_t top[TOP], n = top_values(c, top), i;
    const char *kd = kind(c, cells(s));
    mr__strbuf_printf(b, "  %-20s %-8s %10llu ", s->name[k], kd, (unsigned long long)c->missing);
    if (c->over) {
        char more[32];
        snprintf(more, sizeof more, "> %zu", s->c.cap);
        mr__strbuf_printf(b, "%12s", more);
    } else {
        mr__strbuf_printf(b, "%12zu", c->values.n);
    }
    if (c->numbers > 0 && strcmp(kd, "text") != 0)
        mr__strbuf_printf(b, "  min %.6g  max %.6g  mean %.6g", c->min, c->max, c->sum / (double)c->numbers);
    mr__strbuf_printf(b, "\n");
    if (n == 0) return;
    mr__strbuf_printf(b, "  %-20s most frequent:", "");
    for (i = 0; i < n; i++) {
        char *t = value_text(c, top[i]);
        mr__strbuf_printf(b, "%s '%s' %llu", i ? "," : "", t ? t : "?", (unsigned long long)c->count[top[i]]);
        mr__free(t);
    }
    mr__strbuf_printf(b, "\n");
}

char *mr_survey_report(const mr_survey *s)
{
    mr__strbuf b;
    size_t k;
    if (!s->done) return NULL;
    mr__strbuf_init(&b);
    mr__strbuf_printf(&b, "millrace survey of %s\n\n", strcmp(s->path, "-") == 0 ? "<stdin>" : s->path);
    mr__strbuf_printf(&b, "rows       %llu read, %llu malformed", (unsigned long long)s->c.rows,
                      (unsigned long long)s->c.malformed);
    if (s->c.malformed)
        mr__strbuf_printf(&b, " (left out; the first at line %llu: %zu fields, the header has %zu)",
                          (unsigned long long)s->c.first_malformed_line, s->c.first_malformed_fields, s->c.nfields);
    mr__strbuf_printf(&b, "\ncolumns    %zu; missing cells:", s->c.nfields);
    for (k = 0; k < s->nmissing; k++) mr__strbuf_printf(&b, " '%s'", s->missing[k]);
    mr__strbuf_printf(&b, "\n\n  %-20s %-8s %10s %12s\n", "column", "kind", "missing", "distinct");
    for (k = 0; k < s->c.nfields; k++) text_column(&b, s, k);
    mr__strbuf_printf(&b, "\ndistinct values are counted exactly up to %zu a column; past that only 'more than' is "
                          "known and no frequent values are kept\n", s->c.cap);
    return mr__strbuf_take(&b);
}

static json_t *json_column(const mr_survey *s, size_t k)
{
    const mr__survey_col *c = &s->c.col[k];
    size_t top[TOP], n = top_values(c, top), i;
    int numeric = c->numbers > 0 && strcmp(kind(c, cells(s)), "text") != 0;
    json_t *o = json_object(), *t = json_array();
    o = mr__json_put(o, "name", mr__json_text(s->name[k]));
    o = mr__json_put(o, "kind", json_string(kind(c, cells(s))));
    o = mr__json_put(o, "missing", json_integer((json_int_t)c->missing));
    o = mr__json_put(o, "numbers", json_integer((json_int_t)c->numbers));
    o = mr__json_put(o, "min", numeric ? mr__json_num(c->min) : json_null());
    o = mr__json_put(o, "max", numeric ? mr__json_num(c->max) : json_null());
    o = mr__json_put(o, "mean", numeric ? mr__json_num(c->sum / (double)c->numbers) : json_null());
    o = mr__json_put(o, "distinct", c->over ? json_null() : json_integer((json_int_t)c->values.n));
    o = mr__json_put(o, "distinct_more_than", c->over ? json_integer((json_int_t)s->c.cap) : json_null());
    for (i = 0; t != NULL && i < n; i++) {
        char *v = value_text(c, top[i]);
        json_t *e = json_object();
        e = mr__json_put(e, "value", v ? mr__json_text(v) : NULL);
        e = mr__json_put(e, "count", json_integer((json_int_t)c->count[top[i]]));
        t = mr__json_append(t, e);
        mr__free(v);
    }
    return mr__json_put(o, "most_frequent", t);
}

static json_t *json_root(const mr_survey *s)
{
    json_t *o = json_object(), *rows = json_object(), *cols = json_array(), *miss = json_array();
    size_t k;
    o = mr__json_put(o, "format", json_string("millrace-survey"));
    o = mr__json_put(o, "format_version", json_integer(1));
    o = mr__json_put(o, "path", mr__json_text(strcmp(s->path, "-") == 0 ? "<stdin>" : s->path));
    rows = mr__json_put(rows, "read", json_integer((json_int_t)s->c.rows));
    rows = mr__json_put(rows, "malformed", json_integer((json_int_t)s->c.malformed));
    rows = mr__json_put(rows, "first_malformed_line",
                        s->c.malformed ? json_integer((json_int_t)s->c.first_malformed_line) : json_null());
    o = mr__json_put(o, "rows", rows);
    for (k = 0; miss != NULL && k < s->nmissing; k++) miss = mr__json_append(miss, mr__json_text(s->missing[k]));
    o = mr__json_put(o, "missing_tokens", miss);
    o = mr__json_put(o, "distinct_cap", json_integer((json_int_t)s->c.cap));
    for (k = 0; cols != NULL && k < s->c.nfields; k++) cols = mr__json_append(cols, json_column(s, k));
    return mr__json_put(o, "columns", cols);
}

mr_status mr_survey_write_json(mr_survey *s, const char *path)
{
    const char *input;
    json_t *root;
    mr_status st;
    mr__error_clear(&s->err);
    if (!s->done) return mr__fail(&s->err, MR_ERR_USAGE, "no survey to write");
    input = s->path;
    root = json_root(s);
    if (root == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "%s: out of memory building the JSON", path);
    st = mr__json_write_file(root, path, &input, 1, &s->err);
    json_decref(root);
    return st;
}
