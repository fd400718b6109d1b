/* html_plots.c - the rows of the page's plots, computed from a fit: the
 * forest plot of ratios by term, effect plots of fitted values across a
 * factor's levels, and the changes between fits.  svg.c draws them. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/probability.h"
#include "family/family.h"
#include "output/html.h"
#include "output/html_text.h"
#include "output/svg.h"

double mr__html_quantile(const mr_fit *f)
{
    double tail = (1 - f->level) / 2;
    return f->dispersion_estimated ? -mr__t_quantile(tail, f->df_residual) : -mr__normal_quantile(tail);
}

static mr__svg_row *new_rows(mr__strbuf *b, size_t n)
{
    mr__svg_row *r = mr__malloc_array(n ? n : 1, sizeof *r);
    if (r == NULL) b->failed = 1;
    return r;
}

/* A row on the ratio scale: exp() of the estimate and its bounds. */
static void to_ratio(mr__svg_row *r)
{
    r->est = exp(r->est);
    r->lo = exp(r->lo);
    r->hi = exp(r->hi);
}

static void set_row(mr__svg_row *r, const char *label, double est, double lo, double hi, mr__svg_mark mark)
{
    r->label = label;
    r->est = est;
    r->lo = lo;
    r->hi = hi;
    r->mark = mark;
}

/* Fills a chart's text from strbufs (freed by the caller) and draws it. */
static void draw(mr__strbuf *b, mr__svg_chart *c, mr__strbuf *title, mr__strbuf *desc, mr__strbuf *axis)
{
    c->title = title->failed ? NULL : title->data;
    c->desc = desc->failed ? NULL : desc->data;
    c->axis = axis->failed ? NULL : axis->data;
    if (c->title == NULL || c->desc == NULL || c->axis == NULL) b->failed = 1;
    else mr__svg_dot_chart(b, c);
    mr__strbuf_release(title);
    mr__strbuf_release(desc);
    mr__strbuf_release(axis);
}

static void texts_init(mr__strbuf *t, mr__strbuf *d, mr__strbuf *a)
{
    mr__strbuf_init(t);
    mr__strbuf_init(d);
    mr__strbuf_init(a);
    mr__strbuf_append(t, "", 0);
    mr__strbuf_append(d, "", 0);
    mr__strbuf_append(a, "", 0);
}

/* ---- forest plot ---------------------------------------------------- */

/* Coefficient j with its interval, on the coefficient's scale. */
static void coef_row(mr__svg_row *r, const char *label, const mr_fit *f, size_t j)
{
    set_row(r, label, f->beta[j], f->lo[j], f->hi[j], f->aliased[j] ? MR__MARK_NONE : MR__MARK_ESTIMATE);
}

static size_t forest_rows(const mr_fit *f, mr__svg_row *row, const char *ratio)
{
    size_t t, n = 0;
    double ref = ratio ? 1 : 0;
    for (t = 0; t < f->nterms; t++) {
        const mr__fit_term *term = &f->term[t];
        long fi = term->nparts == 1 ? mr__fit_find_factor(f, term->part[0]) : -1;
        size_t l, j = term->first;
        set_row(&row[n++], term->label, NAN, NAN, NAN, MR__MARK_HEADING);
        for (l = 0; fi >= 0 && l < f->factor[fi].nlevels; l++) {
            const char *level = f->factor[fi].level[l];
            if (!term->full && strcmp(level, f->factor[fi].reference) == 0) {
                set_row(&row[n++], level, ref, ref, ref, MR__MARK_REFERENCE);
                continue;
            }
            if (j >= term->first + term->ncoef) break;
            coef_row(&row[n++], level, f, j++);
        }
        for (; fi < 0 && j < term->first + term->ncoef; j++) coef_row(&row[n++], f->name[j], f, j);
    }
    return n;
}

#define FOREST_MAX 60 /* coefficients; beyond, the largest |statistic| */
#define FOREST_TOP 40

/* The FOREST_TOP estimated coefficients of largest |statistic| (ties by
 * position), in their order in the fit. */
static size_t top_rows(const mr_fit *f, mr__svg_row *row)
{
    size_t j, i, n = 0, first = f->nterms ? f->term[0].first : 0;
    for (j = first; j < f->p; j++) {
        size_t above = 0;
        if (f->aliased[j] || !isfinite(f->stat[j])) continue;
        for (i = first; i < f->p && above < FOREST_TOP; i++)
            above += !f->aliased[i] && isfinite(f->stat[i]) &&
                     (fabs(f->stat[i]) > fabs(f->stat[j]) || (fabs(f->stat[i]) == fabs(f->stat[j]) && i < j));
        if (above < FOREST_TOP) coef_row(&row[n++], f->name[j], f, j);
    }
    return n;
}

void mr__html_forest(mr__strbuf *b, const mr__html_page *pg, size_t k)
{
    const mr_fit *f = pg->fit[k];
    const char *ratio = mr__fit_ratio_label(f);
    size_t i, n = f->p + f->nterms, levels = 0;
    int top = f->p > FOREST_MAX;
    mr__svg_chart c;
    mr__svg_row *row;
    mr__strbuf title, desc, axis;
    char id[32];
    for (i = 0; i < f->nfactors; i++) levels += f->factor[i].nlevels;
    if (f->nterms == 0 || (row = new_rows(b, n + levels)) == NULL) return;
    memset(&c, 0, sizeof c);
    c.row = row;
    c.nrows = top ? top_rows(f, row) : forest_rows(f, row, ratio);
    for (i = 0; ratio && i < c.nrows; i++)
        if (row[i].mark == MR__MARK_ESTIMATE) to_ratio(&row[i]);
    texts_init(&title, &desc, &axis);
    mr__strbuf_printf(&title, "Forest plot: %s by term", ratio ? ratio : "coefficient");
    mr__strbuf_printf(&desc, "Each %s with its %g%% Wald interval, grouped by term; a factor's reference level is "
                             "marked at %s. Numeric covariates: per unit increase. The intercept is in the table, "
                             "not here.",
                      ratio ? ratio : "coefficient", 100 * f->level, ratio ? "ratio 1" : "0");
    if (top)
        mr__strbuf_printf(&desc, " The fit has %zu coefficients: shown are the %zu of largest |%s| (in the fit's "
                                 "order, not grouped), the rest are in the table. Picked by size, they overstate "
                                 "their effects: read them as a screen, not as estimates.",
                          f->p, c.nrows, mr__fit_statistic_name(f));
    if (ratio) mr__strbuf_printf(&axis, "%s = exp(coefficient)", ratio);
    else mr__strbuf_printf(&axis, "coefficient (link scale)");
    snprintf(id, sizeof id, "forest-%zu", k + 1);
    c.id = id;
    c.log_axis = ratio != NULL;
    c.reference = ratio ? 1 : 0;
    c.digits = pg->digits;
    c.legend[MR__MARK_ESTIMATE] = "estimate, line: its interval";
    c.legend[MR__MARK_REFERENCE] = "reference level";
    if (c.nrows) draw(b, &c, &title, &desc, &axis);
    else mr__strbuf_release(&title), mr__strbuf_release(&desc), mr__strbuf_release(&axis);
    mr__free(row);
}

/* ---- effect plots --------------------------------------------------- */

static long level_index(const mr__fit_factor *fac, const char *level)
{
    size_t l;
    for (l = 0; l < fac->nlevels; l++)
        if (strcmp(fac->level[l], level) == 0) return (long)l;
    return -1;
}

static long at_index(const mr__html_page *pg, const char *name)
{
    size_t i;
    for (i = 0; i < pg->nat; i++)
        if (strcmp(pg->at_name[i], name) == 0) return (long)i;
    return -1;
}

/* A numeric covariate's value in the plots: given with --at, else its
 * mean over the rows used when the fit records it, else 0. */
double mr__html_numeric_value(const mr__html_page *pg, const mr_fit *f, const char *name)
{
    long i = at_index(pg, name);
    const mr__fit_numeric *num = mr__fit_find_numeric(f, name);
    return i >= 0 ? pg->at_value[i] : num ? num->mean : 0;
}

/* The design row of factor fi at level l, the rest as held. */
static void profile_row(const mr__html_page *pg, const mr_fit *f, const struct mr__spline *sp, long fi, size_t l,
                        double *x)
{
    mr__html_profile p;
    memset(&p, 0, sizeof p);
    p.pg = pg, p.fit = f, p.factor = fi, p.level = l, p.spline = sp;
    mr__html_design_row(&p, x, x + f->p);
}

/* eta = x'beta and its standard error sqrt(x'Vx).  An aliased column
 * counts as 0, as in the fit, which dropped it: the fitted values are
 * those of the columns estimated. */
void mr__html_linear_predictor(const mr_fit *f, const double *x, double *eta, double *se)
{
    size_t i, j;
    double e = 0, v = 0;
    for (i = 0; i < f->p; i++) {
        if (x[i] == 0 || f->aliased[i]) continue;
        e += x[i] * f->beta[i];
        for (j = 0; j < f->p; j++)
            if (x[j] != 0 && !f->aliased[j]) v += x[i] * x[j] * f->cov[i * f->p + j];
    }
    *eta = e;
    *se = sqrt(v);
}

double mr__html_inverse_link(const mr_fit *f, double eta)
{
    double mu_eta;
    return mr__link_inv1(mr__link_ops_of((mr_link)f->link), eta, &mu_eta);
}

static void effect_row(const mr_fit *f, const double *x, double q, double scale, mr__svg_row *r)
{
    double eta, se, a, z;
    mr__html_linear_predictor(f, x, &eta, &se);
    if (isnan(eta)) {
        r->est = r->lo = r->hi = NAN;
        r->mark = MR__MARK_NONE;
        return;
    }
    a = scale * mr__html_inverse_link(f, eta - q * se);
    z = scale * mr__html_inverse_link(f, eta + q * se);
    r->est = scale * mr__html_inverse_link(f, eta);
    r->lo = a < z ? a : z; /* a decreasing inverse link swaps them */
    r->hi = a < z ? z : a;
    r->mark = MR__MARK_ESTIMATE;
}

#define MAX_EFFECT_LEVELS 100

/* What the effect plots show, and the power of ten a rate is given per
 * (chosen from the reference profile's value m0, so its numbers read as
 * ordinary figures). */
double mr__html_effect_scale(const mr_fit *f, double m0, mr__strbuf *axis)
{
    double scale = 1;
    int k, i;
    if (f->family == MR_BINOMIAL) {
        mr__strbuf_printf(axis, "fitted probability of %s (%%)", f->outcome);
        return 100;
    }
    if (f->exposure == NULL || f->link != MR_LOG) {
        mr__strbuf_printf(axis, "fitted mean of %s%s", f->outcome, f->offset ? " (offset 0)" : "");
        return 1;
    }
    for (k = 0; k < 9 && isfinite(m0) && m0 > 0 && m0 * scale < 1; k++) scale *= 10;
    mr__strbuf_printf(axis, "%s per 1", f->outcome);
    for (i = k; i > 0; i--) mr__strbuf_printf(axis, "%s0", i % 3 == 0 ? "," : ""); /* 100,000 */
    mr__strbuf_printf(axis, " %s", f->exposure);
    return scale;
}

/* Whether `name` is a numeric part of a term before term t, part k. */
static int named_before(const mr_fit *f, const char *name, size_t t, size_t k)
{
    size_t u, i;
    for (u = 0; u <= t; u++)
        for (i = 0; i < (u < t ? f->term[u].nparts : k); i++)
            if (strcmp(f->term[u].part[i], name) == 0) return 1;
    return 0;
}

/* Where the other covariates are held, in words (all but factor fi and
 * the numeric `skip`). */
void mr__html_held_at(const mr__html_page *pg, const mr_fit *f, long fi, const char *skip, mr__strbuf *d)
{
    size_t t, k, i, n = 0, zeros = 0;
    for (i = 0; i < f->nfactors; i++)
        if ((long)i != fi)
            mr__strbuf_printf(d, "%s%s at %s", n++ ? ", " : " Held: ", f->factor[i].name, f->factor[i].reference);
    for (t = 0; t < f->nterms; t++)
        for (k = 0; k < f->term[t].nparts; k++) {
            const char *name = f->term[t].part[k];
            int given = at_index(pg, name) >= 0, known = mr__fit_find_numeric(f, name) != NULL;
            if (mr__fit_find_factor(f, name) >= 0 || named_before(f, name, t, k) || (skip && !strcmp(skip, name)))
                continue;
            mr__strbuf_printf(d, "%s%s at %.6g%s", n++ ? ", " : " Held: ", name, mr__html_numeric_value(pg, f, name),
                              given ? "" : known ? " (its mean)" : "");
            zeros += !given && !known;
        }
    if (n) mr__strbuf_printf(d, ".");
    if (zeros)
        mr__strbuf_printf(d, " A numeric covariate is at 0 unless a value is given: this fit does not record the "
                             "values of its numeric columns (saved by an older version). Where 0 lies outside the "
                             "data the fitted values are extrapolations: read the differences between rows, not the "
                             "levels.");
}

static void effect_plot(mr__strbuf *b, const mr__html_page *pg, size_t k, long fi, double *x, mr__svg_row *row,
                        const struct mr__spline *sp)
{
    const mr_fit *f = pg->fit[k];
    const mr__fit_factor *fac = &f->factor[fi];
    double q = mr__html_quantile(f), scale, eta, se;
    mr__svg_chart c;
    mr__strbuf title, desc, axis;
    char id[48];
    size_t l;
    profile_row(pg, f, sp, fi, (size_t)(level_index(fac, fac->reference) < 0 ? 0 : level_index(fac, fac->reference)), x);
    mr__html_linear_predictor(f, x, &eta, &se);
    texts_init(&title, &desc, &axis);
    scale = mr__html_effect_scale(f, mr__html_inverse_link(f, eta), &axis);
    for (l = 0; l < fac->nlevels; l++) {
        profile_row(pg, f, sp, fi, l, x);
        effect_row(f, x, q, scale, &row[l]);
        row[l].label = fac->level[l];
    }
    mr__strbuf_printf(&title, "Effect plot: %s by %s", axis.failed ? "" : axis.data, fac->name);
    mr__strbuf_printf(&desc, "Fitted value for each level of %s (reference %s).", fac->name, fac->reference);
    mr__html_held_at(pg, f, fi, NULL, &desc);
    mr__strbuf_printf(&desc, " Intervals: %g%% Wald intervals of the linear predictor (delta method: its standard "
                             "error from the covariance of the coefficients), transformed by the inverse %s link.",
                      100 * f->level, mr__link_name((mr_link)f->link));
    memset(&c, 0, sizeof c);
    snprintf(id, sizeof id, "effect-%zu-%ld", k + 1, fi + 1);
    c.id = id;
    c.log_axis = f->link == MR_LOG;
    c.reference = NAN;
    c.digits = pg->digits;
    c.row = row;
    c.nrows = fac->nlevels;
    c.legend[MR__MARK_ESTIMATE] = "fitted value, line: its interval";
    draw(b, &c, &title, &desc, &axis);
}

void mr__html_effects(mr__strbuf *b, const mr__html_page *pg, size_t k)
{
    const mr_fit *f = pg->fit[k];
    size_t i, most = 0;
    double *x;
    mr__svg_row *row;
    struct mr__spline *sp = mr__html_splines(f);
    for (i = 0; i < f->nfactors; i++)
        if (f->factor[i].nlevels > most) most = f->factor[i].nlevels;
    x = mr__malloc_array(2 * f->p + 1, sizeof *x);
    row = new_rows(b, most);
    if (x == NULL || sp == NULL) b->failed = 1;
    for (i = 0; x && row && sp && i < f->nfactors; i++) {
        if (f->factor[i].nlevels > MAX_EFFECT_LEVELS) {
            mr__strbuf_printf(b, "<p class=\"note\">No effect plot for ");
            mr__html_text(b, f->factor[i].name);
            mr__strbuf_printf(b, ": %zu levels (at most %d are drawn).</p>\n", f->factor[i].nlevels, MAX_EFFECT_LEVELS);
        } else if (f->factor[i].nlevels > 1) {
            effect_plot(b, pg, k, (long)i, x, row, sp);
        }
    }
    mr__free(x);
    mr__free(row);
    mr__free(sp);
}

/* ---- changes between fits -------------------------------------------- */

static long coef_index(const mr_fit *f, const char *name)
{
    size_t j;
    for (j = 0; j < f->p; j++)
        if (strcmp(f->name[j], name) == 0) return (long)j;
    return -1;
}

/* Fit `later`'s coefficients minus the first fit's, under headings by
 * term; returns the rows and counts the coefficients the first lacks. */
static size_t change_rows(const mr_fit *first, const mr_fit *later, int ratio, mr__svg_row *row, size_t *unmatched)
{
    double q = mr__html_quantile(later);
    size_t j, t = 0, n = 0;
    *unmatched = 0;
    for (j = later->intercept ? 1 : 0; j < later->p; j++) {
        long i = coef_index(first, later->name[j]);
        double d, se;
        if (t < later->nterms && later->term[t].first == j)
            set_row(&row[n++], later->term[t++].label, NAN, NAN, NAN, MR__MARK_HEADING);
        if (i < 0) {
            ++*unmatched;
            continue;
        }
        if (first->aliased[i] || later->aliased[j]) {
            set_row(&row[n++], later->name[j], NAN, NAN, NAN, MR__MARK_NONE);
            continue;
        }
        d = later->beta[j] - first->beta[i];
        se = sqrt(first->se[i] * first->se[i] + later->se[j] * later->se[j]);
        set_row(&row[n], later->name[j], d, d - q * se, d + q * se,
                d - q * se > 0 || d + q * se < 0 ? MR__MARK_FLAGGED : MR__MARK_PLAIN);
        if (ratio) to_ratio(&row[n]);
        n++;
    }
    return n;
}

static void change_plot(mr__strbuf *b, const mr__html_page *pg, size_t k, mr__svg_row *row)
{
    const mr_fit *first = pg->fit[0], *later = pg->fit[k];
    int ratio = mr__fit_ratio_label(first) && first->link == later->link;
    mr__svg_chart c;
    mr__strbuf title, desc, axis;
    size_t unmatched;
    char id[32];
    memset(&c, 0, sizeof c);
    c.row = row;
    c.nrows = change_rows(first, later, ratio, row, &unmatched);
    texts_init(&title, &desc, &axis);
    mr__strbuf_printf(&title, "Changes from fit 1 to fit %zu", k + 1);
    mr__strbuf_printf(&desc, "Each coefficient of fit %zu %s fit 1's, with a %g%% interval that treats the two fits "
                             "as independent samples (standard error sqrt(se1^2 + se2^2)). Fits of overlapping data "
                             "are not independent and the interval is then too wide: a flagged change is a signal, "
                             "an unflagged one no proof of stability. The intercept is left out: its change depends on "
                             "where the numeric covariates are 0.",
                      k + 1, ratio ? "as a ratio to" : "minus", 100 * later->level);
    if (unmatched) mr__strbuf_printf(&desc, " %zu coefficients of fit %zu are not in fit 1.", unmatched, k + 1);
    mr__strbuf_printf(&axis, ratio ? "ratio of exp(coefficient), fit %zu / fit 1" : "coefficient, fit %zu minus fit 1",
                      k + 1);
    snprintf(id, sizeof id, "change-%zu", k + 1);
    c.id = id;
    c.log_axis = ratio;
    c.reference = ratio ? 1 : 0;
    c.digits = pg->digits;
    c.legend[MR__MARK_FLAGGED] = "interval excludes no change";
    c.legend[MR__MARK_PLAIN] = "interval includes no change (dashed)";
    draw(b, &c, &title, &desc, &axis);
}

void mr__html_changes(mr__strbuf *b, const mr__html_page *pg)
{
    size_t k;
    for (k = 1; k < pg->nfits; k++) {
        mr__svg_row *row = new_rows(b, pg->fit[k]->p + pg->fit[k]->nterms);
        if (row == NULL) return;
        change_plot(b, pg, k, row);
        mr__free(row);
    }
}
