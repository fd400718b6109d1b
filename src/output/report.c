/* report.c - the plain-text fit report.  The layout is millrace's own:
 * what was read, what was fitted, how it converged, one line per
 * coefficient, then the fit statistics and every warning. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/strbuf.h"
#include "family/family.h"
#include "fit/fit.h"
#include "input/codec.h"
#include "input/chunk.h"
#include "output/report_many.h"
#include "output/report_calib.h"

#define DEFAULT_DIGITS 6

static const char *delimiter_name(char d)
{
    switch (d) {
    case '\t': return "tab";
    case ';': return "';'";
    default: return "','";
    }
}

static void put_number(mr__strbuf *b, double x, int digits, int width)
{
    if (isnan(x)) mr__strbuf_printf(b, " %*s", width, "-");
    else mr__strbuf_printf(b, " %*.*g", width, digits, x);
}

static void put_pvalue(mr__strbuf *b, double p, int width)
{
    if (isnan(p)) mr__strbuf_printf(b, " %*s", width, "-");
    else if (p < 1e-16) mr__strbuf_printf(b, " %*s", width, "<1e-16");
    else mr__strbuf_printf(b, " %*.3g", width, p);
}

static void section_data(mr__strbuf *b, const mr_fit *f)
{
    size_t i;
    mr__strbuf_printf(b, "data       %s (%s, %llu bytes read", f->path,
                      f->compression ? mr__compression_name(f->compression) : "plain text", (unsigned long long)f->bytes);
    if (f->compression) mr__strbuf_printf(b, ", %llu bytes of text", (unsigned long long)f->decompressed_bytes);
    mr__strbuf_printf(b, ")\n           checksum fnv1a64w:%016llx, delimiter %s (%s)\n", (unsigned long long)f->checksum,
                      delimiter_name(f->delimiter), f->delimiter_detected ? "detected from the header" : "as given");
    mr__strbuf_printf(b, "rows       %llu read, %llu used, %llu left out\n", (unsigned long long)f->rows_read,
                      (unsigned long long)f->rows_used, (unsigned long long)(f->rows_read - f->rows_used));
    for (i = 0; i < f->nmissing; i++)
        mr__strbuf_printf(b, "           %llu with '%s' missing\n", (unsigned long long)f->missing_count[i],
                          f->missing_name[i]);
    if (f->rows_bad) mr__strbuf_printf(b, "           %llu malformed, skipped; the first:\n", (unsigned long long)f->rows_bad);
    for (i = 0; i < f->nbad_examples; i++) mr__strbuf_printf(b, "             %s\n", f->bad_example[i]);
    if (f->zero_weight) mr__strbuf_printf(b, "           %llu used rows have weight 0\n", (unsigned long long)f->zero_weight);
}

/* A spline's knots, as the JSON has them to full precision. */
static void section_spline(mr__strbuf *b, const mr__fit_term *t)
{
    size_t k;
    mr__strbuf_printf(b, "           spline %s: %zu column%s, ", t->spline_column, t->ncoef, t->ncoef == 1 ? "" : "s");
    mr__strbuf_printf(b, t->nknots ? "knots" : "no interior knot");
    for (k = 0; k < t->nknots; k++) mr__strbuf_printf(b, "%s %.10g", k ? "," : "", t->knots[k]);
    mr__strbuf_printf(b, ", boundary %.10g and %.10g\n", t->boundary[0], t->boundary[1]);
}

static void section_model(mr__strbuf *b, const mr_fit *f)
{
    size_t i;
    mr__strbuf_printf(b, "model      %s family", mr__family_name((mr_family)f->family));
    mr__fit_family_param_text(f, b);
    mr__strbuf_printf(b, ", %s link, %zu coefficients", mr__link_name((mr_link)f->link), f->p);
    if (f->many_given) mr__strbuf_printf(b, " and %zu levels of %s", f->nmany, f->many_factor);
    mr__strbuf_printf(b, " (rank %zu)%s\n", f->rank, f->intercept ? "" : ", no intercept");
    mr__strbuf_printf(b, "           outcome %s", f->outcome);
    if (f->trials) mr__strbuf_printf(b, " out of %s trials", f->trials);
    if (f->exposure) mr__strbuf_printf(b, ", exposure log(%s)", f->exposure);
    if (f->offset) mr__strbuf_printf(b, ", offset %s", f->offset);
    if (f->weight) mr__strbuf_printf(b, ", prior weight %s", f->weight);
    mr__strbuf_printf(b, "\n           terms:");
    for (i = 0; i < f->nterms; i++) mr__strbuf_printf(b, "%s %s", i ? "," : "", f->term[i].label);
    if (f->nterms == 0) mr__strbuf_printf(b, " intercept only");
    mr__strbuf_printf(b, "\n");
    for (i = 0; i < f->nfactors; i++)
        mr__strbuf_printf(b, "           factor %s: %zu levels, reference %s\n", f->factor[i].name,
                          f->factor[i].nlevels, f->factor[i].reference);
    for (i = 0; i < f->nterms; i++)
        if (f->term[i].spline && f->term[i].nparts == 1) section_spline(b, &f->term[i]);
}

static void section_convergence(mr__strbuf *b, const mr_fit *f)
{
    mr__strbuf_printf(b, "fit        %s after %d IRLS iterations (%d pass%s over the data%s)\n",
                      f->converged ? "converged" : "NOT CONVERGED", f->iterations, f->passes, f->passes == 1 ? "" : "es",
                      f->in_memory ? ", later passes from memory" : f->cached ? ", later passes from the cache" : "");
    if (f->by_step)
        mr__strbuf_printf(b, "           last step %.3g standard errors (tolerance %.3g; taken, without a pass after it)",
                          f->rel_change, f->tolerance);
    else
        mr__strbuf_printf(b, "           a coefficient running off to infinity: stopped on a relative deviance change of %.3g",
                          f->rel_change);
    if (f->halvings) mr__strbuf_printf(b, ", %d step halvings", f->halvings);
    if (f->patterns)
        mr__strbuf_printf(b, "\n           rows collapsed into %zu covariate patterns: one read of the file, IRLS in memory%s",
                          f->patterns, f->robust ? "; one more read for the robust standard errors" : "");
    if (f->warm_start)
        mr__strbuf_printf(b, "\n           started from a fit to a sample of the file (%d IRLS steps on %d blocks of %d rows spread over it",
                          f->warm_iterations, f->warm_blocks, MR__BLOCK_ROWS);
    if (f->warm_start && f->warm_polish_blocks)
        mr__strbuf_printf(b, ", then one on %d blocks", f->warm_polish_blocks);
    if (f->warm_start) mr__strbuf_printf(b, ")");
    if (f->resumed)
        mr__strbuf_printf(b, "\n           went on from a checkpoint after pass %d (to the results of a run never stopped; the time is this run's)",
                          f->resumed_from_pass);
    if (f->start_given)
        mr__strbuf_printf(b, "\n           started from the previous fit %s: %zu of this fit's %zu coefficients carried over (it had %zu)",
                          f->start_from, f->start_carried, f->p, f->start_previous);
    mr__strbuf_printf(b, "\n           %.3f s, %.3f s per pass, %.0f rows/s, %d threads\n", f->seconds,
                      f->passes ? f->seconds / f->passes : 0.0, f->rows_per_second, f->threads);
}

static size_t name_width(const mr_fit *f)
{
    size_t j, w = 11;
    for (j = 0; j < f->p; j++)
        if (strlen(f->name[j]) > w) w = strlen(f->name[j]);
    return w > 48 ? 48 : w;
}

/* Which standard errors the table shows: robust ones drive its tests. */
static void robust_line(mr__strbuf *b, const mr_fit *f)
{
    if (!f->robust) return;
    mr__strbuf_printf(b, "standard errors: robust (sandwich %s, factor %.9g)", f->robust_type, f->robust_adjustment);
    if (f->cluster)
        mr__strbuf_printf(b, " by cluster column '%s', %llu clusters%s", f->cluster, (unsigned long long)f->nclusters,
                          f->nclusters < 50 ? " (few clusters: they may be too small)" : "");
    else
        mr__strbuf_printf(b, " by rows");
    mr__strbuf_printf(b, "; the model-based ones are in the JSON\n");
}

static void section_coefficients(mr__strbuf *b, const mr_fit *f, int digits)
{
    const char *ratio = mr__fit_ratio_label(f), *stat = mr__fit_statistic_name(f);
    int w = (int)name_width(f), nw = digits + 7;
    size_t j;
    mr__strbuf_printf(b, "\ncoefficients: Wald %s tests and %g%% intervals%s%s%s\n", stat, 100 * f->level,
                      ratio ? "; " : "", ratio ? ratio : "", ratio ? " = exp(estimate)" : "");
    robust_line(b, f);
    mr__strbuf_printf(b, "  %-*s %*s %*s %8s %9s %*s %*s", w, "coefficient", nw, "estimate", nw,
                      f->robust ? "robust SE" : "SE", stat,
                      "p", nw, "low", nw, "high");
    if (ratio) mr__strbuf_printf(b, " %*s %*s %*s", nw, "ratio", nw, "low", nw, "high");
    mr__strbuf_printf(b, "\n");
    for (j = 0; j < f->p; j++) {
        mr__strbuf_printf(b, "  %-*s", w, f->name[j]);
        if (f->aliased[j]) {
            mr__strbuf_printf(b, " %*s\n", nw, "aliased");
            continue;
        }
        put_number(b, f->beta[j], digits, nw);
        put_number(b, f->robust ? f->robust_se[j] : f->se[j], digits, nw);
        mr__strbuf_printf(b, " %8.3f", f->stat[j]);
        put_pvalue(b, f->pval[j], 9);
        put_number(b, f->lo[j], digits, nw);
        put_number(b, f->hi[j], digits, nw);
        if (ratio) {
            put_number(b, exp(f->beta[j]), digits, nw);
            put_number(b, exp(f->lo[j]), digits, nw);
            put_number(b, exp(f->hi[j]), digits, nw);
        }
        /* at infinity in practice (a zero cell, a growing SE): warnings say why */
        mr__strbuf_printf(b, "%s\n", f->inestimable && f->inestimable[j] ? "  ! not estimable" : "");
    }
}

static size_t term_width(const mr_fit *f)
{
    size_t i, w = 4;
    for (i = 0; i < f->nterms; i++)
        if (strlen(f->term[i].label) > w) w = strlen(f->term[i].label);
    return w > 48 ? 48 : w;
}

/* One line per term: does the term matter as a whole? */
static void section_term_tests(mr__strbuf *b, const mr_fit *f, int digits)
{
    int w = (int)term_width(f), nw = digits + 7;
    size_t i;
    if (f->nterms == 0) return;
    if (f->dispersion_estimated && !f->robust)
        mr__strbuf_printf(b, "\nterms: joint Wald F = chi-square / df, against F(df, %.0f)\n", f->df_residual);
    else
        mr__strbuf_printf(b, "\nterms: joint Wald chi-square, against chi-square(df)\n");
    mr__strbuf_printf(b, "  %-*s %5s %*s %9s\n", w, "term", "df", nw, f->dispersion_estimated && !f->robust ? "F" : "chi-square", "p");
    for (i = 0; i < f->nterms; i++) {
        const mr__fit_term *t = &f->term[i];
        mr__strbuf_printf(b, "  %-*s %5zu", w, t->label, t->test_df);
        if (t->test_df == 0) {
            mr__strbuf_printf(b, "   no test: %s\n", t->ncoef ? "every coefficient of the term is aliased"
                                                 : f->many_given && strcmp(t->label, f->many_factor) == 0
                                                     ? "its levels are not in the covariance"
                                                     : "the term has no coefficient");
            continue;
        }
        put_number(b, t->test_stat, digits, nw);
        put_pvalue(b, t->test_p, 9);
        if (isnan(t->test_stat))
            mr__strbuf_printf(b, "   no test: %s", isnan(f->dispersion) ? "the dispersion could not be estimated"
                                                                         : "its covariance block is numerically singular");
        else if (t->test_df < t->ncoef)
            mr__strbuf_printf(b, "   %zu aliased coefficient%s left out", t->ncoef - t->test_df,
                              t->ncoef - t->test_df == 1 ? "" : "s");
        mr__strbuf_printf(b, "\n");
    }
}

/* A parameter chosen by profile likelihood: each value's log-likelihood. */
static void section_profile(mr__strbuf *b, const mr_fit *f, int digits)
{
    size_t i;
    if (!f->family_param_profiled) return;
    mr__strbuf_printf(b, "  profile of %s (a fit each; the AIC and BIC count it):\n", mr__fit_family_param_name(f));
    for (i = 0; i < f->nprofile; i++)
        mr__strbuf_printf(b, "    %-8.15g log-likelihood %.*g%s\n", f->profile[i].value, digits + 2, f->profile[i].loglik,
                          f->profile[i].value == f->family_param ? "  (chosen)" : "");
}

static void section_statistics(mr__strbuf *b, const mr_fit *f, int digits)
{
    mr__strbuf_printf(b, "\nstatistics\n");
    mr__strbuf_printf(b, "  deviance            %-*.*g  degrees of freedom %.0f\n", digits + 4, digits + 2, f->deviance,
                      f->df_residual);
    mr__strbuf_printf(b, "  null deviance       %-*.*g  degrees of freedom %.0f\n", digits + 4, digits + 2,
                      f->null_deviance, f->df_null);
    mr__strbuf_printf(b, "  pearson chi-square  %.*g\n", digits + 2, f->pearson);
    mr__strbuf_printf(b, "  dispersion          %.*g (%s)\n", digits + 2, f->dispersion,
                      f->dispersion_estimated ? "estimated: pearson chi-square / residual df" : "fixed");
    if (mr__family_ops_of((mr_family)f->family)->loglik_by_rows && isnan(f->loglik)) {
        mr__strbuf_printf(b, "  log-likelihood      not computed: the fit stopped before its steps were small "
                             "enough to sum the %s density\n",
                          mr__family_name((mr_family)f->family));
        mr__strbuf_printf(b, "  AIC, BIC            not computed\n");
        return;
    }
    if (mr__family_ops_of((mr_family)f->family)->no_loglik) {
        mr__strbuf_printf(b, "  log-likelihood      not computed: the %s density has no closed form\n",
                          mr__family_name((mr_family)f->family));
        mr__strbuf_printf(b, "  AIC, BIC            not computed\n");
        return;
    }
    if (mr__fit_quasi(f)) {
        mr__strbuf_printf(b, "  log-likelihood      none: %s with the dispersion estimated is a quasi family, "
                             "without a likelihood\n", mr__family_name((mr_family)f->family));
        mr__strbuf_printf(b, "  AIC, BIC            none\n");
        return;
    }
    mr__strbuf_printf(b, "  log-likelihood      %.*g\n", digits + 2, f->loglik);
    mr__strbuf_printf(b, "  AIC                 %.*g\n", digits + 2, f->aic);
    mr__strbuf_printf(b, "  BIC                 %.*g\n", digits + 2, f->bic);
    section_profile(b, f, digits);
}

char *mr_fit_report(const mr_fit *f, int digits)
{
    mr__strbuf b;
    size_t i;
    if (digits <= 0) digits = DEFAULT_DIGITS;
    if (digits > 17) digits = 17;
    mr__strbuf_init(&b);
    mr__strbuf_printf(&b, "millrace %s fit report\n\n", MR_VERSION_STRING);
    section_data(&b, f);
    section_model(&b, f);
    section_convergence(&b, f);
    section_coefficients(&b, f, digits);
    mr__report_many(&b, f, digits);
    section_term_tests(&b, f, digits);
    section_statistics(&b, f, digits);
    mr__report_calibration(&b, f, digits);
    if (f->nwarnings) mr__strbuf_printf(&b, "\nwarnings\n");
    for (i = 0; i < f->nwarnings; i++) mr__strbuf_printf(&b, "  ! %s\n", f->warning[i]);
    return mr__strbuf_take(&b);
}
