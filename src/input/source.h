/* source.h - bytes in: a file or standard input, plain or compressed
 * (zstd or gzip: the codecs of input/codec.h).
 *
 * Compression is recognised by a codec's magic bytes at the start of the
 * stream, never by the file name, and a stream of several concatenated
 * zstd frames or gzip members reads as one.  The source also counts and
 * checksums the raw bytes (as read, compressed or not) so a report can say
 * exactly which file it describes. */
#ifndef MR_SOURCE_H
#define MR_SOURCE_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"

typedef struct mr__source mr__source;

/* Opens `path` ("-" = standard input).  `read_size` is the size of each
 * raw read.  When tee_fd >= 0 every raw byte read is also written to it
 * (how standard input is kept for the later passes).  `display` names the
 * input in messages. */
mr_status mr__source_open(mr__source **out, const char *path, const char *display, size_t read_size,
                          int tee_fd, mr__error *err);
void mr__source_close(mr__source *s);
/* Before the first read: a zstd input is decompressed by `threads`
 * threads (at most MR__ZFRAME_THREADS_MAX), frame by frame
 * (input/zstd_frames.h), when it is more than 1:
 * the same bytes, in the same order, as the one-thread decoder's. */
void mr__source_set_threads(mr__source *s, int threads);
/* Frames the threads decompressed so far (0 with one thread). */
uint64_t mr__source_parallel_frames(const mr__source *s);

/* Fills buf with up to cap (> 0) decompressed bytes; *got = 0 only at the
 * end of the input.  Truncated or corrupt compressed input, and bytes after
 * the last gzip member that begin no other, are MR_ERR_FORMAT. */
mr_status mr__source_read(mr__source *s, char *buf, size_t cap, size_t *got, mr__error *err);

uint64_t mr__source_raw_bytes(const mr__source *s);  /* raw bytes consumed */
uint64_t mr__source_size(const mr__source *s);       /* file size, 0 if unknown */
uint64_t mr__source_out_bytes(const mr__source *s);  /* decompressed bytes */
/* The input's mr__compression (input/codec.h): MR__COMPRESSION_NONE for
 * plain text, whose bytes are the text itself. */
int mr__source_compression(const mr__source *s);
/* The same value, under its name from before gzip input: nonzero for any
 * compressed input, which callers read as "the raw bytes are not the text"
 * (no block map, no rereads by offset). */
int mr__source_is_zstd(const mr__source *s);
/* FNV-1a 64 of the raw bytes read so far, taken as little-endian 64-bit
 * words (the last partial word zero-padded). */
uint64_t mr__source_checksum(const mr__source *s);
/* Whether the input is a regular file (so mr__source_pread can read it). */
int mr__source_is_file(const mr__source *s);
/* n bytes from `offset` of the file as they are (never decompressed; not
 * counted nor checksummed).  Any thread may call it at any time.  The file
 * ending before offset + n is MR_ERR_IO: it changed since it was mapped. */
mr_status mr__source_pread(const mr__source *s, char *buf, size_t n, uint64_t offset, mr__error *err);
/* For a regular file: MR_ERR_IO unless its size and time are still those
 * it had at open and (read_to_end: the source was read to its end) the
 * bytes read are its size at open.  A file cut, grown or written while a
 * pass reads it would otherwise be fitted on whatever rows it happened to
 * have, the file read once by a collapsed fit included. */
mr_status mr__source_check_unchanged(const mr__source *s, int read_to_end, mr__error *err);
/* Identity of the opened file (size and modification time) so a later
 * pass can tell that the file changed under the fit. */
void mr__source_identity(const mr__source *s, uint64_t *size, int64_t *mtime_ns);

#endif
