/* job_fanout.c - one pass, several runs (fanout.h).  The engine runs this
 * job with raw rows: it reads, decompresses and cuts the rows once, and
 * this job does for each run what the engine does for a job of its own -
 * the block decoded by the run's decoder (its columns, missing values and
 * row checks), packed when the run's job wants it, computed, and added in
 * block order - calling that job's operations on the same blocks in the
 * same order, so each run's result has the bits of its pass alone.  Each
 * engine slot and worker holds one sub-slot and one sub-worker per run. */
#include <string.h>

#include "accum/fanout.h"
#include "common/alloc.h"

typedef struct fanout_job {
    const mr__pass_env *env;
    mr__fanout_cfg *fc;
    mr__pass_env *sub_env;     /* fc->n of them */
    void **sub_job;
    mr__pass_worker ***views;  /* each run's view of its sub-workers */
} fanout_job;

static mr_status fanout_open(const mr__pass_env *env, void **out, mr__error *err)
{
    mr__fanout_cfg *fc = (mr__fanout_cfg *)env->cfg->job_arg;
    fanout_job *j = mr__calloc(1, sizeof *j);
    size_t m;
    if (j == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    *out = j;
    j->env = env;
    j->fc = fc;
    fc->failed = fc->n;
    j->sub_env = mr__calloc(fc->n, sizeof *j->sub_env);
    j->sub_job = mr__calloc(fc->n, sizeof *j->sub_job);
    j->views = mr__calloc(fc->n, sizeof *j->views);
    if (j->sub_env == NULL || j->sub_job == NULL || j->views == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (m = 0; m < fc->n; m++) {
        j->views[m] = mr__calloc(env->nworkers, sizeof *j->views[m]);
        if (j->views[m] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        memset(fc->res[m], 0, sizeof *fc->res[m]);
        j->sub_env[m].cfg = fc->cfg[m];
        j->sub_env[m].res = fc->res[m];
        j->sub_env[m].nworkers = env->nworkers;
        j->sub_env[m].worker = j->views[m];
        if (fc->ops->open(&j->sub_env[m], &j->sub_job[m], err) != MR_OK) return fc->failed = m, err->status;
    }
    return MR_OK;
}

static int sub_packs(const fanout_job *j, size_t m)
{
    const mr__pass_cfg *c = j->fc->cfg[m];
    return (c->store && mr__store_keeps_bytes(c->store)) || j->fc->ops->packs;
}

static mr_status fanout_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    fanout_job *j = job;
    mr__pass_slot *sub = mr__calloc(j->fc->n, sizeof *sub);
    size_t m;
    s->part = sub;
    if (sub == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (m = 0; m < j->fc->n; m++) {
        const mr__binding *b = j->fc->cfg[m]->dcfg->bind;
        MR__TRY(mr__block_init(&sub[m].block, b, err));
        if (sub_packs(j, m) && (sub[m].packed = mr__malloc(mr__store_pack_bound(b))) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        MR__TRY(j->fc->ops->slot_init(j->sub_job[m], &sub[m], err));
    }
    return MR_OK;
}

/* The engine knows whether the input is plain only now. */
static mr_status fanout_start(void *job, mr__error *err)
{
    fanout_job *j = job;
    size_t m;
    for (m = 0; m < j->fc->n; m++) {
        j->sub_env[m].plain = j->env->plain;
        if (j->fc->ops->start(j->sub_job[m], err) != MR_OK) return j->fc->failed = m, err->status;
    }
    return MR_OK;
}

static mr_status fanout_worker_init(void *job, mr__pass_worker *w, mr__error *err)
{
    fanout_job *j = job;
    mr__pass_worker *sub = mr__calloc_lines(j->fc->n, sizeof *sub);
    size_t m;
    w->part = sub;
    if (sub == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (m = 0; m < j->fc->n; m++) {
        sub[m].number = w->number;
        j->views[m][w->number] = &sub[m];
        MR__TRY(mr__decoder_init(&sub[m].dec, j->fc->cfg[m]->dcfg, err));
        sub[m].dec.worker = -1;
        MR__TRY(j->fc->ops->worker_init(j->sub_job[m], &sub[m], err));
    }
    return MR_OK;
}

static int fanout_wants_packed(void *job, const mr__pass_slot *s)
{
    (void)job;
    (void)s;
    return 0;
}

/* What the engine's compute does for a job's own block (pass.c). */
static void pack_sub(const mr__binding *b, mr__pass_slot *ss)
{
    if (ss->packed == NULL && (ss->packed = mr__malloc(mr__store_pack_bound(b))) == NULL) {
        ss->st = mr__fail(&ss->err, MR_ERR_NO_MEMORY, "out of memory");
        return;
    }
    mr__block_settle_offsets(&ss->block);
    ss->packed_len = mr__store_pack(&ss->block, b, ss->packed);
}

static void fanout_compute(void *job, mr__pass_worker *w, mr__pass_slot *s)
{
    fanout_job *j = job;
    mr__pass_slot *sub = s->part;
    mr__pass_worker *sw = w->part;
    size_t m;
    for (m = 0; m < j->fc->n; m++) {
        mr__pass_slot *ss = &sub[m];
        ss->index = s->index;
        ss->chunk = s->chunk;
        ss->raw_bytes = s->raw_bytes;
        ss->packed_len = 0;
        ss->decoded = 1;
        mr__error_clear(&ss->err);
        ss->st = mr__decode_chunk(&sw[m].dec, s->chunk, &ss->block, &ss->err);
        ss->use = &ss->block;
        if (ss->st != MR_OK || ss->block.failed) continue;
        if (j->fc->ops->wants_packed(j->sub_job[m], ss)) pack_sub(j->fc->cfg[m]->dcfg->bind, ss);
        if (ss->st == MR_OK) j->fc->ops->compute(j->sub_job[m], &sw[m], ss);
    }
}

static mr_status fanout_add(void *job, mr__pass_slot *s, mr__error *err)
{
    fanout_job *j = job;
    mr__pass_slot *sub = s->part;
    size_t m;
    for (m = 0; m < j->fc->n; m++) {
        mr_status st = sub[m].st;
        if (st != MR_OK) *err = sub[m].err;
        else st = j->fc->ops->add(j->sub_job[m], &sub[m], err);
        if (st != MR_OK) return j->fc->failed = m, st;
    }
    return MR_OK;
}

/* The source's fields, which the engine set on the pass's result, are
 * each run's as well. */
static mr_status fanout_finish(void *job, mr_status st, mr__error *err)
{
    fanout_job *j = job;
    const mr__pass_result *src = j->env->res;
    size_t m;
    for (m = 0; m < j->fc->n; m++) {
        mr__pass_result *res = j->fc->res[m];
        mr_status sub;
        res->raw_bytes = src->raw_bytes;
        res->out_bytes = src->out_bytes;
        res->checksum = src->checksum;
        res->zstd = src->zstd;
        res->by_map = src->by_map;
        res->size = src->size;
        res->mtime_ns = src->mtime_ns;
        if (j->sub_job == NULL || j->sub_job[m] == NULL) continue; /* its open failed: the pass did */
        sub = j->fc->ops->finish(j->sub_job[m], st, err);
        if (st == MR_OK && sub != MR_OK) j->fc->failed = m;
        st = sub;
    }
    return st;
}

static void fanout_worker_release(void *job, mr__pass_worker *w)
{
    fanout_job *j = job;
    mr__pass_worker *sub = w->part;
    size_t m;
    if (sub == NULL) return;
    for (m = 0; m < j->fc->n; m++) {
        if (j->sub_job[m]) j->fc->ops->worker_release(j->sub_job[m], &sub[m]);
        mr__decoder_release(&sub[m].dec);
    }
    mr__free(sub);
    w->part = NULL;
}

static void fanout_slot_release(void *job, mr__pass_slot *s)
{
    fanout_job *j = job;
    mr__pass_slot *sub = s->part;
    size_t m;
    if (sub == NULL) return;
    for (m = 0; m < j->fc->n; m++) {
        if (j->sub_job[m]) j->fc->ops->slot_release(j->sub_job[m], &sub[m]);
        mr__free(sub[m].packed);
        mr__block_release(&sub[m].block);
    }
    mr__free(sub);
    s->part = NULL;
}

static void fanout_close(void *job)
{
    fanout_job *j = job;
    size_t m;
    for (m = 0; j->sub_job && m < j->fc->n; m++)
        if (j->sub_job[m]) j->fc->ops->close(j->sub_job[m]);
    for (m = 0; j->views && m < j->fc->n; m++) mr__free(j->views[m]);
    mr__free(j->views);
    mr__free(j->sub_env);
    mr__free(j->sub_job);
    mr__free(j);
}

const mr__pass_job_ops mr__job_fanout = {
    .name = "fanout",
    .packs = 0,
    .raw_rows = 1,
    .open = fanout_open,
    .slot_init = fanout_slot_init,
    .start = fanout_start,
    .worker_init = fanout_worker_init,
    .wants_packed = fanout_wants_packed,
    .compute = fanout_compute,
    .add = fanout_add,
    .finish = fanout_finish,
    .worker_release = fanout_worker_release,
    .slot_release = fanout_slot_release,
    .close = fanout_close,
};
