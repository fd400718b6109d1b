/* partial.h - a pass's totals over a range of blocks, as something to add
 * and to carry: the order of additions every pass keeps, and a flat byte
 * encoding of the IRLS totals (a checkpoint, or another process, holds a
 * partial result as bytes and adds it back later, to the same bits).
 *
 * THE ORDER OF ADDITIONS (part of the numeric contract, like
 * MR__BLOCK_ROWS).  Blocks are numbered from the first data row.  Blocks
 * g*G .. g*G+G-1 (G = MR__GROUP_BLOCKS) are added in block order into a
 * zeroed group total; the group totals are added in group order into a
 * zeroed pass total.  Every run does this, on one thread or many, so a
 * process that owns whole groups can reduce them itself and hand their
 * totals on, and the root adding the group totals in order gets the bits
 * one process would have got.  A pass of at most G blocks (262,144 rows)
 * adds exactly as plain block order did. */
#ifndef MR_PARTIAL_H
#define MR_PARTIAL_H

#include <stddef.h>
#include <stdint.h>
#include "accum/accumulate.h"

#define MR__GROUP_BLOCKS 16

/* Whether block `index` closes its group (`last`: it is the pass's last). */
static inline int mr__group_closes(uint64_t index, int last)
{
    return last || (index + 1) % MR__GROUP_BLOCKS == 0;
}

/* A group's total goes into the pass's by mr__sums_add_totals
 * (accum/accumulate.h). */

/* THE ENCODING (version 2), all integers little-endian whatever the host:
 *   bytes 0-3    "MRPS"
 *   u32          version (1)
 *   u64          p
 *   u64 u64      first block, number of blocks the totals cover
 *   f64 ...      X'WX's upper triangle, column by column (p (p + 1) / 2)
 *   f64 ...      X'Wz (p)
 *   f64 x 5      deviance, Pearson, null deviance, null sum of w, of w z
 *   u64 x 2      rows out of the domain, rows at its boundary
 *   f64 x 5      the family's own sums (family.h, MR__PS_*; version 2)
 * A double goes as the u64 of its IEEE-754 bits, so every value, NaN
 * payloads and signed zeros included, comes back bit for bit. */
#define MR__PARTIAL_VERSION 2u

typedef struct mr__partial_range {
    uint64_t first_block, nblocks;
} mr__partial_range;

size_t mr__partial_size(size_t p);
/* Writes mr__partial_size(p) bytes to out. */
void mr__partial_encode(const mr__block_sums *s, size_t p, mr__partial_range range, unsigned char *out);
/* Reads totals of p columns into s (p x p, from mr__sums_init; the lower
 * triangle is left alone): MR_ERR_IO on bytes that are not version-2
 * totals of p columns, of exactly mr__partial_size(p) bytes. */
mr_status mr__partial_decode(const unsigned char *in, size_t len, size_t p, mr__block_sums *s,
                             mr__partial_range *range, mr__error *err);

#endif
