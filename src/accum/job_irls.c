/* job_irls.c - an IRLS pass as a job of the pass engine (pass_job.h):
 * each block's X'WX, X'Wz, deviance and the other totals at the current
 * coefficients (accumulate.c), added by the group order of partial.h,
 * and an eliminated factor's per-level sums by blocks (levelsums.h); on
 * the first such pass after a first pass that kept no blocks, the blocks
 * are kept for the passes after it. */
#include <string.h>

#include "accum/group_bytes.h"
#include "accum/levelsums.h"
#include "accum/partial.h"
#include "accum/pass.h"
#include "common/alloc.h"

typedef struct irls_job {
    const mr__pass_env *env;
    const mr__design *design;
    mr__block_sums group; /* the open group's total */
    int group_open;
    mr__partial_range group_blocks; /* the open group's blocks */
} irls_job;

/* A block's partial result: its sums, and its eliminated factor's levels'
 * rows (design->nabsorb > 0), made by the worker that computed it. */
typedef struct irls_part {
    mr__block_sums sums;
    mr__level_part levels;
} irls_part;

/* A worker's scratch: the block's design and, with an eliminated factor,
 * the slot map its levels' rows are made with (all -1 between blocks). */
typedef struct irls_worker {
    mr__workspace ws;
    int32_t *level_slot;
} irls_worker;

/* The pass's levels' rows, then the reference's (accumulate.h). */
static mr_status open_levels(irls_job *j, mr__error *err)
{
    mr__block_sums *total = &j->env->res->sums;
    const mr__design *d = j->design;
    if (d->nabsorb == 0) return MR_OK;
    total->lev = mr__pass_pool_take_levels(j->env->cfg->pool, mr__level_totals_size(d));
    if (total->lev == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    total->nlev = d->nabsorb;
    return MR_OK;
}

static mr_status irls_open(const mr__pass_env *env, void **out, mr__error *err)
{
    irls_job *j = mr__calloc(1, sizeof *j);
    if (j == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    *out = j;
    j->env = env;
    j->design = env->cfg->point->design;
    MR__TRY(mr__sums_init_pass(&env->res->sums, j->design->p, env->cfg->point->calibrate, err));
    MR__TRY(mr__sums_init_pass(&j->group, j->design->p, env->cfg->point->calibrate, err));
    return open_levels(j, err);
}

static mr_status irls_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    irls_job *j = job;
    const mr__design *d = j->design;
    irls_part *part = mr__calloc(1, sizeof *part);
    if (part == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->part = part;
    MR__TRY(mr__sums_init_block_pass(&part->sums, j->design, j->env->cfg->point->calibrate, err));
    return d->nabsorb > 0 ? mr__level_part_init(&part->levels, d, err) : MR_OK;
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
    irls_worker *iw = mr__calloc(1, sizeof *iw);
    if (iw == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    w->part = iw;
    if (j->design->nabsorb > 0 && (iw->level_slot = mr__level_slots_new(j->design)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (mr__pass_pool_take_workspace(j->env->cfg->pool, j->design, w->number, &iw->ws)) return MR_OK;
    return mr__workspace_init(&iw->ws, j->design, err);
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
    irls_part *part = s->part;
    irls_worker *iw = w->part;
    const mr__irls_point *pt = j->env->cfg->point;
    mr__accumulate_block(pt, s->use, &iw->ws, &part->sums);
    if (j->design->nabsorb == 0) return;
    part->levels.n = 0;
    /* rows out of the domain: the step is halved and the sums unused */
    if (s->use->n > 0 && part->sums.invalid == 0 && !pt->calib_only)
        mr__level_part_block(pt, s->use, &iw->ws, s->use->n, iw->level_slot, &part->levels);
}

/* The group's total into the pass's, in group order (accum/partial.h). */
static void close_group(irls_job *j)
{
    /* another process adds it in its place too (fit/share.c) */
    if (j->env->cfg->groups_out) mr__group_encode(&j->group, j->design->p, j->group_blocks, j->env->cfg->groups_out);
    mr__sums_add_totals(&j->env->res->sums, &j->group, j->design->p);
    mr__sums_zero_totals(&j->group, j->design->p);
    j->group_open = 0;
}

static mr_status irls_add(void *job, mr__pass_slot *s, mr__error *err)
{
    irls_job *j = job;
    const mr__pass_cfg *cfg = j->env->cfg;
    irls_part *part = s->part;
    MR__TRY(mr__pass_block_status(s, err));
    if (!j->group_open) {
        j->group_blocks.first_block = s->index;
        j->group_blocks.nblocks = 0;
    }
    j->group_blocks.nblocks++;
    mr__sums_add(&j->group, &part->sums, j->design);
    if (j->design->nabsorb > 0) mr__level_part_add_to(&part->levels, j->env->res->sums.lev);
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
    irls_worker *iw = w->part;
    if (iw == NULL) return;
    mr__pass_pool_keep_workspace(j->env->cfg->pool, j->design, j->env->nworkers, w->number, &iw->ws);
    mr__workspace_release(&iw->ws);
    mr__free(iw->level_slot);
    mr__free(iw);
    w->part = NULL;
}

static void irls_slot_release(void *job, mr__pass_slot *s)
{
    irls_part *part = s->part;
    (void)job;
    if (part == NULL) return;
    mr__sums_release(&part->sums);
    mr__level_part_release(&part->levels);
    mr__free(part);
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
