/* html_calibration.c - the calibration plot: observed against expected
 * by tenth of the fitted mean, from the fit's "calibration" groups, with
 * the exact interval of each group's observed mean for a Poisson or
 * binomial outcome (exact_interval.h).
 *
 * The plot takes plain arrays (mr__html_calibration_data, html.h); where they
 * come from is one call, calibration_of() below: the fit's accessors. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "output/exact_interval.h"
#include "output/html.h"
#include "output/html_text.h"
#include "output/svg_xy.h"

void mr__html_calibration_release(mr__html_calibration_data *c)
{
    mr__free(c->basis);
    mr__free(c->value);
    memset(c, 0, sizeof *c);
}

/* The fit's calibration groups (mr_fit_calibration_*): 0 and nothing kept
 * when it has none (a fit saved before they were) or memory runs out (the
 * page then goes without the plot). */
static int calibration_of(const mr__html_page *pg, size_t k, mr__html_calibration_data *c)
{
    const mr_fit *f = pg->fit[k];
    int groups = mr_fit_calibration_groups(f);
    size_t i, n = groups > 0 ? (size_t)groups : 0;
    mr_calibration_group g;
    memset(c, 0, sizeof *c);
    if (n == 0 || mr_fit_calibration_basis(f) == NULL) return 0;
    c->value = mr__malloc_array(6 * n, sizeof *c->value);
    c->basis = mr__strdup(mr_fit_calibration_basis(f));
    if (c->value == NULL || c->basis == NULL) goto bad;
    c->rows = c->value, c->weight = c->value + n, c->mean_low = c->value + 2 * n;
    c->mean_high = c->value + 3 * n, c->observed = c->value + 4 * n, c->expected = c->value + 5 * n;
    for (i = 0; i < n; i++) {
        if (mr_fit_calibration_group(f, i, &g) != MR_OK) goto bad;
        c->rows[i] = (double)g.rows, c->weight[i] = g.weight, c->mean_low[i] = g.mean_low;
        c->mean_high[i] = g.mean_high, c->observed[i] = g.observed, c->expected[i] = g.expected;
    }
    c->n = n;
    return 1;
bad:
    mr__html_calibration_release(c);
    return 0;
}

/* The exact interval of each group's observed mean, where the totals are
 * counts: a Poisson outcome's sum of y, Garwood's interval divided by the
 * weight (the group's rows); a binomial outcome's events out of its
 * trials, Clopper-Pearson's.  A prior weight makes the totals weighted
 * sums, and other families' outcomes are no counts: NULL then, with the
 * reason in words in `why`. */
static const char *interval_kind(const mr_fit *f, const char **why)
{
    *why = NULL;
    if (f->weight) *why = "a prior weight makes each group's observed total a weighted sum, not a count";
    else if (f->family == MR_POISSON) return "Garwood's exact Poisson interval of the observed count (chi-square "
                                             "quantiles), divided by the group's weight";
    else if (f->family == MR_BINOMIAL) return "the Clopper-Pearson exact binomial interval of the events observed "
                                              "out of the group's trials (beta quantiles)";
    else *why = "exact intervals are drawn for a Poisson or binomial outcome only";
    return NULL;
}

static void observed_interval(const mr_fit *f, double count, double weight, double *lo, double *hi)
{
    if (f->family == MR_BINOMIAL) {
        mr__clopper_pearson_interval(count, weight, f->level, lo, hi);
        return;
    }
    mr__garwood_interval(count, f->level, lo, hi);
    *lo /= weight;
    *hi /= weight;
}

static void table(mr__strbuf *t, const mr__html_calibration_data *c, const mr__svg_point *pt, int digits)
{
    size_t i, k, nv = isnan(pt[0].lo) ? 7 : 9;
    mr__strbuf_printf(t, "<table class=\"num\"><thead><tr><th>group</th><th>rows</th><th>weight</th>"
                         "<th>%s from</th><th>to</th><th>observed</th><th>expected</th><th>O/E</th>%s"
                         "</tr></thead><tbody>\n",
                      strstr(c->basis, MR__CALIB_RATE_WORDS) ? MR__CALIB_RATE_WORDS : "fitted mean",
                      nv == 9 ? "<th>observed low</th><th>observed high</th>" : "");
    for (i = 0; i < c->n; i++) {
        const double v[] = {c->rows[i], c->weight[i], c->mean_low[i], c->mean_high[i], pt[i].y, pt[i].x,
                            pt[i].y / pt[i].x, pt[i].lo, pt[i].hi};
        mr__strbuf_printf(t, "<tr><td>%zu</td>", i + 1);
        for (k = 0; k < nv; k++) {
            mr__strbuf_printf(t, "<td>");
            mr__html_number(t, v[k], k == 0 ? 17 : digits);
            mr__strbuf_printf(t, "</td>");
        }
        mr__strbuf_printf(t, "</tr>\n");
    }
    mr__strbuf_printf(t, "</tbody></table>\n");
}

/* What the plot shows, for its <desc> and caption. */
static void describe(mr__strbuf *d, const mr_fit *f, const mr__html_calibration_data *c)
{
    const char *why, *kind = interval_kind(f, &why);
    mr__strbuf_printf(d, "Each point is a group of rows (%s), %zu groups: the mean fitted by the model (x) and "
                         "the mean observed (y), both per unit of weight. Points on the grey line y = x are "
                         "calibrated; above it the model under-predicts, below it over-predicts. ", c->basis, c->n);
    if (kind) mr__strbuf_printf(d, "Vertical lines: the %g%% interval of each observed mean, %s; it allows for "
                                   "chance alone, given the group's rows. ", 100 * f->level, kind);
    else mr__strbuf_printf(d, "No interval is drawn: %s. ", why);
    if (kind && f->dispersion_estimated)
        mr__strbuf_printf(d, "The dispersion is estimated at %.3g: the data vary %s than the interval assumes; one "
                             "that allowed for it would be about sqrt(%.3g) = %.3g times as wide. ",
                          f->dispersion, f->dispersion > 1 ? "more" : "less", f->dispersion, sqrt(f->dispersion));
    mr__strbuf_printf(d, "A good calibration within the data used for the fit is expected and no proof that the "
                         "model holds for other data.");
}

/* The unit of the means: per row, per trial, per unit of prior weight. */
static void axis_label(mr__strbuf *a, const mr_fit *f, const char *what)
{
    mr__strbuf_printf(a, "%s mean of %s", what, f->outcome);
    if (f->family == MR_BINOMIAL) mr__strbuf_printf(a, " (a proportion: events per %s)", f->weight ? "unit of weight" : "trial");
    else mr__strbuf_printf(a, " per %s", f->weight ? "unit of prior weight" : "row");
}

/* The groups' points: means per unit of weight, each with the interval
 * of its observed mean where there is one; diag: the range of both. */
static void points(const mr_fit *f, const mr__html_calibration_data *c, mr__svg_point *pt, double diag[2])
{
    const char *why, *kind = interval_kind(f, &why);
    size_t i;
    diag[0] = INFINITY, diag[1] = -INFINITY;
    for (i = 0; i < c->n; i++) {
        pt[i].x = c->expected[i] / c->weight[i], pt[i].y = c->observed[i] / c->weight[i];
        pt[i].lo = pt[i].hi = NAN, pt[i].flagged = 0;
        if (kind && c->weight[i] > 0) observed_interval(f, c->observed[i], c->weight[i], &pt[i].lo, &pt[i].hi);
        diag[0] = fmin(diag[0], fmin(pt[i].x, pt[i].y));
        diag[1] = fmax(diag[1], fmax(pt[i].x, pt[i].y));
    }
}

void mr__html_calibration_plot(mr__strbuf *b, const mr__html_page *pg, size_t k, const mr__html_calibration_data *c)
{
    const mr_fit *f = pg->fit[k];
    mr__svg_point *pt = mr__malloc_array(c->n + 1, sizeof *pt);
    double diag[2];
    mr__strbuf title, desc, axis_x, axis_y, t;
    mr__svg_line line;
    mr__svg_xy xy;
    char id[32];
    if (pt == NULL || c->n == 0) {
        b->failed = pt == NULL;
        mr__free(pt);
        return;
    }
    points(f, c, pt, diag);
    mr__strbuf_init(&title), mr__strbuf_init(&desc), mr__strbuf_init(&axis_x), mr__strbuf_init(&axis_y);
    mr__strbuf_init(&t);
    mr__strbuf_printf(&title, "Calibration: observed against fitted mean of %s, by group", f->outcome);
    describe(&desc, f, c);
    axis_label(&axis_x, f, "fitted");
    axis_label(&axis_y, f, "observed");
    table(&t, c, pt, pg->digits);
    memset(&xy, 0, sizeof xy);
    snprintf(id, sizeof id, "calibration-%zu", k + 1);
    line.x = diag, line.y = diag, line.n = 2, line.style = MR__LINE_THIN;
    xy.id = id, xy.title = title.data, xy.desc = desc.data, xy.xaxis = axis_x.data, xy.yaxis = axis_y.data;
    xy.xlog = xy.ylog = diag[0] > 0 && diag[1] > 20 * diag[0];
    xy.point = pt, xy.npoints = c->n, xy.line = &line, xy.nlines = 1, xy.yref = NAN, xy.table = t.data;
    xy.legend = isnan(pt[0].lo) ? "Blue circles: groups; grey line: observed = fitted."
                                : "Blue circles: groups, vertical line: the interval of the observed mean; grey "
                                  "line: observed = fitted.";
    if (title.failed || desc.failed || axis_x.failed || axis_y.failed || t.failed) b->failed = 1;
    else mr__svg_xy_chart(b, &xy);
    mr__strbuf_release(&title), mr__strbuf_release(&desc), mr__strbuf_release(&axis_x);
    mr__strbuf_release(&axis_y), mr__strbuf_release(&t);
    mr__free(pt);
}

int mr__html_calibration(mr__strbuf *b, const mr__html_page *pg, size_t k)
{
    mr__html_calibration_data c;
    if (!calibration_of(pg, k, &c)) return 0;
    mr__strbuf_printf(b, "<h3>Calibration</h3>\n");
    mr__html_calibration_plot(b, pg, k, &c);
    mr__html_calibration_release(&c);
    return 1;
}
