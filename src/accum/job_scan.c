/* job_scan.c - the first pass as a job of the pass engine (pass_job.h):
 * each block's counts, spreads and log-likelihood constant (scan.c), every
 * factor's levels counted in block order (census.c), where each block lies
 * in the file (for later passes to read it by the map), the covariate
 * patterns merged in block order (patterns.c), the decoded blocks kept for
 * the IRLS passes (store.c), and an evenly spread sample of packed blocks
 * for the warm start. */
#include <string.h>

#include "accum/census.h"
#include "accum/level_outcomes.h"
#include "accum/pass.h"
#include "common/alloc.h"

typedef struct scan_job {
    const mr__pass_env *env;
    mr__level_census census;           /* every factor's levels, in block order */
    atomic_uint_fast64_t sample_stride; /* blocks it divides are packed for the sample */
} scan_job;

/* A block's partial result. */
typedef struct scan_part {
    mr__scan_sums scan;
    uint64_t rows_hash; /* plain text: the block's rows, for the block map */
} scan_part;

static mr_status scan_open(const mr__pass_env *env, void **out, mr__error *err)
{
    scan_job *j = mr__calloc(1, sizeof *j);
    mr__pass_result *res = env->res;
    if (j == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    *out = j;
    j->env = env;
    atomic_init(&j->sample_stride, 1);
    res->sample_stride = 1;
    mr__store_init_packed(&res->sample);
    res->collapsed = env->cfg->dcfg->collapse != 0;
    return MR_OK;
}

static mr_status scan_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    scan_job *j = job;
    const mr__decode_cfg *dcfg = j->env->cfg->dcfg;
    const mr__binding *b = dcfg->bind;
    if (dcfg->collapse) {
        s->block.patterns = mr__calloc(1, sizeof *s->block.patterns);
        if (s->block.patterns == NULL || mr__pattern_rows_init(s->block.patterns, b->nfac + b->nnum) != 0)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    s->part = mr__calloc(1, sizeof(scan_part));
    if (s->part == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return mr__scan_init(&((scan_part *)s->part)->scan, b->ncol, b->nnum, err);
}

/* The columns are bound now that the header is read. */
static mr_status scan_start(void *job, mr__error *err)
{
    scan_job *j = job;
    mr__pass_result *res = j->env->res;
    const mr__binding *b = j->env->cfg->dcfg->bind;
    MR__TRY(mr__scan_init(&res->scan, b->ncol, b->nnum, err));
    MR__TRY(mr__census_init(&j->census, b, err));
    if (res->collapsed && mr__pattern_merge_init(&res->patterns, b->nfac + b->nnum, j->env->nworkers) != 0)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* Decoders of the first pass number levels their own way; each worker
 * counts outcomes by level in those numbers (level_outcomes.h). */
static mr_status scan_worker_init(void *job, mr__pass_worker *w, mr__error *err)
{
    scan_job *j = job;
    const mr__decode_cfg *dcfg = j->env->cfg->dcfg;
    w->dec.worker = (int32_t)w->number;
    w->part = mr__level_outcomes_new(dcfg->bind->nfac, dcfg->npairs + dcfg->ntriples);
    return w->part ? MR_OK : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
}

/* Blocks are packed for the store only while the rows cannot collapse
 * (the adding thread packs the odd block itself when collapsing is given
 * up), and for the sample when their number may go in it: the stride only
 * doubles, so a block the adding thread will want was packed. */
static int scan_wants_packed(void *job, const mr__pass_slot *s)
{
    scan_job *j = job;
    const mr__pass_cfg *cfg = j->env->cfg;
    if (mr__pass_store_packs(cfg) && (!cfg->dcfg->collapse || atomic_load(cfg->dcfg->collapse_abandoned))) return 1;
    return s->index % atomic_load(&j->sample_stride) == 0;
}

static void scan_compute(void *job, mr__pass_worker *w, mr__pass_slot *s)
{
    scan_job *j = job;
    scan_part *part = s->part;
    const mr__binding *b = j->env->cfg->dcfg->bind;
    /* only plain text is ever reread by the map */
    if (s->decoded && j->env->plain) part->rows_hash = mr__chunk_rows_hash(s->chunk);
    mr__scan_block(s->use, b->ncol, b->nnum, &part->scan);
    /* a block is counted by the decoder that numbered its levels */
    if (s->use->worker == (int32_t)w->number) mr__level_outcomes_block(w->part, s->use, j->env->cfg->dcfg, w->dec.local);
    else ((mr__level_outcomes *)w->part)->failed = 1;
}

/* Keeps every stride-th block; when the sample is full, every other kept
 * block goes and the stride doubles.  Only block numbers decide, so the
 * sample is the same whatever the threads or read size. */
static mr_status keep_sample(scan_job *j, mr__pass_slot *s, mr__error *err)
{
    mr__pass_result *res = j->env->res;
    if (s->index % res->sample_stride != 0) return MR_OK;
    if (res->sample.n == MR__SAMPLE_BLOCKS) {
        mr__store_drop_odd(&res->sample);
        res->sample_stride *= 2;
        atomic_store(&j->sample_stride, res->sample_stride);
        if (s->index % res->sample_stride != 0) return MR_OK;
    }
    if (s->packed_len == 0) return mr__fail(err, MR_ERR_INTERNAL, "a sample block was not packed");
    return mr__store_adopt_packed(&res->sample, &s->packed, s->packed_len, err);
}

/* Too many patterns, or no memory for them: fall back to passes over the
 * rows (the fit is the same, only slower). */
static void merge_patterns(const mr__pass_cfg *cfg, mr__pass_result *res, const mr__block *blk)
{
    if (blk != NULL && !atomic_load(cfg->dcfg->collapse_abandoned) &&
        mr__pattern_merge_add(&res->patterns, blk->worker, blk->patterns) == 0 &&
        res->patterns.table.n <= MR__MAX_PATTERNS)
        return;
    atomic_store(cfg->dcfg->collapse_abandoned, 1);
    res->collapsed = 0;
    mr__pattern_merge_release(&res->patterns);
}

/* The first pass keeps its decoded blocks for the IRLS passes unless the
 * rows may still collapse into patterns (then the patterns replace them).
 * If collapsing is given up after some blocks went unkept, the store is
 * incomplete and the first IRLS pass decodes the file again. */
static mr_status keep_scanned(const mr__pass_cfg *cfg, mr__pass_result *res, mr__pass_slot *s, mr__error *err)
{
    if (res->collapsed || res->store_incomplete) {
        res->store_incomplete = 1;
        return MR_OK;
    }
    return mr__pass_keep_block(cfg, res, s, err);
}

static mr_status scan_add(void *job, mr__pass_slot *s, mr__error *err)
{
    scan_job *j = job;
    const mr__pass_cfg *cfg = j->env->cfg;
    mr__pass_result *res = j->env->res;
    scan_part *part = s->part;
    MR__TRY(mr__census_add(&j->census, &s->block, s->chunk, cfg->dcfg, err));
    MR__TRY(mr__pass_block_status(s, err));
    MR__TRY(mr__block_map_add(&res->map, s->chunk, part->rows_hash, err));
    mr__scan_add(&res->scan, &part->scan, cfg->dcfg->bind->ncol, cfg->dcfg->bind->nnum);
    if (res->collapsed) merge_patterns(cfg, res, &s->block);
    if (cfg->store) MR__TRY(keep_scanned(cfg, res, s, err));
    return keep_sample(j, s, err);
}

/* Each worker's factor levels, handed to the result. */
static mr_status take_levels(scan_job *j, mr__error *err)
{
    mr__pass_result *res = j->env->res;
    size_t i, n = j->env->nworkers;
    res->worker_levels = mr__calloc(n, sizeof *res->worker_levels);
    if (res->worker_levels == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    res->nworkers = n;
    res->worker_outcomes = mr__calloc(n, sizeof *res->worker_outcomes);
    if (res->worker_outcomes == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < n; i++) {
        res->worker_levels[i] = j->env->worker[i]->dec.local;
        j->env->worker[i]->dec.local = NULL;
        res->worker_outcomes[i] = j->env->worker[i]->part;
        j->env->worker[i]->part = NULL;
    }
    return MR_OK;
}

static mr_status scan_finish(void *job, mr_status st, mr__error *err)
{
    scan_job *j = job;
    const mr__pass_cfg *cfg = j->env->cfg;
    mr__pass_result *res = j->env->res;
    /* offsets in the stream are offsets in the file only when it is plain */
    res->map.usable = st == MR_OK && !res->zstd && !res->map.mostly_blank;
    if (st == MR_OK) st = take_levels(j, err);
    /* A worker may give up collapsing after its block was merged. */
    if (res->collapsed && atomic_load(cfg->dcfg->collapse_abandoned)) merge_patterns(cfg, res, NULL);
    return st;
}

static void scan_worker_release(void *job, mr__pass_worker *w)
{
    (void)job;
    mr__level_outcomes_free(w->part);
    w->part = NULL;
}

static void scan_slot_release(void *job, mr__pass_slot *s)
{
    (void)job;
    if (s->block.patterns) {
        mr__pattern_rows_release(s->block.patterns);
        mr__free(s->block.patterns);
        s->block.patterns = NULL;
    }
    if (s->part == NULL) return;
    mr__scan_release(&((scan_part *)s->part)->scan);
    mr__free(s->part);
    s->part = NULL;
}

static void scan_close(void *job)
{
    scan_job *j = job;
    mr__census_release(&j->census);
    mr__free(j);
}

const mr__pass_job_ops mr__job_scan = {
    .name = "scan",
    .packs = 1,
    .open = scan_open,
    .slot_init = scan_slot_init,
    .start = scan_start,
    .worker_init = scan_worker_init,
    .wants_packed = scan_wants_packed,
    .compute = scan_compute,
    .add = scan_add,
    .finish = scan_finish,
    .worker_release = scan_worker_release,
    .slot_release = scan_slot_release,
    .close = scan_close,
};
