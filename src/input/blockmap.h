/* blockmap.h - where each block of rows lies in a plain file.
 *
 * The first pass over a file notes, block by block, the bytes a chunk took
 * (accum/pass.c).  Where those bytes are the file's own (no compression),
 * a later pass needs no reader thread: each worker reads the block it
 * takes straight from the file and cuts its rows itself
 * (mr__splitter_recut), so the serial stage of a pass disappears.  The
 * blocks, hence every partial sum, are the same as the stream's. */
#ifndef MR_BLOCKMAP_H
#define MR_BLOCKMAP_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"
#include "input/chunk.h"

typedef struct mr__block_span {
    uint64_t offset, end; /* bytes [offset, end) of the stream */
    uint64_t first_line;
    uint64_t rows_hash;   /* mr__chunk_rows_hash of the block first read */
    uint32_t nrows;
} mr__block_span;

typedef struct mr__block_map {
    mr__block_span *span; /* block i at span[i] */
    size_t n, cap;
    int usable;           /* set once complete and the stream is the file's bytes */
    int mostly_blank;     /* some block's bytes are mostly blank lines: see below */
} mr__block_map;

/* The checksum of a chunk's rows (its bytes, blank lines left out): a block
 * reread by the map must give the first read's, or the file changed, even
 * where an edit kept its size, time and line ends.  Workers take it, so
 * it costs no serial time: 0.75 instructions a byte where decoding takes
 * about 38, 1.4% of a 7-pass --no-cache fit's instructions (callgrind,
 * 200,000 rows of build/synth). */
uint64_t mr__chunk_rows_hash(const mr__chunk *c);

/* Appends chunk c as the next block (rows_hash: its mr__chunk_rows_hash);
 * a zeroed map is empty.  A worker reads a block whole, blank lines
 * and all, where the stream skips them as they come: a block holding a
 * long run of them (gigabytes, in a file of blank lines) would take that
 * much memory.  Such a block marks the map mostly_blank, and later passes
 * then stream the file. */
mr_status mr__block_map_add(mr__block_map *m, const mr__chunk *c, uint64_t rows_hash, mr__error *err);
void mr__block_map_release(mr__block_map *m);

#endif
