/* pass.c - the pass engine: threads, the ring of slots, reading (the
 * stream, a plain file by the first pass's map, kept blocks), block order,
 * progress and stop, buffers handed from pass to pass.  What a pass
 * computes is its job's (pass_job.h: job_scan.c, job_irls.c). */
#define _DEFAULT_SOURCE /* syscall(SYS_gettid): Linux keeps a nice value per thread */
#include <errno.h>
#include <pthread.h>
#include <string.h>
#include <time.h>
#ifdef __linux__
#include <sys/resource.h>
#include <sys/syscall.h>
#include <unistd.h>
#endif

#include "accum/pass.h"
#include "common/alloc.h"
#include "common/clock.h"
#include "input/inputset.h"
#include "input/rowsplit.h"
#include "input/source.h"

enum { SLOT_FREE, SLOT_FILLING, SLOT_FILLED, SLOT_BUSY, SLOT_DONE };

typedef mr__pass_slot slot;

typedef struct worker {
    _Alignas(64) struct engine *e; /* a worker's state starts a cache line */
    pthread_t thread;
    int started;
    mr__pass_worker w;
} worker;

typedef struct engine {
    const mr__pass_cfg *cfg;
    const mr__pass_job_ops *ops;
    void *job;
    mr__pass_env env;
    pthread_mutex_t mu;
    /* One condition per kind of waiter, each signalled only when that
     * waiter can go on: a wake-up costs more than the work of many rows on
     * a virtual machine. */
    pthread_cond_t slot_free;   /* the reader */
    pthread_cond_t slot_filled; /* the workers */
    pthread_cond_t slot_done;   /* the calling thread */
    slot *slots;
    size_t W;
    uint64_t next_take;     /* next block a worker may take */
    uint64_t next_combine;  /* next block to add */
    uint64_t emitted;       /* blocks handed over by the reader */
    uint64_t rows_done;     /* rows in the blocks added so far */
    int reader_done, abort;
    int by_map;             /* workers read the file's blocks by the first pass's map */
    mr_status reader_st;
    mr__error reader_err;
    mr__source *src;
    mr__splitter sp;
    worker *workers;
    mr__pass_worker **worker_view;
    size_t nworkers;
    pthread_t reader;
    int reader_started;
    char *buf;
    size_t buf_cap, pending_off, pending_len;
    uint64_t bytes_total;   /* the input's size, or the set's */
    /* a set of files (cfg->set): the one being read, the raw bytes of
     * those before it, each one's identity, the first one's header */
    size_t file;
    uint64_t raw_before;
    mr__file_identity *files;
    char *first_header;
    size_t first_header_len;
} engine;

/* ---- the reader ------------------------------------------------------ */

/* Waits until block `index` may be filled; returns its slot or NULL when
 * the pass is being abandoned.  Called with the lock held. */
static slot *claim_slot(engine *e, uint64_t index)
{
    slot *s = &e->slots[index % e->W];
    while (!e->abort && (s->state != SLOT_FREE || index >= e->next_combine + e->W)) pthread_cond_wait(&e->slot_free, &e->mu);
    if (e->abort) return NULL;
    s->state = SLOT_FILLING;
    s->index = index;
    return s;
}

static void publish(engine *e, slot *s)
{
    pthread_mutex_lock(&e->mu);
    s->state = SLOT_FILLED;
    e->emitted = s->index + 1;
    pthread_cond_signal(&e->slot_filled);
    pthread_mutex_unlock(&e->mu);
}

static mr__chunk *on_full_chunk(void *user, mr__chunk *full, mr__error *err)
{
    engine *e = user;
    slot *s = &e->slots[full->index % e->W], *next;
    s->raw_bytes = e->raw_before + mr__source_raw_bytes(e->src);
    publish(e, s);
    pthread_mutex_lock(&e->mu);
    next = claim_slot(e, full->index + 1);
    pthread_mutex_unlock(&e->mu);
    if (next == NULL) {
        mr__fail(err, MR_ERR_INTERNAL, "pass abandoned");
        return NULL;
    }
    return next->chunk;
}

/* The one input, or file k of a set. */
static mr_status open_source(engine *e, size_t k, mr__error *err)
{
    const mr__pass_cfg *cfg = e->cfg;
    const char *path = cfg->set ? cfg->set->path[k] : cfg->path;
    const char *display = cfg->set ? cfg->set->display[k] : cfg->display;
    MR__TRY(mr__source_open(&e->src, path, display, cfg->read_size, cfg->tee_fd, err));
    mr__source_set_threads(e->src, cfg->nthreads);
    return MR_OK;
}

static void note_file(engine *e)
{
    mr__file_identity *f = &e->files[e->file];
    mr__source_identity(e->src, &f->size, &f->mtime_ns);
    f->raw_bytes = mr__source_raw_bytes(e->src);
    f->out_bytes = mr__source_out_bytes(e->src);
    f->checksum = mr__source_checksum(e->src);
    f->compression = mr__source_compression(e->src);
}

/* The next file of a set: its header read and held to the first file's,
 * then the rows after it. */
static mr_status next_file(engine *e, mr__error *err)
{
    const mr__inputset *set = e->cfg->set;
    const char *display = set->display[e->file + 1];
    size_t got = 0, used = 0;
    MR__TRY(mr__source_check_unchanged(e->src, 1, err));
    note_file(e);
    e->raw_before += mr__source_raw_bytes(e->src);
    mr__source_close(e->src);
    e->src = NULL;
    MR__TRY(mr__splitter_next_file(&e->sp, (uint32_t)++e->file, on_full_chunk, e, err));
    MR__TRY(open_source(e, e->file, err));
    while (e->sp.want_header) {
        MR__TRY(mr__source_read(e->src, e->buf, e->buf_cap, &got, err));
        if (got == 0) {
            MR__TRY(mr__splitter_finish(&e->sp, NULL, NULL, err));
            if (e->sp.want_header) return mr__fail(err, MR_ERR_NO_DATA, "%s: the file is empty", display);
            used = 0;
            break;
        }
        MR__TRY(mr__splitter_feed(&e->sp, e->buf, got, &used, on_full_chunk, e, err));
    }
    MR__TRY(mr__inputset_check_header(e->first_header, e->first_header_len, set->display[0], e->sp.header,
                                      e->sp.header_len, display, e->cfg->dcfg->delim, err));
    if (got > used) MR__TRY(mr__splitter_feed(&e->sp, e->buf + used, got - used, &used, on_full_chunk, e, err));
    return MR_OK;
}

/* The input's bytes, read in place into the chunks being cut. */
static mr_status read_file_rows(engine *e, mr__error *err)
{
    /* Decompressed bytes go straight into the chunk being cut, saving a
     * copy on the thread every other thread waits for.  A read that
     * completes the chunk leaves its rest in that chunk's buffer, to be
     * copied into the next chunks; since a row takes at least two bytes,
     * IN_PLACE_READ bytes complete at most one more chunk, so the buffer
     * being read from is never claimed again meanwhile (W >= 4 slots). */
    enum { IN_PLACE_READ = 2 * MR__BLOCK_ROWS };
    for (;;) {
        size_t got, used, want = e->buf_cap < IN_PLACE_READ ? e->buf_cap : IN_PLACE_READ;
        char *at = mr__splitter_reserve(&e->sp, want, err);
        if (at == NULL) return MR_ERR_NO_MEMORY;
        MR__TRY(mr__source_read(e->src, at, want, &got, err));
        if (got == 0) break;
        MR__TRY(mr__splitter_feed(&e->sp, at, got, &used, on_full_chunk, e, err));
    }
    return MR_OK;
}

static mr_status read_stream(engine *e, mr__error *err)
{
    if (e->pending_len > 0) {
        size_t used;
        MR__TRY(mr__splitter_feed(&e->sp, e->buf + e->pending_off, e->pending_len, &used, on_full_chunk, e, err));
    }
    for (;;) {
        MR__TRY(read_file_rows(e, err));
        if (e->cfg->set == NULL || e->file + 1 >= e->cfg->set->n) break;
        MR__TRY(next_file(e, err));
    }
    return mr__splitter_finish(&e->sp, on_full_chunk, e, err);
}

/* Replaying kept blocks needs no reader: each worker takes the next block
 * number itself and loads that block, so a block changes hands once (to
 * the calling thread) instead of three times. */
static int replaying(const mr__pass_cfg *cfg) { return cfg->store != NULL && !cfg->store_fill; }

/* Replaying, or reading a mapped file: each worker fetches its own block. */
static int workers_fetch(const engine *e) { return replaying(e->cfg) || e->by_map; }

static size_t replay_stride(const mr__pass_cfg *cfg) { return cfg->replay_stride > 1 ? cfg->replay_stride : 1; }

/* Whether block i is this pass's to compute and add (mr__pass_cfg.range). */
static int in_range(const mr__pass_cfg *cfg, uint64_t i)
{
    return cfg->range == NULL || (i >= cfg->range->first_block && i - cfg->range->first_block < cfg->range->nblocks);
}

static int store_holds_range(const mr__pass_cfg *cfg)
{
    const mr__partial_range *r = cfg->range;
    return r == NULL || r->nblocks == 0 ||
           (r->first_block >= cfg->store->first_block &&
            r->first_block + r->nblocks <= cfg->store->first_block + cfg->store->n);
}

/* Workers fetch blocks [lo, n), or the range's within them. */
static void fetch_between(engine *e, uint64_t lo, uint64_t n)
{
    const mr__partial_range *r = e->cfg->range;
    uint64_t from = r ? r->first_block : lo, to = r ? r->first_block + r->nblocks : n;
    if (to > n) to = n;
    if (from > to || from < lo) from = to; /* the store does not hold them: none (the caller checks) */
    e->next_take = e->next_combine = from;
    e->emitted = to;
    e->reader_done = 1;
}

static void load_kept_block(const mr__pass_cfg *cfg, slot *s)
{
    const mr__store *store = cfg->store;
    s->raw_bytes = 0;
    s->kept_index = (size_t)(s->index - store->first_block) * replay_stride(cfg);
    if (store->packed) {
        s->kept = mr__store_packed(store, s->kept_index); /* compute() unpacks it */
    } else if (store->fd < 0) {
        s->use = &store->block[s->kept_index];
    } else {
        s->st = mr__store_read(store, s->kept_index, s->packed, &s->err);
        if (s->st == MR_OK) s->kept = s->packed;
    }
}

/* The block's bytes straight from the file into the slot's chunk, and its
 * rows cut here: the reader's work for this block, done by a worker. */
static void read_mapped_block(const engine *e, slot *s)
{
    const mr__block_map *m = e->cfg->map;
    const mr__block_span *b = &m->span[s->index];
    size_t len = (size_t)(b->end - b->offset);
    mr__chunk *c = s->chunk;
    s->raw_bytes = b->end;
    c->len = 0;
    if (mr__chunk_room(c, len, &s->err) == NULL) {
        s->st = MR_ERR_NO_MEMORY;
        return;
    }
    s->st = mr__source_pread(e->src, c->data, len, b->offset, &s->err);
    if (s->st == MR_OK)
        s->st = mr__splitter_recut(c, len, e->cfg->display, s->index * (uint64_t)MR__BLOCK_ROWS, b->first_line,
                                   b->nrows, s->index + 1 == m->n, &s->err);
    if (s->st == MR_OK && mr__chunk_rows_hash(c) != b->rows_hash)
        s->st = mr__fail(&s->err, MR_ERR_IO,
                         "%s: the file changed during the fit (the rows from line %llu on are not those first read)",
                         e->cfg->display, (unsigned long long)b->first_line);
}

static void fetch_block(const engine *e, slot *s)
{
    s->st = MR_OK;
    if (e->by_map) read_mapped_block(e, s);
    else load_kept_block(e->cfg, s);
}

static void *reader_main(void *arg)
{
    engine *e = arg;
    mr__error err;
    mr_status st;
    mr__error_clear(&err);
    st = read_stream(e, &err);
    pthread_mutex_lock(&e->mu);
    e->reader_done = 1;
    e->reader_st = st;
    e->reader_err = err;
    pthread_cond_broadcast(&e->slot_filled);
    pthread_cond_signal(&e->slot_done);
    pthread_mutex_unlock(&e->mu);
    return NULL;
}

/* ---- the workers ----------------------------------------------------- */

int mr__pass_store_packs(const mr__pass_cfg *cfg)
{
    return cfg->store != NULL && mr__store_keeps_bytes(cfg->store) && cfg->store_fill;
}

/* The block packed into the slot's buffer, for the job to keep. */
static void pack_block(const mr__binding *b, slot *s)
{
    /* the sample took the last buffer, and had none to give back */
    if (s->packed == NULL && (s->packed = mr__malloc(mr__store_pack_bound(b))) == NULL) {
        s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
        return;
    }
    mr__block_settle_offsets(&s->block);
    s->packed_len = mr__store_pack(&s->block, b, s->packed);
}

static void compute(worker *w, slot *s)
{
    engine *e = w->e;
    const mr__pass_cfg *cfg = e->cfg;
    const mr__binding *b = cfg->dcfg->bind;
    s->st = MR_OK;
    s->packed_len = 0;
    s->decoded = 0;
    mr__error_clear(&s->err);
    if (!in_range(cfg, s->index)) return; /* another process's block: read past, never decoded */
    if (s->kept) {
        mr__store_unpack(cfg->store, s->kept, s->kept_index, b, &s->block);
        s->use = &s->block;
        s->kept = NULL;
    } else if (s->use == NULL && !e->ops->raw_rows) {
        s->st = mr__decode_chunk(&w->w.dec, s->chunk, &s->block, &s->err);
        s->use = &s->block;
        s->decoded = 1;
        if (s->st != MR_OK || s->block.failed) return;
        if (e->ops->wants_packed(e->job, s)) pack_block(b, s);
        if (s->st != MR_OK) return;
    }
    e->ops->compute(e->job, &w->w, s);
}

/* The next block for this worker to fetch: its slot, claimed, or NULL
 * when there is none left.  Called with the lock held. */
static slot *take_next_block(engine *e)
{
    for (;;) {
        slot *s = &e->slots[e->next_take % e->W];
        if (e->abort || e->next_take >= e->emitted) return NULL;
        if (s->state == SLOT_FREE && e->next_take < e->next_combine + e->W) {
            s->state = SLOT_BUSY;
            s->index = e->next_take++;
            return s;
        }
        pthread_cond_wait(&e->slot_free, &e->mu);
    }
}

/* The reader is a pass's one serial stage.  Where threads outnumber
 * cores, a fair share of a core for it is a loss for all, as workers then
 * wait for its blocks; so the workers of a pass over the file run a few
 * nice levels below the thread that started them (a collapsed 10^7-row
 * fit on 2 cores: 1.15 -> 1.0 s).  Only a hint: failure changes nothing,
 * and neither does it where there are cores to spare. */
enum { WORKER_NICE_STEP = 5, NICE_MAX = 19 };

static void yield_cores_to_reader(void)
{
#ifdef __linux__
    id_t tid = (id_t)syscall(SYS_gettid);
    int nice;
    errno = 0;
    nice = getpriority(PRIO_PROCESS, tid);
    if (errno == 0) (void)setpriority(PRIO_PROCESS, tid, nice + WORKER_NICE_STEP > NICE_MAX ? NICE_MAX : nice + WORKER_NICE_STEP);
#endif
}

static void *worker_main(void *arg)
{
    worker *w = arg;
    engine *e = w->e;
    if (!workers_fetch(e)) yield_cores_to_reader();
    for (;;) {
        slot *s;
        pthread_mutex_lock(&e->mu);
        if (workers_fetch(e)) {
            s = take_next_block(e);
            pthread_mutex_unlock(&e->mu);
            if (s == NULL) return NULL;
            fetch_block(e, s);
            if (s->st == MR_OK) compute(w, s);
            pthread_mutex_lock(&e->mu);
            s->state = SLOT_DONE;
            if (s->index == e->next_combine) pthread_cond_signal(&e->slot_done);
            pthread_mutex_unlock(&e->mu);
            continue;
        }
        for (;;) {
            s = &e->slots[e->next_take % e->W];
            if (e->abort) break;
            if (e->next_take < e->emitted && s->state == SLOT_FILLED && s->index == e->next_take) break;
            if (e->reader_done && e->next_take >= e->emitted) break;
            pthread_cond_wait(&e->slot_filled, &e->mu);
        }
        if (e->abort || (e->reader_done && e->next_take >= e->emitted)) {
            pthread_mutex_unlock(&e->mu);
            return NULL;
        }
        s->state = SLOT_BUSY;
        e->next_take++;
        pthread_mutex_unlock(&e->mu);
        compute(w, s);
        pthread_mutex_lock(&e->mu);
        s->state = SLOT_DONE;
        if (s->index == e->next_combine) pthread_cond_signal(&e->slot_done);
        pthread_mutex_unlock(&e->mu);
    }
}

/* ---- set-up and tear-down -------------------------------------------- */

struct mr__pool_slot {
    mr__chunk *chunk; /* NULL: nothing kept here */
    mr__block block;
    char *packed;
};

/* Slot i's buffers from the pool, when it kept some for this binding. */
static int take_pooled_slot(mr__pass_pool *pool, const mr__binding *b, size_t i, slot *s)
{
    struct mr__pool_slot *k;
    if (pool == NULL || pool->bind != b || i >= pool->nslot || pool->slot[i].chunk == NULL) return 0;
    k = &pool->slot[i];
    s->chunk = k->chunk;
    s->block = k->block;
    s->packed = k->packed;
    memset(k, 0, sizeof *k);
    return 1;
}

/* Leaves slot i's buffers to the pool; 0 when it has no room for them. */
static int pool_slot(mr__pass_pool *pool, const mr__binding *b, size_t W, size_t i, slot *s)
{
    struct mr__pool_slot *k;
    if (pool == NULL || s->chunk == NULL || (pool->bind != NULL && pool->bind != b)) return 0;
    if (pool->slot == NULL) {
        if ((pool->slot = mr__calloc(W, sizeof *pool->slot)) == NULL) return 0;
        pool->nslot = W;
        pool->bind = b;
    }
    if (i >= pool->nslot || pool->slot[i].chunk != NULL) return 0;
    k = &pool->slot[i];
    k->chunk = s->chunk;
    k->block = s->block;
    k->packed = s->packed;
    s->chunk = NULL;
    s->packed = NULL;
    memset(&s->block, 0, sizeof s->block);
    return 1;
}

int mr__pass_pool_take_workspace(mr__pass_pool *pool, const mr__design *d, size_t i, mr__workspace *ws)
{
    if (pool == NULL || pool->design != d || i >= pool->nws || pool->ws[i].D == NULL) return 0;
    *ws = pool->ws[i];
    memset(&pool->ws[i], 0, sizeof *ws);
    return 1;
}

void mr__pass_pool_keep_workspace(mr__pass_pool *pool, const mr__design *d, size_t nworkers, size_t i,
                                  mr__workspace *ws)
{
    if (pool == NULL || ws->D == NULL || (pool->design != NULL && pool->design != d)) return;
    if (pool->ws == NULL) {
        if ((pool->ws = mr__calloc(nworkers, sizeof *pool->ws)) == NULL) return;
        pool->nws = nworkers;
        pool->design = d;
    }
    if (i >= pool->nws || pool->ws[i].D != NULL) return;
    pool->ws[i] = *ws;
    memset(ws, 0, sizeof *ws);
}

void mr__pass_pool_release(mr__pass_pool *pool)
{
    size_t i;
    for (i = 0; i < pool->nslot; i++) {
        struct mr__pool_slot *k = &pool->slot[i];
        if (k->chunk) mr__free(k->chunk->data);
        mr__free(k->chunk);
        mr__free(k->packed);
        mr__block_release(&k->block);
    }
    for (i = 0; i < pool->nws; i++) mr__workspace_release(&pool->ws[i]);
    mr__free(pool->slot);
    mr__free(pool->ws);
    memset(pool, 0, sizeof *pool);
}

static mr_status init_slots(engine *e, mr__error *err)
{
    const mr__pass_cfg *cfg = e->cfg;
    const mr__binding *b = cfg->dcfg->bind;
    size_t i;
    e->slots = mr__calloc(e->W, sizeof *e->slots);
    if (e->slots == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < e->W; i++) {
        slot *s = &e->slots[i];
        if (!take_pooled_slot(cfg->pool, b, i, s)) {
            s->chunk = mr__calloc(1, sizeof *s->chunk);
            if (s->chunk == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
            MR__TRY(mr__block_init(&s->block, b, err));
        }
        if (((cfg->store && mr__store_keeps_bytes(cfg->store)) || e->ops->packs) && s->packed == NULL &&
            (s->packed = mr__malloc(mr__store_pack_bound(b))) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        MR__TRY(e->ops->slot_init(e->job, s, err));
    }
    return MR_OK;
}

static void release_slots(engine *e)
{
    size_t i;
    for (i = 0; e->slots && i < e->W; i++) {
        slot *s = &e->slots[i];
        e->ops->slot_release(e->job, s);
        (void)pool_slot(e->cfg->pool, e->cfg->dcfg->bind, e->W, i, s);
        if (s->chunk) mr__free(s->chunk->data);
        mr__free(s->chunk);
        mr__free(s->packed);
        mr__block_release(&s->block);
    }
    mr__free(e->slots);
    e->slots = NULL;
}

/* EAGAIN is the system refusing a thread's stack or its slot in the
 * process's limits: out of memory, as far as the user can act on it. */
static mr_status thread_failure(int rc, const char *what, mr__error *err)
{
    if (rc == EAGAIN || rc == ENOMEM)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory: cannot start %s (%s); try fewer --threads or more memory",
                        what, strerror(rc));
    return mr__fail(err, MR_ERR_INTERNAL, "cannot start %s: %s", what, strerror(rc));
}

static mr_status start_workers(engine *e, mr__error *err)
{
    size_t i;
    /* each worker's decoder state is written for every row */
    e->workers = mr__calloc_lines(e->nworkers, sizeof *e->workers);
    e->worker_view = mr__calloc(e->nworkers, sizeof *e->worker_view);
    if (e->workers == NULL || e->worker_view == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    e->env.worker = e->worker_view;
    for (i = 0; i < e->nworkers; i++) {
        worker *w = &e->workers[i];
        w->e = e;
        w->w.number = i;
        e->worker_view[i] = &w->w;
        MR__TRY(mr__decoder_init(&w->w.dec, e->cfg->dcfg, err));
        w->w.dec.worker = -1;
        MR__TRY(e->ops->worker_init(e->job, &w->w, err));
    }
    for (i = 0; i < e->nworkers; i++) {
        int rc = pthread_create(&e->workers[i].thread, NULL, worker_main, &e->workers[i]);
        if (rc != 0) return thread_failure(rc, "a worker thread", err);
        e->workers[i].started = 1;
    }
    return MR_OK;
}

static void wake_everyone(engine *e)
{
    pthread_cond_broadcast(&e->slot_free);
    pthread_cond_broadcast(&e->slot_filled);
    pthread_cond_broadcast(&e->slot_done);
}

static void stop_threads(engine *e)
{
    size_t i;
    pthread_mutex_lock(&e->mu);
    if (!e->reader_done || e->next_combine < e->emitted) e->abort = 1;
    wake_everyone(e);
    pthread_mutex_unlock(&e->mu);
    if (e->reader_started) pthread_join(e->reader, NULL);
    e->reader_started = 0;
    pthread_mutex_lock(&e->mu);
    e->abort = 1;
    wake_everyone(e);
    pthread_mutex_unlock(&e->mu);
    for (i = 0; e->workers && i < e->nworkers; i++)
        if (e->workers[i].started) pthread_join(e->workers[i].thread, NULL);
}

/* Reads up to the end of the header row on this thread, so the caller can
 * bind columns before any worker starts.  What follows the header in the
 * same read is left in buf[pending_off, +pending_len) for the reader. */
static mr_status read_header(engine *e, mr__error *err)
{
    const mr__pass_cfg *cfg = e->cfg;
    size_t got = 0, used = 0;
    while (e->sp.want_header) {
        MR__TRY(mr__source_read(e->src, e->buf, e->buf_cap, &got, err));
        if (got == 0) {
            MR__TRY(mr__splitter_finish(&e->sp, on_full_chunk, e, err));
            if (e->sp.want_header) return mr__fail(err, MR_ERR_NO_DATA, "%s: the file is empty", e->sp.display);
            used = 0;
            break;
        }
        MR__TRY(mr__splitter_feed(&e->sp, e->buf, got, &used, on_full_chunk, e, err));
    }
    e->pending_off = used;
    e->pending_len = got - used;
    if (cfg->set != NULL) {
        if ((e->first_header = mr__strndup(e->sp.header, e->sp.header_len)) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        e->first_header_len = e->sp.header_len;
    }
    return cfg->on_header(cfg->header_user, e->sp.header, e->sp.header_len, err);
}

/* A later pass (given the first pass's map) over a plain file whose header
 * ends where the map's first block starts goes by the map; anything else is streamed (which checks
 * the file its own way). */
static int reads_by_map(const engine *e)
{
    const mr__block_map *m = e->cfg->map;
    return m != NULL && m->usable && e->cfg->set == NULL && mr__source_is_file(e->src) &&
           !mr__source_is_zstd(e->src) && (m->n == 0 || m->span[0].offset == e->sp.pos);
}

/* The header is read with reads of at most this size: data rows go
 * straight into chunks, so a larger first read would only be copied
 * again, into two buffers faulted in for it. */
enum { HEADER_READ = 64u << 10 };

static mr_status begin_stream(engine *e, mr__error *err)
{
    const mr__pass_cfg *cfg = e->cfg;
    slot *first;
    if (cfg->set != NULL && (e->files = mr__calloc(cfg->set->n, sizeof *e->files)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    MR__TRY(open_source(e, 0, err));
    e->bytes_total = cfg->set ? cfg->set->total_size : mr__source_size(e->src);
    e->buf_cap = cfg->read_size < 16 ? 16 : cfg->read_size < HEADER_READ ? cfg->read_size : HEADER_READ;
    e->buf = mr__malloc(e->buf_cap);
    if (e->buf == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    mr__splitter_init(&e->sp, cfg->set ? cfg->set->display[0] : cfg->display, 1);
    if (cfg->set != NULL) e->sp.names = (const char *const *)cfg->set->display;
    MR__TRY(read_header(e, err));
    MR__TRY(init_slots(e, err));
    e->by_map = reads_by_map(e);
    if (e->by_map) {
        fetch_between(e, 0, cfg->map->n);
        return MR_OK;
    }
    first = &e->slots[0];
    first->state = SLOT_FILLING;
    first->index = 0;
    mr__splitter_start_chunk(&e->sp, first->chunk);
    return MR_OK;
}

/* done: the raw bytes up to the block just added, NULL at the end. */
static mr_status report_progress(engine *e, const uint64_t *done, double t0, double *last, int final, mr__error *err)
{
    const mr__pass_cfg *cfg = e->cfg;
    mr_progress pr;
    double t = mr__seconds_now();
    if ((cfg->progress == NULL && cfg->progress_stop == NULL) || (!final && t - *last < 0.25)) return MR_OK;
    *last = t;
    pr.pass = cfg->pass_number;
    pr.bytes_done = done ? *done : (e->src ? e->raw_before + mr__source_raw_bytes(e->src) : 0);
    pr.bytes_total = e->bytes_total;
    pr.rows_done = e->rows_done;
    pr.seconds = t - t0;
    if (cfg->progress) cfg->progress(&pr, cfg->progress_user);
    else if (cfg->progress_stop(&pr, cfg->progress_user) != 0)
        return mr__fail(err, MR_ERR_STOPPED, "%s: stopped by the progress callback in pass %d", cfg->display,
                        cfg->pass_number);
    return MR_OK;
}

/* The block as the store's next one: the bytes the worker packed, or the
 * block itself (memory store, or a block packed by nobody). */
static mr_status put_block(const mr__pass_cfg *cfg, slot *s, mr__error *err)
{
    mr__pattern_rows *patterns = s->block.patterns;
    mr_status st;
    if (s->packed_len > 0 && mr__store_keeps_bytes(cfg->store))
        return mr__store_put_packed(cfg->store, s->packed, s->packed_len, err);
    mr__block_settle_offsets(&s->block);
    s->block.patterns = NULL; /* the slot keeps its pattern rows */
    st = mr__store_keep(cfg->store, &s->block, cfg->dcfg->bind, err);
    s->block.patterns = patterns;
    return st;
}

/* The cache file only saves time: a write to it that fails (a full disk,
 * a file size limit) gives it up for the rest of the pass, which goes on
 * without it, and the caller learns why from store_failed.  The store is
 * left as it is: workers still look at it while the pass runs. */
mr_status mr__pass_keep_block(const mr__pass_cfg *cfg, mr__pass_result *res, slot *s, mr__error *err)
{
    mr_status st;
    if (res->store_failed) return MR_OK;
    st = put_block(cfg, s, err);
    if (st != MR_ERR_IO || cfg->store->fd < 0) return st;
    res->store_failed = 1;
    res->store_err = *err;
    mr__error_clear(err);
    return MR_OK;
}

mr_status mr__pass_block_status(const slot *s, mr__error *err)
{
    if (s->use == &s->block && s->block.failed) {
        *err = s->block.err;
        return s->block.err.status;
    }
    return MR_OK;
}

static mr_status add_block(engine *e, slot *s, mr__error *err)
{
    if (s->st != MR_OK) {
        *err = s->err;
        return s->st;
    }
    if (!in_range(e->cfg, s->index)) return MR_OK;
    return e->ops->add(e->job, s, err);
}

static mr_status combine_all(engine *e, double t0, mr__error *err)
{
    double last = t0;
    for (;;) {
        slot *s;
        uint64_t done;
        mr_status st;
        pthread_mutex_lock(&e->mu);
        for (;;) {
            s = &e->slots[e->next_combine % e->W];
            if (s->state == SLOT_DONE && s->index == e->next_combine) break;
            if (e->reader_done && e->next_combine >= e->emitted) break;
            pthread_cond_wait(&e->slot_done, &e->mu);
        }
        if (!(s->state == SLOT_DONE && s->index == e->next_combine)) {
            pthread_mutex_unlock(&e->mu);
            break;
        }
        pthread_mutex_unlock(&e->mu);
        if (s->use != NULL) e->rows_done += s->use->nread;
        st = add_block(e, s, err);
        if (st != MR_OK) return st;
        done = s->raw_bytes; /* the slot is the reader's again once freed */
        pthread_mutex_lock(&e->mu);
        s->state = SLOT_FREE;
        s->use = NULL;
        e->next_combine++;
        if (workers_fetch(e)) pthread_cond_broadcast(&e->slot_free);
        else pthread_cond_signal(&e->slot_free);
        pthread_mutex_unlock(&e->mu);
        st = report_progress(e, &done, t0, &last, 0, err);
        if (st != MR_OK) return st;
    }
    if (e->reader_st != MR_OK) {
        *err = e->reader_err;
        return e->reader_st;
    }
    return report_progress(e, NULL, t0, &last, 1, err);
}

/* A set's totals: bytes summed, the newest time, the set's checksum. */
static void finish_set(engine *e, mr__pass_result *res)
{
    size_t i, n = e->file + 1;
    note_file(e);
    res->raw_bytes = res->out_bytes = res->size = 0;
    res->mtime_ns = INT64_MIN;
    for (i = 0; i < n; i++) {
        res->raw_bytes += e->files[i].raw_bytes;
        res->out_bytes += e->files[i].out_bytes;
        res->size += e->files[i].size;
        if (e->files[i].mtime_ns > res->mtime_ns) res->mtime_ns = e->files[i].mtime_ns;
    }
    res->checksum = mr__inputset_checksum(e->files, n);
    res->zstd = e->files[0].compression;
    res->by_map = 0;
    res->files = e->files;
    res->nfiles = n;
    e->files = NULL;
}

static void finish_source(engine *e, mr__pass_result *res)
{
    if (e->src == NULL) return;
    if (e->cfg->set != NULL) {
        finish_set(e, res);
        return;
    }
    res->raw_bytes = mr__source_raw_bytes(e->src);
    res->out_bytes = mr__source_out_bytes(e->src);
    res->checksum = mr__source_checksum(e->src);
    res->zstd = mr__source_is_zstd(e->src);
    res->by_map = e->by_map;
    mr__source_identity(e->src, &res->size, &res->mtime_ns);
}

static void release_engine(engine *e)
{
    size_t i;
    for (i = 0; e->workers && i < e->nworkers; i++) {
        if (e->job) e->ops->worker_release(e->job, &e->workers[i].w);
        mr__decoder_release(&e->workers[i].w.dec);
    }
    mr__free(e->workers);
    mr__free(e->worker_view);
    /* slots are made only once the job is open */
    if (e->job) {
        release_slots(e);
        e->ops->close(e->job);
    }
    mr__splitter_release(&e->sp);
    mr__source_close(e->src);
    mr__free(e->buf);
    mr__free(e->files);
    mr__free(e->first_header);
    pthread_mutex_destroy(&e->mu);
    pthread_cond_destroy(&e->slot_free);
    pthread_cond_destroy(&e->slot_filled);
    pthread_cond_destroy(&e->slot_done);
}

static mr_status run_threads(engine *e, double t0, mr__error *err)
{
    mr_status st = start_workers(e, err);
    if (st == MR_OK && !workers_fetch(e)) {
        int rc = pthread_create(&e->reader, NULL, reader_main, e);
        if (rc != 0) st = thread_failure(rc, "the reader thread", err);
        else e->reader_started = 1;
    }
    if (st == MR_OK) st = combine_all(e, t0, err);
    /* a pass by the map read the header only through the stream */
    if (st == MR_OK && e->src != NULL) st = mr__source_check_unchanged(e->src, !e->by_map, err);
    return st;
}

mr_status mr__pass_run(const mr__pass_cfg *cfg, mr__pass_result *res, mr__error *err)
{
    engine e;
    mr_status st;
    double t0 = mr__seconds_now();
    memset(&e, 0, sizeof e);
    memset(res, 0, sizeof *res);
    e.cfg = cfg;
    e.ops = cfg->kind == MR__PASS_SCAN      ? &mr__job_scan
            : cfg->kind == MR__PASS_SCORE   ? &mr__job_score
            : cfg->kind == MR__PASS_MEAT    ? &mr__job_meat
            : cfg->kind == MR__PASS_SURVEY  ? &mr__job_survey
                                            : &mr__job_irls;
    if (cfg->ops != NULL) e.ops = cfg->ops;
    e.nworkers = cfg->nthreads > 0 ? (size_t)cfg->nthreads : 1;
    /* Two blocks per worker (one being computed, one waiting), one being
     * read, one being added, and slack for blocks that finish out of
     * order: the calling thread adds them in order, so one slow block
     * holds up the ring, and with no slack the reader stalls and a core
     * idles (first pass at 10^7 rows, 2 workers: the reader waited 0.20 s
     * with none, 0.05 s with 8).  The slack is a constant, not per worker:
     * what it absorbs is one block's delay.  It is no larger because each
     * slot's 2 MiB are pages the first pass faults in: with 4 instead of
     * 8, that pass over 2e6 plain rows took 0.19 s instead of 0.23 s (1
     * worker: 0.21 s, 0.26 s), and fits at 10^7 rows were no slower. */
    e.W = 2 * e.nworkers + 4;
    pthread_mutex_init(&e.mu, NULL);
    pthread_cond_init(&e.slot_free, NULL);
    pthread_cond_init(&e.slot_filled, NULL);
    pthread_cond_init(&e.slot_done, NULL);
    e.env.cfg = cfg;
    e.env.res = res;
    e.env.nworkers = e.nworkers;
    st = e.ops->open(&e.env, &e.job, err);
    if (st == MR_OK) st = replaying(cfg) ? init_slots(&e, err) : begin_stream(&e, err);
    e.env.plain = e.src != NULL && !mr__source_is_zstd(e.src) && cfg->set == NULL;
    /* the columns are bound now that the header is read */
    if (st == MR_OK) st = e.ops->start(e.job, err);
    if (st == MR_OK && replaying(cfg) && !store_holds_range(cfg))
        st = mr__fail(err, MR_ERR_INTERNAL, "the kept blocks are not those of this process's range");
    if (st == MR_OK && replaying(cfg))
        fetch_between(&e, cfg->store->first_block,
                      cfg->store->first_block + (cfg->store->n + replay_stride(cfg) - 1) / replay_stride(cfg));
    /* a store filled by a pass over a range keeps that range's blocks */
    if (cfg->range && cfg->store && cfg->store_fill && cfg->store->n == 0) cfg->store->first_block = cfg->range->first_block;
    if (st == MR_OK) st = run_threads(&e, t0, err);
    stop_threads(&e);
    finish_source(&e, res);
    if (e.job) st = e.ops->finish(e.job, st, err);
    if (cfg->set != NULL) res->map.usable = 0; /* offsets in no one file */
    release_engine(&e);
    res->seconds = mr__seconds_now() - t0;
    return st;
}

void mr__pass_result_release(mr__pass_result *res, size_t nfac)
{
    size_t i, f;
    for (i = 0; i < res->nworkers; i++) {
        if (res->worker_levels[i] == NULL) continue;
        for (f = 0; f < nfac; f++) mr__levelset_release(&res->worker_levels[i][f]);
        mr__free(res->worker_levels[i]);
    }
    for (i = 0; res->worker_outcomes && i < res->nworkers; i++) mr__level_outcomes_free(res->worker_outcomes[i]);
    mr__free(res->worker_outcomes);
    mr__free(res->worker_levels);
    /* a result zeroed and never run has no sample (and fd 0 is not ours) */
    if (res->sample.packed) mr__store_release(&res->sample);
    mr__pattern_merge_release(&res->patterns);
    mr__block_map_release(&res->map);
    mr__free(res->files);
    mr__scan_release(&res->scan);
    mr__sums_release(&res->sums);
    mr__sums_release(&res->bread);
    memset(res, 0, sizeof *res);
}
