/* start.c - a previous fit as the start of a new one (start.h).
 *
 * Coefficients are matched by name ("intercept", "year", "sex=M",
 * "band=45-49 & sex=M"): a level the previous fit did not have starts at
 * 0, one it had and this data lacks is dropped.  When a factor's
 * reference level changed (the data's first level is another, or the
 * model names another), its main effect is reparametrised: the old
 * reference's coefficient is 0 by definition, so each level's new
 * coefficient is its old one less the new reference's old one, which the
 * intercept gains.  Interactions of such a factor (and its main effect in
 * a model without an intercept) start at 0.  A start only shortens the
 * way to the maximum: IRLS reaches the same one from anywhere it can
 * start, and from a start outside the family's range it starts afresh. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "fit/fit.h"
#include "fit/start.h"

static char *dup_or_null(const char *s) { return s ? mr__strdup(s) : NULL; }

static void free_strings(char **v, size_t n)
{
    size_t i;
    for (i = 0; v && i < n; i++) mr__free(v[i]);
    mr__free(v);
}

void mr__start_free(mr__start *s)
{
    size_t i, k;
    if (s == NULL) return;
    mr__free(s->label);
    mr__free(s->outcome);
    mr__free(s->trials);
    for (i = 0; s->term && i < s->nterms; i++)
        for (k = 0; k < s->term[i].nparts; k++) mr__free(s->term[i].part[k]);
    mr__free(s->term);
    free_strings(s->factor_name, s->nfactors);
    free_strings(s->factor_ref, s->nfactors);
    free_strings(s->name, s->p);
    mr__free(s->beta);
    mr__free(s);
}

static int copy_terms(mr__start *s, const mr_fit *fit)
{
    size_t i, k;
    if ((s->term = mr__calloc(fit->nterms + 1, sizeof *s->term)) == NULL) return -1;
    s->nterms = fit->nterms;
    for (i = 0; i < fit->nterms; i++)
        for (k = 0; k < fit->term[i].nparts && k < MR__MAX_INTERACT; k++) {
            if ((s->term[i].part[k] = mr__strdup(fit->term[i].part[k])) == NULL) return -1;
            s->term[i].nparts++;
            s->term[i].factor[k] = mr__fit_find_factor(fit, fit->term[i].part[k]) >= 0;
        }
    return 0;
}

static int copy_factors_and_coefficients(mr__start *s, const mr_fit *fit)
{
    size_t i;
    s->factor_name = mr__calloc(fit->nfactors + 1, sizeof *s->factor_name);
    s->factor_ref = mr__calloc(fit->nfactors + 1, sizeof *s->factor_ref);
    s->name = mr__calloc(fit->p + 1, sizeof *s->name);
    s->beta = mr__calloc(fit->p + 1, sizeof *s->beta);
    if (!s->factor_name || !s->factor_ref || !s->name || !s->beta) return -1;
    s->nfactors = fit->nfactors;
    s->p = fit->p;
    for (i = 0; i < fit->nfactors; i++)
        if (!(s->factor_name[i] = mr__strdup(fit->factor[i].name)) ||
            !(s->factor_ref[i] = mr__strdup(fit->factor[i].reference)))
            return -1;
    for (i = 0; i < fit->p; i++) {
        if ((s->name[i] = mr__strdup(fit->name[i])) == NULL) return -1;
        s->beta[i] = fit->aliased[i] ? NAN : fit->beta[i];
    }
    return 0;
}

mr__start *mr__start_copy(const mr_fit *fit, const char *label)
{
    mr__start *s = mr__calloc(1, sizeof *s);
    if (s == NULL) return NULL;
    s->family = fit->family;
    s->link = fit->link;
    s->intercept = fit->intercept;
    s->label = mr__strdup(label ? label : "a previous fit");
    s->outcome = dup_or_null(fit->outcome);
    s->trials = dup_or_null(fit->trials);
    if (!s->label || (fit->outcome && !s->outcome) || (fit->trials && !s->trials) || copy_terms(s, fit) != 0 ||
        copy_factors_and_coefficients(s, fit) != 0) {
        mr__start_free(s);
        return NULL;
    }
    return s;
}

/* ---- the same model? ---------------------------------------------------- */

static int same_text(const char *a, const char *b) { return a == b || (a && b && strcmp(a, b) == 0); }

static const char *part_of(const mr__spec *spec, size_t ti, size_t k)
{
    return ti < spec->ncov ? spec->cov[ti].name : spec->inter[ti - spec->ncov].name[k];
}

/* The first term (index) that differs, or -1. */
static long different_term(const mr__start *s, const mr__spec *spec)
{
    size_t ti, k, nterms = spec->ncov + spec->ninter;
    for (ti = 0; ti < nterms || ti < s->nterms; ti++) {
        size_t nparts = ti < spec->ncov ? 1 : ti < nterms ? (size_t)spec->inter[ti - spec->ncov].n : 0;
        if (ti >= nterms || ti >= s->nterms || nparts != s->term[ti].nparts) return (long)ti;
        for (k = 0; k < nparts; k++) {
            const mr__covariate *c = mr__spec_find(spec, part_of(spec, ti, k));
            int factor = c != NULL && c->role == MR__ROLE_FACTOR;
            if (strcmp(part_of(spec, ti, k), s->term[ti].part[k]) != 0 || factor != s->term[ti].factor[k])
                return (long)ti;
        }
    }
    return -1;
}

static mr_status refuse(const mr__start *s, mr__error *err, const char *what)
{
    return mr__fail(err, MR_ERR_USAGE,
                    "%s is a fit of another model (%s): a start must come from a fit of the same outcome, family, "
                    "link and terms; fit without it",
                    s->label, what);
}

mr_status mr__start_check(const mr__start *s, const mr__spec *spec, mr__error *err)
{
    char what[256];
    long ti;
    if (!same_text(s->outcome, spec->outcome) || !same_text(s->trials, spec->trials))
        return refuse(s, err, "its outcome differs");
    if (s->family != spec->family || s->link != mr__spec_link(spec)) return refuse(s, err, "its family or link differs");
    if (s->intercept != spec->intercept) return refuse(s, err, "one has an intercept, the other not");
    if ((ti = different_term(s, spec)) < 0) return MR_OK;
    snprintf(what, sizeof what, "term %ld differs: %s", ti + 1,
             (size_t)ti < s->nterms && (size_t)ti < spec->ncov + spec->ninter ? "its columns or their kinds"
             : (size_t)ti < s->nterms                                       ? "this model has fewer terms"
                                                                            : "this model has more terms");
    return refuse(s, err, what);
}

/* ---- the previous coefficients on this design ----------------------- */

/* The previous estimate named `name`, if it had one. */
static int previous(const mr__start *s, const char *name, double *value)
{
    size_t i;
    for (i = 0; i < s->p; i++)
        if (strcmp(s->name[i], name) == 0) {
            *value = s->beta[i];
            return isfinite(s->beta[i]);
        }
    return 0;
}

/* The previous reference of a factor whose reference changed, else NULL. */
static const char *changed_reference(const mr__start *s, const mr__factor *fac)
{
    size_t i;
    for (i = 0; i < s->nfactors; i++)
        if (strcmp(s->factor_name[i], fac->name) == 0)
            return strcmp(s->factor_ref[i], fac->level[fac->ref]) != 0 ? s->factor_ref[i] : NULL;
    return NULL;
}

/* b_old(new reference) for a reference the previous fit never saw: the
 * sample's estimate of the old reference under the new one, negated, or
 * 0 (as the old reference) without a sample. */
static double new_reference_shift(const mr__factor *fac, const mr__term *t, const char *old_ref, const double *fill)
{
    size_t l;
    for (l = 0; fill != NULL && l < fac->nlevels; l++)
        if (strcmp(fac->level[l], old_ref) == 0 && t->colmap[l] >= 0) return -fill[t->colmap[l]];
    return 0;
}

/* A factor's main effect under a new reference: level L's coefficient
 * becomes b_old(L) - b_old(new reference), the intercept gains the latter. */
static mr_status move_reference(const mr__start *s, const mr__design *d, const mr__term *t, const char *old_ref,
                                const double *fill, double *raw, int *known, size_t *guessed)
{
    const mr__factor *fac = &d->fac[t->fac[0]];
    mr__strbuf sb;
    char *name;
    double shift = 0;
    size_t l;
    mr__strbuf_init(&sb);
    mr__strbuf_printf(&sb, "%s=%s", fac->name, fac->level[fac->ref]); /* as design.c names a column */
    if ((name = mr__strbuf_take(&sb)) == NULL) return MR_ERR_NO_MEMORY;
    if (!previous(s, name, &shift)) shift = new_reference_shift(fac, t, old_ref, fill), (*guessed)++;
    mr__free(name);
    for (l = 0; l < fac->nlevels; l++) {
        int32_t j = t->colmap[l];
        if (j < 0) continue;
        if (strcmp(fac->level[l], old_ref) == 0) raw[j] = 0, known[j] = 1;
        /* a filled value is already under the new reference */
        if (known[j] || fill == NULL) raw[j] -= shift;
    }
    raw[0] += shift;
    return MR_OK;
}

static int term_has_changed_factor(const mr__start *s, const mr__design *d, const mr__term *t, const char **old_ref)
{
    int k;
    *old_ref = NULL;
    for (k = 0; k < t->nfac && !t->full; k++)
        if ((*old_ref = changed_reference(s, &d->fac[t->fac[k]])) != NULL) return 1;
    return 0;
}

/* `fill`: raw values for the coefficients the previous fit lacks (NULL: 0). */
static mr_status raw_start(const mr__start *s, const mr__design *d, const double *fill, double *raw, int *known,
                           size_t *guessed)
{
    size_t j, ti;
    for (j = 0; j < d->p; j++) known[j] = previous(s, d->name[j], &raw[j]);
    for (j = 0; j < d->p; j++)
        if (!known[j]) raw[j] = fill ? fill[j] : 0, (*guessed)++;
    for (ti = 0; ti < d->nterms; ti++) {
        const mr__term *t = &d->term[ti];
        const char *old_ref;
        if (!term_has_changed_factor(s, d, t, &old_ref)) continue;
        if (t->nfac == 1 && t->nnum == 0 && d->intercept) {
            MR__TRY(move_reference(s, d, t, old_ref, fill, raw, known, guessed));
            continue;
        }
        for (j = t->col0; j < t->col0 + t->ncols; j++) raw[j] = fill ? fill[j] : 0, known[j] = 0, (*guessed)++;
    }
    return MR_OK;
}

/* beta_raw = A beta_internal (design.h) with A upper triangular: each
 * internal column is its raw column scaled, less lower-order columns that
 * come earlier.  Back substitution inverts it. */
static void raw_to_internal(const mr__design *d, const double *raw, double *internal)
{
    size_t p = d->p, j, k;
    for (j = p; j-- > 0;) {
        double v = raw[j];
        for (k = j + 1; k < p; k++) v -= d->A[k * p + j] * internal[k];
        internal[j] = v / d->A[j * p + j];
    }
}

static void internal_to_raw(const mr__design *d, const double *internal, double *raw)
{
    size_t p = d->p, j, k;
    for (j = 0; j < p; j++) {
        double v = 0;
        for (k = j; k < p; k++) v += d->A[k * p + j] * internal[k];
        raw[j] = v;
    }
}

mr_status mr__start_map(const mr__start *s, const mr__design *d, const double *fill, double *internal,
                        size_t *carried, size_t *guessed, mr__error *err)
{
    double *raw = mr__calloc(d->p + 1, sizeof *raw);
    double *raw_fill = fill ? mr__calloc(d->p + 1, sizeof *raw_fill) : NULL;
    int *known = mr__calloc(d->p + 1, sizeof *known);
    mr_status st = raw && known && (raw_fill || !fill) ? MR_OK : MR_ERR_NO_MEMORY;
    size_t j;
    *carried = *guessed = 0;
    if (st == MR_OK && fill) internal_to_raw(d, fill, raw_fill);
    if (st == MR_OK) st = raw_start(s, d, raw_fill, raw, known, guessed);
    if (st == MR_OK) {
        raw_to_internal(d, raw, internal);
        for (j = 0; j < d->p; j++) *carried += known[j] != 0;
    }
    mr__free(raw);
    mr__free(raw_fill);
    mr__free(known);
    return st == MR_OK ? MR_OK : mr__fail(err, st, "out of memory");
}
