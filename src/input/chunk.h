/* chunk.h - a run of whole rows cut from the decompressed stream.
 *
 * Chunks are cut at fixed row counts (MR__BLOCK_ROWS), counted from the
 * first data row, never at buffer boundaries.  That makes a chunk the unit
 * of every partial sum: results then depend only on the data, not on read
 * sizes or thread counts. */
#ifndef MR_CHUNK_H
#define MR_CHUNK_H

#include <stddef.h>
#include <stdint.h>

#define MR__BLOCK_ROWS 16384

typedef struct mr__chunk {
    uint64_t index;      /* block number */
    uint64_t first_line; /* physical line (1-based) of the first row */
    uint64_t offset;     /* stream byte where the chunk starts (after the row before) */
    uint64_t end;        /* and where it ends, once handed over */
    uint32_t nrows;
    int has_quote;       /* a '"' somewhere: the full CSV parser is needed */
    char *data;
    size_t len, cap;
    size_t row_start[MR__BLOCK_ROWS + 1]; /* row r is data[row_start[r] .. row_start[r+1]) */
    /* line of row r minus first_line: 64 bits, as a chunk may span more
     * than 2^32 lines (blank ones) */
    uint64_t row_line[MR__BLOCK_ROWS];
    /* A set of files (inputset.h): each row's file, as an index into
     * names; NULL names for a single input (row_file then unused).  Line
     * numbers are each file's own, so first_line + row_line[r] is taken
     * modulo 2^64 across a file boundary. */
    const char *const *names;
    uint32_t row_file[MR__BLOCK_ROWS];
} mr__chunk;

/* The name of the file row r came from, `display` for a single input. */
static inline const char *mr__chunk_row_display(const mr__chunk *c, uint32_t r, const char *display)
{
    return c->names != NULL ? c->names[c->row_file[r]] : display;
}

#endif
