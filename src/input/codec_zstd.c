/* codec_zstd.c - zstd input (RFC 8878) through libzstd's streaming
 * decoder: one decoder reads concatenated frames as one stream.
 *
 * A frame whose header gives its content size must hold that many bytes
 * (RFC 8878 3.1.1.1.4).  libzstd's stream decoder checks it only when the
 * output room is large: fed a little at a time, it took a frame that
 * declared 6,477 bytes and held none as a whole, empty frame (a fuzzing
 * find, tests/fuzz/regressions/zstd), so a damaged file could lose rows
 * in silence.  The size is checked here, at every frame's end. */
#include <string.h>
#include <zstd.h>

#include "common/alloc.h"
#include "input/codec.h"

typedef struct zstd_decoder {
    ZSTD_DStream *ds;
    const char *display;
    size_t frame_left; /* ZSTD_decompressStream's last hint: 0 = frame ended */
    /* the frame being read: its first bytes, the bytes it has given */
    unsigned char head[18]; /* ZSTD_FRAMEHEADERSIZE_MAX, of the unstable API */
    size_t nhead;
    uint64_t produced;
} zstd_decoder;

/* A zstd frame, or a skippable frame (which a file may start with). */
static int claims(const unsigned char *m)
{
    uint32_t magic = (uint32_t)m[0] | (uint32_t)m[1] << 8 | (uint32_t)m[2] << 16 | (uint32_t)m[3] << 24;
    return magic == ZSTD_MAGICNUMBER || (magic & ZSTD_MAGIC_SKIPPABLE_MASK) == ZSTD_MAGIC_SKIPPABLE_START;
}

static void zstd_close(void *dec)
{
    zstd_decoder *d = dec;
    if (d == NULL) return;
    ZSTD_freeDStream(d->ds);
    mr__free(d);
}

static mr_status zstd_open(void **dec, const char *display, mr__error *err)
{
    zstd_decoder *d = mr__calloc(1, sizeof *d);
    *dec = NULL;
    if (d == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    d->display = display;
    d->ds = ZSTD_createDStream();
    if (d->ds == NULL) {
        zstd_close(d);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    ZSTD_initDStream(d->ds);
    *dec = d;
    return MR_OK;
}

/* The frame's first bytes, as many as a header can take (a shorter frame
 * is then whole in them). */
static void note_head(zstd_decoder *d, const unsigned char *taken, size_t n)
{
    size_t k = sizeof d->head - d->nhead;
    if (k > n) k = n;
    memcpy(d->head + d->nhead, taken, k);
    d->nhead += k;
}

/* A skippable frame's content size is 0 to libzstd, as is its output. */
static mr_status frame_end(zstd_decoder *d, const mr__codec_io *io, mr__error *err)
{
    unsigned long long declared = ZSTD_getFrameContentSize(d->head, d->nhead);
    uint64_t produced = d->produced;
    d->nhead = 0;
    d->produced = 0;
    if (declared == ZSTD_CONTENTSIZE_UNKNOWN || declared == ZSTD_CONTENTSIZE_ERROR || declared == produced)
        return MR_OK;
    return mr__fail(err, MR_ERR_FORMAT,
                    "%s: corrupt zstd stream (within the first %llu bytes): a frame's header gives %llu bytes of "
                    "content, its blocks %llu",
                    d->display, (unsigned long long)(io->in_offset + io->in_len), declared,
                    (unsigned long long)produced);
}

static mr_status zstd_step(void *dec, mr__codec_io *io, mr__error *err)
{
    zstd_decoder *d = dec;
    ZSTD_outBuffer ob = {io->out, io->out_cap, io->out_pos};
    ZSTD_inBuffer ib = {io->in, io->in_len, io->in_pos};
    size_t r;
    /* Between frames nothing is held back, and a call without input would
     * begin the next frame: its hint would then say "inside a frame". */
    if (ib.pos == ib.size && d->frame_left == 0) return MR_OK;
    r = ZSTD_decompressStream(d->ds, &ob, &ib);
    if (ZSTD_isError(r))
        return mr__fail(err, MR_ERR_FORMAT, "%s: corrupt zstd stream (within the first %llu bytes): %s", d->display,
                        (unsigned long long)(io->in_offset + io->in_len), ZSTD_getErrorName(r));
    note_head(d, io->in + io->in_pos, ib.pos - io->in_pos);
    d->produced += ob.pos - io->out_pos;
    io->in_pos = ib.pos;
    io->out_pos = ob.pos;
    d->frame_left = r;
    return r == 0 ? frame_end(d, io, err) : MR_OK;
}

static mr_status zstd_end(void *dec, uint64_t total, mr__error *err)
{
    zstd_decoder *d = dec;
    if (d->frame_left != 0)
        return mr__fail(err, MR_ERR_FORMAT, "%s: truncated zstd stream (ends inside a frame after %llu bytes)",
                        d->display, (unsigned long long)total);
    return MR_OK;
}

const mr__codec mr__codec_zstd = {"zstd", MR__COMPRESSION_ZSTD, 4, claims, zstd_open, zstd_close, zstd_step, zstd_end};
