/* codec_zstd.c - zstd input (RFC 8878) through libzstd's streaming
 * decoder: one decoder reads concatenated frames as one stream. */
#include <zstd.h>

#include "common/alloc.h"
#include "input/codec.h"

typedef struct zstd_decoder {
    ZSTD_DStream *ds;
    const char *display;
    size_t frame_left; /* ZSTD_decompressStream's last hint: 0 = frame ended */
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
    io->in_pos = ib.pos;
    io->out_pos = ob.pos;
    d->frame_left = r;
    return MR_OK;
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
