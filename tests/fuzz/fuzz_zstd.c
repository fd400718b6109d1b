/* fuzz_zstd.c - libFuzzer target: the source reader (src/input/source.h) on
 * arbitrary bytes, plain or (possibly broken) zstd.
 *
 * Input: two bytes of sizes, then the stream, which the source reads from an
 * in-memory file (memfd) by its path.
 *   byte 0: the raw read size, 16 + 7 * b (the source's least is 16);
 *   byte 1: the room offered to each mr__source_read, 1 + 13 * b.
 *
 * Oracles:
 *   - source.h: the stream is zstd exactly when it starts with a zstd or a
 *     skippable frame's magic (RFC 8878 3.1.1, 3.1.2); plain input comes
 *     out byte for byte; a read ends with MR_OK or MR_ERR_FORMAT, never
 *     anything else, and the message names the input;
 *   - the same zstd stream decoder given the whole input and all the output
 *     room at once: the source, which feeds it a read at a time into the
 *     room each call offers, must give the same bytes and fail where it
 *     fails (an error, or the input ending inside a frame).  zstd's
 *     one-shot ZSTD_decompress is no oracle here: it writes straight into
 *     the whole output, and lets through streams the stream decoder and
 *     the zstd tool refuse (a block larger than its frame's window, which
 *     RFC 8878 3.1.1.2.4 forbids, and others reported as corrupt);
 *   - and a frame whose header gives its content size must make that many
 *     bytes (RFC 8878 3.1.1.1.4): the stream decoder checks that only with
 *     room for the whole frame, so each frame of a stream it reads is also
 *     decoded alone and held to its header; the source must refuse one
 *     that differs;
 *   - on success every raw byte was counted, and the checksum is FNV-1a 64 over
 *     the bytes as little-endian 64-bit words, the last one zero-padded.
 * Output is bounded (OUT_CAP): a few bytes of zstd can stand for gigabytes,
 * which the source would stream, but a fuzzer run cannot wait for.
 */
#define _GNU_SOURCE /* memfd_create */
#include <stdio.h>
#include <stdlib.h>

#include "zstd_whole.h"

static void fail(const char *what, const char *msg)
{
    fprintf(stderr, "fuzz_zstd: %s (message: \"%.300s\")\n", what, msg);
    abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    if (size < 2) return 0;
    (void)read_and_check(data + 2, size - 2, 16 + 7 * (size_t)data[0], 1 + 13 * (size_t)data[1], 1);
    return 0;
}
