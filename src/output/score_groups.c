/* score_groups.c - a scoring run's observed/expected table by group (the
 * totals the scoring job added, fit/scorer.h) as text, CSV or JSON, with
 * an interval for O/E: the exact Poisson (Garwood) one, or for an outcome
 * of events out of trials (means in (0, 1): binomial) the exact binomial
 * (Clopper-Pearson) one.
 *
 * Why Clopper-Pearson for events out of trials.  O is then a sum of
 * independent events of unequal probabilities (Poisson-binomial), whose
 * variance sum p (1 - p) is below that of a Poisson count of the same mean
 * E, so the Poisson interval is too wide (much too wide when the means are
 * large: O/E cannot pass n / E).  Among counts of n trials with mean E,
 * the binomial of equal probabilities E / n is the most spread (Hoeffding,
 * "On the distribution of the number of successes in independent trials",
 * Ann. Math. Statist. 27 (1956) 713-721): the Clopper-Pearson interval
 * for O / n (Clopper and Pearson, Biometrika 26 (1934) 404-413), times
 * n / E, keeps its level for any spread of the probabilities, and is
 * conservative in the same way the exact Poisson one is for counts.  Like
 * the Poisson one here, at O = 0 (O = n) the bound that exists is the
 * one-sided bound of level P. */
#include <jansson.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/dtoa.h"
#include "common/outfile.h"
#include "common/strbuf.h"
#include "common/threads.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/run.h"
#include "fit/scorer.h"
#include "output/exact_interval.h"
#include "output/json_text.h"

typedef struct oe_row {
    double ratio, low, high;
} oe_row;

/* O / E and its interval from the exact bounds for O (lo, hi). */
static oe_row observed_expected(double o, double e, const double *lohi)
{
    oe_row r;
    r.ratio = o / e;
    r.low = lohi[0] / e;
    r.high = lohi[1] / e;
    return r;
}

/* O events out of n trials with E expected: Clopper-Pearson's bounds for
 * O / n (lo, hi), times n / E (see the top). */
static oe_row observed_expected_binomial(double o, double e, double n, const double *lohi)
{
    oe_row r;
    if (o > n) o = n; /* rounding of sums of w y */
    r.ratio = o / e;
    r.low = lohi[0] * n / e; /* as (bound n) / E, bit for bit */
    r.high = lohi[1] * n / e;
    return r;
}

/* Events out of trials: the fit's means lie in (0, 1). */
static int binomial_groups(const mr_scorer *s)
{
    return mr__family_ops_of((mr_family)s->fit->family)->mu_hi == 1.0;
}

/* Groups of the same counts (O, and n for events out of trials) share
 * their exact bounds, each a bisection of dozens of incomplete gamma or
 * beta evaluations: the bounds are found once per distinct counts. */
typedef struct counts_key {
    uint64_t o, n; /* the doubles' bits: equal bits, equal bounds */
    size_t i;
} counts_key;

static int by_counts(const void *pa, const void *pb)
{
    const counts_key *a = pa, *b = pb;
    if (a->o != b->o) return a->o < b->o ? -1 : 1;
    if (a->n != b->n) return a->n < b->n ? -1 : 1;
    return (a->i > b->i) - (a->i < b->i);
}

static void exact_bounds(const mr_scorer *s, int binomial, size_t i, double *lohi)
{
    double o = s->g.obs[i], n = s->g.prior[i];
    if (!binomial) {
        mr__garwood_interval(o, s->level, &lohi[0], &lohi[1]);
        return;
    }
    if (o > n) o = n;
    mr__clopper_pearson_interval(o, n, s->level, &lohi[0], &lohi[1]);
}

/* The bounds of every `stride`-th distinct counts from `first`: a
 * thread's share (distinct counts by size, so each thread meets large
 * ones and small ones alike). */
typedef struct bounds_work {
    const mr_scorer *s;
    const counts_key *key;
    const size_t *distinct; /* where each distinct counts' run starts in key */
    size_t ndistinct, first, stride;
    int binomial;
    double *b;
} bounds_work;

static void *bounds_share(void *arg)
{
    const bounds_work *w = arg;
    size_t d;
    for (d = w->first; d < w->ndistinct; d += w->stride) {
        size_t i = w->key[w->distinct[d]].i;
        exact_bounds(w->s, w->binomial, i, w->b + 2 * i);
    }
    return NULL;
}

static size_t bounds_threads(const mr_scorer *s, size_t ndistinct)
{
    int cpus;
    size_t T = (size_t)mr__worker_threads(s->threads, &cpus);
    if (T > MR__THREADS_MAX) T = MR__THREADS_MAX;
    return T < ndistinct ? T : ndistinct > 0 ? ndistinct : 1;
}

/* Each group's bounds for O (2 per group), or NULL when out of memory:
 * found once per distinct counts, those spread over threads (each
 * computed alone, so the same bits for any number of them), then copied
 * to the other groups of the same counts. */
static double *group_bounds(const mr_scorer *s)
{
    size_t n = s->g.n, i, j, nd = 0, T, t;
    int binomial = binomial_groups(s);
    double *b = mr__malloc_array(2 * (n ? n : 1), sizeof *b);
    counts_key *k = mr__malloc_array(n ? n : 1, sizeof *k);
    size_t *distinct = mr__malloc_array(n ? n : 1, sizeof *distinct);
    bounds_work work[MR__THREADS_MAX];
    if (b == NULL || k == NULL || distinct == NULL) {
        mr__free(b);
        mr__free(k);
        mr__free(distinct);
        return NULL;
    }
    for (i = 0; i < n; i++) {
        memcpy(&k[i].o, &s->g.obs[i], sizeof k[i].o);
        k[i].n = 0;
        if (binomial) memcpy(&k[i].n, &s->g.prior[i], sizeof k[i].n);
        k[i].i = i;
    }
    qsort(k, n, sizeof *k, by_counts);
    for (i = 0; i < n; i = j) {
        distinct[nd++] = i;
        for (j = i + 1; j < n && k[j].o == k[i].o && k[j].n == k[i].n; j++) continue;
    }
    T = bounds_threads(s, nd);
    for (t = 0; t < T; t++) {
        bounds_work w = {s, k, distinct, nd, t, T, binomial, b};
        work[t] = w;
    }
    mr__run_threads(bounds_share, work, sizeof work[0], T);
    for (t = 0; t < nd; t++) {
        size_t end = t + 1 < nd ? distinct[t + 1] : n;
        const double *lohi = b + 2 * k[distinct[t]].i;
        for (j = distinct[t] + 1; j < end; j++) memcpy(b + 2 * k[j].i, lohi, 2 * sizeof *b);
    }
    mr__free(k);
    mr__free(distinct);
    return b;
}

/* Cell k of a key (each cell as its 4-byte length and bytes). */
static const char *key_cell(const mr__level_name *key, size_t k, size_t *n)
{
    const unsigned char *p = (const unsigned char *)key->str;
    size_t i;
    for (i = 0;; i++) {
        size_t len = (size_t)p[0] | (size_t)p[1] << 8 | (size_t)p[2] << 16 | (size_t)p[3] << 24;
        if (i == k) {
            *n = len;
            return (const char *)p + 4;
        }
        p += 4 + len;
    }
}

static const char *const number_names[] = {"rows", "exposure", "observed", "expected", "o_e", "o_e_low", "o_e_high"};

static void group_numbers(const mr_scorer *s, size_t i, const double *bounds, double *v)
{
    const double *lohi = bounds + 2 * i;
    oe_row r = binomial_groups(s) ? observed_expected_binomial(s->g.obs[i], s->g.exp[i], s->g.prior[i], lohi)
                                  : observed_expected(s->g.obs[i], s->g.exp[i], lohi);
    v[0] = (double)s->g.rows[i];
    v[1] = s->g.expo[i];
    v[2] = s->g.obs[i];
    v[3] = s->g.exp[i];
    v[4] = r.ratio;
    v[5] = r.low;
    v[6] = r.high;
}

/* A CSV cell: the shortest text that reads back to v; empty if v is
 * not finite. */
static void csv_number(mr__strbuf *b, double v)
{
    char t[MR__DTOA_SIZE];
    if (isfinite(v)) mr__strbuf_append(b, t, mr__dtoa(v, t));
}

/* CSV (every digit needed) or text (aligned, 6 digits): the same rows. */
static char *table(const mr_scorer *s, int csv)
{
    mr__strbuf b;
    size_t i, k, n;
    double v[7], *bounds = group_bounds(s);
    if (bounds == NULL) return NULL;
    mr__strbuf_init(&b);
    if (!csv)
        mr__strbuf_printf(&b, "observed/expected by group, exact %s %g%% intervals\n",
                          binomial_groups(s) ? "binomial (Clopper-Pearson)" : "Poisson", 100 * s->level);
    for (k = 0; k < s->nby; k++) mr__strbuf_printf(&b, csv ? "%s," : "%-16s ", s->by[k]);
    for (k = 0; k < 7; k++) mr__strbuf_printf(&b, csv ? "%s%s" : "%s%14s", k && csv ? "," : "", number_names[k]);
    mr__strbuf_append(&b, "\n", 1);
    for (i = 0; i < s->g.n; i++) {
        group_numbers(s, i, bounds, v);
        for (k = 0; k < s->nby; k++) {
            const char *p = key_cell(&s->g.groups.name[i], k, &n);
            if (csv) mr__strbuf_append_csv(&b, p, n), mr__strbuf_append(&b, ",", 1);
            else mr__strbuf_printf(&b, "%-16.*s ", (int)n, p);
        }
        for (k = 0; k < 7; k++) {
            if (csv) {
                if (k) mr__strbuf_append(&b, ",", 1);
                csv_number(&b, v[k]);
            } else if (isfinite(v[k])) mr__strbuf_printf(&b, "%14.6g", v[k]);
            else mr__strbuf_printf(&b, "%14s", "-");
        }
        mr__strbuf_append(&b, "\n", 1);
    }
    mr__free(bounds);
    return mr__strbuf_take(&b);
}

static json_t *group_json(const mr_scorer *s, size_t i, const double *bounds)
{
    json_t *o = json_object(), *key = json_object();
    double v[7];
    size_t k, n;
    group_numbers(s, i, bounds, v);
    for (k = 0; k < s->nby; k++) {
        const char *p = key_cell(&s->g.groups.name[i], k, &n);
        char *cell = mr__malloc(n + 1);
        if (cell) memcpy(cell, p, n), cell[n] = 0;
        json_object_set_new(key, s->by[k], cell ? mr__json_text(cell) : NULL);
        mr__free(cell);
    }
    json_object_set_new(o, "key", key);
    json_object_set_new(o, "rows", json_integer((json_int_t)s->g.rows[i]));
    for (k = 1; k < 7; k++) json_object_set_new(o, number_names[k], isfinite(v[k]) ? json_real(v[k]) : json_null());
    return o;
}

static char *json_table(const mr_scorer *s)
{
    json_t *root = json_object(), *by = json_array(), *groups = json_array();
    char *text, *out = NULL;
    double *bounds = group_bounds(s);
    size_t i;
    if (bounds == NULL) {
        json_decref(root), json_decref(by), json_decref(groups);
        return NULL;
    }
    json_object_set_new(root, "level", json_real(s->level));
    json_object_set_new(root, "interval", json_string(binomial_groups(s) ? "binomial-exact" : "poisson-exact"));
    for (i = 0; i < s->nby; i++) json_array_append_new(by, mr__json_text(s->by[i]));
    json_object_set_new(root, "by", by);
    for (i = 0; i < s->g.n; i++) json_array_append_new(groups, group_json(s, i, bounds));
    mr__free(bounds);
    json_object_set_new(root, "groups", groups);
    text = json_dumps(root, JSON_INDENT(1) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER);
    json_decref(root);
    if (text) {
        size_t n = strlen(text);
        if ((out = mr__malloc(n + 2)) != NULL) memcpy(out, text, n), memcpy(out + n, "\n", 2);
        free(text);
    }
    return out;
}

char *mr_scorer_groups_report(const mr_scorer *s, mr_groups_format format)
{
    if (s->nby == 0) return NULL;
    if (format == MR_GROUPS_JSON) return json_table(s);
    return table(s, format == MR_GROUPS_CSV);
}

mr_status mr_scorer_write_groups(mr_scorer *s, const char *path, mr_groups_format format)
{
    const char *inputs[1] = {s->data ? s->data : "-"};
    char *text = mr_scorer_groups_report(s, format);
    mr__outfile *out = NULL;
    mr_status st;
    if (text == NULL) return mr__fail(&s->err, s->nby ? MR_ERR_NO_MEMORY : MR_ERR_USAGE, "no groups to write");
    st = mr__outfile_open(&out, path, inputs, 1, &s->err);
    if (st == MR_OK && (st = mr__outfile_write(out, text, strlen(text), &s->err)) != MR_OK) mr__outfile_abort(out);
    else if (st == MR_OK) st = mr__outfile_commit(out, &s->err);
    mr__free(text);
    return st;
}
