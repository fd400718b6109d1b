/* compare_write.c - several models compared, as JSON for programs
 * (format "millrace-comparison", README), written atomically through
 * common/outfile.c. */
#include <math.h>
#include <stdio.h>

#include "common/alloc.h"
#include "fit/compare.h"
#include "output/json_text.h"
#include "output/json_util.h"

#define COMPARISON_FORMAT "millrace-comparison"
#define COMPARISON_FORMAT_VERSION 1

static json_t *terms(const mr_fit *f)
{
    json_t *a = json_array();
    size_t t;
    for (t = 0; a != NULL && t < f->nterms; t++) a = mr__json_append(a, mr__json_text(f->term[t].label));
    return a;
}

static json_t *model(const mr__cmp_model *m)
{
    const mr_fit *f = m->fit;
    json_t *o = json_object();
    o = mr__json_put(o, "name", mr__json_text(m->label));
    o = mr__json_put(o, "terms", terms(f));
    o = mr__json_put(o, "converged", json_boolean(f->status == MR_OK));
    o = mr__json_put(o, "rows_used", json_integer((json_int_t)f->rows_used));
    o = mr__json_put(o, "deviance", mr__json_num(f->deviance));
    o = mr__json_put(o, "residual_df", mr__json_num(f->df_residual));
    o = mr__json_put(o, "dispersion", mr__json_num(f->dispersion));
    o = mr__json_put(o, "dispersion_estimated", json_boolean(f->dispersion_estimated));
    o = mr__json_put(o, "log_likelihood", mr__json_num(f->loglik));
    o = mr__json_put(o, "aic", mr__json_num(f->aic));
    return mr__json_put(o, "bic", mr__json_num(f->bic));
}

static json_t *statistics(json_t *o, const mr_model_test *p)
{
    o = mr__json_put(o, "df", mr__json_num(p->df));
    o = mr__json_put(o, "deviance_change", mr__json_num(p->deviance_change));
    o = mr__json_put(o, "chi_square", mr__json_num(p->chi2));
    o = mr__json_put(o, "chi_square_p", mr__json_num(p->chi2_p));
    o = mr__json_put(o, "f", mr__json_num(p->f));
    o = mr__json_put(o, "f_p", mr__json_num(p->f_p));
    o = mr__json_put(o, "f_residual_df", mr__json_num(p->f_residual_df));
    return mr__json_put(o, "note", *p->note ? mr__json_text(p->note) : json_null());
}

static json_t *test(const mr_comparison *c, const mr__cmp_test *t)
{
    const mr_model_test *p = &t->pub;
    json_t *o = json_object();
    if (p->kind == MR_TEST_NESTED) {
        o = mr__json_put(o, "smaller", mr__json_text(c->model[p->smaller].label));
        o = mr__json_put(o, "larger", mr__json_text(c->model[p->larger].label));
        return statistics(o, p);
    }
    o = mr__json_put(o, "model", mr__json_text(c->model[p->larger].label));
    o = mr__json_put(o, "without", mr__json_text(t->term));
    o = mr__json_put(o, "deviance", mr__json_num(p->reduced_deviance));
    o = mr__json_put(o, "residual_df", mr__json_num(p->reduced_residual_df));
    o = mr__json_put(o, "aic", mr__json_num(p->reduced_aic));
    return statistics(o, p);
}

static json_t *tests(const mr_comparison *c, mr_test_kind kind)
{
    json_t *a = json_array();
    size_t k;
    for (k = 0; a != NULL && k < c->ntests; k++)
        if (c->test[k].pub.kind == kind) a = mr__json_append(a, test(c, &c->test[k]));
    return a;
}

static json_t *comparison_json(const mr_comparison *c)
{
    json_t *root = json_object(), *models = json_array();
    size_t i;
    for (i = 0; models != NULL && i < c->nmodels; i++) models = mr__json_append(models, model(&c->model[i]));
    root = mr__json_put(root, "format", json_string(COMPARISON_FORMAT));
    root = mr__json_put(root, "format_version", json_integer(COMPARISON_FORMAT_VERSION));
    root = mr__json_put(root, "data", mr__json_text(c->path));
    root = mr__json_put(root, "models", models);
    root = mr__json_put(root, "nested", tests(c, MR_TEST_NESTED));
    return mr__json_put(root, "drop_one", tests(c, MR_TEST_DROP_ONE));
}

mr_status mr_comparison_write_json(const mr_comparison *c, const char *path, const char *const *inputs,
                                   size_t ninputs, char *msg, size_t msgcap)
{
    json_t *root;
    mr__error err;
    mr__error_clear(&err);
    if (!c->ran) {
        mr__fail(&err, MR_ERR_USAGE, "%s: the models have not been fitted", path);
        mr__error_export(&err, msg, msgcap);
        return err.status;
    }
    root = comparison_json(c);
    if (root == NULL) mr__fail(&err, MR_ERR_NO_MEMORY, "%s: out of memory building the JSON", path);
    else mr__json_write_file(root, path, inputs, ninputs, &err);
    json_decref(root);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
