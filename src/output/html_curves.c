/* html_curves.c - the design row of a profile (a factor at one level,
 * the others at their references; a numeric at a value, the others held)
 * and the effect curves: the fitted value along each numeric or spline
 * column's range with its interval band. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "family/family.h"
#include "model/term_spline.h"
#include "output/html.h"
#include "output/html_text.h"
#include "output/svg_xy.h"

#define CURVE_POINTS 41

static long level_of(const mr__fit_factor *fac, const char *level)
{
    size_t l;
    for (l = 0; l < fac->nlevels; l++)
        if (strcmp(fac->level[l], level) == 0) return (long)l;
    return -1;
}

/* v = v (x) e_at (width w): the term's columns run over its parts, the
 * first slowest. */
static size_t kron_unit(double *v, size_t n, size_t w, size_t at)
{
    size_t i = n;
    while (i-- > 0) {
        double keep = v[i];
        memset(v + i * w, 0, w * sizeof *v);
        v[i * w + at] = keep;
    }
    return n * w;
}

/* Term t's entries of the row into v (returns their count; 0: the term
 * is 0 at this profile). */
static size_t term_entries(const mr__html_profile *p, const mr__fit_term *t, size_t ti, double *v)
{
    const mr_fit *f = p->fit;
    size_t k, n = 1;
    v[0] = 1;
    if (t->spline) {
        const mr__spline *sp = &p->spline[ti];
        double at = strcmp(t->spline_column, p->var ? p->var : "") == 0 ? p->value
                                                                          : mr__html_numeric_value(p->pg, f, t->spline_column);
        if (sp->ncols > t->ncoef) return 0;
        for (n = 0; n < sp->ncols; n++) v[n] = mr__spline_value(sp, n, at);
    }
    for (k = 0; k < t->nparts; k++) {
        long a = mr__fit_find_factor(f, t->part[k]);
        const mr__fit_factor *fac = a >= 0 ? &f->factor[a] : NULL;
        long ref, at;
        size_t i, w;
        if (t->spline && strcmp(t->part[k], t->spline_column) == 0) continue;
        if (fac == NULL) {
            double x = p->var && strcmp(t->part[k], p->var) == 0 ? p->value : mr__html_numeric_value(p->pg, f, t->part[k]);
            for (i = 0; i < n; i++) v[i] *= x;
            continue;
        }
        ref = level_of(fac, fac->reference);
        at = a == p->factor ? (long)p->level : ref;
        w = t->full || ref < 0 ? fac->nlevels : fac->nlevels - 1;
        if (!t->full && ref >= 0 && at == ref) return 0;
        if (n * w > t->ncoef) return 0; /* not this term's layout */
        n = kron_unit(v, n, w, (size_t)(t->full || ref < 0 ? (at < 0 ? 0 : at) : at < ref ? at : at - 1));
    }
    return n;
}

void mr__html_design_row(const mr__html_profile *p, double *x, double *scratch)
{
    const mr_fit *f = p->fit;
    size_t t, j;
    for (j = 0; j < f->p; j++) x[j] = 0;
    if (f->intercept && f->p > 0 && (f->nterms == 0 || f->term[0].first > 0)) x[0] = 1;
    for (t = 0; t < f->nterms; t++) {
        const mr__fit_term *term = &f->term[t];
        size_t n = term->ncoef ? term_entries(p, term, t, scratch) : 0;
        if (n == term->ncoef) memcpy(x + term->first, scratch, n * sizeof *x);
    }
}

/* The spline basis of each spline term (indexed by term); NULL when out
 * of memory or a term's knots do not make one. */
mr__spline *mr__html_splines(const mr_fit *f)
{
    mr__spline *sp = mr__calloc(f->nterms + 1, sizeof *sp);
    size_t t;
    mr__error err;
    for (t = 0; sp && t < f->nterms; t++) {
        const mr__fit_term *term = &f->term[t];
        if (!term->spline) continue;
        mr__error_clear(&err);
        if (term->nboundary != 2 ||
            mr__spline_make(&sp[t], term->knots, term->nknots, term->boundary, term->spline_column, &err) != MR_OK) {
            mr__free(sp);
            return NULL;
        }
    }
    return sp;
}

/* ---- the curves ------------------------------------------------------- */

/* The range of column `name`: the rows' least and greatest values, or a
 * spline's boundary knots; 0 when neither is known. */
static int range_of(const mr_fit *f, const char *name, double *lo, double *hi)
{
    const mr__fit_numeric *num = mr__fit_find_numeric(f, name);
    size_t t;
    if (num) {
        *lo = num->min, *hi = num->max;
        return *lo < *hi;
    }
    for (t = 0; t < f->nterms; t++)
        if (f->term[t].spline && strcmp(f->term[t].spline_column, name) == 0 && f->term[t].nboundary == 2) {
            *lo = f->term[t].boundary[0], *hi = f->term[t].boundary[1];
            return *lo < *hi;
        }
    return 0;
}

typedef struct curve {
    double x[CURVE_POINTS], est[CURVE_POINTS], lo[CURVE_POINTS], hi[CURVE_POINTS];
} curve;

static void compute(mr__html_profile *p, double a, double z, double scale, double *row, double *scratch, curve *c)
{
    double q = mr__html_quantile(p->fit);
    size_t i;
    for (i = 0; i < CURVE_POINTS; i++) {
        double eta, se, u, w;
        c->x[i] = i + 1 == CURVE_POINTS ? z : a + (z - a) * (double)i / (CURVE_POINTS - 1);
        p->value = c->x[i];
        mr__html_design_row(p, row, scratch);
        mr__html_linear_predictor(p->fit, row, &eta, &se);
        u = scale * mr__html_inverse_link(p->fit, eta - q * se);
        w = scale * mr__html_inverse_link(p->fit, eta + q * se);
        c->est[i] = isnan(eta) ? NAN : scale * mr__html_inverse_link(p->fit, eta);
        c->lo[i] = isnan(eta) ? NAN : fmin(u, w); /* a decreasing inverse link swaps them */
        c->hi[i] = isnan(eta) ? NAN : fmax(u, w);
    }
}

static void table(mr__strbuf *t, const curve *c, const char *name, int digits)
{
    size_t i;
    mr__strbuf_printf(t, "<table class=\"num\"><thead><tr><th>");
    mr__html_text(t, name);
    mr__strbuf_printf(t, "</th><th>estimate</th><th>low</th><th>high</th></tr></thead><tbody>\n");
    for (i = 0; i < CURVE_POINTS; i++) {
        const double v[] = {c->x[i], c->est[i], c->lo[i], c->hi[i]};
        size_t k;
        mr__strbuf_printf(t, "<tr>");
        for (k = 0; k < 4; k++) mr__strbuf_printf(t, "<td>"), mr__html_number(t, v[k], digits), mr__strbuf_printf(t, "</td>");
        mr__strbuf_printf(t, "</tr>\n");
    }
    mr__strbuf_printf(t, "</tbody></table>\n");
}

static void texts(const mr__html_profile *p, const char *name, double a, double z, int spline, mr__strbuf *title,
                  mr__strbuf *desc, const mr__strbuf *axis)
{
    const mr_fit *f = p->fit;
    mr__strbuf_printf(title, "Effect curve: %s along %s", axis->failed ? "" : axis->data, name);
    mr__strbuf_printf(desc, "Fitted value as %s runs from %.6g to %.6g (%s)%s.", name, a, z,
                      mr__fit_find_numeric(f, name) ? "its least and greatest value in the rows used"
                                                    : "the spline's boundary knots",
                      spline ? ", through its natural cubic spline" : "");
    mr__html_held_at(p->pg, f, -1, name, desc);
    mr__strbuf_printf(desc, " Band: %g%% Wald intervals of the linear predictor (delta method), transformed by the "
                            "inverse %s link. Where the data are sparse the curve is poorly determined.",
                      100 * f->level, mr__link_name((mr_link)f->link));
}

/* Whether every coefficient of the terms with column `name` is aliased
 * (the column adds nothing the others do not: no curve). */
static int all_aliased(const mr_fit *f, const char *name)
{
    size_t t, k, j, any = 0;
    for (t = 0; t < f->nterms; t++)
        for (k = 0; k < f->term[t].nparts; k++)
            if (strcmp(f->term[t].part[k], name) == 0)
                for (j = f->term[t].first; j < f->term[t].first + f->term[t].ncoef; j++)
                    if (!f->aliased[j]) any = 1;
    return !any;
}

static void one_curve(mr__strbuf *b, mr__html_profile *p, size_t k, size_t n, const char *name, int spline,
                      double *row, double *scratch)
{
    const mr_fit *f = p->fit;
    double a, z, eta, se, scale;
    curve *c = mr__malloc(sizeof *c);
    mr__strbuf title, desc, axis, t, xname;
    mr__svg_line line;
    mr__svg_xy xy;
    char id[48];
    if (c == NULL || !range_of(f, name, &a, &z) || all_aliased(f, name)) {
        if (c == NULL) {
            b->failed = 1;
            return;
        }
        mr__strbuf_printf(b, "<p class=\"note\">No effect curve for ");
        mr__html_text(b, name);
        mr__strbuf_printf(b, all_aliased(f, name) ? ": its coefficients are aliased.</p>\n"
                                                   : ": this fit does not record its range (saved by an older "
                                                     "version).</p>\n");
        mr__free(c);
        return;
    }
    p->var = name;
    p->value = (a + z) / 2;
    mr__html_design_row(p, row, scratch);
    mr__html_linear_predictor(f, row, &eta, &se);
    mr__strbuf_init(&title), mr__strbuf_init(&desc), mr__strbuf_init(&axis), mr__strbuf_init(&t);
    mr__strbuf_init(&xname);
    mr__strbuf_printf(&xname, "%s (in the units of the data)", name); /* the fit knows no units */
    scale = mr__html_effect_scale(f, mr__html_inverse_link(f, eta), &axis);
    compute(p, a, z, scale, row, scratch, c);
    texts(p, name, a, z, spline, &title, &desc, &axis);
    table(&t, c, name, p->pg->digits);
    memset(&xy, 0, sizeof xy);
    snprintf(id, sizeof id, "curve-%zu-%zu", k + 1, n);
    line.x = c->x, line.y = c->est, line.n = CURVE_POINTS, line.style = MR__LINE_CURVE;
    xy.id = id, xy.title = title.data, xy.desc = desc.data, xy.xaxis = xname.data, xy.yaxis = axis.data;
    xy.ylog = f->link == MR_LOG, xy.line = &line, xy.nlines = 1, xy.yref = NAN, xy.table = t.data;
    xy.band_x = c->x, xy.band_lo = c->lo, xy.band_hi = c->hi, xy.nband = CURVE_POINTS;
    xy.legend = "Blue line: fitted value; shaded band: its interval.";
    if (title.failed || desc.failed || axis.failed || t.failed || xname.failed) b->failed = 1;
    else mr__svg_xy_chart(b, &xy);
    mr__strbuf_release(&title), mr__strbuf_release(&desc), mr__strbuf_release(&axis), mr__strbuf_release(&t);
    mr__strbuf_release(&xname);
    mr__free(c);
}

/* Whether part k of term t is the first mention of a numeric column. */
static int first_numeric(const mr_fit *f, size_t t, size_t k)
{
    const char *name = f->term[t].part[k];
    size_t u, i;
    if (mr__fit_find_factor(f, name) >= 0) return 0;
    for (u = 0; u <= t; u++)
        for (i = 0; i < (u < t ? f->term[u].nparts : k); i++)
            if (strcmp(f->term[u].part[i], name) == 0) return 0;
    return 1;
}

void mr__html_curves(mr__strbuf *b, const mr__html_page *pg, size_t k)
{
    const mr_fit *f = pg->fit[k];
    mr__html_profile p;
    size_t t, i, n = 0;
    double *row = mr__malloc_array(2 * f->p + 1, sizeof *row);
    mr__spline *sp = mr__html_splines(f);
    memset(&p, 0, sizeof p);
    p.pg = pg, p.fit = f, p.factor = -1, p.spline = sp;
    if (row == NULL || sp == NULL) b->failed = 1;
    for (t = 0; !b->failed && t < f->nterms; t++)
        for (i = 0; i < f->term[t].nparts; i++)
            if (first_numeric(f, t, i))
                one_curve(b, &p, k, ++n, f->term[t].part[i],
                          f->term[t].spline && !strcmp(f->term[t].part[i], f->term[t].spline_column), row, row + f->p);
    if (n == 0 && !b->failed) mr__strbuf_printf(b, "<p>The model has no numeric covariate.</p>\n");
    mr__free(row);
    mr__free(sp);
}
