/* compare_tests.c - when one fit is nested in another, and the
 * likelihood-ratio and F tests between them (the statistics R's anova.glm
 * gives for two models with test "Chisq" and "F"; tests/ref/compare.py
 * holds them to it). */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/probability.h"
#include "fit/compare.h"

static int same_text(const char *a, const char *b)
{
    if (a == NULL || b == NULL) return a == b;
    return strcmp(a, b) == 0;
}

static int same_real(double a, double b) { return (isnan(a) && isnan(b)) || a == b; }

/* The rows' model: everything but the terms. */
static int same_frame(const mr_fit *a, const mr_fit *b)
{
    return same_text(a->outcome, b->outcome) && same_text(a->trials, b->trials) &&
           same_text(a->offset, b->offset) && same_text(a->exposure, b->exposure) &&
           same_text(a->weight, b->weight) && a->family == b->family && a->link == b->link &&
           same_real(a->family_param, b->family_param) && a->intercept == b->intercept &&
           a->dispersion_estimated == b->dispersion_estimated;
}

/* The same term: its label, its coefficient columns by name, and a
 * spline's knots (a spline of df 3 and one of df 4 share a label). */
static int same_term(const mr_fit *fa, const mr__fit_term *a, const mr_fit *fb, const mr__fit_term *b)
{
    size_t j;
    if (strcmp(a->label, b->label) != 0 || a->ncoef != b->ncoef || a->spline != b->spline) return 0;
    for (j = 0; j < a->ncoef; j++)
        if (strcmp(fa->name[a->first + j], fb->name[b->first + j]) != 0) return 0;
    if (a->spline && (a->nknots != b->nknots || a->nboundary != b->nboundary)) return 0;
    for (j = 0; a->spline && j < a->nknots; j++)
        if (a->knots[j] != b->knots[j]) return 0;
    for (j = 0; a->spline && j < a->nboundary; j++)
        if (a->boundary[j] != b->boundary[j]) return 0;
    return 1;
}

static int has_term(const mr_fit *f, const mr_fit *g, const mr__fit_term *t)
{
    size_t u;
    for (u = 0; u < g->nterms; u++)
        if (same_term(f, t, g, &g->term[u])) return 1;
    return 0;
}

int mr__cmp_nested(const mr_fit *a, const mr_fit *b)
{
    size_t t;
    if (a->nterms >= b->nterms || !same_frame(a, b)) return 0;
    for (t = 0; t < a->nterms; t++)
        if (!has_term(a, b, &a->term[t])) return 0;
    return 1;
}

void mr__cmp_test_blank(mr__cmp_test *t, const char *note)
{
    mr_model_test *p = &t->pub;
    p->reduced_deviance = p->reduced_residual_df = p->reduced_aic = NAN;
    p->df = p->deviance_change = p->chi2 = p->chi2_p = p->f = p->f_p = p->f_residual_df = NAN;
    snprintf(t->note, sizeof t->note, "%s", note);
    p->note = t->note;
}

/* Under an estimated dispersion the larger model's (Pearson) scales the
 * deviance, and its residual df are the F test's denominator, as in
 * anova.glm; a fixed dispersion is 1 and has no F test. */
void mr__cmp_pair_test(const mr_fit *smaller, const mr_fit *larger, mr__cmp_test *t)
{
    mr_model_test *p = &t->pub;
    double phi = larger->dispersion_estimated ? larger->dispersion : 1.0;
    mr__cmp_test_blank(t, "");
    if (smaller->rows_used != larger->rows_used) {
        snprintf(t->note, sizeof t->note,
                 "not tested: the models used different rows (%llu and %llu; missing values in a column one of "
                 "them lacks)",
                 (unsigned long long)smaller->rows_used, (unsigned long long)larger->rows_used);
        return;
    }
    p->df = smaller->df_residual - larger->df_residual;
    p->deviance_change = smaller->deviance - larger->deviance;
    if (!(p->df > 0)) {
        snprintf(t->note, sizeof t->note, "not tested: no degrees of freedom between the models (aliased columns)");
        return;
    }
    p->chi2 = p->deviance_change / phi;
    p->chi2_p = mr__chisq_sf(p->chi2, p->df);
    if (!larger->dispersion_estimated) return;
    p->f_residual_df = larger->df_residual;
    p->f = p->chi2 / p->df;
    p->f_p = mr__f_sf(p->f, p->df, p->f_residual_df);
}
