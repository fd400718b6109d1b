/* zstd_frames.h - a zstd file of several frames decompressed by several
 * threads, its text handed out in file order.
 *
 * DESIGN.  The thread that reads (the pass's reader) pulls raw bytes,
 * finds where each frame ends (ZSTD_findFrameCompressedSize) and queues
 * the whole compressed frame in a ring of `nthreads + 2` frame slots;
 * skippable frames (pzstd writes one before each frame, giving its size)
 * are dropped.  Worker threads take queued frames in any order and
 * decompress each into its slot's buffer; the reading thread hands the
 * slots' text out strictly in slot order, so the bytes are exactly those
 * of the one-thread stream decoder whatever the thread count.  A frame
 * boundary need not be a row boundary: the caller sees one stream.
 *
 * Memory stays flat: at most the ring's frames are held, each at most
 * MR__ZFRAME_IN_MAX compressed and MR__ZFRAME_OUT_MAX decompressed.  A
 * frame whose text would exceed that is decoded by the reading thread
 * from its slot, streamed; a frame larger than MR__ZFRAME_IN_MAX compressed,
 * or whose header gives a size over MR__ZFRAME_OUT_MAX (a file written as
 * one frame), sends the rest of the file through the one-thread stream
 * decoder: the same bytes, only not in parallel.  The limits are no
 * larger because a single-frame file of unknown size is held up to them
 * before it is known to be one. */
#ifndef MR_ZSTD_FRAMES_H
#define MR_ZSTD_FRAMES_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"

#define MR__ZFRAME_IN_MAX (8u << 20)
#define MR__ZFRAME_OUT_MAX (16u << 20)
/* At most this many threads (source.c caps the count it is given): zstd
 * decompresses text at roughly a gigabyte a second per thread (common
 * knowledge, not measured here), far more than the row parsers take, and
 * each thread adds two frames in flight to the memory held. */
#define MR__ZFRAME_THREADS_MAX 4

typedef struct mr__zframes mr__zframes;

/* Up to cap raw bytes of the input into buf; *got = 0 at its end. */
typedef mr_status (*mr__raw_pull)(void *user, char *buf, size_t cap, size_t *got, mr__error *err);

/* A decoder with `nthreads` (>= 1) workers, pulling raw input through
 * `pull`; `head` holds the bytes already read (copied). */
mr_status mr__zframes_open(mr__zframes **out, int nthreads, const char *display, mr__raw_pull pull, void *user,
                           const unsigned char *head, size_t head_len, mr__error *err);
/* Stops the workers, frees everything.  NULL is fine. */
void mr__zframes_close(mr__zframes *z);
/* Up to cap bytes of text; *got = 0 only at the end.  Corrupt or
 * truncated input is MR_ERR_FORMAT naming the input and the frame's
 * offset. */
mr_status mr__zframes_read(mr__zframes *z, char *buf, size_t cap, size_t *got, mr__error *err);
/* Frames decompressed by the workers so far (tests: proof of parallel
 * decoding). */
uint64_t mr__zframes_parallel_frames(mr__zframes *z);

#endif
