/* fuzz_zframes.c - libFuzzer target: a zstd stream of several frames read
 * by the frame threads (src/input/zstd_frames.c), through the source as a
 * fit reads it with more than one thread.
 *
 * Input: three bytes, then the stream (from an in-memory file, as in
 * fuzz_zstd.c):
 *   byte 0: the threads, 2 + b % 3 (MR__ZFRAME_THREADS_MAX is 4);
 *   byte 1: the raw read size, 16 + 7 * b: where the reading thread's
 *           reads cut the frames;
 *   byte 2: the room offered to each mr__source_read, 1 + 13 * b.
 * Streams that do not start with a zstd or skippable frame's magic are
 * not read (the threads are only ever given zstd; fuzz_zstd has the rest).
 *
 * Oracles, those of fuzz_zstd.c (zstd_whole.h): the bytes and the failures
 * of zstd's stream decoder given the whole input at once, which is also
 * what the one-thread source gives (fuzz_zstd), so the threads change
 * nothing a reader sees; the raw bytes counted and checksummed; a status
 * OK or malformed input only, naming the input.  And the frames the
 * threads report decoding are no more than the stream's frames (RFC 8878
 * 3.1: frames concatenate; skippable ones carry no text).
 */
#define _GNU_SOURCE /* memfd_create */
#include <stdio.h>
#include <stdlib.h>

#include "zstd_whole.h"

static void fail(const char *what, const char *msg)
{
    fprintf(stderr, "fuzz_zframes: %s (message: \"%.300s\")\n", what, msg);
    abort();
}

/* The zstd frames of a stream zstd reads whole, skippable frames left
 * out; UINT64_MAX when zstd cannot walk it frame by frame (its legacy
 * frames, which the stream decoder reads after a first frame, need not
 * give their sizes). */
static uint64_t count_frames(const uint8_t *p, size_t n)
{
    uint64_t frames = 0;
    while (n > 0) {
        size_t k = ZSTD_findFrameCompressedSize(p, n);
        if (ZSTD_isError(k) || k == 0 || k > n) return UINT64_MAX;
        frames += !starts_as_skippable(p, k);
        p += k;
        n -= k;
    }
    return frames;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const uint8_t *in = data + 3;
    uint64_t parallel;
    if (size < 3 || !starts_as_zstd(in, size - 3)) return 0;
    parallel = read_and_check(in, size - 3, 16 + 7 * (size_t)data[1], 1 + 13 * (size_t)data[2], 2 + data[0] % 3);
    if (parallel > 0 && parallel > count_frames(in, size - 3)) fail("the threads decoded more frames than the stream has", "");
    return 0;
}
