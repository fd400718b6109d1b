/* job_irls.c - an IRLS pass as a job of the pass engine (pass_job.h):
 * each block's X'WX, X'Wz, deviance and the other totals at the current
 * coefficients (accumulate.c), added by the group order of partial.h; on
 * the first such pass after a first pass that kept no blocks, the blocks
 * are kept for the passes after it. */
#include <string.h>

#include "accum/partial.h"
#include "accum/pass.h"
#include "common/alloc.h"

typedef struct irls_job {
    const mr__pass_env *env;
    const mr__design *design;
    mr__block_sums group; /* the open group's total */
    int group_open;
} irls_job;

static mr_status irls_open(const mr__pass_env *env, void **out, mr__error *err)
{
    irls_job *j = mr__calloc(1, sizeof *j);
    if (j == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    *out = j;
    j->env = env;
    j->design = env->cfg->point->design;
    MR__TRY(mr__sums_init(&env->res->sums, j->design->p, err));
    return mr__sums_init(&j->group, j->design->p, err);
}

static mr_status irls_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    irls_job *j = job;
    s->part = mr__calloc(1, sizeof(mr__block_sums));
    if (s->part == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return mr__sums_init_block(s->part, j->design, err);
}

static mr_status irls_start(void *job, mr__error *err)
{
    (void)job;
    (void)err;
    return MR_OK;
}

static mr_status irls_worker_init(void *job, mr__pass_worker *w, mr__error *err)
{
    irls_job *j = job;
    mr__workspace *ws = mr__calloc(1, sizeof *ws);
    if (ws == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    w->part = ws;
    if (mr__pass_pool_take_workspace(j->env->cfg->pool, j->design, w->number, ws)) return MR_OK;
    return mr__workspace_init(ws, j->design, err);
}

static int irls_wants_packed(void *job, const mr__pass_slot *s)
{
    irls_job *j = job;
    (void)s;
    return mr__pass_store_packs(j->env->cfg);
}

static void irls_compute(void *job, mr__pass_worker *w, mr__pass_slot *s)
{
    irls_job *j = job;
    mr__accumulate_block(j->env->cfg->point, s->use, w->part, s->part);
}

/* The group's total into the pass's, in group order (accum/partial.h). */
static void close_group(irls_job *j)
{
    mr__sums_add_totals(&j->env->res->sums, &j->group, j->design->p);
    mr__sums_zero_totals(&j->group, j->design->p);
    j->group_open = 0;
}

static mr_status irls_add(void *job, mr__pass_slot *s, mr__error *err)
{
    irls_job *j = job;
    const mr__pass_cfg *cfg = j->env->cfg;
    MR__TRY(mr__pass_block_status(s, err));
    mr__sums_add(&j->group, s->part, j->design);
    j->group_open = 1;
    if (mr__group_closes(s->index, 0)) close_group(j);
    if (cfg->store && cfg->store_fill) return mr__pass_keep_block(cfg, j->env->res, s, err);
    return MR_OK;
}

static mr_status irls_finish(void *job, mr_status st, mr__error *err)
{
    irls_job *j = job;
    (void)err;
    if (st == MR_OK && j->group_open) close_group(j);
    return st;
}

static void irls_worker_release(void *job, mr__pass_worker *w)
{
    irls_job *j = job;
    mr__workspace *ws = w->part;
    if (ws == NULL) return;
    mr__pass_pool_keep_workspace(j->env->cfg->pool, j->design, j->env->nworkers, w->number, ws);
    mr__workspace_release(ws);
    mr__free(ws);
    w->part = NULL;
}

static void irls_slot_release(void *job, mr__pass_slot *s)
{
    (void)job;
    if (s->part == NULL) return;
    mr__sums_release(s->part);
    mr__free(s->part);
    s->part = NULL;
}

static void irls_close(void *job)
{
    irls_job *j = job;
    mr__sums_release(&j->group);
    mr__free(j);
}

const mr__pass_job_ops mr__job_irls = {
    .name = "irls",
    .packs = 0,
    .open = irls_open,
    .slot_init = irls_slot_init,
    .start = irls_start,
    .worker_init = irls_worker_init,
    .wants_packed = irls_wants_packed,
    .compute = irls_compute,
    .add = irls_add,
    .finish = irls_finish,
    .worker_release = irls_worker_release,
    .slot_release = irls_slot_release,
    .close = irls_close,
};
