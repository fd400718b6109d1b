/* zstd_frames.c - several zstd frames decompressed at once, their text in
 * file order (zstd_frames.h). */
#include <pthread.h>
#include <string.h>
#define ZSTD_STATIC_LINKING_ONLY /* ZSTD_getFrameContentSize is stable; the rest is not used */
#include <zstd.h>
#include <zstd_errors.h>

#include "common/alloc.h"
#include "input/codec.h"
#include "input/zstd_frames.h"

enum { ZS_FREE, ZS_QUEUED, ZS_BUSY, ZS_DONE };

typedef struct zslot {
    int state;
    unsigned char *in; /* the compressed frame */
    size_t in_len, in_cap;
    char *out;         /* its text */
    size_t out_len, out_cap, out_pos;
    uint64_t offset;   /* where the frame starts in the file */
    int oversize;      /* its text passed MR__ZFRAME_OUT_MAX: streamed by the reader */
    int streaming;     /* the reader is streaming it */
    size_t in_pos;
    mr_status st;
    mr__error err;
} zslot;

struct mr__zframes {
    const char *display;
    mr__raw_pull pull;
    void *user;
    pthread_mutex_t mu;
    pthread_cond_t queued, done;
    zslot *slot;
    size_t W;
    uint64_t head, tail, next_take; /* next to hand out, to fill, to decode */
    pthread_t *thr;
    size_t nthr;
    int stop;
    unsigned char *raw; /* raw bytes not yet queued: raw[0] is at raw_off */
    size_t raw_len, raw_cap, raw_pos;
    uint64_t raw_off;
    int raw_eof, to_tail, tail_mode;
    /* A failure met while queueing (a damaged frame header, the file cut
     * short, a read error) waits until the frames queued before it are
     * handed out: the rows before it reach the caller, as with one thread. */
    mr_status queue_st;
    mr__error queue_err;
    void *stream; /* mr__codec_zstd's decoder: the tail, or an oversize frame */
    uint64_t parallel;
};

/* ---- the workers ------------------------------------------------------- */

static mr_status frame_failure(mr__error *err, const char *display, uint64_t offset, size_t r)
{
    return mr__fail(err, MR_ERR_FORMAT, "%s: corrupt zstd stream (the frame at byte %llu): %s", display,
                    (unsigned long long)offset, ZSTD_getErrorName(r));
}

/* Room for the frame's text: its size when the header says so, else a
 * guess that doubles as needed, never past MR__ZFRAME_OUT_MAX. */
static int grow_out(zslot *s, size_t want)
{
    char *p;
    if (want > MR__ZFRAME_OUT_MAX) want = MR__ZFRAME_OUT_MAX;
    if (want <= s->out_cap) return 1;
    p = mr__realloc(s->out, want);
    if (p == NULL) return 0;
    s->out = p;
    s->out_cap = want;
    return 1;
}

static size_t first_guess(const zslot *s)
{
    unsigned long long n = ZSTD_getFrameContentSize(s->in, s->in_len);
    if (n != ZSTD_CONTENTSIZE_UNKNOWN && n != ZSTD_CONTENTSIZE_ERROR) return n > 0 ? (size_t)n : 1;
    return 4 * s->in_len + (64u << 10);
}

/* A frame holds the content size its header gives (RFC 8878 3.1.1.1.4),
 * which libzstd checks only when its output room is large (codec_zstd.c). */
static void held_as_declared(const char *display, zslot *s)
{
    unsigned long long n = ZSTD_getFrameContentSize(s->in, s->in_len);
    if (n == ZSTD_CONTENTSIZE_UNKNOWN || n == ZSTD_CONTENTSIZE_ERROR || n == s->out_len) return;
    s->st = mr__fail(&s->err, MR_ERR_FORMAT,
                     "%s: corrupt zstd stream (the frame at byte %llu): its header gives %llu bytes of content, its "
                     "blocks %llu",
                     display, (unsigned long long)s->offset, n, (unsigned long long)s->out_len);
}

static void decode_frame(const char *display, ZSTD_DCtx *dc, zslot *s)
{
    ZSTD_inBuffer ib = {s->in, s->in_len, 0};
    s->out_len = s->out_pos = 0;
    s->oversize = 0;
    s->st = MR_OK;
    ZSTD_DCtx_reset(dc, ZSTD_reset_session_only);
    if (!grow_out(s, first_guess(s))) {
        s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
        return;
    }
    for (;;) {
        ZSTD_outBuffer ob = {s->out, s->out_cap, s->out_len};
        size_t r = ZSTD_decompressStream(dc, &ob, &ib);
        s->out_len = ob.pos;
        if (ZSTD_isError(r)) {
            s->st = frame_failure(&s->err, display, s->offset, r);
            return;
        }
        if (r == 0) { /* the frame is whole: its end was found before it was queued */
            held_as_declared(display, s);
            return;
        }
        if (ob.pos < ob.size && ib.pos == ib.size) {
            s->st = mr__fail(&s->err, MR_ERR_FORMAT, "%s: truncated zstd frame at byte %llu", display,
                             (unsigned long long)s->offset);
            return;
        }
        if (ob.pos == ob.size) {
            if (s->out_cap >= MR__ZFRAME_OUT_MAX) {
                s->oversize = 1;
                return;
            }
            if (!grow_out(s, 2 * s->out_cap)) {
                s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
                return;
            }
        }
    }
}

static void *worker_main(void *arg)
{
    mr__zframes *z = arg;
    ZSTD_DCtx *dc = ZSTD_createDCtx();
    for (;;) {
        zslot *s;
        pthread_mutex_lock(&z->mu);
        while (!z->stop && z->next_take == z->tail) pthread_cond_wait(&z->queued, &z->mu);
        if (z->stop) {
            pthread_mutex_unlock(&z->mu);
            break;
        }
        s = &z->slot[z->next_take++ % z->W];
        s->state = ZS_BUSY;
        pthread_mutex_unlock(&z->mu);
        if (dc == NULL) s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
        else decode_frame(z->display, dc, s);
        pthread_mutex_lock(&z->mu);
        s->state = ZS_DONE;
        z->parallel++;
        pthread_cond_broadcast(&z->done);
        pthread_mutex_unlock(&z->mu);
    }
    ZSTD_freeDCtx(dc);
    return NULL;
}

/* ---- finding frames ---------------------------------------------------- */

static mr_status pull_more(mr__zframes *z, mr__error *err)
{
    size_t got;
    if (z->raw_pos > 0) { /* what was queued goes */
        memmove(z->raw, z->raw + z->raw_pos, z->raw_len - z->raw_pos);
        z->raw_len -= z->raw_pos;
        z->raw_off += z->raw_pos;
        z->raw_pos = 0;
    }
    if (z->raw_cap - z->raw_len < (256u << 10)) {
        size_t cap = z->raw_cap ? 2 * z->raw_cap : (1u << 20);
        unsigned char *p = mr__realloc(z->raw, cap);
        if (p == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        z->raw = p;
        z->raw_cap = cap;
    }
    MR__TRY(z->pull(z->user, (char *)z->raw + z->raw_len, z->raw_cap - z->raw_len, &got, err));
    if (got == 0) z->raw_eof = 1;
    z->raw_len += got;
    return MR_OK;
}

/* A frame whose header gives more text than a slot takes: no use holding
 * its compressed bytes (a file compressed by zstd from a file is one). */
static int too_large(const unsigned char *p, size_t have)
{
    unsigned long long n = ZSTD_getFrameContentSize(p, have);
    return n != ZSTD_CONTENTSIZE_UNKNOWN && n != ZSTD_CONTENTSIZE_ERROR && n > MR__ZFRAME_OUT_MAX;
}

/* The next frame whole at raw[raw_pos, +*n); 0 at the end of the input,
 * or (to_tail set) when it is too large to hold. */
static mr_status next_frame(mr__zframes *z, size_t *n, mr__error *err)
{
    *n = 0;
    for (;;) {
        size_t have = z->raw_len - z->raw_pos;
        if (have > 0) {
            size_t r = ZSTD_findFrameCompressedSize(z->raw + z->raw_pos, have);
            if (!ZSTD_isError(r)) {
                *n = r;
                return MR_OK;
            }
            if (too_large(z->raw + z->raw_pos, have)) {
                z->to_tail = 1;
                return MR_OK;
            }
            if (ZSTD_getErrorCode(r) != ZSTD_error_srcSize_wrong)
                return frame_failure(err, z->display, z->raw_off + z->raw_pos, r);
            if (z->raw_eof)
                return mr__fail(err, MR_ERR_FORMAT, "%s: truncated zstd stream (ends inside a frame after %llu bytes)",
                                z->display, (unsigned long long)(z->raw_off + z->raw_len));
            if (have >= MR__ZFRAME_IN_MAX) {
                z->to_tail = 1;
                return MR_OK;
            }
        } else if (z->raw_eof) {
            return MR_OK;
        }
        MR__TRY(pull_more(z, err));
    }
}

static int skippable(const unsigned char *p)
{
    uint32_t magic = (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
    return (magic & ZSTD_MAGIC_SKIPPABLE_MASK) == ZSTD_MAGIC_SKIPPABLE_START;
}

static mr_status queue_frame(mr__zframes *z, size_t n, mr__error *err)
{
    zslot *s = &z->slot[z->tail % z->W];
    if (s->in_cap < n) {
        unsigned char *p = mr__realloc(s->in, n);
        if (p == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        s->in = p;
        s->in_cap = n;
    }
    memcpy(s->in, z->raw + z->raw_pos, n);
    s->in_len = n;
    s->offset = z->raw_off + z->raw_pos;
    s->streaming = 0;
    pthread_mutex_lock(&z->mu);
    s->state = ZS_QUEUED;
    z->tail++;
    pthread_cond_signal(&z->queued);
    pthread_mutex_unlock(&z->mu);
    return MR_OK;
}

/* Frames into every free slot (the reading thread's part). */
static mr_status queue_frames(mr__zframes *z, mr__error *err)
{
    while (z->tail - z->head < z->W && !z->to_tail && z->queue_st == MR_OK) {
        size_t n;
        MR__TRY(next_frame(z, &n, err));
        if (n == 0) break;
        if (!skippable(z->raw + z->raw_pos)) MR__TRY(queue_frame(z, n, err));
        z->raw_pos += n;
    }
    return MR_OK;
}

/* ---- handing the text out ----------------------------------------------- */

/* A frame, or the rest of the file, through the stream decoder: in_offset
 * names where its bytes lie, for the messages. */
static mr_status stream_step(mr__zframes *z, mr__codec_io *io, mr__error *err)
{
    if (z->stream == NULL) MR__TRY(mr__codec_zstd.open(&z->stream, z->display, err));
    return mr__codec_zstd.step(z->stream, io, err);
}

/* The rest of the file once a frame was too large to hold. */
static mr_status tail_read(mr__zframes *z, char *buf, size_t cap, size_t *got, mr__error *err)
{
    mr__codec_io io = {NULL, 0, 0, 0, buf, cap, 0};
    while (io.out_pos == 0) {
        if (z->raw_pos == z->raw_len) {
            if (z->raw_eof) {
                if (z->stream != NULL) MR__TRY(mr__codec_zstd.end(z->stream, z->raw_off + z->raw_len, err));
                break;
            }
            MR__TRY(pull_more(z, err));
            continue;
        }
        io.in = z->raw;
        io.in_len = z->raw_len;
        io.in_pos = z->raw_pos;
        io.in_offset = z->raw_off;
        MR__TRY(stream_step(z, &io, err));
        z->raw_pos = io.in_pos;
    }
    *got = io.out_pos;
    return MR_OK;
}

/* Text of the slot at the head: its buffer, or for an oversize frame the
 * stream decoder run over its bytes.  *finished once all of it is out. */
static mr_status slot_text(mr__zframes *z, zslot *s, char *buf, size_t cap, size_t *got, int *finished,
                           mr__error *err)
{
    size_t n;
    if (s->oversize) {
        mr__codec_io io = {s->in, s->in_len, s->in_pos, s->offset, buf, cap, 0};
        if (!s->streaming && z->stream != NULL) {
            mr__codec_zstd.close(z->stream);
            z->stream = NULL;
        }
        s->streaming = 1;
        MR__TRY(stream_step(z, &io, err));
        s->in_pos = io.in_pos;
        *got = io.out_pos;
        *finished = io.out_pos == 0 && s->in_pos == s->in_len;
        return MR_OK;
    }
    n = s->out_len - s->out_pos;
    if (n > cap) n = cap;
    memcpy(buf, s->out + s->out_pos, n);
    s->out_pos += n;
    *got = n;
    *finished = s->out_pos == s->out_len;
    return MR_OK;
}

mr_status mr__zframes_read(mr__zframes *z, char *buf, size_t cap, size_t *got, mr__error *err)
{
    *got = 0;
    if (z->tail_mode) return tail_read(z, buf, cap, got, err);
    for (;;) {
        zslot *s;
        int finished;
        if (z->queue_st == MR_OK) z->queue_st = queue_frames(z, &z->queue_err);
        if (z->head == z->tail) {
            if (z->queue_st != MR_OK) {
                *err = z->queue_err;
                return z->queue_st;
            }
            if (!z->to_tail) return MR_OK; /* the end */
            z->tail_mode = 1;
            return tail_read(z, buf, cap, got, err);
        }
        s = &z->slot[z->head % z->W];
        pthread_mutex_lock(&z->mu);
        while (s->state != ZS_DONE) pthread_cond_wait(&z->done, &z->mu);
        pthread_mutex_unlock(&z->mu);
        if (s->st != MR_OK) {
            *err = s->err;
            return s->st;
        }
        MR__TRY(slot_text(z, s, buf, cap, got, &finished, err));
        if (finished) {
            pthread_mutex_lock(&z->mu);
            s->state = ZS_FREE;
            z->head++;
            pthread_mutex_unlock(&z->mu);
        }
        if (*got > 0) return MR_OK;
    }
}

/* ---- set-up ------------------------------------------------------------- */

void mr__zframes_close(mr__zframes *z)
{
    size_t i;
    if (z == NULL) return;
    pthread_mutex_lock(&z->mu);
    z->stop = 1;
    pthread_cond_broadcast(&z->queued);
    pthread_mutex_unlock(&z->mu);
    for (i = 0; i < z->nthr; i++) pthread_join(z->thr[i], NULL);
    for (i = 0; z->slot && i < z->W; i++) {
        mr__free(z->slot[i].in);
        mr__free(z->slot[i].out);
    }
    if (z->stream) mr__codec_zstd.close(z->stream);
    pthread_mutex_destroy(&z->mu);
    pthread_cond_destroy(&z->queued);
    pthread_cond_destroy(&z->done);
    mr__free(z->slot);
    mr__free(z->thr);
    mr__free(z->raw);
    mr__free(z);
}

mr_status mr__zframes_open(mr__zframes **out, int nthreads, const char *display, mr__raw_pull pull, void *user,
                           const unsigned char *head, size_t head_len, mr__error *err)
{
    mr__zframes *z = mr__calloc(1, sizeof *z);
    size_t i, n = nthreads > 0 ? (size_t)nthreads : 1;
    *out = NULL;
    if (z == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    pthread_mutex_init(&z->mu, NULL);
    pthread_cond_init(&z->queued, NULL);
    pthread_cond_init(&z->done, NULL);
    z->display = display;
    z->pull = pull;
    z->user = user;
    z->W = n + 2; /* one being handed out, one per worker, one being read */
    z->slot = mr__calloc(z->W, sizeof *z->slot);
    z->thr = mr__calloc(n, sizeof *z->thr);
    z->raw_cap = head_len > (1u << 20) ? head_len : (1u << 20);
    z->raw = mr__malloc(z->raw_cap);
    if (z->slot == NULL || z->thr == NULL || z->raw == NULL) {
        mr__zframes_close(z);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    if (head_len > 0) memcpy(z->raw, head, head_len);
    z->raw_len = head_len;
    for (i = 0; i < n; i++) {
        if (pthread_create(&z->thr[i], NULL, worker_main, z) != 0) {
            mr__zframes_close(z);
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory: cannot start a zstd thread");
        }
        z->nthr++;
    }
    *out = z;
    return MR_OK;
}

uint64_t mr__zframes_parallel_frames(mr__zframes *z)
{
    uint64_t n;
    pthread_mutex_lock(&z->mu);
    n = z->parallel;
    pthread_mutex_unlock(&z->mu);
    return n;
}
