/* drift.c - what changed between two fits of the same model: the refresh
 * of a registry extract refitted.  The fits must be of one model (outcome,
 * family, link, offset, exposure, weight, intercept, dispersion, terms and
 * references); their data may differ in anything.
 *
 * A change is measured in standard errors, and the SE is the larger of the
 * two fits' own.  Not sqrt(se_old^2 + se_new^2): that is the SE of a
 * difference of independent estimates, while a refreshed extract shares
 * most of its rows with the last one, so the two estimates are strongly
 * positively correlated and the SE of their difference is far smaller;
 * the independent-samples z understates how unusual a shift is.  The
 * larger SE asks a question that needs no model of the overlap: did the
 * estimate move by more than its own uncertainty?  Taking the larger of
 * the two keeps a smaller, noisier refresh from being flagged more
 * readily.  The independent-samples z is reported beside it. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/error.h"
#include "family/family.h"
#include "output/drift.h"

static int same_text(const char *a, const char *b)
{
    if (a == NULL || b == NULL) return a == b;
    return strcmp(a, b) == 0;
}

static const char *or_none(const char *s) { return s ? s : "(none)"; }

static mr_status differ(mr__error *err, const char *what, const char *a, const char *b)
{
    return mr__fail(err, MR_ERR_USAGE, "the fits are of different models: %s '%s' in the old, '%s' in the new", what,
                    or_none(a), or_none(b));
}

static mr_status same_references(const mr_fit *a, const mr_fit *b, mr__error *err)
{
    size_t i;
    for (i = 0; i < a->nfactors; i++) {
        long j = mr__fit_find_factor(b, a->factor[i].name);
        if (j >= 0 && strcmp(a->factor[i].reference, b->factor[j].reference) != 0) {
            char what[256];
            snprintf(what, sizeof what, "reference level of %s", a->factor[i].name);
            return differ(err, what, a->factor[i].reference, b->factor[j].reference);
        }
    }
    return MR_OK;
}

static mr_status same_model(const mr_fit *a, const mr_fit *b, mr__error *err)
{
    size_t i;
    if (!same_text(a->outcome, b->outcome)) return differ(err, "outcome", a->outcome, b->outcome);
    if (!same_text(a->trials, b->trials)) return differ(err, "trials", a->trials, b->trials);
    if (a->family != b->family)
        return differ(err, "family", mr__family_name((mr_family)a->family), mr__family_name((mr_family)b->family));
    if (a->family_param_estimated != b->family_param_estimated)
        return differ(err, mr__fit_family_param_name(a) ? mr__fit_family_param_name(a) : "family parameter",
                      a->family_param_estimated ? "estimated" : "fixed", b->family_param_estimated ? "estimated" : "fixed");
    /* an estimated or profiled parameter is a result, compared as the
     * coefficients are */
    if (a->family_param_profiled != b->family_param_profiled)
        return differ(err, mr__fit_family_param_name(a) ? mr__fit_family_param_name(a) : "family parameter",
                      a->family_param_profiled ? "profiled" : "fixed", b->family_param_profiled ? "profiled" : "fixed");
    if (a->family_param_given && !a->family_param_estimated && !a->family_param_profiled &&
        a->family_param != b->family_param) {
        char va[32], vb[32];
        snprintf(va, sizeof va, "%.17g", a->family_param);
        snprintf(vb, sizeof vb, "%.17g", b->family_param);
        return differ(err, mr__fit_family_param_name(a), va, vb);
    }
    if (a->link != b->link) return differ(err, "link", mr__link_name((mr_link)a->link), mr__link_name((mr_link)b->link));
    if (!same_text(a->offset, b->offset)) return differ(err, "offset", a->offset, b->offset);
    if (!same_text(a->exposure, b->exposure)) return differ(err, "exposure", a->exposure, b->exposure);
    if (!same_text(a->weight, b->weight)) return differ(err, "weight", a->weight, b->weight);
    if (a->intercept != b->intercept)
        return differ(err, "intercept", a->intercept ? "yes" : "no", b->intercept ? "yes" : "no");
    if (a->dispersion_estimated != b->dispersion_estimated)
        return differ(err, "dispersion", a->dispersion_estimated ? "estimate" : "fixed",
                      b->dispersion_estimated ? "estimate" : "fixed");
    for (i = 0; i < a->nterms || i < b->nterms; i++)
        if (i >= a->nterms || i >= b->nterms || strcmp(a->term[i].label, b->term[i].label) != 0)
            return differ(err, "term", i < a->nterms ? a->term[i].label : NULL, i < b->nterms ? b->term[i].label : NULL);
    return same_references(a, b, err);
}

static long find_coef(const mr_fit *f, const char *name)
{
    size_t j;
    for (j = 0; j < f->p; j++)
        if (strcmp(f->name[j], name) == 0) return (long)j;
    return -1;
}

static void measure(mr__drift_coef *c, double threshold)
{
    c->change = c->new_est - c->old_est;
    c->se = c->old_se > c->new_se ? c->old_se : c->new_se;
    c->z = c->change / c->se;
    c->z_indep = c->change / sqrt(c->old_se * c->old_se + c->new_se * c->new_se);
    c->flagged = !(fabs(c->z) < threshold); /* a zero SE with a change is infinitely far */
    if (c->change == 0) c->flagged = 0, c->z = c->z_indep = 0;
}

/* Coefficient j of the old fit (or of the new one, when only there). */
static void pair(mr_drift *d, mr__drift_coef *c, const mr_fit *f, size_t j, long other)
{
    const mr_fit *o = d->old_fit, *n = d->new_fit;
    int in_old = f == o;
    c->name = f->name[j];
    c->old_est = c->new_est = c->old_se = c->new_se = c->change = c->se = c->z = c->z_indep = NAN;
    if (in_old) c->old_est = o->beta[j], c->old_se = o->se[j];
    else c->new_est = n->beta[j], c->new_se = n->se[j];
    if (other < 0) {
        c->kind = in_old ? MR__DRIFT_VANISHED : MR__DRIFT_NEW;
        c->flagged = 1;
        return;
    }
    c->new_est = n->beta[other];
    c->new_se = n->se[other];
    c->kind = o->aliased[j] || n->aliased[other] ? MR__DRIFT_ALIASED : MR__DRIFT_BOTH;
    if (c->kind == MR__DRIFT_BOTH) measure(c, d->threshold);
    else c->flagged = o->aliased[j] != n->aliased[other]; /* aliased in one only: the design changed */
}

static mr_status compare_coefficients(mr_drift *d, mr__error *err)
{
    const mr_fit *o = d->old_fit, *n = d->new_fit;
    size_t j;
    d->coef = mr__calloc(o->p + n->p + 1, sizeof *d->coef);
    if (d->coef == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (j = 0; j < o->p; j++) pair(d, &d->coef[d->ncoef++], o, j, find_coef(n, o->name[j]));
    for (j = 0; j < n->p; j++)
        if (find_coef(o, n->name[j]) < 0) pair(d, &d->coef[d->ncoef++], n, j, -1);
    for (j = 0; j < d->ncoef; j++) d->nflagged_coef += (size_t)d->coef[j].flagged;
    return MR_OK;
}

static int has_level(const mr__fit_factor *f, const char *level)
{
    size_t l;
    for (l = 0; l < f->nlevels; l++)
        if (strcmp(f->level[l], level) == 0) return 1;
    return 0;
}

/* The levels of a's factors that b's factor of the same name lacks. */
static void levels_missing_from(mr_drift *d, const mr_fit *a, const mr_fit *b, int added)
{
    size_t i, l;
    for (i = 0; i < a->nfactors; i++) {
        long j = mr__fit_find_factor(b, a->factor[i].name);
        for (l = 0; j >= 0 && l < a->factor[i].nlevels; l++)
            if (!has_level(&b->factor[j], a->factor[i].level[l])) {
                mr__drift_level *v = &d->level[d->nlevels++];
                v->factor = a->factor[i].name;
                v->level = a->factor[i].level[l];
                v->added = added;
            }
    }
}

static mr_status compare_levels(mr_drift *d, mr__error *err)
{
    size_t i, total = 0;
    for (i = 0; i < d->old_fit->nfactors; i++) total += d->old_fit->factor[i].nlevels;
    for (i = 0; i < d->new_fit->nfactors; i++) total += d->new_fit->factor[i].nlevels;
    d->level = mr__calloc(total + 1, sizeof *d->level);
    if (d->level == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    levels_missing_from(d, d->new_fit, d->old_fit, 1);
    levels_missing_from(d, d->old_fit, d->new_fit, 0);
    return MR_OK;
}

static mr_status compare_rows(mr_drift *d, mr__error *err)
{
    const mr_fit *o = d->old_fit, *n = d->new_fit;
    const mr__drift_count rows[] = {
        {"read", o->rows_read, n->rows_read},
        {"used", o->rows_used, n->rows_used},
        {"left_out", o->rows_read - o->rows_used, n->rows_read - n->rows_used},
        {"bad", o->rows_bad, n->rows_bad},
        {"incomplete", o->rows_incomplete, n->rows_incomplete},
        {"zero_weight", o->zero_weight, n->zero_weight},
    };
    size_t i, j;
    d->rows = mr__malloc(sizeof rows);
    d->missing = mr__calloc(o->nmissing + n->nmissing + 1, sizeof *d->missing);
    if (d->rows == NULL || d->missing == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    memcpy(d->rows, rows, sizeof rows);
    d->nrows = sizeof rows / sizeof rows[0];
    /* per column: the old fit's columns, then those only the new one has */
    for (i = 0; i < o->nmissing; i++) {
        mr__drift_count *c = &d->missing[d->nmissing++];
        c->name = o->missing_name[i];
        c->old_n = o->missing_count[i];
        for (j = 0; j < n->nmissing; j++)
            if (strcmp(n->missing_name[j], c->name) == 0) c->new_n = n->missing_count[j];
    }
    for (j = 0; j < n->nmissing; j++) {
        for (i = 0; i < o->nmissing && strcmp(o->missing_name[i], n->missing_name[j]) != 0; i++) continue;
        if (i == o->nmissing) d->missing[d->nmissing++] = (mr__drift_count){n->missing_name[j], 0, n->missing_count[j]};
    }
    return MR_OK;
}

int mr__drift_input_changed(const mr_drift *d)
{
    const mr_fit *o = d->old_fit, *n = d->new_fit;
    return o->checksum != n->checksum || o->bytes != n->bytes || o->decompressed_bytes != n->decompressed_bytes;
}

double mr__drift_deviance_per_row(const mr_fit *f) { return f->rows_used > 0 ? f->deviance / (double)f->rows_used : NAN; }

void mr_drift_free(mr_drift *d)
{
    if (d == NULL) return;
    mr__free(d->coef);
    mr__free(d->level);
    mr__free(d->rows);
    mr__free(d->missing);
    mr__free(d);
}

mr_status mr_drift_compare(const mr_fit *old_fit, const mr_fit *new_fit, double threshold, mr_drift **out, char *msg,
                           size_t msgcap)
{
    mr__error err;
    mr_drift *d = NULL;
    mr__error_clear(&err);
    *out = NULL;
    if (!(threshold > 0) || !isfinite(threshold))
        mr__fail(&err, MR_ERR_USAGE, "the threshold must be a positive number of standard errors (got %g)", threshold);
    else if (same_model(old_fit, new_fit, &err) == MR_OK && (d = mr__calloc(1, sizeof *d)) == NULL)
        mr__fail(&err, MR_ERR_NO_MEMORY, "out of memory");
    if (d != NULL) {
        d->old_fit = old_fit;
        d->new_fit = new_fit;
        d->threshold = threshold;
        if (compare_coefficients(d, &err) == MR_OK && compare_levels(d, &err) == MR_OK) compare_rows(d, &err);
    }
    if (err.status != MR_OK) {
        mr_drift_free(d);
        d = NULL;
    }
    mr__error_export(&err, msg, msgcap);
    *out = d;
    return err.status;
}

size_t mr_drift_nflagged(const mr_drift *d) { return d->nflagged_coef + d->nlevels; }
size_t mr_drift_ncoef(const mr_drift *d) { return d->ncoef; }
const char *mr_drift_coef_name(const mr_drift *d, size_t i) { return i < d->ncoef ? d->coef[i].name : NULL; }
double mr_drift_coef_change(const mr_drift *d, size_t i) { return i < d->ncoef ? d->coef[i].change : NAN; }
double mr_drift_coef_z(const mr_drift *d, size_t i) { return i < d->ncoef ? d->coef[i].z : NAN; }
int mr_drift_coef_flagged(const mr_drift *d, size_t i) { return i < d->ncoef && d->coef[i].flagged; }
