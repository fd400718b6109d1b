/* zstd_whole.h - what the zstd targets (fuzz_zstd.c, fuzz_zframes.c) share:
 * reading a source to its end, FNV-1a over the raw words, and the oracle,
 * zstd's stream decoder given the whole input at once (see fuzz_zstd.c's
 * top for why that decoder and not the one-shot one), and one read of a
 * source held to all of it.  Included once by each target, which defines
 * _GNU_SOURCE (memfd_create) and fail() itself. */
#ifndef MR_FUZZ_ZSTD_WHOLE_H
#define MR_FUZZ_ZSTD_WHOLE_H

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>
#include <zstd.h>

#include "common/error.h"
#include "input/codec.h"
#include "input/source.h"

#define OUT_CAP (8u << 20)

static void fail(const char *what, const char *msg);

static uint64_t fnv_words(const uint8_t *p, size_t n)
{
    uint64_t h = 0xcbf29ce484222325ULL, w;
    size_t i;
    for (i = 0; i + 8 <= n; i += 8) {
        w = 0;
        for (size_t k = 0; k < 8; k++) w |= (uint64_t)p[i + k] << (8 * k);
        h = (h ^ w) * 0x100000001b3ULL;
    }
    if (i < n) {
        w = 0;
        for (size_t k = 0; i + k < n; k++) w |= (uint64_t)p[i + k] << (8 * k);
        h = (h ^ w) * 0x100000001b3ULL;
    }
    return h;
}

static uint32_t magic_of(const uint8_t *p) { return (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24; }

static int starts_as_skippable(const uint8_t *p, size_t n)
{
    return n >= 4 && (magic_of(p) & ZSTD_MAGIC_SKIPPABLE_MASK) == ZSTD_MAGIC_SKIPPABLE_START;
}

static int starts_as_zstd(const uint8_t *p, size_t n)
{
    return (n >= 4 && magic_of(p) == ZSTD_MAGICNUMBER) || starts_as_skippable(p, n);
}

/* Everything the source gives, up to OUT_CAP bytes (*capped then). */
static mr_status read_all(mr__source *s, char *out, size_t room, size_t *n, int *capped, mr__error *err)
{
    mr_status st;
    *n = 0;
    *capped = 0;
    for (;;) {
        size_t got, ask = room < OUT_CAP - *n ? room : OUT_CAP - *n;
        if (ask == 0) {
            *capped = 1;
            return MR_OK;
        }
        st = mr__source_read(s, out + *n, ask, &got, err);
        if (st != MR_OK) return st;
        if (got > ask) fail("the source wrote more than it was offered", "");
        if (got == 0) return MR_OK;
        *n += got;
    }
}

enum { WHOLE_OK, WHOLE_ERROR, WHOLE_TRUNCATED, WHOLE_CAPPED };

/* The stream decoded in calls that each get all the input and output left. */
static int decode_whole(ZSTD_DStream *ds, const uint8_t *in, size_t n, char *out, size_t *nout)
{
    ZSTD_inBuffer ib = {in, n, 0};
    ZSTD_outBuffer ob = {out, OUT_CAP, 0};
    size_t r = 0;
    ZSTD_initDStream(ds);
    /* the hint of the last call that did anything: a call after the end
     * of a frame waits for the next one's header */
    for (;;) {
        size_t in_before = ib.pos, out_before = ob.pos, hint = ZSTD_decompressStream(ds, &ob, &ib);
        if (ZSTD_isError(hint)) return WHOLE_ERROR;
        if (ob.pos == ob.size) return WHOLE_CAPPED;
        if (ib.pos == in_before && ob.pos == out_before) break;
        r = hint;
    }
    *nout = ob.pos;
    return r == 0 ? WHOLE_OK : WHOLE_TRUNCATED;
}

/* RFC 8878 3.1.1.1.4: a frame's header may give the size of its content,
 * which its blocks must then make (the zstd tool refuses a frame whose
 * blocks make another size).  zstd's stream decoder checks that only when
 * it has room for the whole frame at once, so for a stream it read whole
 * this decodes each frame alone and holds it to its header.  1 when some
 * frame's blocks make another size than its header gives; 0 when none
 * does, or when zstd cannot walk the stream frame by frame (its legacy
 * frames). */
static int content_size_differs(ZSTD_DStream *ds, const uint8_t *p, size_t n)
{
    static char *scratch;
    size_t got;
    if (scratch == NULL && (scratch = malloc(OUT_CAP)) == NULL) abort();
    while (n > 0) {
        size_t k = ZSTD_findFrameCompressedSize(p, n);
        unsigned long long size;
        if (ZSTD_isError(k) || k == 0 || k > n) return 0;
        size = ZSTD_getFrameContentSize(p, k);
        if (!starts_as_skippable(p, k) && size != ZSTD_CONTENTSIZE_UNKNOWN && size != ZSTD_CONTENTSIZE_ERROR &&
            (decode_whole(ds, p, k, scratch, &got) != WHOLE_OK || got != size))
            return 1;
        p += k;
        n -= k;
    }
    return 0;
}

/* zstd's legacy frames (formats 0.1 to 0.7, before RFC 8878; their magic
 * numbers 0xFD2FB51E to 0xFD2FB527, recalled from zstd's zstd_legacy.h,
 * not checked against it): 1 when a frame of the stream starts with one. */
static int legacy_magic(uint32_t m) { return m >= 0xFD2FB51Eu && m <= 0xFD2FB527u; }

static int has_legacy_frame(const uint8_t *p, size_t n)
{
    while (n >= 4) {
        size_t k;
        if (legacy_magic(magic_of(p))) return 1;
        k = ZSTD_findFrameCompressedSize(p, n);
        if (ZSTD_isError(k) || k == 0 || k > n) return 0;
        p += k;
        n -= k;
    }
    return 0;
}

static void compare_with_whole(const uint8_t *in, size_t n, const char *out, size_t nout, mr_status st,
                               const mr__error *err, char *want)
{
    static ZSTD_DStream *ds;
    size_t nwant = 0;
    int whole;
    if (ds == NULL && (ds = ZSTD_createDStream()) == NULL) abort();
    whole = decode_whole(ds, in, n, want, &nwant);
    if (whole == WHOLE_CAPPED) return;
    if (whole == WHOLE_OK && content_size_differs(ds, in, n)) {
        if (st == MR_OK) fail("the source read a frame whose blocks make another size than its header gives", "");
        return;
    }
    if (whole != WHOLE_OK) {
        /* Which failure is not compared: zstd's decoder of its legacy
         * frames (magic 0xFD2FB527, accepted after a first frame) can call
         * the same bytes corrupt or unfinished depending on how they are fed. */
        if (st == MR_OK) fail(whole == WHOLE_ERROR ? "the source read a stream zstd rejects" : "the source read a truncated stream", "");
        return;
    }
    /* zstd's stream decoder reads some legacy frames given whole that it
     * calls corrupt fed a read at a time ("Unknown frame descriptor"), as
     * the source feeds it: a refusal, with the input named, is all that
     * is asked there. */
    if (st != MR_OK && !has_legacy_frame(in, n)) fail("the source failed on a stream zstd reads", err->msg);
    if (st != MR_OK) return;
    if (nwant != nout || memcmp(want, out, nout) != 0) fail("the source's bytes differ from zstd's", "");
}

/* What the source must call the stream, from its first bytes alone: zstd
 * (RFC 8878's magic or a skippable frame's), gzip (RFC 1952's 1f 8b), or
 * plain text. */
static int expected_compression(const uint8_t *p, size_t n)
{
    if (starts_as_zstd(p, n)) return MR__COMPRESSION_ZSTD;
    if (n >= 2 && p[0] == 0x1f && p[1] == 0x8b) return MR__COMPRESSION_GZIP;
    return MR__COMPRESSION_NONE;
}

/* The stream as the file the source opens. */
static void put_file(int fd, const uint8_t *p, size_t n)
{
    if (ftruncate(fd, 0) != 0 || (n > 0 && pwrite(fd, p, n, 0) != (ssize_t)n)) abort();
}

/* The source reads in (n bytes) from an in-memory file by its path, in
 * raw reads of read_size bytes, offering room bytes a call, its zstd
 * frames decoded by `threads` threads (1: the stream decoder alone): every
 * check at the top of fuzz_zstd.c.  Returns the frames the threads
 * decoded (mr__source_parallel_frames) when the read succeeded whole,
 * else 0. */
static uint64_t read_and_check(const uint8_t *in, size_t n, size_t read_size, size_t room, int threads)
{
    static int fd = -1;
    static char path[64], *out, *want;
    size_t nout;
    uint64_t parallel = 0;
    int capped, zstd;
    mr__source *s;
    mr__error err;
    mr_status st;
    if (fd < 0) {
        fd = memfd_create("millrace-fuzz-zstd", 0);
        out = malloc(OUT_CAP);
        want = malloc(OUT_CAP);
        if (fd < 0 || out == NULL || want == NULL) abort();
        snprintf(path, sizeof path, "/proc/self/fd/%d", fd);
    }
    put_file(fd, in, n);
    mr__error_clear(&err);
    if (mr__source_open(&s, path, "in.zst", read_size, -1, &err) != MR_OK) fail("cannot open", err.msg);
    if (threads > 1) mr__source_set_threads(s, threads);
    st = read_all(s, out, room, &nout, &capped, &err);
    zstd = mr__source_is_zstd(s);
    if (st != MR_OK && st != MR_ERR_FORMAT) fail("a read gave a status other than OK or malformed input", err.msg);
    if (st != MR_OK && (err.status != st || strstr(err.msg, "in.zst") == NULL)) fail("the message does not name the input", err.msg);
    if (zstd != expected_compression(in, n)) fail("a compression recognised by other than its magic", "");
    if (!capped && st == MR_OK) {
        if (mr__source_raw_bytes(s) != n) fail("raw bytes miscounted", "");
        if (mr__source_out_bytes(s) != nout) fail("output bytes miscounted", "");
        if (mr__source_checksum(s) != fnv_words(in, n)) fail("checksum differs from FNV-1a over the words", "");
        parallel = mr__source_parallel_frames(s);
    }
    if (!zstd && (st != MR_OK || nout != n || memcmp(out, in, n) != 0))
        fail("plain input did not come out as it went in", err.msg);
    /* gzip has its own target (fuzz_gzip) with zlib as the reference */
    if (zstd == MR__COMPRESSION_ZSTD && !capped) compare_with_whole(in, n, out, nout, st, &err, want);
    mr__source_close(s);
    return parallel;
}

#endif
