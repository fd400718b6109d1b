/* html_funnel.c - the funnel plot of a scoring run's groups (the JSON of
 * `score --by-out`, output/score_groups.c): each group's observed/expected
 * ratio against its expected count, with exact Poisson control limits.
 *
 * The limits at expected count E are the quantiles of the count a group
 * would show were its ratio 1: the smallest k with P(X <= k) >= p,
 * X ~ Poisson(E), divided by E (P(X <= k) = Q(k + 1, E), the regularized
 * upper incomplete gamma of common/probability.h).  A group lies outside
 * them exactly when its Garwood interval at that level excludes 1 (the
 * interval score_groups.c writes): both are the exact two-sided Poisson
 * test. */
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/error.h"
#include "common/probability.h"
#include "output/html.h"
#include "output/html_text.h"
#include "output/json_text.h"
#include "output/svg_xy.h"

#define CURVE_POINTS 160

static const double level[2] = {0.95, 0.998};

/* min{k : P(X <= k) >= p}, X ~ Poisson(e). */
double mr__poisson_quantile(double p, double e)
{
    double k;
    if (!(e > 0)) return 0;
    /* beyond 2^50 a count's steps are below the doubles' resolution of
     * the quantile's neighbourhood: the normal quantile, rounded */
    if (!(e < 0x1p50)) return floor(e + mr__normal_quantile(p) * sqrt(e));
    k = floor(e + mr__normal_quantile(p) * sqrt(e)) - 2;
    if (k < 0) k = 0;
    while (k > 0 && mr__gamma_q(k + 1, e) >= p) k--; /* Q(k + 1, e) = P(X <= k) */
    while (mr__gamma_q(k + 1, e) < p) k++;
    return k;
}

/* P(X <= o) and P(X >= o) for X ~ Poisson(e); o may be a weighted total. */
static int outside(double o, double e, double lev)
{
    double a = (1 - lev) / 2;
    double below = mr__gamma_q(o + 1, e), above = o > 0 ? 1 - mr__gamma_q(o, e) : 1;
    return below < a || above < a;
}

typedef struct group {
    char *label;
    double observed, expected, garwood_lo, garwood_hi;
} group;

typedef struct groups {
    group *g;
    size_t n, skipped;
    double level; /* of the file's Garwood intervals */
} groups;

static void release(groups *gs)
{
    size_t i;
    for (i = 0; gs->g && i < gs->n; i++) mr__free(gs->g[i].label);
    mr__free(gs->g);
}

static double real_of(json_t *o, const char *key)
{
    json_t *v = json_object_get(o, key);
    return json_is_number(v) ? json_number_value(v) : NAN;
}

/* The bytes a key's text stands for (json_text.h's escape undone, so
 * that mr__html_text shows them as the fit's own tables do); the text as
 * it is when it is no such escape. */
static void put_unescaped(mr__strbuf *s, const char *text)
{
    char *raw = NULL;
    mr_status st = mr__json_unescape(text, strlen(text), &raw);
    if (st == MR_ERR_NO_MEMORY) s->failed = 1;
    mr__strbuf_printf(s, "%s", st == MR_OK ? raw : text);
    mr__free(raw);
}

/* "COL=VALUE, COL=VALUE" of a group's key. */
static char *label_of(json_t *key)
{
    mr__strbuf s;
    const char *col;
    json_t *v;
    mr__strbuf_init(&s);
    mr__strbuf_append(&s, "", 0);
    json_object_foreach(key, col, v) {
        mr__strbuf_printf(&s, "%s", s.len ? ", " : "");
        put_unescaped(&s, col);
        mr__strbuf_printf(&s, "=");
        put_unescaped(&s, json_is_string(v) ? json_string_value(v) : "(blank)");
    }
    return mr__strbuf_take(&s); /* NULL when out of memory */
}

static mr_status load(const char *path, groups *gs, mr__error *err)
{
    json_error_t e;
    json_t *root = json_load_file(path, 0, &e), *list;
    size_t i;
    memset(gs, 0, sizeof *gs);
    if (root == NULL)
        return json_error_code(&e) == json_error_cannot_open_file
                   ? mr__fail(err, MR_ERR_IO, "%s", e.text)
                   : mr__fail(err, MR_ERR_FORMAT, "%s:%d:%d: not JSON: %s", path, e.line, e.column, e.text);
    list = json_object_get(root, "groups");
    gs->level = real_of(root, "level");
    if (!json_is_array(list) || !json_is_object(json_object_get(json_array_get(list, 0), "key"))) {
        json_decref(root);
        return mr__fail(err, MR_ERR_FORMAT, "%s: not a group table of millrace score --by-out (JSON)", path);
    }
    gs->g = mr__calloc(json_array_size(list) + 1, sizeof *gs->g);
    for (i = 0; gs->g && i < json_array_size(list); i++) {
        json_t *o = json_array_get(list, i);
        group *g = &gs->g[gs->n];
        g->observed = real_of(o, "observed"), g->expected = real_of(o, "expected");
        g->garwood_lo = real_of(o, "o_e_low"), g->garwood_hi = real_of(o, "o_e_high");
        if (!(g->expected > 0) || !(g->observed >= 0)) {
            gs->skipped++;
            continue;
        }
        if ((g->label = label_of(json_object_get(o, "key"))) == NULL) break;
        gs->n++;
    }
    json_decref(root);
    if (gs->g == NULL || gs->n + gs->skipped < i || i < json_array_size(list)) {
        release(gs);
        return mr__fail(err, MR_ERR_NO_MEMORY, "%s: out of memory", path);
    }
    return MR_OK;
}

/* The control-limit curves, ratio scale: lines[2 * l] low, [2 * l + 1] high. */
static void limit_curves(const groups *gs, double *x, double *y)
{
    double lo = INFINITY, hi = 0;
    size_t i, l;
    for (i = 0; i < gs->n; i++) lo = fmin(lo, gs->g[i].expected), hi = fmax(hi, gs->g[i].expected);
    lo /= 1.5, hi *= 1.5;
    for (i = 0; i < CURVE_POINTS; i++) x[i] = lo * pow(hi / lo, (double)i / (CURVE_POINTS - 1));
    for (l = 0; l < 2; l++)
        for (i = 0; i < CURVE_POINTS; i++) {
            y[(2 * l) * CURVE_POINTS + i] = mr__poisson_quantile((1 - level[l]) / 2, x[i]) / x[i];
            y[(2 * l + 1) * CURVE_POINTS + i] = mr__poisson_quantile(1 - (1 - level[l]) / 2, x[i]) / x[i];
        }
}

static void table(mr__strbuf *t, const groups *gs, int digits, size_t *nout)
{
    size_t i, l;
    mr__strbuf_printf(t, "<table class=\"num\"><thead><tr><th>group</th><th>observed</th><th>expected</th>"
                         "<th>O/E</th><th>95%% limit low</th><th>high</th><th>99.8%% limit low</th><th>high</th>"
                         "<th>outside</th></tr></thead><tbody>\n");
    *nout = 0;
    for (i = 0; i < gs->n; i++) {
        const group *g = &gs->g[i];
        const char *where = outside(g->observed, g->expected, level[1])   ? "99.8%"
                            : outside(g->observed, g->expected, level[0]) ? "95%"
                                                                          : "no";
        const double v[] = {g->observed, g->expected, g->observed / g->expected};
        *nout += where[0] != 'n';
        mr__strbuf_printf(t, "<tr><td>");
        mr__html_text(t, g->label);
        mr__strbuf_printf(t, "</td>");
        for (l = 0; l < 3; l++) mr__strbuf_printf(t, "<td>"), mr__html_number(t, v[l], digits), mr__strbuf_printf(t, "</td>");
        for (l = 0; l < 2; l++) {
            double a = (1 - level[l]) / 2;
            mr__strbuf_printf(t, "<td>");
            mr__html_number(t, mr__poisson_quantile(a, g->expected) / g->expected, digits);
            mr__strbuf_printf(t, "</td><td>");
            mr__html_number(t, mr__poisson_quantile(1 - a, g->expected) / g->expected, digits);
            mr__strbuf_printf(t, "</td>");
        }
        mr__strbuf_printf(t, "<td>%s</td></tr>\n", where);
    }
    mr__strbuf_printf(t, "</tbody></table>\n");
}

/* The groups outside the 95 % limits, as a table of their own. */
static void outside_list(mr__strbuf *b, const groups *gs, int digits)
{
    size_t i, n = 0;
    for (i = 0; i < gs->n; i++) {
        const group *g = &gs->g[i];
        if (!outside(g->observed, g->expected, level[0])) continue;
        if (n++ == 0)
            mr__strbuf_printf(b, "<table class=\"num\"><caption>Groups outside the 95%% limits</caption><thead><tr>"
                                 "<th>group</th><th>O/E</th><th>Garwood interval low</th><th>high</th>"
                                 "<th>beyond</th></tr></thead><tbody>\n");
        mr__strbuf_printf(b, "<tr><td>");
        mr__html_text(b, g->label);
        mr__strbuf_printf(b, "</td><td>");
        mr__html_number(b, g->observed / g->expected, digits);
        mr__strbuf_printf(b, "</td><td>");
        mr__html_number(b, g->garwood_lo, digits);
        mr__strbuf_printf(b, "</td><td>");
        mr__html_number(b, g->garwood_hi, digits);
        mr__strbuf_printf(b, "</td><td>%s limits, %s</td></tr>\n",
                          outside(g->observed, g->expected, level[1]) ? "99.8%" : "95%",
                          g->observed > g->expected ? "above" : "below");
    }
    mr__strbuf_printf(b, n ? "</tbody></table>\n" : "<p>No group lies outside the 95%% limits.</p>\n");
}

static void draw(mr__strbuf *b, const groups *gs, const char *path, int digits, double *x, double *y,
                 mr__svg_point *pt)
{
    mr__svg_line line[4];
    mr__svg_xy xy;
    mr__strbuf desc, t;
    size_t i, nout;
    for (i = 0; i < gs->n; i++) {
        pt[i].x = gs->g[i].expected, pt[i].y = gs->g[i].observed / gs->g[i].expected;
        pt[i].lo = pt[i].hi = NAN;
        pt[i].flagged = outside(gs->g[i].observed, gs->g[i].expected, level[0]);
    }
    limit_curves(gs, x, y);
    for (i = 0; i < 4; i++) {
        line[i].x = x, line[i].y = y + i * CURVE_POINTS, line[i].n = CURVE_POINTS;
        line[i].style = i < 2 ? MR__LINE_DASHED : MR__LINE_DOTTED;
    }
    mr__strbuf_init(&desc), mr__strbuf_init(&t);
    table(&t, gs, digits, &nout);
    mr__strbuf_printf(&desc, "Each point is a group of the scoring run's table (%s, %zu groups): its observed "
                             "count over the count the model expects (O/E, y) against the expected count (x). The "
                             "funnels are exact Poisson control limits around O/E = 1 at 95%% (dashed) and 99.8%% "
                             "(dotted); %zu groups lie outside the 95%% limits (squares). The limits allow for "
                             "chance alone: counts that vary more than Poisson (overdispersion) put more groups "
                             "outside, and about 1 group in 20 lies outside the 95%% limits by chance.",
                      path, gs->n, nout);
    if (gs->skipped) mr__strbuf_printf(&desc, " %zu groups without an expected count are not drawn.", gs->skipped);
    memset(&xy, 0, sizeof xy);
    xy.id = "funnel", xy.title = "Funnel plot: observed/expected by group", xy.desc = desc.data;
    xy.xaxis = "expected count (the model's fitted means added up)", xy.yaxis = "observed / expected (ratio)";
    xy.xlog = 1, xy.point = pt, xy.npoints = gs->n, xy.line = line, xy.nlines = 4, xy.yref = 1, xy.table = t.data;
    xy.legend = "Blue circles: groups inside the 95% limits; vermillion squares: outside; dashed: 95% limits; "
                "dotted: 99.8% limits; horizontal dashed line: O/E = 1.";
    if (desc.failed || t.failed) b->failed = 1;
    else mr__svg_xy_chart(b, &xy);
    mr__strbuf_release(&desc), mr__strbuf_release(&t);
}

mr_status mr__html_funnel(mr__strbuf *b, const char *path, int digits, mr__error *err)
{
    groups gs;
    double *x, *y;
    mr__svg_point *pt;
    MR__TRY(load(path, &gs, err));
    x = mr__malloc_array(5 * CURVE_POINTS, sizeof *x);
    y = x ? x + CURVE_POINTS : NULL;
    pt = mr__malloc_array(gs.n + 1, sizeof *pt);
    mr__strbuf_printf(b, "<section id=\"groups\">\n<h2>Groups: observed against expected</h2>\n");
    if (x == NULL || pt == NULL) b->failed = 1;
    else if (gs.n == 0) mr__strbuf_printf(b, "<p>No group has an expected count above 0: nothing to draw.</p>\n");
    else draw(b, &gs, path, digits, x, y, pt), outside_list(b, &gs, digits);
    mr__strbuf_printf(b, "</section>\n");
    mr__free(x);
    mr__free(pt);
    release(&gs);
    return MR_OK;
}
