/* job_meat.c - the meat of the sandwich (robust standard errors) as a job
 * of the pass engine (pass_job.h), run once at the final coefficients.
 *
 * Rows (no cluster column): the sum over rows of u^2 x x', where u x is
 * the row's score (accumulate.h), formed per block by the kernels of
 * X'WX and added by the group order of partial.h, as an IRLS pass adds.
 * Either way the pass also adds up X'WX at the same point (the bread,
 * res->bread), so that bread and meat are of one point, the final one.
 *
 * Clusters: the sum over clusters of s s', s the sum of the cluster's
 * scores.  A worker cuts its block into runs of rows of one cluster.
 * Streamed (the file grouped: each cluster's rows together), a block
 * hands on its first and last runs' sums, which may go on in the blocks
 * next to it, and the sum of s s' over the runs between them, which are
 * whole clusters; the calling thread, in block order, joins the runs that
 * straddle blocks and keeps a set of the clusters closed.  A cluster met
 * again after others closed means the file is not grouped: the pass
 * stops (res->clusters_not_grouped) and the caller runs it again with a
 * table, which holds every cluster's s, added run by run in block order,
 * and sums s s' in the order clusters first appeared.  Either way every
 * addition's order follows the block numbers alone: the same bits for any
 * thread count and read size.  The bookkeeping (the set, the table) may
 * take at most cfg->limit bytes (MR_ERR_CLUSTERS beyond it).  Shared by
 * several processes, each block's runs go out as bytes instead
 * (cfg->blocks_out), for fit/share.c to add every rank's in block order. */
#include <string.h>

#include "accum/clusters.h"
#include "accum/group_bytes.h"
#include "accum/levelsums.h"
#include "accum/meat.h"
#include "accum/partial.h"
#include "accum/pass.h"
#include "common/alloc.h"

typedef struct meat_part {
    mr__block_sums bread; /* this block's X'WX */
    mr__block_sums rows; /* rows: this block's sums */
    /* an eliminated factor (design nabsorb > 0): the block's levels' rows
     * at the weights w (the bread's) and at u^2 (the meat's), levelsums.h */
    mr__level_part bread_levels, meat_levels;
    size_t nruns;
    uint64_t *key;       /* 2 words a run */
    double *vec;         /* streamed: first and last runs' s; table: every run's */
    size_t vec_cap;      /* runs vec holds */
    double *inner;       /* streamed: sum of s s' over the runs between (p x p, upper) */
} meat_part;

typedef struct meat_scratch {
    mr__workspace ws;
    int32_t *level_slot; /* an eliminated factor's slot map (levelsums.h) */
    double *v;           /* one run's s */
    size_t *nz;          /* its non-zero entries */
    uint32_t *at;        /* where each run starts */
} meat_scratch;

typedef struct meat_job {
    const mr__pass_env *env;
    const mr__meat_cfg *mc;
    const mr__design *design;
    size_t p;
    mr__block_sums group; /* rows: the open group's total */
    mr__block_sums bread_group; /* the open group's X'WX */
    mr__partial_range group_blocks; /* the open group's blocks */
    int group_open;
    mr__clusters cl;      /* clusters: their bookkeeping (clusters.h) */
} meat_job;

static mr_status no_memory(mr__error *err) { return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory"); }

/* An eliminated factor's levels' rows (the reference's last) in the
 * pass's bread and meat totals. */
static mr_status open_levels(const meat_job *j, mr__error *err)
{
    const mr__design *d = j->design;
    mr__pass_result *res = j->env->res;
    size_t n = mr__level_totals_size(d);
    if (d->nabsorb == 0) return MR_OK;
    /* the IRLS passes' spare totals, when the pool still holds them */
    res->bread.lev = mr__pass_pool_take_levels(j->env->cfg->pool, n);
    res->sums.lev = mr__zalloc(n, sizeof(double));
    if (res->bread.lev == NULL || res->sums.lev == NULL) return no_memory(err);
    res->bread.nlev = res->sums.nlev = d->nabsorb;
    return MR_OK;
}

static mr_status meat_open(const mr__pass_env *env, void **out, mr__error *err)
{
    meat_job *j = mr__calloc(1, sizeof *j);
    if (j == NULL) return no_memory(err);
    *out = j;
    j->env = env;
    j->mc = env->cfg->job_arg;
    j->design = env->cfg->point->design;
    j->p = j->design->p;
    MR__TRY(mr__sums_init(&env->res->sums, j->p, err));
    MR__TRY(mr__sums_init(&env->res->bread, j->p, err));
    MR__TRY(mr__sums_init(&j->bread_group, j->p, err));
    MR__TRY(open_levels(j, err));
    if (j->mc->clusters) return mr__clusters_init(&j->cl, j->p, j->mc->table, j->mc->limit, env->res->sums.xtwx,
                                                     j->mc->display, err);
    return mr__sums_init(&j->group, j->p, err);
}

static mr_status meat_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    meat_job *j = job;
    meat_part *m = mr__calloc(1, sizeof *m);
    s->part = m;
    if (m == NULL) return no_memory(err);
    MR__TRY(mr__sums_init_block(&m->bread, j->design, err));
    if (j->design->nabsorb > 0) {
        MR__TRY(mr__level_part_init(&m->bread_levels, j->design, err));
        MR__TRY(mr__level_part_init(&m->meat_levels, j->design, err));
    }
    if (!j->mc->clusters) return mr__sums_init_block(&m->rows, j->design, err);
    m->key = mr__malloc_array(2 * MR__BLOCK_ROWS, sizeof *m->key);
    if (m->key == NULL) return no_memory(err);
    if (j->mc->table) return MR_OK;
    m->vec = mr__calloc(2 * j->p, sizeof *m->vec);
    m->inner = mr__calloc(j->p * j->p, sizeof *m->inner);
    m->vec_cap = 2;
    return m->vec && m->inner ? MR_OK : no_memory(err);
}

static mr_status meat_start(void *job, mr__error *err)
{
    (void)job;
    (void)err;
    return MR_OK;
}

static mr_status meat_worker_init(void *job, mr__pass_worker *w, mr__error *err)
{
    meat_job *j = job;
    meat_scratch *sc = mr__calloc(1, sizeof *sc);
    if (sc == NULL) return no_memory(err);
    w->part = sc;
    sc->v = mr__calloc(j->p + 1, sizeof *sc->v);
    sc->nz = mr__malloc_array(j->p + 1, sizeof *sc->nz);
    sc->at = mr__malloc_array(MR__BLOCK_ROWS + 1, sizeof *sc->at);
    if (sc->v == NULL || sc->nz == NULL || sc->at == NULL) return no_memory(err);
    if (j->design->nabsorb > 0 && (sc->level_slot = mr__level_slots_new(j->design)) == NULL) return no_memory(err);
    if (mr__pass_pool_take_workspace(j->env->cfg->pool, j->design, w->number, &sc->ws)) return MR_OK;
    return mr__workspace_init(&sc->ws, j->design, err);
}

static int meat_wants_packed(void *job, const mr__pass_slot *s)
{
    (void)job;
    (void)s;
    return 0;
}

/* v = the sum of rows i0 .. i1 - 1's scores u x. */
static void run_score(const mr__design *d, const mr__workspace *ws, size_t n, size_t i0, size_t i1, double *v)
{
    size_t i, k;
    memset(v, 0, d->p * sizeof *v);
    for (i = i0; i < i1; i++) {
        const double u = ws->w[i];
        for (k = 0; k < d->ndense; k++) v[d->dense_col[k]] += ws->D[k * n + i] * u;
        for (k = 0; k < d->nsparse; k++) {
            int32_t c = ws->scol[k * n + i];
            if (c >= 0) v[c] += ws->sval[k * n + i] * u;
        }
    }
}

static int same_key(const uint64_t *a, const uint64_t *b) { return a[0] == b[0] && a[1] == b[1]; }

/* Where run r's s goes: streamed, the first and last runs' rows of vec
 * and the scratch between; table, row r of vec. */
static double *run_target(const meat_job *j, meat_part *m, meat_scratch *sc, size_t r, size_t nruns)
{
    if (j->mc->table) return m->vec + r * j->p;
    if (r == 0) return m->vec;
    if (r == nruns - 1) return m->vec + j->p;
    return sc->v;
}

/* The block's runs of rows of one cluster: their keys and first rows
 * (start[nruns] = n). */
static size_t cut_runs(const mr__block *blk, uint64_t *key, uint32_t *start)
{
    size_t nruns = 0;
    uint32_t i;
    for (i = 0; i < blk->n; i++)
        if (i == 0 || !same_key(blk->cluster + 2 * i, blk->cluster + 2 * (i - 1))) {
            key[2 * nruns] = blk->cluster[2 * i];
            key[2 * nruns + 1] = blk->cluster[2 * i + 1];
            start[nruns++] = i;
        }
    start[nruns] = blk->n;
    return nruns;
}

static void compute_clusters(meat_job *j, meat_scratch *sc, mr__pass_slot *s)
{
    meat_part *m = s->part;
    const mr__block *blk = s->use;
    size_t r;
    m->nruns = 0;
    if (blk->n == 0) return;
    if (blk->cluster == NULL) { /* only blocks decoded on this pass carry the column */
        s->st = mr__fail(&s->err, MR_ERR_INTERNAL, "a block without its cluster column");
        return;
    }
    m->nruns = cut_runs(blk, m->key, sc->at);
    if (j->mc->table && mr__reserve((void **)&m->vec, &m->vec_cap, m->nruns, j->p * sizeof *m->vec) != MR_OK) {
        m->nruns = 0;
        s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
        return;
    }
    if (!j->mc->table) memset(m->inner, 0, j->p * j->p * sizeof *m->inner);
    for (r = 0; r < m->nruns; r++) {
        double *v = run_target(j, m, sc, r, m->nruns);
        run_score(j->design, &sc->ws, blk->n, sc->at[r], sc->at[r + 1], v);
        if (v == sc->v) mr__add_outer(m->inner, j->p, v, sc->nz);
    }
}

static void meat_compute(void *job, mr__pass_worker *w, mr__pass_slot *s)
{
    meat_job *j = job;
    meat_scratch *sc = w->part;
    meat_part *m = s->part;
    const mr__irls_point *pt = j->env->cfg->point;
    size_t n = s->use->n;
    int levels = j->design->nabsorb > 0 && n > 0;
    /* the bread at the same point as the meat: X'WX where the scores are */
    mr__accumulate_block(pt, s->use, &sc->ws, &m->bread);
    m->bread_levels.n = m->meat_levels.n = 0;
    if (levels) mr__level_part_block(pt, s->use, &sc->ws, n, sc->level_slot, &m->bread_levels);
    mr__block_scores(pt, s->use, &sc->ws);
    if (j->mc->clusters) {
        compute_clusters(j, sc, s);
        return;
    }
    if (j->mc->by_levels) {
        if (levels) mr__level_part_scores(pt, s->use, &sc->ws, n, sc->level_slot, &m->meat_levels);
        return;
    }
    mr__accumulate_scores(j->design, s->use, &sc->ws, &m->rows);
    /* the workspace now holds u for sqrt(w), u x for sqrt(w) x and 1 for
     * sqrt(w) z: the same rows give each level's sum u^2, sum u and
     * sum u^2 x (fit/robust.c) */
    if (levels) mr__level_part_block(pt, s->use, &sc->ws, n, sc->level_slot, &m->meat_levels);
}

/* ---- the calling thread: rows ------------------------------------------ */

static void close_group(meat_job *j)
{
    mr__bytebuf *out = j->env->cfg->groups_out;
    /* another process adds them in their place too (fit/share.c): rows,
     * then bread; with clusters the bread alone (the clusters go by block) */
    if (out != NULL && !j->mc->clusters) mr__group_encode(&j->group, j->p, j->group_blocks, out);
    if (out != NULL) mr__group_encode(&j->bread_group, j->p, j->group_blocks, out);
    if (!j->mc->clusters) {
        mr__sums_add_totals(&j->env->res->sums, &j->group, j->p);
        mr__sums_zero_totals(&j->group, j->p);
    }
    mr__sums_add_totals(&j->env->res->bread, &j->bread_group, j->p);
    mr__sums_zero_totals(&j->bread_group, j->p);
    j->group_open = 0;
}

/* Rows' sums and the bread by the group order of partial.h. */
static void add_groups(meat_job *j, mr__pass_slot *s)
{
    meat_part *m = s->part;
    if (!j->group_open) {
        j->group_blocks.first_block = s->index;
        j->group_blocks.nblocks = 0;
    }
    j->group_blocks.nblocks++;
    if (!j->mc->clusters) mr__sums_add(&j->group, &m->rows, j->design);
    mr__sums_add(&j->bread_group, &m->bread, j->design);
    if (j->design->nabsorb > 0) {
        mr__level_part_add_to(&m->bread_levels, j->env->res->bread.lev);
        mr__level_part_add_to(&m->meat_levels, j->env->res->sums.lev);
    }
    j->group_open = 1;
    if (mr__group_closes(s->index, 0)) close_group(j);
}

static mr_status meat_add(void *job, mr__pass_slot *s, mr__error *err)
{
    meat_job *j = job;
    meat_part *m = s->part;
    MR__TRY(mr__pass_block_status(s, err));
    add_groups(j, s);
    if (!j->mc->clusters) return MR_OK;
    if (j->mc->table) return mr__clusters_add_table(&j->cl, m->nruns, m->key, m->vec, err);
    if (j->mc->blocks_out != NULL) {
        mr__clusters_put_block(s->index, j->p, m->nruns, m->key, m->vec, m->inner, j->mc->blocks_out);
        return MR_OK;
    }
    return mr__clusters_add_streamed(&j->cl, m->nruns, m->key, m->vec, m->inner, &j->env->res->clusters_not_grouped,
                                     err);
}

/* Clusters by the eliminated factor: its levels with rows, the
 * reference's included. */
static uint64_t levels_met(const meat_job *j)
{
    const mr__design *d = j->design;
    const double *row = j->env->res->bread.lev;
    uint64_t n = 0;
    size_t l;
    for (l = 0; row != NULL && l <= d->nabsorb; l++) n += row[l * (d->p + 2)] > 0;
    return n;
}

static mr_status meat_finish(void *job, mr_status st, mr__error *err)
{
    meat_job *j = job;
    if (st != MR_OK) return st;
    if (j->group_open) close_group(j);
    if (j->mc->by_levels) j->env->res->clusters = levels_met(j);
    if (!j->mc->clusters || j->mc->blocks_out != NULL) return st;
    st = mr__clusters_finish(&j->cl, err);
    j->env->res->clusters = j->cl.n;
    return st;
}

static void meat_worker_release(void *job, mr__pass_worker *w)
{
    meat_job *j = job;
    meat_scratch *sc = w->part;
    if (sc == NULL) return;
    if (sc->ws.p) {
        mr__pass_pool_keep_workspace(j->env->cfg->pool, j->design, j->env->nworkers, w->number, &sc->ws);
        mr__workspace_release(&sc->ws);
    }
    mr__free(sc->v);
    mr__free(sc->nz);
    mr__free(sc->at);
    mr__free(sc->level_slot);
    mr__free(sc);
    w->part = NULL;
}

static void meat_slot_release(void *job, mr__pass_slot *s)
{
    meat_part *m = s->part;
    (void)job;
    if (m == NULL) return;
    mr__sums_release(&m->bread);
    mr__sums_release(&m->rows);
    mr__level_part_release(&m->bread_levels);
    mr__level_part_release(&m->meat_levels);
    mr__free(m->key);
    mr__free(m->vec);
    mr__free(m->inner);
    mr__free(m);
    s->part = NULL;
}

static void meat_close(void *job)
{
    meat_job *j = job;
    mr__sums_release(&j->group);
    mr__sums_release(&j->bread_group);
    mr__clusters_release(&j->cl);
    mr__free(j);
}

const mr__pass_job_ops mr__job_meat = {
    .name = "meat",
    .packs = 0,
    .open = meat_open,
    .slot_init = meat_slot_init,
    .start = meat_start,
    .worker_init = meat_worker_init,
    .wants_packed = meat_wants_packed,
    .compute = meat_compute,
    .add = meat_add,
    .finish = meat_finish,
    .worker_release = meat_worker_release,
    .slot_release = meat_slot_release,
    .close = meat_close,
};
