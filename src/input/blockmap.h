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

typedef struct mr__block_span {
    uint64_t offset, end; /* bytes [offset, end) of the stream */
    uint64_t first_line;
    uint32_t nrows;
} mr__block_span;

typedef struct mr__block_map {
    mr__block_span *span; /* block i at span[i] */
    size_t n, cap;
    int usable;           /* set once complete and the stream is the file's bytes */
} mr__block_map;

/* Appends the next block; a zeroed map is empty. */
mr_status mr__block_map_add(mr__block_map *m, uint64_t offset, uint64_t end, uint64_t first_line, uint32_t nrows,
                            mr__error *err);
void mr__block_map_release(mr__block_map *m);

#endif
