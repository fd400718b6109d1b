/* compare.c - mr_comparison: several models fitted to one file, each as
 * mr_fitter_run fits it alone (the same bits), refits without each term
 * for drop-one tests, and the tests between nested models
 * (compare_tests.c).  The text and JSON are output/compare_report.c's. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "fit/compare.h"
#include "fit/fitter.h"

mr_comparison *mr_comparison_new(void) { return mr__calloc(1, sizeof(mr_comparison)); }

static void clear_run(mr_comparison *c)
{
    size_t i;
    for (i = 0; i < c->nmodels; i++) {
        mr_fit_free(c->model[i].fit);
        c->model[i].fit = NULL;
    }
    for (i = 0; i < c->ntests; i++) mr__free(c->test[i].term);
    c->ntests = 0;
    mr__free(c->path);
    c->path = NULL;
    c->ran = 0;
}

void mr_comparison_free(mr_comparison *c)
{
    size_t i;
    if (c == NULL) return;
    clear_run(c);
    for (i = 0; i < c->nmodels; i++) mr__free(c->model[i].label);
    mr__free(c->model);
    mr__free(c->test);
    mr__free(c);
}

const char *mr_comparison_errmsg(const mr_comparison *c) { return c->err.msg; }

mr_status mr_comparison_add(mr_comparison *c, mr_fitter *fitter, const char *label)
{
    size_t i;
    mr__cmp_model *m;
    mr__error_clear(&c->err);
    if (label == NULL || *label == '\0') return mr__fail(&c->err, MR_ERR_USAGE, "a model needs a name");
    for (i = 0; i < c->nmodels; i++)
        if (strcmp(c->model[i].label, label) == 0)
            return mr__fail(&c->err, MR_ERR_USAGE, "two models are named '%s'", label);
    if (mr__reserve((void **)&c->model, &c->capmodels, c->nmodels + 1, sizeof *c->model) != 0)
        return mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
    m = &c->model[c->nmodels];
    memset(m, 0, sizeof *m);
    if ((m->label = mr__strdup(label)) == NULL) return mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
    m->fitter = fitter;
    c->nmodels++;
    return MR_OK;
}

mr_status mr_comparison_drop_one(mr_comparison *c, size_t model)
{
    mr__error_clear(&c->err);
    if (model >= c->nmodels)
        return mr__fail(&c->err, MR_ERR_USAGE, "drop-one: there is no model %zu (%zu given)", model + 1, c->nmodels);
    c->model[model].drop_one = 1;
    return MR_OK;
}

static mr__cmp_test *new_test(mr_comparison *c, mr_test_kind kind, size_t smaller, size_t larger)
{
    mr__cmp_test *t;
    if (mr__reserve((void **)&c->test, &c->captests, c->ntests + 1, sizeof *c->test) != 0) return NULL;
    t = &c->test[c->ntests++];
    memset(t, 0, sizeof *t);
    mr__cmp_test_blank(t, "");
    t->pub.kind = kind;
    t->pub.smaller = smaller;
    t->pub.larger = larger;
    return t;
}

/* The fitter's own run; a failure names the model. */
static mr_status fit_model(mr_comparison *c, mr__cmp_model *m, const char *path)
{
    mr_status st = mr_fitter_run(m->fitter, path, &m->fit);
    if (st != MR_OK) return mr__fail(&c->err, st, "model %s: %s", m->label, mr_fitter_errmsg(m->fitter));
    return MR_OK;
}

/* Model m without term t: the fitter's model swapped for the reduced one
 * for one run (its options stay; a start from a previous fit would not
 * fit the reduced model and is left out), then put back. */
static mr_status fit_reduced(mr__cmp_model *m, size_t t, const char *path, mr_fit **out)
{
    mr_fitter *f = m->fitter;
    mr__spec reduced, kept;
    struct mr__start *start = f->start;
    mr_status st = mr__spec_copy(&reduced, &f->spec, &f->err);
    *out = NULL;
    if (st != MR_OK) return st;
    (void)mr__spec_drop_term(&reduced, t);
    kept = f->spec;
    f->spec = reduced;
    f->start = NULL;
    st = mr_fitter_run(f, path, out);
    f->start = start;
    reduced = f->spec;
    f->spec = kept;
    mr__spec_release(&reduced);
    return st;
}

/* A reduced model that cannot be fitted (no terms and no intercept left,
 * no data once the column is gone) is a test with a note, not a failed
 * run; running out of memory or being stopped is. */
static mr_status drop_one(mr_comparison *c, size_t i, const char *path)
{
    mr__cmp_model *m = &c->model[i];
    size_t t;
    for (t = 0; t < m->fit->nterms; t++) {
        mr_fit *reduced = NULL;
        mr__cmp_test *test;
        mr_status st;
        if (!mr__cmp_droppable(m->fit, t)) continue;
        st = fit_reduced(m, t, path, &reduced);
        if (st == MR_ERR_NO_MEMORY || st == MR_ERR_STOPPED || st == MR_ERR_IO)
            return mr__fail(&c->err, st, "model %s without %s: %s", m->label, m->fit->term[t].label,
                            mr_fitter_errmsg(m->fitter));
        test = new_test(c, MR_TEST_DROP_ONE, (size_t)-1, i);
        if (test == NULL || (test->term = mr__strdup(m->fit->term[t].label)) == NULL) {
            mr_fit_free(reduced);
            return mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
        }
        test->pub.term = test->term;
        if (st != MR_OK) {
            char note[256];
            snprintf(note, sizeof note, "not fitted: %s", mr_fitter_errmsg(m->fitter));
            mr__cmp_test_blank(test, note);
        } else {
            mr__cmp_pair_test(reduced, m->fit, test);
            test->pub.reduced_deviance = reduced->deviance;
            test->pub.reduced_residual_df = reduced->df_residual;
            test->pub.reduced_aic = reduced->aic;
        }
        mr_fit_free(reduced);
    }
    return MR_OK;
}

static mr_status nested_tests(mr_comparison *c)
{
    size_t a, b;
    for (a = 0; a < c->nmodels; a++)
        for (b = 0; b < c->nmodels; b++) {
            mr__cmp_test *t;
            if (!mr__cmp_nested(c->model[a].fit, c->model[b].fit)) continue;
            if ((t = new_test(c, MR_TEST_NESTED, a, b)) == NULL)
                return mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
            mr__cmp_pair_test(c->model[a].fit, c->model[b].fit, t);
        }
    return MR_OK;
}

/* Every model is fitted before any test, so a model that fails (a column
 * missing from the file) fails the run before any refit is paid for. */
mr_status mr_comparison_run(mr_comparison *c, const char *path)
{
    size_t i;
    mr_status st = MR_OK;
    mr__error_clear(&c->err);
    clear_run(c);
    if (c->nmodels == 0) return mr__fail(&c->err, MR_ERR_USAGE, "no model to compare");
    if (strcmp(path, "-") == 0)
        return mr__fail(&c->err, MR_ERR_USAGE, "models are compared on a file, not standard input (it is read once "
                                               "per model)");
    for (i = 0; st == MR_OK && i < c->nmodels; i++) st = fit_model(c, &c->model[i], path);
    if (st == MR_OK) st = nested_tests(c);
    for (i = 0; st == MR_OK && i < c->nmodels; i++)
        if (c->model[i].drop_one) st = drop_one(c, i, path);
    if (st == MR_OK && (c->path = mr__strdup(path)) == NULL) st = mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
    if (st != MR_OK) {
        mr__error keep = c->err;
        clear_run(c);
        c->err = keep;
        return st;
    }
    c->ran = 1;
    return MR_OK;
}

size_t mr_comparison_nmodels(const mr_comparison *c) { return c->nmodels; }

const char *mr_comparison_label(const mr_comparison *c, size_t i) { return i < c->nmodels ? c->model[i].label : NULL; }

const mr_fit *mr_comparison_fit(const mr_comparison *c, size_t i)
{
    return c->ran && i < c->nmodels ? c->model[i].fit : NULL;
}

size_t mr_comparison_ntests(const mr_comparison *c) { return c->ran ? c->ntests : 0; }

int mr_comparison_test(const mr_comparison *c, size_t k, mr_model_test *out)
{
    if (!c->ran || k >= c->ntests) return 0;
    *out = c->test[k].pub;
    return 1;
}
