/* pass_read.c - the pass engine's reading: the stream cut into the ring's
 * chunks (one file, or a set's files one after another), the header read
 * on the calling thread, and the blocks a worker fetches itself (a plain
 * file's by the first pass's map, or kept ones); the reader thread; the
 * input's identity once read.  Apart from pass.c so that how rows come in
 * reads apart from how blocks are computed and added in order. */
#include <string.h>

#include "accum/pass.h"
#include "accum/pass_engine.h"
#include "common/alloc.h"

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

static void load_kept_block(const mr__pass_cfg *cfg, slot *s)
{
    const mr__store *store = cfg->store;
    s->raw_bytes = 0;
    s->kept_index = (size_t)(s->index - store->first_block) * mr__pass_replay_stride(cfg);
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

void mr__pass_fetch_block(const engine *e, slot *s)
{
    s->st = MR_OK;
    if (e->by_map) read_mapped_block(e, s);
    else load_kept_block(e->cfg, s);
}

void *mr__pass_reader_main(void *arg)
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

mr_status mr__pass_begin_stream(engine *e, mr__error *err)
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
    MR__TRY(mr__pass_init_slots(e, err));
    e->by_map = reads_by_map(e);
    if (e->by_map) {
        mr__pass_fetch_between(e, 0, cfg->map->n);
        return MR_OK;
    }
    first = &e->slots[0];
    first->state = SLOT_FILLING;
    first->index = 0;
    mr__splitter_start_chunk(&e->sp, first->chunk);
    return MR_OK;
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

void mr__pass_finish_source(engine *e, mr__pass_result *res)
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
