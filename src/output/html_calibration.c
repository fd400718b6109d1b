/* html_calibration.c - the calibration plot: observed against expected
 * by tenth of the fitted mean, from the fit's "calibration" groups.
 *
 * The plot takes plain arrays (mr__html_calibration_data, html.h); where they
 * come from is one call, calibration_of() below: the fit's accessors. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
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

/* Observed and expected are the groups' weighted totals; the plot shows
 * them per unit of weight (means), unless they already lie within the
 * group's range of fitted means (means as given).  Ranges of rates say
 * nothing of that: totals per row then. */
static int given_as_means(const mr__html_calibration_data *c)
{
    size_t i;
    if (strstr(c->basis, MR__CALIB_RATE_WORDS)) return 0;
    for (i = 0; i < c->n; i++) {
        double e = c->expected[i], tol = 1e-9 * (fabs(c->mean_low[i]) + fabs(c->mean_high[i]));
        if (e < c->mean_low[i] - tol || e > c->mean_high[i] + tol) return 0;
    }
    return 1;
}

/* The groups' ranges are of rates when the basis says so (fit/calibrate.c);
 * expected and observed, hence the plot's axes, stay means per row. */
static void table(mr__strbuf *t, const mr__html_calibration_data *c, const double *ex, const double *ob, int digits)
{
    size_t i;
    mr__strbuf_printf(t, "<table class=\"num\"><thead><tr><th>group</th><th>rows</th><th>weight</th>"
                         "<th>%s from</th><th>to</th><th>observed</th><th>expected</th><th>O/E</th>"
                         "</tr></thead><tbody>\n",
                      strstr(c->basis, MR__CALIB_RATE_WORDS) ? MR__CALIB_RATE_WORDS : "fitted mean");
    for (i = 0; i < c->n; i++) {
        const double v[] = {c->rows[i], c->weight[i], c->mean_low[i], c->mean_high[i], ob[i], ex[i], ob[i] / ex[i]};
        size_t k;
        mr__strbuf_printf(t, "<tr><td>%zu</td>", i + 1);
        for (k = 0; k < 7; k++) {
            mr__strbuf_printf(t, "<td>");
            mr__html_number(t, v[k], k == 0 ? 17 : digits);
            mr__strbuf_printf(t, "</td>");
        }
        mr__strbuf_printf(t, "</tr>\n");
    }
    mr__strbuf_printf(t, "</tbody></table>\n");
}

void mr__html_calibration_plot(mr__strbuf *b, const mr__html_page *pg, size_t k, const mr__html_calibration_data *c)
{
    const mr_fit *f = pg->fit[k];
    int means = given_as_means(c);
    double *v = mr__malloc_array(2 * c->n + 2, sizeof *v), *ex = v, *ob = v ? v + c->n : NULL, diag[2];
    mr__svg_point *pt = mr__malloc_array(c->n, sizeof *pt);
    mr__strbuf title, desc, axis_x, axis_y, t;
    mr__svg_line line;
    mr__svg_xy xy;
    size_t i;
    char id[32];
    if (v == NULL || pt == NULL) {
        b->failed = 1;
        goto done;
    }
    diag[0] = INFINITY, diag[1] = -INFINITY;
    for (i = 0; i < c->n; i++) {
        ex[i] = means ? c->expected[i] : c->expected[i] / c->weight[i];
        ob[i] = means ? c->observed[i] : c->observed[i] / c->weight[i];
        pt[i].x = ex[i], pt[i].y = ob[i], pt[i].lo = pt[i].hi = NAN, pt[i].flagged = 0;
        diag[0] = fmin(diag[0], fmin(ex[i], ob[i]));
        diag[1] = fmax(diag[1], fmax(ex[i], ob[i]));
    }
    mr__strbuf_init(&title), mr__strbuf_init(&desc), mr__strbuf_init(&axis_x), mr__strbuf_init(&axis_y);
    mr__strbuf_init(&t);
    mr__strbuf_printf(&title, "Calibration: observed against fitted mean of %s, by group", f->outcome);
    mr__strbuf_printf(&desc, "Each point is a group of rows (%s), %zu groups: the mean fitted by the model (x) and "
                             "the mean observed (y), both per unit of weight. Points on the grey line y = x are "
                             "calibrated; above it the model under-predicts, below it over-predicts. A good "
                             "calibration within the data used for the fit is expected and no proof that the model "
                             "holds for other data.", c->basis, c->n);
    mr__strbuf_printf(&axis_x, "fitted mean of %s", f->outcome);
    mr__strbuf_printf(&axis_y, "observed mean of %s", f->outcome);
    table(&t, c, ex, ob, pg->digits);
    memset(&xy, 0, sizeof xy);
    snprintf(id, sizeof id, "calibration-%zu", k + 1);
    line.x = diag, line.y = diag, line.n = 2, line.style = MR__LINE_THIN;
    xy.id = id, xy.title = title.data, xy.desc = desc.data, xy.xaxis = axis_x.data, xy.yaxis = axis_y.data;
    xy.xlog = xy.ylog = diag[0] > 0 && diag[1] > 20 * diag[0];
    xy.point = pt, xy.npoints = c->n, xy.line = &line, xy.nlines = 1, xy.yref = NAN, xy.table = t.data;
    xy.legend = "Blue circles: groups; grey line: observed = fitted.";
    if (title.failed || desc.failed || axis_x.failed || axis_y.failed || t.failed) b->failed = 1;
    else mr__svg_xy_chart(b, &xy);
    mr__strbuf_release(&title), mr__strbuf_release(&desc), mr__strbuf_release(&axis_x);
    mr__strbuf_release(&axis_y), mr__strbuf_release(&t);
done:
    mr__free(v);
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
