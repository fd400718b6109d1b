/* compare_report.c - several models compared, as text for people: each
 * model's rows, deviance, residual df, AIC and BIC, then the tests
 * between nested models and the drop-one tests.  The layout and wording
 * are millrace's own. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/strbuf.h"
#include "fit/compare.h"

#define DEFAULT_DIGITS 6

static void put_number(mr__strbuf *b, double x, int digits, int width)
{
    if (isnan(x)) mr__strbuf_printf(b, " %*s", width, "-");
    else mr__strbuf_printf(b, " %*.*g", width, digits, x);
}

static int label_width(const mr_comparison *c)
{
    size_t i, w = 8;
    for (i = 0; i < c->nmodels; i++)
        if (strlen(c->model[i].label) > w) w = strlen(c->model[i].label);
    for (i = 0; i < c->ntests; i++)
        if (c->test[i].term && strlen(c->test[i].term) > w) w = strlen(c->test[i].term);
    return w > 40 ? 40 : (int)w;
}

static void section_models(mr__strbuf *b, const mr_comparison *c, int digits, int w)
{
    size_t i;
    mr__strbuf_printf(b, "data       %s (its first pass read once for all the models)\n",
                      strcmp(c->path, "-") == 0 ? "<stdin>" : c->path);
    mr__strbuf_printf(b, "\nmodels (each fitted to the rows complete in its own columns)\n");
    mr__strbuf_printf(b, "  %-*s %12s %6s %14s %12s %14s %14s\n", w, "", "rows used", "terms", "deviance",
                      "residual df", "AIC", "BIC");
    for (i = 0; i < c->nmodels; i++) {
        const mr_fit *f = c->model[i].fit;
        mr__strbuf_printf(b, "  %-*s %12llu %6zu", w, c->model[i].label, (unsigned long long)f->rows_used, f->nterms);
        put_number(b, f->deviance, digits, 14);
        put_number(b, f->df_residual, digits, 12);
        put_number(b, f->aic, digits, 14);
        put_number(b, f->bic, digits, 14);
        mr__strbuf_printf(b, "%s\n", f->status == MR_ERR_NOT_CONVERGED ? "  not converged" : "");
    }
}

static void put_stats(mr__strbuf *b, const mr__cmp_test *t, int digits)
{
    const mr_model_test *p = &t->pub;
    put_number(b, p->df, digits, 6);
    put_number(b, p->deviance_change, digits, 14);
    put_number(b, p->chi2, digits, 12);
    put_number(b, p->chi2_p, 4, 10);
    put_number(b, p->f, digits, 10);
    put_number(b, p->f_p, 4, 10);
    mr__strbuf_printf(b, "\n");
    if (*t->note) mr__strbuf_printf(b, "      %s\n", t->note);
}

static const char STATS_HEAD[] = " %6s %14s %12s %10s %10s %10s\n";

static void section_nested(mr__strbuf *b, const mr_comparison *c, int digits, int w)
{
    size_t k, n = 0;
    for (k = 0; k < c->ntests; k++) n += c->test[k].pub.kind == MR_TEST_NESTED;
    if (n == 0) {
        mr__strbuf_printf(b, "\nnested models: none (no model's terms are all in another with the same outcome, "
                             "family, link, offset and weight)\n");
        return;
    }
    mr__strbuf_printf(b, "\nnested models: the smaller against the larger (likelihood ratio; the deviance change "
                         "scaled by the larger model's dispersion)\n");
    mr__strbuf_printf(b, "  %-*s   %-*s", w, "smaller", w, "larger");
    mr__strbuf_printf(b, STATS_HEAD, "df", "deviance drop", "chi-square", "p", "F", "p (F)");
    for (k = 0; k < c->ntests; k++) {
        const mr__cmp_test *t = &c->test[k];
        if (t->pub.kind != MR_TEST_NESTED) continue;
        mr__strbuf_printf(b, "  %-*s < %-*s", w, c->model[t->pub.smaller].label, w, c->model[t->pub.larger].label);
        put_stats(b, t, digits);
    }
}

static void section_drop_one(mr__strbuf *b, const mr_comparison *c, size_t m, int digits, int w)
{
    size_t k;
    mr__strbuf_printf(b, "\ndrop-one: %s refitted without each term in turn (terms inside a larger term kept)\n",
                      c->model[m].label);
    mr__strbuf_printf(b, "  %-*s %14s %12s %14s", w, "without", "deviance", "residual df", "AIC");
    mr__strbuf_printf(b, STATS_HEAD, "df", "deviance rise", "chi-square", "p", "F", "p (F)");
    for (k = 0; k < c->ntests; k++) {
        const mr__cmp_test *t = &c->test[k];
        if (t->pub.kind != MR_TEST_DROP_ONE || t->pub.larger != m) continue;
        mr__strbuf_printf(b, "  %-*s", w, t->term);
        put_number(b, t->pub.reduced_deviance, digits, 14);
        put_number(b, t->pub.reduced_residual_df, digits, 12);
        put_number(b, t->pub.reduced_aic, digits, 14);
        put_stats(b, t, digits);
    }
}

char *mr_comparison_report(const mr_comparison *c, int digits)
{
    mr__strbuf b;
    size_t i;
    int w;
    if (!c->ran) return NULL;
    if (digits <= 0) digits = DEFAULT_DIGITS;
    w = label_width(c);
    mr__strbuf_init(&b);
    section_models(&b, c, digits, w);
    section_nested(&b, c, digits, w);
    for (i = 0; i < c->nmodels; i++)
        if (c->model[i].drop_one) section_drop_one(&b, c, i, digits, w);
    mr__strbuf_printf(&b, "\nA test here compares two models fitted to the same rows; its p-value is not adjusted "
                          "for the\nnumber of tests or for having chosen among models, and says nothing of how "
                          "well either model fits.\nAIC and BIC are comparable only between models of the same "
                          "rows and family (none for quasi families).\n");
    return mr__strbuf_take(&b);
}
