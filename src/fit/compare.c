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
#include "fit/multi.h"

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

/* A model refitted without a term: a fitter of its own that shares the
 * model's options (read only during the run) and holds the model less the
 * term; a start from a previous fit would not fit it and is left out. */
typedef struct reduced {
    size_t model, test;
    mr_fitter *fitter; /* a shallow copy: only its spec is its own */
} reduced;

/* The terms of a spec as the design numbers them (covariates, then
 * interactions): their columns. */
static size_t term_parts(const mr__spec *s, size_t t, const char **part)
{
    int k;
    if (t < s->ncov) {
        part[0] = s->cov[t].name;
        return 1;
    }
    for (k = 0; k < s->inter[t - s->ncov].n; k++) part[k] = s->inter[t - s->ncov].name[k];
    return (size_t)s->inter[t - s->ncov].n;
}

/* Kept when inside a larger term (marginality, as R's drop.scope). */
static int droppable(const mr__spec *s, size_t t)
{
    const char *a[MR__MAX_INTERACT] = {NULL}, *b[MR__MAX_INTERACT] = {NULL};
    size_t na = term_parts(s, t, a), u, i, k;
    for (u = 0; u < s->ncov + s->ninter; u++) {
        size_t nb = term_parts(s, u, b), found = 0;
        if (u == t || nb <= na) continue;
        for (i = 0; i < na; i++)
            for (k = 0; k < nb; k++) found += strcmp(a[i], b[k]) == 0;
        if (found == na) return 0;
    }
    return 1;
}

static char *term_label(const mr__spec *s, size_t t)
{
    const char *part[MR__MAX_INTERACT] = {NULL};
    size_t n = term_parts(s, t, part), i, len = 1;
    char *label;
    for (i = 0; i < n; i++) len += strlen(part[i]) + 3;
    if ((label = mr__malloc(len)) == NULL) return NULL;
    label[0] = '\0';
    for (i = 0; i < n; i++) {
        if (i > 0) strcat(label, " & ");
        strcat(label, part[i]);
    }
    return label;
}

static void free_reduced(reduced *rd, size_t n)
{
    size_t i;
    for (i = 0; rd && i < n; i++) mr__fitter_twin_free(rd[i].fitter);
    mr__free(rd);
}

/* Model m without term t as a test to come; *out NULL when the reduced
 * model is no model (nothing left to fit): the test then says so. */
static mr_status reduce(mr_comparison *c, size_t m, size_t t, reduced *out)
{
    mr_fitter *f = c->model[m].fitter, *g;
    mr__cmp_test *test = new_test(c, MR_TEST_DROP_ONE, (size_t)-1, m);
    out->fitter = NULL;
    if (test == NULL || (test->term = term_label(&f->spec, t)) == NULL)
        return mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
    test->pub.term = test->term;
    out->model = m;
    out->test = c->ntests - 1;
    if ((g = mr__fitter_twin(f, &c->err)) == NULL) return c->err.status;
    g->start = NULL;
    out->fitter = g;
    (void)mr__spec_drop_term(&g->spec, t);
    if (mr__spec_validate(&g->spec, &g->err) != MR_OK) {
        char note[256];
        snprintf(note, sizeof note, "not fitted: %.200s", g->err.msg);
        mr__cmp_test_blank(test, note);
        mr__fitter_twin_free(g);
        out->fitter = NULL;
    }
    return MR_OK;
}

/* Every reduced model the drop-one tests need, in the order of the tests. */
static mr_status reductions(mr_comparison *c, reduced **out, size_t *n)
{
    size_t m, t, cap = 0;
    *out = NULL;
    *n = 0;
    for (m = 0; m < c->nmodels; m++) {
        const mr__spec *s = &c->model[m].fitter->spec;
        for (t = 0; c->model[m].drop_one && t < s->ncov + s->ninter; t++) {
            if (!droppable(s, t)) continue;
            if (mr__reserve((void **)out, &cap, *n + 1, sizeof **out) != 0)
                return mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
            MR__TRY(reduce(c, m, t, &(*out)[(*n)++]));
        }
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

static void drop_one_test(mr__cmp_test *test, const mr_fit *reduced_fit, const mr_fit *full)
{
    char *term = test->term;
    mr_model_test keep = test->pub;
    mr__cmp_pair_test(reduced_fit, full, test);
    test->term = term;
    test->pub.kind = keep.kind;
    test->pub.smaller = keep.smaller;
    test->pub.larger = keep.larger;
    test->pub.term = term;
    test->pub.reduced_deviance = reduced_fit->deviance;
    test->pub.reduced_residual_df = reduced_fit->df_residual;
    test->pub.reduced_aic = reduced_fit->aic;
}

/* The message of the run at fault, naming its model. */
static mr_status failure(mr_comparison *c, mr_status st, mr_fitter *const *all, const reduced *rd,
                         const size_t *of_rd, size_t failed, size_t nall)
{
    const char *msg = all[failed < nall ? failed : 0]->err.msg;
    if (failed >= nall) return mr__fail(&c->err, st, "%s", msg);
    if (failed < c->nmodels) return mr__fail(&c->err, st, "model %s: %s", c->model[failed].label, msg);
    failed = of_rd[failed - c->nmodels];
    return mr__fail(&c->err, st, "model %s without %s: %s", c->model[rd[failed].model].label,
                    c->test[rd[failed].test].term, msg);
}

/* The models and the reduced models, all in one shared first pass. */
static mr_status fit_everything(mr_comparison *c, const char *path, reduced *rd, size_t nrd)
{
    size_t n = c->nmodels, i, failed;
    mr_fitter **all = mr__calloc(n + nrd + 1, sizeof *all);
    mr_fit **fits = mr__calloc(n + nrd + 1, sizeof *fits);
    size_t *of_rd = mr__calloc(nrd + 1, sizeof *of_rd);
    mr_status st = MR_OK;
    if (all == NULL || fits == NULL || of_rd == NULL) st = mr__fail(&c->err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; st == MR_OK && i < c->nmodels; i++) all[i] = c->model[i].fitter;
    for (i = 0; st == MR_OK && i < nrd; i++)
        if (rd[i].fitter != NULL) of_rd[n - c->nmodels] = i, all[n++] = rd[i].fitter;
    if (st == MR_OK && (st = mr__fit_shared(all, n, path, fits, &failed)) != MR_OK)
        st = failure(c, st, all, rd, of_rd, failed, n);
    for (i = 0; st == MR_OK && i < c->nmodels; i++) c->model[i].fit = fits[i];
    for (i = c->nmodels; st == MR_OK && i < n; i++) {
        const reduced *r = &rd[of_rd[i - c->nmodels]];
        drop_one_test(&c->test[r->test], fits[i], c->model[r->model].fit);
        mr_fit_free(fits[i]);
    }
    mr__free(all);
    mr__free(fits);
    mr__free(of_rd);
    return st;
}

/* Every model is fitted in the one shared first pass; a model that fails
 * there (a column missing from the file) fails the run, naming it. */
mr_status mr_comparison_run(mr_comparison *c, const char *path)
{
    reduced *rd = NULL;
    size_t nrd = 0;
    mr_status st;
    mr__error_clear(&c->err);
    clear_run(c);
    if (c->nmodels == 0) return mr__fail(&c->err, MR_ERR_USAGE, "no model to compare");
    st = reductions(c, &rd, &nrd);
    if (st == MR_OK) st = fit_everything(c, path, rd, nrd);
    free_reduced(rd, nrd);
    if (st == MR_OK) st = nested_tests(c);
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
