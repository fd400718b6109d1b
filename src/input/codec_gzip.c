/* codec_gzip.c - gzip input (RFC 1952) through zlib's inflate.
 *
 * A gzip file may hold several members one after another (`cat a.gz b.gz`,
 * pigz, bgzip); their texts read as one.  zlib stops at the end of each
 * member, so the decoder checks that the next bytes begin another member
 * and resets zlib for it.  Anything else after a member is an error, not
 * silently dropped: a file with a damaged or foreign tail is not the file
 * the analyst meant to fit.  (libdeflate can decode faster, but only a
 * whole buffer at a time, and the input is streamed: so zlib.) */
#define ZLIB_CONST
#include <limits.h>
#include <string.h>
#include <zlib.h>

#include "common/alloc.h"
#include "input/codec.h"

static const unsigned char MAGIC[2] = {0x1f, 0x8b};

typedef struct gzip_decoder {
    z_stream z;
    const char *display;
    int in_member;         /* zlib is inside a member: it has not seen its trailer */
    size_t magic_seen;     /* between members: bytes of the next one's magic seen */
    uint64_t members;      /* members begun */
    uint64_t member_start; /* offset of the last member begun */
} gzip_decoder;

static int claims(const unsigned char *head) { return head[0] == MAGIC[0] && head[1] == MAGIC[1]; }

/* zlib's memory comes from ours too, so the allocation-failure test
 * reaches the decoder's failure paths. */
static voidpf z_alloc(voidpf opaque, uInt items, uInt size)
{
    (void)opaque;
    return mr__malloc((size_t)items * size);
}

static void z_free(voidpf opaque, voidpf p)
{
    (void)opaque;
    mr__free(p);
}

static void gzip_close(void *dec)
{
    gzip_decoder *d = dec;
    if (d == NULL) return;
    inflateEnd(&d->z);
    mr__free(d);
}

static mr_status gzip_open(void **dec, const char *display, mr__error *err)
{
    gzip_decoder *d = mr__calloc(1, sizeof *d);
    int rc;
    *dec = NULL;
    if (d == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    d->display = display;
    d->z.zalloc = z_alloc;
    d->z.zfree = z_free;
    /* 16 + window bits: gzip members only, no zlib or raw deflate */
    rc = inflateInit2(&d->z, 16 + MAX_WBITS);
    if (rc != Z_OK) {
        mr__free(d);
        if (rc == Z_MEM_ERROR) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        return mr__fail(err, MR_ERR_INTERNAL, "%s: zlib %s could not start a decoder (%d)", display, zlibVersion(), rc);
    }
    *dec = d;
    return MR_OK;
}

/* zlib's words for the two trailer checks, said plainly; other messages
 * (damaged deflate data, a bad header) are passed on as zlib gives them. */
static const char *explain(const char *zmsg)
{
    if (zmsg == NULL) return "invalid compressed data";
    if (strcmp(zmsg, "incorrect data check") == 0) return "the CRC-32 in its trailer does not match its data";
    if (strcmp(zmsg, "incorrect length check") == 0) return "the length in its trailer does not match its data";
    return zmsg;
}

static mr_status failed(gzip_decoder *d, int rc, uint64_t at, mr__error *err)
{
    if (rc == Z_MEM_ERROR) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return mr__fail(err, MR_ERR_FORMAT, "%s: corrupt gzip stream (member %llu, found at offset %llu): %s", d->display,
                    (unsigned long long)d->members, (unsigned long long)at,
                    explain(rc == Z_DATA_ERROR ? d->z.msg : NULL));
}

/* One call of inflate on what io offers (zlib counts in 32 bits). */
static int inflate_io(gzip_decoder *d, const unsigned char *in, size_t *in_avail, char *out, size_t *out_avail)
{
    uInt in_n = *in_avail < UINT_MAX ? (uInt)*in_avail : UINT_MAX;
    uInt out_n = *out_avail < UINT_MAX ? (uInt)*out_avail : UINT_MAX;
    int rc;
    d->z.next_in = in;
    d->z.avail_in = in_n;
    d->z.next_out = (Bytef *)out;
    d->z.avail_out = out_n;
    rc = inflate(&d->z, Z_NO_FLUSH);
    *in_avail = in_n - d->z.avail_in;   /* now: bytes taken */
    *out_avail = out_n - d->z.avail_out; /* now: bytes written */
    return rc;
}

static mr_status not_a_member(gzip_decoder *d, uint64_t at, mr__error *err)
{
    if (d->members == 0)
        return mr__fail(err, MR_ERR_FORMAT, "%s: not a gzip stream (no gzip magic at offset %llu)", d->display,
                        (unsigned long long)at);
    return mr__fail(err, MR_ERR_FORMAT,
                    "%s: trailing garbage: the bytes from offset %llu on, after gzip member %llu, are not a gzip member",
                    d->display, (unsigned long long)at, (unsigned long long)d->members);
}

/* Between members: the next bytes must be the gzip magic.  They are checked
 * here, a byte at a time (a read may end between the two), so that a tail
 * which is no member is named as such, not as a damaged header; once both
 * are seen, zlib starts afresh and is given them. */
static mr_status next_member(gzip_decoder *d, mr__codec_io *io, mr__error *err)
{
    size_t taken = sizeof MAGIC, none = 0;
    int rc;
    while (d->magic_seen < sizeof MAGIC && io->in_pos < io->in_len) {
        uint64_t at = io->in_offset + io->in_pos;
        if (d->magic_seen == 0) d->member_start = at;
        if (io->in[io->in_pos] != MAGIC[d->magic_seen]) return not_a_member(d, d->member_start, err);
        d->magic_seen++;
        io->in_pos++;
    }
    if (d->magic_seen < sizeof MAGIC) return MR_OK;
    d->magic_seen = 0;
    d->members++;
    d->in_member = 1;
    rc = inflateReset(&d->z);
    if (rc == Z_OK) rc = inflate_io(d, MAGIC, &taken, io->out + io->out_pos, &none);
    if (rc != Z_OK || taken != sizeof MAGIC) return failed(d, rc, d->member_start, err);
    return MR_OK;
}

static mr_status gzip_step(void *dec, mr__codec_io *io, mr__error *err)
{
    gzip_decoder *d = dec;
    size_t in_n, out_n;
    int rc;
    if (!d->in_member) {
        MR__TRY(next_member(d, io, err));
        if (!d->in_member) return MR_OK;
    }
    in_n = io->in_len - io->in_pos;
    out_n = io->out_cap - io->out_pos;
    rc = inflate_io(d, io->in + io->in_pos, &in_n, io->out + io->out_pos, &out_n);
    io->in_pos += in_n;
    io->out_pos += out_n;
    if (rc == Z_STREAM_END) d->in_member = 0; /* its CRC-32 and length matched */
    else if (rc == Z_BUF_ERROR && in_n == 0 && out_n == 0) return MR_OK; /* nothing to do */
    else if (rc != Z_OK) return failed(d, rc, io->in_offset + io->in_pos, err);
    return MR_OK;
}

static mr_status gzip_end(void *dec, uint64_t total, mr__error *err)
{
    gzip_decoder *d = dec;
    if (!d->in_member && d->magic_seen == 0) return MR_OK;
    return mr__fail(err, MR_ERR_FORMAT,
                    "%s: the gzip stream ends inside a member (member %llu, from offset %llu; the stream ends after "
                    "%llu bytes)",
                    d->display, (unsigned long long)(d->members + (d->in_member ? 0 : 1)),
                    (unsigned long long)d->member_start, (unsigned long long)total);
}

const mr__codec mr__codec_gzip = {"gzip", MR__COMPRESSION_GZIP, 2, claims, gzip_open, gzip_close, gzip_step, gzip_end};
