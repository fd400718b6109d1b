/* fuzz_gzip.c - libFuzzer target: the gzip codec (src/input/codec_gzip.c)
 * on arbitrary bytes, driven straight from memory the way codec.h says.
 *
 * Input: two bytes that seed the slicing, then the stream.  The stream is
 * given to the codec's step in slices whose sizes, and the output room of
 * each step, are drawn from a generator seeded by those two bytes (as
 * tests/check_input.c's decode_in_slices does: a third of the slices 1 to 9
 * bytes, the rest up to 4096; an eighth of the rooms 1 to 3 bytes).  The
 * gzip codec is used whatever the magic, so that streams which are not gzip
 * reach its failure paths too.
 *
 * Oracles:
 *   - codec.h: mr__codec_find names gzip exactly when the stream starts
 *     with 1f 8b (RFC 1952 2.3.1); a step with input left and room for
 *     output moves on; step and end give MR_OK or MR_ERR_FORMAT, never
 *     anything else, and the message names the input;
 *   - zlib's inflate given the whole input and all the output room at once,
 *     member after member (inflateInit2 with 16 + MAX_WBITS, reset after
 *     each Z_STREAM_END while input is left): where it reads the stream,
 *     the codec must give the same bytes; where it fails (damage, a tail
 *     that is no member, the input ending inside one), the codec must fail.
 * Output is bounded (OUT_CAP): deflate packs about a thousand to one.
 */
#define ZLIB_CONST
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zlib.h>

#include "common/error.h"
#include "input/codec.h"

#define OUT_CAP (8u << 20)

static void fail(const char *what, const char *msg)
{
    fprintf(stderr, "fuzz_gzip: %s (message: \"%.300s\")\n", what, msg);
    abort();
}

/* xorshift64: the sizes of slices and rooms. */
static size_t draw(uint64_t *r, size_t below)
{
    *r ^= *r << 13;
    *r ^= *r >> 7;
    *r ^= *r << 17;
    return (size_t)(*r % below);
}

static void check_status(mr_status st, const mr__error *err)
{
    if (st == MR_OK) return;
    if (st != MR_ERR_FORMAT) fail("a step gave a status other than OK or malformed input", err->msg);
    if (err->status != st || strstr(err->msg, "in.gz") == NULL) fail("the message does not name the input", err->msg);
}

/* The codec over in[0, n) in slices; *nout bytes out, *capped when the
 * output reached OUT_CAP (the rest is not decoded). */
static mr_status decode_in_slices(const uint8_t *in, size_t n, uint64_t seed, char *out, size_t *nout, int *capped,
                                  mr__error *err)
{
    static const unsigned char none[1] = {0};
    const mr__codec *c = &mr__codec_gzip;
    mr__codec_io io = {none, 0, 0, 0, NULL, 0, 0};
    uint64_t r = seed * 0x9E3779B97F4A7C15ULL + 1;
    size_t fed = 0;
    mr_status st;
    void *dec;
    *nout = 0;
    *capped = 0;
    if (c->open(&dec, "in.gz", err) != MR_OK) fail("cannot open a decoder", err->msg);
    for (;;) {
        size_t in_before, room;
        if (io.in_pos == io.in_len && fed < n) {
            size_t k = draw(&r, 3) == 0 ? 1 + draw(&r, 9) : 1 + draw(&r, 4096);
            if (k > n - fed) k = n - fed;
            io.in = in + fed;
            io.in_len = k;
            io.in_pos = 0;
            io.in_offset = fed;
            fed += k;
        }
        room = draw(&r, 8) == 0 ? 1 + draw(&r, 3) : 1 + draw(&r, 4096);
        if (room > OUT_CAP - *nout) room = OUT_CAP - *nout;
        if (room == 0) {
            *capped = 1;
            c->close(dec);
            return MR_OK;
        }
        io.out = out + *nout;
        io.out_cap = room;
        io.out_pos = 0;
        in_before = io.in_pos;
        st = c->step(dec, &io, err);
        if (st != MR_OK) break;
        if (io.in_pos > io.in_len || io.out_pos > io.out_cap) fail("a step went past its buffers", "");
        if (in_before < io.in_len && io.in_pos == in_before && io.out_pos == 0) fail("a step with input left did nothing", "");
        *nout += io.out_pos;
        if (fed == n && io.in_pos == io.in_len && io.out_pos == 0) {
            st = c->end(dec, fed, err);
            break;
        }
    }
    c->close(dec);
    return st;
}

enum { WHOLE_OK, WHOLE_FAILED, WHOLE_CAPPED };

/* zlib on everything at once, member after member. */
static int inflate_whole(const uint8_t *in, size_t n, char *out, size_t *nout)
{
    z_stream z;
    int rc, result = WHOLE_OK;
    memset(&z, 0, sizeof z);
    if (inflateInit2(&z, 16 + MAX_WBITS) != Z_OK) abort();
    z.next_in = in;
    z.avail_in = (uInt)n;
    z.next_out = (Bytef *)out;
    z.avail_out = OUT_CAP;
    while (z.avail_in > 0) {
        rc = inflate(&z, Z_NO_FLUSH);
        if (rc == Z_MEM_ERROR) abort();
        if (rc == Z_STREAM_END) {
            if (inflateReset(&z) != Z_OK) abort();
            continue;
        }
        if (z.avail_out == 0) result = WHOLE_CAPPED;
        else result = WHOLE_FAILED; /* damaged, or the input ended inside a member */
        break;
    }
    *nout = OUT_CAP - z.avail_out;
    inflateEnd(&z);
    return result;
}

static int starts_as_gzip(const uint8_t *p, size_t n) { return n >= 2 && p[0] == 0x1f && p[1] == 0x8b; }

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static char *out, *want;
    const uint8_t *in = data + 2;
    const mr__codec *found;
    size_t n, nout, nwant;
    int capped, whole;
    mr__error err;
    mr_status st;
    if (size < 2) return 0;
    if (out == NULL) {
        out = malloc(OUT_CAP);
        want = malloc(OUT_CAP);
        if (out == NULL || want == NULL) abort();
    }
    n = size - 2;
    found = mr__codec_find(in, n < MR__CODEC_MAGIC_MAX ? n : MR__CODEC_MAGIC_MAX);
    if ((found == &mr__codec_gzip) != starts_as_gzip(in, n)) fail("gzip recognised by other than its magic", "");
    mr__error_clear(&err);
    st = decode_in_slices(in, n, (uint64_t)data[0] << 8 | data[1], out, &nout, &capped, &err);
    check_status(st, &err);
    if (capped) return 0;
    whole = inflate_whole(in, n, want, &nwant);
    if (whole == WHOLE_CAPPED) return 0;
    if (whole == WHOLE_FAILED) {
        if (st == MR_OK) fail("the codec read a stream zlib rejects", "");
        return 0;
    }
    if (st != MR_OK) fail("the codec failed on a stream zlib reads", err.msg);
    if (nwant != nout || memcmp(want, out, nout) != 0) fail("the codec's bytes differ from zlib's", "");
    return 0;
}
