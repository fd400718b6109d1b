/* term_test.c - one joint Wald test per term: are all of the term's
 * estimated coefficients 0?  For a factor of several levels or an
 * interaction no single coefficient's test answers that.  Aliased
 * coefficients are left out (they are not estimated), so the test's df is
 * the number of the term's estimated coefficients.  A term of one
 * coefficient gets the same test, whose statistic is the square of the
 * coefficient's z or t and whose p-value is the coefficient's: every term
 * has a line, and readers need no special case. */
#include <math.h>

#include "common/alloc.h"
#include "common/probability.h"
#include "fit/fit.h"
#include "solve/normal_eq.h"

static double p_value(const mr_fit *fit, double stat, size_t df)
{
    if (fit->dispersion_estimated && !fit->robust) return mr__f_sf(stat, (double)df, fit->df_residual);
    /* as the coefficient's own p-value when there is one coefficient */
    if (df == 1) return 2 * mr__normal_sf(sqrt(stat));
    return mr__chisq_sf(stat, (double)df);
}

/* b and V of the term's estimated coefficients into x and S (k x k). */
static size_t gather(const mr_fit *fit, const mr__fit_term *t, size_t *col, double *x, double *S)
{
    /* robust standard errors, when asked, drive the tests */
    const double *cov = fit->robust ? fit->robust_cov : fit->cov;
    size_t j, a, c, k = 0;
    for (j = t->first; j < t->first + t->ncoef; j++)
        if (!fit->aliased[j]) col[k++] = j;
    for (c = 0; c < k; c++) {
        x[c] = fit->beta[col[c]];
        for (a = 0; a < k; a++) S[c * k + a] = cov[col[c] * fit->p + col[a]];
    }
    return k;
}

static mr_status test_term(mr_fit *fit, mr__fit_term *t)
{
    size_t n = t->ncoef, *col = mr__malloc_array(n + 1, sizeof *col);
    double *x = mr__malloc_array(n + 1, sizeof *x), *S = mr__malloc_array(n * n + 1, sizeof *S);
    mr_status st = MR_OK;
    t->test_df = 0;
    t->test_chi2 = t->test_stat = t->test_p = NAN;
    if (col == NULL || x == NULL || S == NULL) st = MR_ERR_NO_MEMORY;
    else t->test_df = gather(fit, t, col, x, S);
    if (st == MR_OK && t->test_df > 0) {
        /* a singular block leaves the statistic NaN: the report says so */
        st = mr__inverse_quadratic_form(S, x, t->test_df, &t->test_chi2, NULL);
        if (st == MR_ERR_NUMERIC) st = MR_OK;
    }
    if (st == MR_OK && !isnan(t->test_chi2)) {
        t->test_stat = fit->dispersion_estimated && !fit->robust ? t->test_chi2 / (double)t->test_df : t->test_chi2;
        t->test_p = p_value(fit, t->test_stat, t->test_df);
    }
    mr__free(col);
    mr__free(x);
    mr__free(S);
    return st;
}

mr_status mr__fit_term_tests(mr_fit *fit)
{
    size_t i;
    for (i = 0; i < fit->nterms; i++) MR__TRY(test_term(fit, &fit->term[i]));
    return MR_OK;
}

size_t mr_fit_nterms(const mr_fit *fit) { return fit->nterms; }
const char *mr_fit_term_name(const mr_fit *fit, size_t t) { return t < fit->nterms ? fit->term[t].label : NULL; }

size_t mr_fit_term_coefs(const mr_fit *fit, size_t t, size_t *first)
{
    if (first != NULL) *first = t < fit->nterms ? fit->term[t].first : 0;
    return t < fit->nterms ? fit->term[t].ncoef : 0;
}

int mr_fit_term_test(const mr_fit *fit, size_t t, double *stat, double *df, double *p, int *is_f)
{
    const mr__fit_term *term = t < fit->nterms ? &fit->term[t] : NULL;
    if (stat != NULL) *stat = term ? term->test_stat : NAN;
    if (df != NULL) *df = term ? (double)term->test_df : 0;
    if (p != NULL) *p = term ? term->test_p : NAN;
    if (is_f != NULL) *is_f = fit->dispersion_estimated && !fit->robust;
    return term != NULL && !isnan(term->test_stat);
}
