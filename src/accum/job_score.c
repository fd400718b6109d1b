/* job_score.c - scoring as a job of the pass engine (pass_job.h): compute
 * reads a block's rows itself (the engine decodes nothing: a scored file
 * keeps every row, incomplete ones too, and need not hold the outcome),
 * builds each row's design row and writes its CSV line into the block's
 * text (score_row.c: one row); add hands the text on in block order, so lines come out in input
 * order and the bytes do not depend on the thread count. */
#include <string.h>

#include "accum/score_row.h"
#include "common/alloc.h"
#include "input/numparse.h"

static const char *const column_names[] = {"eta",           "se_eta",         "mean",          "mean_low",
                                           "mean_high",     "resid_response", "resid_pearson", "resid_deviance"};

const char *mr__score_column_name(int k) { return column_names[k]; }

int mr__score_column_index(const char *name)
{
    int k;
    for (k = 0; k < MR__SCORE_NCOLUMNS; k++)
        if (strcmp(column_names[k], name) == 0) return k;
    return -1;
}

int mr__score_column_written(const mr__score_cfg *c, int k)
{
    if (k >= MR__SCORE_FIRST_RESIDUAL && c->role_field[MR__SCORE_OUTCOME] < 0) return 0;
    return c->columns == 0 || (c->columns >> k & 1u);
}

static mr_status score_open(const mr__pass_env *env, void **out, mr__error *err)
{
    (void)err;
    *out = (void *)env->cfg->job_arg;
    return MR_OK;
}

static mr_status score_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    (void)job;
    s->part = mr__calloc(1, sizeof(score_slot));
    if (s->part == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

static mr_status write_text(mr__score_cfg *c, mr__strbuf *o, mr__error *err)
{
    mr_status st;
    if (o->failed) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    st = c->write(c->write_user, o->data, o->len, err);
    o->len = 0;
    return st;
}

static mr_status score_start(void *job, mr__error *err)
{
    mr__score_cfg *c = job;
    size_t i, n = 0;
    int k;
    mr__strbuf o;
    mr_status st;
    mr__strbuf_init(&o);
    for (i = 0; i < c->nkeep; i++) {
        mr__strbuf_append_csv(&o, c->keep_name[i], strlen(c->keep_name[i]));
        mr__strbuf_append(&o, ",", 1);
    }
    for (k = 0; k < MR__SCORE_NCOLUMNS; k++)
        if (mr__score_column_written(c, k)) mr__strbuf_printf(&o, "%s%s", n++ ? "," : "", column_names[k]);
    mr__strbuf_append(&o, "\n", 1);
    st = write_text(c, &o, err);
    mr__strbuf_release(&o);
    return st;
}

/* Which by columns are model factors (score_row.h: their level numbers
 * key the block's groups), and when all are and their cells few, the
 * table from a cell to its group. */
static mr_status by_factors(const mr__score_cfg *c, score_worker *sw, mr__error *err)
{
    size_t i, j, ncell = 1;
    mr__levelset_init(&sw->local);
    mr__strbuf_init(&sw->lkey);
    sw->local.limit = c->groups.limit;
    sw->by_fac = mr__calloc(c->nby + 1, sizeof *sw->by_fac);
    sw->by_stride = mr__calloc(c->nby + 1, sizeof *sw->by_stride);
    if (sw->by_fac == NULL || sw->by_stride == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < c->nby; i++) {
        sw->by_fac[i] = -1;
        for (j = 0; j < c->nfac; j++)
            if (c->fac[j].field == c->by_field[i]) sw->by_fac[i] = (int32_t)j;
        sw->by_stride[i] = ncell;
        if (sw->by_fac[i] < 0 || ncell > MR__SCORE_DENSE_GROUPS) ncell = MR__SCORE_DENSE_GROUPS + 1;
        else ncell *= c->fac[sw->by_fac[i]].levels.n ? c->fac[sw->by_fac[i]].levels.n : 1;
    }
    if (c->nby == 0 || ncell > MR__SCORE_DENSE_GROUPS) return MR_OK;
    sw->dense = mr__malloc_array(ncell, sizeof *sw->dense);
    sw->dense_cell = mr__malloc_array(ncell, sizeof *sw->dense_cell);
    if (sw->dense == NULL || sw->dense_cell == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < ncell; i++) sw->dense[i] = -1;
    return MR_OK;
}

static mr_status score_worker_init(void *job, mr__pass_worker *w, mr__error *err)
{
    const mr__score_cfg *c = job;
    size_t i, nf = c->nfields ? c->nfields : 1, nx = c->nterms + 1;
    int k;
    score_worker *sw = mr__calloc(1, sizeof *sw);
    if (sw == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    w->part = sw;
    sw->c = c;
    sw->np = mr__numparser_new();
    sw->wanted = mr__calloc(nf, 1);
    sw->xcol = mr__calloc(nx, sizeof *sw->xcol);
    sw->xval = mr__calloc(nx, sizeof *sw->xval);
    sw->lev = mr__calloc(c->nfac + 1, sizeof *sw->lev);
    sw->num = mr__calloc(c->nnum + 1, sizeof *sw->num);
    if (c->many_mean_span != NULL) {
        sw->dx = mr__calloc(c->p + 1, sizeof *sw->dx);
        sw->dcol = mr__calloc(c->p + 1, sizeof *sw->dcol);
        sw->dpos = mr__calloc(c->p + 1, sizeof *sw->dpos);
        if (!sw->dx || !sw->dcol || !sw->dpos) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    if (!sw->lev || !sw->num || !sw->np || !sw->wanted || mr__row_cells_init(&sw->cells, c->nfields) != MR_OK ||
        !sw->xcol || !sw->xval)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; k < MR__SCORE_NCOLUMNS; k++) sw->written[k] = (unsigned char)mr__score_column_written(c, k);
    sw->wants_interval = sw->written[MR__SCORE_MEAN_LOW] || sw->written[MR__SCORE_MEAN_HIGH];
    sw->wants_se = sw->written[MR__SCORE_SE_ETA] || sw->wants_interval;
    sw->wants_residuals = 0;
    for (k = MR__SCORE_FIRST_RESIDUAL; k < MR__SCORE_NCOLUMNS; k++) sw->wants_residuals |= sw->written[k];
    sw->quick_numbers = 1;
    for (i = 0; i < c->nmissing_tokens; i++)
        if (mr__is_number_syntax(c->missing_token[i], strlen(c->missing_token[i]))) sw->quick_numbers = 0;
    for (i = 0; i < c->nkeep; i++) sw->wanted[c->keep_field[i]] = MR__FIELD_WANTED;
    for (i = 0; i < c->nby; i++) sw->wanted[c->by_field[i]] = MR__FIELD_WANTED;
    MR__TRY(by_factors(c, sw, err));
    for (i = 0; i < c->nfac; i++) sw->wanted[c->fac[i].field] = MR__FIELD_WANTED;
    for (i = 0; i < c->nnum; i++) sw->wanted[c->num[i].field] = MR__FIELD_WANTED;
    for (i = 0; i < MR__SCORE_ROLES; i++)
        if (c->role_field[i] >= 0) sw->wanted[c->role_field[i]] = MR__FIELD_WANTED;
    return mr__tokenizer_init(&sw->tok, c->delim, err);
}

static int wants_nothing_packed(void *job, const mr__pass_slot *s)
{
    (void)job;
    (void)s;
    return 0;
}

static void score_compute(void *job, mr__pass_worker *w, mr__pass_slot *s)
{
    const mr__score_cfg *c = job;
    score_worker *sw = w->part;
    score_slot *out = s->part;
    out->out.len = out->keys.len = 0;
    out->rows = out->scored = out->unseen = out->missing = 0;
    out->nkey = 0;
    out->toomany = 0;
    if (c->nby) mr__score_groups_reset(sw);
    sw->s = s;
    sw->chunk = s->chunk;
    mr_status st = mr__tokenize_cells(&sw->tok, s->chunk, &sw->cells, sw->wanted, c->nfields, mr__score_row_end, sw,
                                      c->display, &s->err);
    if (st != MR_OK && s->st == MR_OK) s->st = st;
}

static mr_status grow_groups(mr__score_cfg *c, mr__error *err)
{
    size_t cap = c->g_cap ? 2 * c->g_cap : 256;
    double *o = mr__realloc(c->g_obs, cap * sizeof *o);
    if (o) c->g_obs = o;
    double *e = mr__realloc(c->g_exp, cap * sizeof *e);
    if (e) c->g_exp = e;
    double *x = mr__realloc(c->g_expo, cap * sizeof *x);
    if (x) c->g_expo = x;
    double *w = mr__realloc(c->g_prior, cap * sizeof *w);
    if (w) c->g_prior = w;
    uint64_t *r = mr__realloc(c->g_rows, cap * sizeof *r);
    if (r) c->g_rows = r;
    if (!o || !e || !x || !w || !r) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    c->g_cap = cap;
    return MR_OK;
}

static mr_status too_many_groups(const mr__score_cfg *c, mr__error *err)
{
    return mr__fail(err, MR_ERR_USAGE, "%s: more than %zu groups, the most held in memory", c->display,
                    c->groups.limit);
}

/* A group's number in the totals, a new one's totals zero. */
static mr_status group_id(mr__score_cfg *c, const char *key, size_t len, int32_t *id, mr__error *err)
{
    size_t before = c->groups.n;
    mr_status st = mr__levelset_add(&c->groups, key, len, id);
    if (st == MR_ERR_DOMAIN) return too_many_groups(c, err);
    if (st != MR_OK) return mr__fail(err, st, "out of memory");
    if (c->groups.n > before) { /* a new group: ids come in order */
        if ((size_t)*id == c->g_cap) MR__TRY(grow_groups(c, err));
        c->g_obs[*id] = c->g_exp[*id] = c->g_expo[*id] = c->g_prior[*id] = 0;
        c->g_rows[*id] = 0;
    }
    return MR_OK;
}

/* The block's groups into the totals, in the order of their first row in
 * it (so that new ones are numbered in order of first appearance), each
 * with its sums over the block. */
static mr_status add_groups(mr__score_cfg *c, score_slot *out, mr__error *err)
{
    size_t i;
    if (out->nomem || out->keys.failed) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (out->toomany) return too_many_groups(c, err);
    for (i = 0; i < out->nkey; i++) {
        const group_key *g = &out->gkey[i];
        int32_t id;
        MR__TRY(group_id(c, out->keys.data + g->at, g->len, &id, err));
        c->g_obs[id] += g->obs;
        c->g_exp[id] += g->exp;
        c->g_expo[id] += g->expo;
        c->g_prior[id] += g->prior;
        c->g_rows[id] += g->rows;
    }
    return MR_OK;
}

static mr_status score_add(void *job, mr__pass_slot *s, mr__error *err)
{
    mr__score_cfg *c = job;
    score_slot *out = s->part;
    if (c->nby) MR__TRY(add_groups(c, out, err));
    c->rows += out->rows;
    c->scored += out->scored;
    c->unseen += out->unseen;
    c->missing += out->missing;
    return write_text(c, &out->out, err);
}

static mr_status score_finish(void *job, mr_status st, mr__error *err)
{
    (void)job;
    (void)err;
    return st;
}

static void score_worker_release(void *job, mr__pass_worker *w)
{
    score_worker *sw = w->part;
    (void)job;
    if (sw == NULL) return;
    mr__tokenizer_release(&sw->tok);
    mr__numparser_free(sw->np);
    mr__free(sw->wanted);
    mr__row_cells_release(&sw->cells);
    mr__free(sw->lev);
    mr__free(sw->num);
    mr__free(sw->xcol);
    mr__free(sw->xval);
    mr__free(sw->dx);
    mr__free(sw->dcol);
    mr__free(sw->dpos);
    mr__free(sw->by_fac);
    mr__free(sw->by_stride);
    mr__free(sw->dense);
    mr__free(sw->dense_cell);
    mr__levelset_release(&sw->local);
    mr__strbuf_release(&sw->lkey);
    mr__free(sw);
    w->part = NULL;
}

static void score_slot_release(void *job, mr__pass_slot *s)
{
    score_slot *out = s->part;
    (void)job;
    if (out == NULL) return;
    mr__strbuf_release(&out->out);
    mr__strbuf_release(&out->keys);
    mr__free(out->gkey);
    mr__free(out);
    s->part = NULL;
}

static void score_close(void *job) { (void)job; }

const mr__pass_job_ops mr__job_score = {
    .name = "score",
    .packs = 0,
    .raw_rows = 1,
    .open = score_open,
    .slot_init = score_slot_init,
    .start = score_start,
    .worker_init = score_worker_init,
    .wants_packed = wants_nothing_packed,
    .compute = score_compute,
    .add = score_add,
    .finish = score_finish,
    .worker_release = score_worker_release,
    .slot_release = score_slot_release,
    .close = score_close,
};
