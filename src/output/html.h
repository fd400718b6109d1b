/* html.h - what the page's files share (html.c writes the page and its
 * tables, html_plots.c the rows of its plots, svg.c draws them). */
#ifndef MR_HTML_H
#define MR_HTML_H

#include <stddef.h>

#include "common/strbuf.h"
#include "fit/fit.h"

typedef struct mr__html_page {
    const mr_fit *const *fit;
    const char *const *source; /* each fit's file, or NULL */
    size_t nfits;
    char **at_name;            /* numeric covariates' values for the effect plots */
    double *at_value;
    size_t nat;
    int digits;
} mr__html_page;

/* The plots of fit k: ratios (or coefficients) by term; fitted values
 * across the levels of each factor. */
void mr__html_forest(mr__strbuf *b, const mr__html_page *pg, size_t k);
void mr__html_effects(mr__strbuf *b, const mr__html_page *pg, size_t k);
/* Each later fit's coefficients against the first fit's. */
void mr__html_changes(mr__strbuf *b, const mr__html_page *pg);

/* The two-sided quantile of the fit's intervals: Student's t on the
 * residual df when the dispersion is estimated, else the normal. */
double mr__html_quantile(const mr_fit *f);

#endif
