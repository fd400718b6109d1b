/* html.c - one or more fits as one HTML page that stands alone: every
 * style inline, the plots inline SVG (svg.c), no script, no link to
 * anything outside the file; readable on a screen, printable.  The same
 * fits and settings give the same bytes: nothing in it comes from the
 * clock or the machine, only from the fits. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/error.h"
#include "common/outfile.h"
#include "family/family.h"
#include "input/codec.h"
#include "output/html.h"
#include "output/html_text.h"

#define DEFAULT_DIGITS 4

static const char style[] =
    "body{font:15px/1.45 system-ui,-apple-system,'Segoe UI','DejaVu Sans',Arial,sans-serif;color:#111;"
    "max-width:72rem;margin:0 auto;padding:1rem 1.5rem}\n"
    "h1{font-size:1.6rem}h2{font-size:1.3rem;border-bottom:2px solid #111;margin-top:2.5rem}"
    "h3{font-size:1.1rem;margin-top:1.8rem}\n"
    "table{border-collapse:collapse;margin:.5rem 0;font-size:.9rem}"
    "th,td{padding:.15rem .5rem;border-bottom:1px solid #ccc;text-align:left;vertical-align:top}\n"
    "table.num td{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}"
    "table.num td:first-child{text-align:left}table.num thead th{text-align:right}"
    "table.num thead th:first-child{text-align:left}\n"
    "th.group{background:#eee}pre{background:#f4f4f4;padding:.5rem;overflow-x:auto;white-space:pre-wrap}\n"
    ".caution{border:2px solid #111;padding:.2rem 1rem;margin:1rem 0}.note{color:#444;font-style:italic}\n"
    ".warn{font-weight:bold}figure{margin:1.2rem 0;break-inside:avoid}svg{max-width:100%;height:auto}\n"
    "svg text{font-size:12px;fill:#111}svg text.heading{font-weight:bold}svg text.axis{font-size:13px}\n"
    "figcaption{font-size:.9rem;max-width:48rem}.legend{font-size:.9rem}.key{font-size:1.1rem}\n"
    ".k0,.k2{color:#0072B2}.k1{color:#D55E00}.k3{color:#000}nav ul{columns:2}\n"
    ".caution h2{margin-top:.5rem}\n"
    "@media print{body{max-width:none;font-size:10pt}section[id^=fit-],#comparison{break-before:page}"
    "h3{break-after:avoid}"
    "nav{display:none}}\n";

/* ---- settings --------------------------------------------------------- */

static mr_status add_at(mr__html_page *pg, const char *arg, mr__error *err)
{
    const char *eq = strchr(arg, '=');
    char *end, *name;
    double v;
    if (eq == NULL || eq == arg) return mr__fail(err, MR_ERR_USAGE, "at '%s': give COLUMN=VALUE", arg);
    v = strtod(eq + 1, &end);
    if (eq[1] == '\0' || *end != '\0' || !isfinite(v))
        return mr__fail(err, MR_ERR_USAGE, "at '%s': '%s' is not a number", arg, eq + 1);
    if ((name = mr__malloc((size_t)(eq - arg) + 1)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    memcpy(name, arg, (size_t)(eq - arg));
    name[eq - arg] = '\0';
    pg->at_name[pg->nat] = name;
    pg->at_value[pg->nat++] = v;
    return MR_OK;
}

static int is_numeric_of(const mr_fit *f, const char *name)
{
    size_t t, k;
    for (t = 0; t < f->nterms; t++)
        for (k = 0; k < f->term[t].nparts; k++)
            if (strcmp(f->term[t].part[k], name) == 0 && mr__fit_find_factor(f, name) < 0) return 1;
    return 0;
}

static mr_status read_settings(mr__html_page *pg, const char *const *settings, size_t n, mr__error *err)
{
    size_t i, k;
    pg->at_name = mr__calloc(n + 1, sizeof *pg->at_name);
    pg->at_value = mr__calloc(n + 1, sizeof *pg->at_value);
    if (pg->at_name == NULL || pg->at_value == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < n; i++) {
        const char *s = settings[i];
        char *end;
        if (strncmp(s, "digits ", 7) == 0) {
            long d = strtol(s + 7, &end, 10);
            if (*end != '\0' || d < 1 || d > 17)
                return mr__fail(err, MR_ERR_USAGE, "digits takes 1 to 17, got '%s'", s + 7);
            pg->digits = (int)d;
        } else if (strncmp(s, "at ", 3) == 0) {
            MR__TRY(add_at(pg, s + 3, err));
            for (k = 0; k < pg->nfits && !is_numeric_of(pg->fit[k], pg->at_name[pg->nat - 1]); k++) continue;
            if (k == pg->nfits)
                return mr__fail(err, MR_ERR_USAGE, "at '%s': no fit has a numeric covariate '%s'", s + 3,
                                pg->at_name[pg->nat - 1]);
        } else if (strncmp(s, "groups ", 7) == 0 && s[7] != '\0') {
            pg->groups_path = s + 7;
        } else {
            return mr__fail(err, MR_ERR_USAGE, "unknown setting '%s' (digits N, at COLUMN=VALUE, groups FILE)", s);
        }
    }
    return MR_OK;
}

static void free_settings(mr__html_page *pg)
{
    size_t i;
    for (i = 0; pg->at_name && i < pg->nat; i++) mr__free(pg->at_name[i]);
    mr__free(pg->at_name);
    mr__free(pg->at_value);
}

static void put(mr__strbuf *b, const char *html) { mr__strbuf_append(b, html, strlen(html)); }


/* ---- several fits ------------------------------------------------------ */

static int same_data(const mr__html_page *pg)
{
    size_t k;
    for (k = 1; k < pg->nfits; k++)
        if (pg->fit[k]->checksum != pg->fit[0]->checksum || pg->fit[k]->n != pg->fit[0]->n ||
            strcmp(pg->fit[k]->outcome, pg->fit[0]->outcome) != 0)
            return 0;
    return 1;
}

static void comparison(mr__strbuf *b, const mr__html_page *pg)
{
    size_t k;
    put(b, "<section id=\"comparison\">\n<h2>Comparison of the fits</h2>\n<table class=\"num\"><thead><tr><th>fit</th>"
           "<th>family, link</th><th>rows used</th><th>parameters</th><th>deviance</th><th>residual df</th>"
           "<th>AIC</th><th>BIC</th><th>converged</th></tr></thead><tbody>\n");
    for (k = 0; k < pg->nfits; k++) {
        const mr_fit *f = pg->fit[k];
        put(b, "<tr><td>");
        mr__html_fit_name(b, pg, k);
        mr__strbuf_printf(b, "</td><td>%s, %s</td><td>%llu</td><td>%zu</td>", mr__family_name((mr_family)f->family),
                          mr__link_name((mr_link)f->link), (unsigned long long)f->n, f->rank);
        char aic[32], bic[32];
        mr__strbuf_printf(b, "<td>%.8g</td><td>%.0f</td><td>%s</td><td>%s</td><td>%s</td></tr>\n", f->deviance,
                          f->df_residual, mr__html_criterion(aic, f, f->aic), mr__html_criterion(bic, f, f->bic), f->converged ? "yes" : "NO");
    }
    put(b, "</tbody></table>\n");
    put(b, same_data(pg) ? "<p>The fits read the same data (same checksum, rows and outcome): lower AIC or BIC "
                           "favours a model, differences of a few units are weak evidence.</p>\n"
                         : "<p class=\"warn\">The fits read different data or outcomes (checksum, rows used or "
                           "outcome differ): their deviance, AIC and BIC are not comparable.</p>\n");
    put(b, "<h3>Changes of the coefficients</h3>\n");
    mr__html_changes(b, pg);
    put(b, "</section>\n");
}

/* ---- the page ------------------------------------------------------------ */

/* The README's "Statistical cautions", shortened: one item for each of
 * its items, under the same words (tests/cli/html.sh checks they match). */
static const char cautions[] =
    "<section id=\"cautions\" class=\"caution\">\n<h2>Before using these results</h2>\n<ul>\n"
    "<li><strong>Model assumptions.</strong> A GLM assumes independent observations, the chosen variance function "
    "and a linear predictor correct on the link scale. With many rows every p-value is tiny, a wrong model's "
    "too.</li>\n"
    "<li><strong>Overdispersion.</strong> Counts often vary more than Poisson allows: compare the Pearson "
    "chi-square with its residual df; well above 1 means the intervals are too narrow (refit with the dispersion "
    "estimated). Robust standard errors with few clusters are too small.</li>\n"
    "<li><strong>Confounding.</strong> Ratios are adjusted only for the terms in the model; associations are not "
    "causal effects, and aggregated data add biases of their own.</li>\n"
    "<li><strong>Data quality.</strong> Rows with a missing value were left out (see the counts): unbiased only "
    "when what is missing depends on the model's covariates alone. Coding changes between data refreshes look "
    "like trends.</li>\n"
    "<li><strong>Pooled files.</strong> Several files are fitted as one data set with one set of coefficients: "
    "check them one by one first.</li>\n"
    "<li><strong>Separation and sparse cells.</strong> Heed the warnings: a coefficient of a term with zero events "
    "or perfect prediction (not estimable) is no estimate.</li>\n"
    "<li><strong>Validate before use.</strong> These results may inform health decisions: check the model against "
    "an independent tool and review it in full. Estimates are evidence for decisions, not decisions.</li>\n"
    "</ul>\n</section>\n";

static const char not_shown[] =
    "<section id=\"not-shown\">\n<h2>Not shown</h2>\n<p>A calibration plot (observed against fitted by tenth of "
    "the fitted mean) appears under a fit whose saved file holds its calibration groups; a funnel plot (groups' "
    "observed/expected against the expected count) when a scoring run's group table is given (--groups). Nothing "
    "on this page is drawn from data the fits and that table do not hold.</p>\n</section>\n";

static void contents(mr__strbuf *b, const mr__html_page *pg)
{
    size_t k;
    put(b, "<nav><ul>\n<li><a href=\"#cautions\">Before using these results</a></li>\n");
    for (k = 0; k < pg->nfits; k++) {
        mr__strbuf_printf(b, "<li><a href=\"#fit-%zu\">", k + 1);
        mr__html_fit_name(b, pg, k);
        put(b, "</a></li>\n");
    }
    if (pg->nfits > 1) put(b, "<li><a href=\"#comparison\">Comparison of the fits</a></li>\n");
    if (pg->groups_path) put(b, "<li><a href=\"#groups\">Groups: observed against expected</a></li>\n");
    put(b, "<li><a href=\"#not-shown\">Not shown</a></li>\n</ul></nav>\n");
}

static void page(mr__strbuf *b, const mr__html_page *pg)
{
    size_t k;
    put(b, "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
           "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>millrace: ");
    mr__html_fit_name(b, pg, 0);
    if (pg->nfits > 1) mr__strbuf_printf(b, " and %zu more", pg->nfits - 1);
    mr__strbuf_printf(b, "</title>\n<style>\n%s</style>\n</head>\n<body>\n<h1>Model fit report</h1>\n"
                         "<p>%zu fit%s, written by millrace %s from the saved fit%s (fits made by millrace ",
                      style, pg->nfits, pg->nfits == 1 ? "" : "s", MR_VERSION_STRING, pg->nfits == 1 ? "" : "s");
    for (k = 0; k < pg->nfits; k++) {
        mr__html_text(b, pg->fit[k]->version);
        put(b, k + 1 < pg->nfits ? ", " : ").</p>\n");
    }
    mr__strbuf_printf(b, "<p>Numbers are rounded to %d significant digits (p-values to 3; deviance, Pearson "
                         "chi-square, dispersion, AIC and BIC to 8); the fits' JSON files hold them in full.</p>\n",
                      pg->digits);
    contents(b, pg);
    put(b, cautions);
    for (k = 0; k < pg->nfits; k++) mr__html_fit_section(b, pg, k);
    if (pg->nfits > 1) comparison(b, pg);
    if (pg->groups_path) mr__strbuf_append(b, pg->funnel.data, pg->funnel.len);
    put(b, not_shown);
    put(b, "</body>\n</html>\n");
}

/* The files the page must not replace: the fits' own files and the data
 * they were fitted to. */
static const char **inputs_of(const mr__html_page *pg, size_t *n)
{
    const char **in = mr__calloc(2 * pg->nfits + 2, sizeof *in);
    size_t k;
    *n = 0;
    if (in && pg->groups_path) in[(*n)++] = pg->groups_path;
    for (k = 0; in && k < pg->nfits; k++) {
        if (pg->source && pg->source[k]) in[(*n)++] = pg->source[k];
        if (strcmp(pg->fit[k]->path, "<stdin>") != 0) in[(*n)++] = pg->fit[k]->path;
    }
    return in;
}

static mr_status write_page(const mr__html_page *pg, const char *path, mr__error *err)
{
    mr__strbuf b;
    mr__outfile *out = NULL;
    size_t ninputs;
    const char **inputs = inputs_of(pg, &ninputs);
    mr_status st;
    if (inputs == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    st = mr__outfile_open(&out, path, inputs, ninputs, err);
    mr__free(inputs);
    if (st != MR_OK) return st;
    mr__strbuf_init(&b);
    page(&b, pg);
    if (b.failed) {
        mr__strbuf_release(&b);
        mr__outfile_abort(out);
        return mr__fail(err, MR_ERR_NO_MEMORY, "%s: out of memory writing the page", path);
    }
    st = mr__outfile_write(out, b.data, b.len, err);
    mr__strbuf_release(&b);
    if (st != MR_OK) {
        mr__outfile_abort(out);
        return st;
    }
    return mr__outfile_commit(out, err);
}

/* The group table's section, before the page is opened: a table that
 * cannot be read leaves no page. */
static mr_status funnel(mr__html_page *pg, mr__error *err)
{
    mr__strbuf_init(&pg->funnel);
    if (pg->groups_path == NULL) return MR_OK;
    MR__TRY(mr__html_funnel(&pg->funnel, pg->groups_path, pg->digits, err));
    return pg->funnel.failed ? mr__fail(err, MR_ERR_NO_MEMORY, "%s: out of memory", pg->groups_path) : MR_OK;
}

mr_status mr_fits_write_html(const mr_fit *const *fits, const char *const *sources, size_t nfits,
                             const char *const *settings, size_t nsettings, const char *path, char *msg, size_t msgcap)
{
    mr__html_page pg;
    mr__error err;
    mr__error_clear(&err);
    memset(&pg, 0, sizeof pg);
    pg.fit = fits;
    pg.source = sources;
    pg.nfits = nfits;
    pg.digits = DEFAULT_DIGITS;
    if (nfits == 0) mr__fail(&err, MR_ERR_USAGE, "%s: a page needs at least one fit", path);
    else if (read_settings(&pg, settings, nsettings, &err) == MR_OK && funnel(&pg, &err) == MR_OK)
        write_page(&pg, path, &err);
    free_settings(&pg);
    mr__strbuf_release(&pg.funnel);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
