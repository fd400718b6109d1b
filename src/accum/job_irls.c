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
    mr__level_part block_levels; /* the block being added: its eliminated factor's
                                  * levels' rows (design->nabsorb > 0) */
    int32_t *level_slot;         /* their slot map (nabsorb, all -1 between blocks) */
    int group_open;
    mr__partial_range group_blocks; /* the open group's blocks */
} irls_job;

/* A block's partial result: its sums, and what its levels' rows are made
 * from when it is added (levelsums.h). */
typedef struct irls_part {
    mr__block_sums sums;
    mr__level_input lev;
} irls_part;

static size_t level_width(const mr__design *d) { return d->p + 2; }

static mr_status open_levels(irls_job *j, mr__error *err)
{
    mr__block_sums *total = &j->env->res->sums;
    const mr__design *d = j->design;
    if (d->nabsorb == 0) return MR_OK;
    /* the levels' rows, then the reference's (accumulate.h) */
    total->lev = mr__calloc((d->nabsorb + 1) * level_width(d), sizeof *total->lev);
    if (total->lev == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    total->nlev = d->nabsorb;
    j->level_slot = mr__malloc_array(d->nabsorb + 1, sizeof *j->level_slot);
    if (j->level_slot == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (size_t l = 0; l <= d->nabsorb; l++) j->level_slot[l] = -1;
    MR__TRY(mr__level_part_init(&j->block_levels, level_width(d),
                                d->nabsorb + 1 < MR__BLOCK_ROWS ? d->nabsorb + 1 : MR__BLOCK_ROWS,
                                MR__BLOCK_ROWS * (d->ndense + d->nsparse), err));
    return mr__level_part_order(&j->block_levels, d, err);
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
    irls_part *part = mr__calloc(1, sizeof *part);
    if (part == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->part = part;
    MR__TRY(mr__sums_init_block_pass(&part->sums, j->design, j->env->cfg->point->calibrate, err));
    if (j->design->nabsorb == 0) return MR_OK;
    return mr__level_input_init(&part->lev, j->design, err);
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
    irls_part *part = s->part;
    mr__accumulate_block(j->env->cfg->point, s->use, w->part, &part->sums);
    part->lev.n = 0;
    /* rows out of the domain: the step is halved and the sums unused */
    if (j->design->nabsorb > 0 && s->use->n > 0 && part->sums.invalid == 0 && !j->env->cfg->point->calib_only)
        mr__level_input_keep(&part->lev, j->design, w->part, s->use->n);
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
    if (j->design->nabsorb > 0) {
        mr__level_part_block(cfg->point, s->use, &part->lev, j->level_slot, &j->block_levels);
        mr__level_part_add_to(&j->block_levels, j->env->res->sums.lev);
    }
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
    irls_part *part = s->part;
    (void)job;
    if (part == NULL) return;
    mr__sums_release(&part->sums);
    mr__level_input_release(&part->lev);
    mr__free(part);
    s->part = NULL;
}

static void irls_close(void *job)
{
    irls_job *j = job;
    mr__sums_release(&j->group);
    mr__level_part_release(&j->block_levels);
    mr__free(j->level_slot);
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
