/* group_bytes.h - an IRLS pass's group totals as bytes, one after another,
 * and their sum back in group order: how processes that each own a range
 * of whole groups (accum/partial.h) reach the bits one process would.
 *
 * Each group: u64 length, its totals (partial.h's encoding, with the
 * group's first block and block count), then its calibration bins
 * (accum/calibration.h, not in partial.h's encoding): u64 lo, u64 hi,
 * (hi - lo) x MR__CB_N f64.  Adding the groups' totals into a zeroed pass
 * total in order is what job_irls.c does with them on one process. */
#ifndef MR_GROUP_BYTES_H
#define MR_GROUP_BYTES_H

#include "accum/partial.h"
#include "common/bytebuf.h"

/* Appends the group's totals s (p x p) covering range to b (b->failed on
 * out of memory). */
void mr__group_encode(const mr__block_sums *s, size_t p, mr__partial_range range, mr__bytebuf *b);

/* Adds every group at r, in the order they come, into total (p x p, from
 * mr__sums_init, its calibration bins kept); *next_block is the first
 * block the groups must start at (contiguous blocks, advanced past them).
 * MR_ERR_IO on bytes that are not such groups, MR_ERR_NO_MEMORY. */
mr_status mr__group_add_all(mr__byteread *r, size_t p, mr__block_sums *total, uint64_t *next_block, mr__error *err);

/* The same for a pass with k totals per group (the meat pass's rows and
 * bread): each group's k entries follow one another, entry i added into
 * totals[i], each total's groups contiguous from next_block[i]. */
mr_status mr__group_add_each(mr__byteread *r, size_t p, mr__block_sums *const *totals, size_t k,
                             uint64_t *next_block, mr__error *err);

#endif
