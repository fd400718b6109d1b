/* first_bytes.h - the first pass's result as bytes and back, bit for bit:
 * everything later passes and the published fit take from it, so that a
 * checkpoint (fit/checkpoint.c), or another process, can carry it.
 *
 * THE ENCODING (version 1), little-endian (common/bytes.h: integers as
 * u64, doubles as their IEEE-754 bits, text as a u64 length and bytes):
 *   "MRFP", u32 version
 *   the input: size, mtime (ns), raw bytes, decompressed bytes, checksum,
 *     compression
 *   the shape: bound columns, numerics, factors
 *   the scan sums (accum/scan.h): counts of rows (read, used, incomplete,
 *     bad, positive weight, fractional, outcome not whole), missing per column,
 *     per numeric sum / deviation scale / scaled squares / least / greatest
 *     value, sw, swy, swe,
 *     swoff, the log-likelihood constant, the bad rows shown (line,
 *     message); the value counts (a flag, counts_failed, then per numeric
 *     its sorted distinct values and counts, total, min, max, over, failed)
 *   each worker's factor levels: workers, then per worker and factor the
 *     levels by their numbers (text each)
 *   each worker's outcome counts (accum/level_outcomes.h): a flag, then
 *     per worker whether they are whole; if so the tables of cells (pairs
 *     of factors, then triples), per factor its levels' counts (rows,
 *     above 0, below the maximum) by the worker's level numbers, per table
 *     its cells (the key's two 32-bit halves: a pair's two numbers; counts)
 *   the block map: blocks, usable, mostly blank, then per block offset,
 *     end, first line, rows' checksum, rows
 *   collapsed, store incomplete; with collapsed: the merge's key columns,
 *     each one's values in order of first appearance (text), the patterns
 *     (count, key words), each one's four sums and its key words.
 * Not carried: the warm-start sample and kept blocks (a resumed fit has
 * taken its start already, and its first IRLS pass keeps blocks afresh),
 * a failed cache's message. */
#ifndef MR_FIRST_BYTES_H
#define MR_FIRST_BYTES_H

#include "accum/pass.h"
#include "common/bytebuf.h"

#define MR__FIRST_VERSION 1u

/* Appends res's encoding (ncol, nnum, nfac: the binding's) to b; the value
 * counts are finished (sorted) on the way, which any later use does too.
 * b->failed on out of memory. */
void mr__first_encode(mr__pass_result *res, size_t ncol, size_t nnum, size_t nfac, mr__bytebuf *b);

/* A zeroed res filled from the bytes at r (advanced past them); the shape
 * read in *ncol, *nnum, *nfac.  MR_ERR_IO on bytes that are not a version-1
 * result, MR_ERR_NO_MEMORY; on failure res is released. */
mr_status mr__first_decode(mr__byteread *r, mr__pass_result *res, size_t *ncol, size_t *nnum, size_t *nfac,
                           mr__error *err);

#endif
