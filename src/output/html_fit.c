/* html_fit.c - one fit's section of the page (html.c): the data read,
 * the model, convergence, the coefficient table with ratios and
 * intervals, the term tests and the fit statistics as HTML tables, then
 * the fit's plots (html_plots.c, html_curves.c, html_calibration.c).
 * Every number in these tables is the saved fit's, rounded as the JSON's
 * reader is told (tests/cli/html/check_numbers.py reads both). */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "family/family.h"
#include "input/codec.h"
#include "output/html.h"
#include "output/html_text.h"

/* ---- small pieces ----------------------------------------------------- */

static void put(mr__strbuf *b, const char *html) { mr__strbuf_append(b, html, strlen(html)); }

/* A table cell of the library's text. */
static void cell(mr__strbuf *b, const char *tag, const char *text)
{
    mr__strbuf_printf(b, "<%s>", tag);
    mr__html_text(b, text);
    mr__strbuf_printf(b, "</%s>", tag);
}

static void num_cell(mr__strbuf *b, double x, int digits)
{
    put(b, "<td>");
    mr__html_number(b, x, digits);
    put(b, "</td>");
}

void mr__html_fit_name(mr__strbuf *b, const mr__html_page *pg, size_t k)
{
    mr__strbuf_printf(b, "Fit %zu: ", k + 1);
    mr__html_text(b, pg->source && pg->source[k] ? pg->source[k] : pg->fit[k]->path);
}

static void row_count(mr__strbuf *b, const char *what, uint64_t n)
{
    mr__strbuf_printf(b, "<tr><th>%s</th><td>%llu</td></tr>\n", what, (unsigned long long)n);
}

/* ---- one fit ----------------------------------------------------------- */

static void summary_data(mr__strbuf *b, const mr_fit *f)
{
    size_t i;
    put(b, "<h3>Data read</h3>\n<table>\n<tr><th>file</th>");
    cell(b, "td", f->path);
    mr__strbuf_printf(b, "</tr>\n<tr><th>read</th><td>%llu bytes%s%s%s, checksum fnv1a64w:%016llx</td></tr>\n",
                      (unsigned long long)f->bytes, f->compression ? " (" : "",
                      f->compression ? mr__compression_name(f->compression) : "", f->compression ? ")" : "",
                      (unsigned long long)f->checksum);
    row_count(b, "rows read", f->rows_read);
    row_count(b, "rows used", f->rows_used);
    row_count(b, "rows left out", f->rows_read - f->rows_used);
    if (f->rows_incomplete)
        mr__strbuf_printf(b, "<tr><td>&#8195;a model column missing</td><td>%llu</td></tr>\n",
                          (unsigned long long)f->rows_incomplete);
    for (i = 0; i < f->nmissing; i++) {
        put(b, "<tr><td>&#8195;&#8195;missing ");
        mr__html_text(b, f->missing_name[i]);
        mr__strbuf_printf(b, "</td><td>%llu</td></tr>\n", (unsigned long long)f->missing_count[i]);
    }
    if (f->rows_bad) mr__strbuf_printf(b, "<tr><td>&#8195;malformed, skipped</td><td>%llu</td></tr>\n",
                                       (unsigned long long)f->rows_bad);
    if (f->zero_weight) mr__strbuf_printf(b, "<tr><td>&#8195;used, weight 0</td><td>%llu</td></tr>\n",
                                          (unsigned long long)f->zero_weight);
    put(b, "</table>\n");
    for (i = 0; i < f->nbad_examples; i++) {
        put(b, i ? "\n" : "<p>The first malformed rows:</p>\n<pre>");
        mr__html_text(b, f->bad_example[i]);
        if (i + 1 == f->nbad_examples) put(b, "</pre>\n");
    }
}

static void summary_model(mr__strbuf *b, const mr_fit *f)
{
    size_t i;
    mr__strbuf_printf(b, "<h3>Model</h3>\n<p>%s family", mr__family_name((mr_family)f->family));
    mr__fit_family_param_text(f, b);
    mr__strbuf_printf(b, ", %s link, %zu coefficients (rank %zu), dispersion %s; outcome ",
                      mr__link_name((mr_link)f->link), f->p, f->rank,
                      f->dispersion_estimated ? "estimated" : "fixed at 1");
    mr__html_text(b, f->outcome);
    if (f->exposure) put(b, ", exposure log("), mr__html_text(b, f->exposure), put(b, ")");
    if (f->offset) put(b, ", offset "), mr__html_text(b, f->offset);
    if (f->weight) put(b, ", prior weight "), mr__html_text(b, f->weight);
    put(b, ".</p>\n<p>The model's lines as given:</p>\n<pre>");
    for (i = 0; i < f->nmodel_lines; i++) {
        mr__html_text(b, f->model_origin[i] ? f->model_origin[i] : "");
        put(b, f->model_origin[i] ? ": " : "");
        mr__html_text(b, f->model_line[i]);
        put(b, "\n");
    }
    put(b, "</pre>\n");
    for (i = 0; i < f->nfactors; i++) {
        put(b, i ? ", " : "<p>Factors and their reference levels: ");
        mr__html_text(b, f->factor[i].name);
        put(b, " (");
        mr__html_text(b, f->factor[i].reference);
        mr__strbuf_printf(b, "; %zu levels)%s", f->factor[i].nlevels, i + 1 == f->nfactors ? ".</p>\n" : "");
    }
}

static void summary_convergence(mr__strbuf *b, const mr_fit *f)
{
    size_t i;
    mr__strbuf_printf(b, "<h3>Convergence</h3>\n<p%s>%s after %d IRLS iterations (%d pass%s over the data); last step "
                         "%.3g standard errors (tolerance %.3g).</p>\n",
                      f->converged ? "" : " class=\"warn\"", f->converged ? "Converged" : "NOT CONVERGED: do not use",
                      f->iterations, f->passes, f->passes == 1 ? "" : "es", f->rel_change, f->tolerance);
    for (i = 0; i < f->nwarnings; i++) {
        put(b, i ? "\n<li>" : "<p class=\"warn\">Warnings:</p>\n<ul><li>");
        mr__html_text(b, f->warning[i]);
        put(b, i + 1 == f->nwarnings ? "</li></ul>\n" : "</li>");
    }
}

/* Which standard errors the table shows: robust ones drive its tests. */
static void robust_note(mr__strbuf *b, const mr_fit *f)
{
    if (!f->robust) return;
    mr__strbuf_printf(b, "<p>Standard errors: robust (sandwich %s, factor %.9g) ", f->robust_type,
                      f->robust_adjustment);
    if (f->cluster) {
        put(b, "by cluster column ");
        cell(b, "code", f->cluster);
        mr__strbuf_printf(b, ", %llu clusters%s", (unsigned long long)f->nclusters,
                          f->nclusters < 50 ? " (few clusters: they may be too small)" : "");
    } else {
        put(b, "by rows");
    }
    put(b, "; the model-based ones are in the JSON.</p>\n");
}

static void coefficient_table(mr__strbuf *b, const mr__html_page *pg, const mr_fit *f)
{
    const char *ratio = mr__fit_ratio_label(f);
    size_t j;
    mr__strbuf_printf(b, "<h3>Coefficients</h3>\n<p>Wald %s tests and %g%% intervals%s%s%s.</p>\n",
                      mr__fit_statistic_name(f), 100 * f->level, ratio ? "; " : "", ratio ? ratio : "",
                      ratio ? " = exp(estimate)" : "");
    robust_note(b, f);
    mr__strbuf_printf(b, "<table class=\"num\"><thead><tr><th>coefficient</th><th>estimate</th><th>%s</th>"
                         "<th>%s</th><th>p</th><th>low</th><th>high</th>",
                      f->robust ? "robust SE" : "SE", mr__fit_statistic_name(f));
    if (ratio) mr__strbuf_printf(b, "<th>%s</th><th>low</th><th>high</th>", ratio);
    put(b, "</tr></thead><tbody>\n");
    for (j = 0; j < f->p; j++) {
        put(b, f->inestimable && f->inestimable[j] ? "<tr class=\"warn\">" : "<tr>");
        if (f->inestimable && f->inestimable[j]) {
            mr__strbuf label;
            mr__strbuf_init(&label);
            mr__strbuf_printf(&label, "%s (not estimable)", f->name[j]);
            cell(b, "td", label.data ? label.data : f->name[j]);
            mr__strbuf_release(&label);
        } else {
            cell(b, "td", f->name[j]);
        }
        if (f->aliased[j]) {
            mr__strbuf_printf(b, "<td colspan=\"%d\">aliased (no estimate)</td></tr>\n", ratio ? 9 : 6);
            continue;
        }
        num_cell(b, f->beta[j], pg->digits);
        num_cell(b, f->robust ? f->robust_se[j] : f->se[j], pg->digits);
        num_cell(b, f->stat[j], pg->digits);
        put(b, "<td>");
        mr__html_p_value(b, f->pval[j]);
        put(b, "</td>");
        num_cell(b, f->lo[j], pg->digits);
        num_cell(b, f->hi[j], pg->digits);
        if (ratio) {
            num_cell(b, exp(f->beta[j]), pg->digits);
            num_cell(b, exp(f->lo[j]), pg->digits);
            num_cell(b, exp(f->hi[j]), pg->digits);
        }
        put(b, "</tr>\n");
    }
    put(b, "</tbody></table>\n");
}

/* Why a term's test is missing or partial, as the text report says it. */
static const char *term_note(const mr_fit *f, const mr__fit_term *t)
{
    if (t->test_df == 0)
        return t->ncoef ? "no test: every coefficient of the term is aliased"
               : f->many_given && strcmp(t->label, f->many_factor) == 0 ? "no test: its levels are not in the covariance"
                                                                        : "no test: the term has no coefficient";
    if (isnan(t->test_stat))
        return isnan(f->dispersion) ? "no test: the dispersion could not be estimated"
                                    : "no test: its covariance block is numerically singular";
    return t->test_df < t->ncoef ? "aliased coefficients left out" : "";
}

/* The joint Wald test of each term (term_test.c): chi-square, or F where
 * the dispersion is estimated and the standard errors are not robust; the
 * same blanks as the JSON's, which has no test where the df are 0. */
static void term_tests(mr__strbuf *b, const mr__html_page *pg, const mr_fit *f)
{
    size_t i;
    int is_f = f->dispersion_estimated && !f->robust;
    for (i = 0; i < f->nterms; i++) {
        const mr__fit_term *t = &f->term[i];
        if (i == 0) put(b, "<h3>Term tests</h3>\n<table class=\"num\"><thead><tr><th>term</th><th>test</th><th>df</th>"
                           "<th>Wald statistic</th><th>p</th><th>note</th></tr></thead><tbody>\n");
        put(b, "<tr>");
        cell(b, "td", t->label);
        cell(b, "td", t->test_df == 0 ? "none" : is_f ? "F" : "chi-square");
        num_cell(b, t->test_df ? (double)t->test_df : NAN, pg->digits);
        num_cell(b, t->test_stat, pg->digits);
        put(b, "<td>");
        mr__html_p_value(b, t->test_p);
        put(b, "</td>");
        cell(b, "td", term_note(f, t));
        put(b, "</tr>\n");
        if (i + 1 == f->nterms) put(b, "</tbody></table>\n");
    }
}

/* An AIC or BIC as %.8g, or what a fit without a log-likelihood (tweedie,
 * a quasi family) has instead. */
const char *mr__html_criterion(char buf[32], const mr_fit *f, double v)
{
    if (mr__fit_quasi(f)) return "none (quasi family)";
    if (isnan(v)) return "not computed";
    snprintf(buf, 32, "%.8g", v);
    return buf;
}

static void statistics(mr__strbuf *b, const mr_fit *f)
{
    char aic[32], bic[32];
    mr__strbuf_printf(b, "<h3>Fit statistics</h3>\n<table class=\"num\">\n<tr><td>deviance</td><td>%.8g (degrees of freedom "
                         "%.0f)</td></tr>\n<tr><td>null deviance</td><td>%.8g (degrees of freedom %.0f)</td></tr>\n<tr><td>Pearson chi-square"
                         "</td><td>%.8g</td></tr>\n<tr><td>dispersion</td><td>%.8g (%s)</td></tr>\n<tr><td>AIC</td>"
                         "<td>%s</td></tr>\n<tr><td>BIC</td><td>%s</td></tr>\n</table>\n",
                      f->deviance, f->df_residual, f->null_deviance, f->df_null, f->pearson, f->dispersion,
                      f->dispersion_estimated ? "estimated" : "fixed", mr__html_criterion(aic, f, f->aic), mr__html_criterion(bic, f, f->bic));
    if (mr__fit_quasi(f))
        mr__strbuf_printf(b, "<p>No log-likelihood, AIC or BIC: %s with the dispersion estimated is a quasi family, "
                             "fitted by its mean and variance alone, without a likelihood.</p>\n",
                          mr__family_name((mr_family)f->family));
    if (!f->dispersion_estimated && f->df_residual > 0 && f->pearson / f->df_residual > 1.5)
        mr__strbuf_printf(b, "<p class=\"warn\">Pearson chi-square / residual df = %.3g, well above 1: the data vary "
                             "more than the model allows and the intervals are too narrow. Consider dispersion "
                             "estimate.</p>\n", f->pearson / f->df_residual);
}

void mr__html_fit_section(mr__strbuf *b, const mr__html_page *pg, size_t k)
{
    const mr_fit *f = pg->fit[k];
    mr__strbuf_printf(b, "<section id=\"fit-%zu\">\n<h2>", k + 1);
    mr__html_fit_name(b, pg, k);
    put(b, "</h2>\n");
    summary_data(b, f);
    summary_model(b, f);
    summary_convergence(b, f);
    coefficient_table(b, pg, f);
    term_tests(b, pg, f);
    statistics(b, f);
    put(b, "<h3>Forest plot</h3>\n");
    mr__html_forest(b, pg, k);
    put(b, "<h3>Effect plots</h3>\n");
    mr__html_effects(b, pg, k);
    put(b, "<h3>Effect curves</h3>\n");
    mr__html_curves(b, pg, k);
    mr__html_calibration(b, pg, k);
    put(b, "</section>\n");
}
