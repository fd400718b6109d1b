/* clusters.h - the clusters' part of the sandwich's meat (job_meat.c),
 * on the calling thread in block order: sum over clusters g of s_g s_g',
 * s_g the sum of the scores of g's rows.
 *
 * Streamed (the file grouped by the cluster column): a block's runs come
 * as keys, the first and last runs' s (which may go on in the blocks
 * beside it) and the sum of s s' over the runs between them (whole
 * clusters); a run that goes on joins the open cluster.  The closed
 * clusters' first key words are kept in a set: a cluster met again after
 * others makes mr__clusters_add_streamed fail with *not_grouped = 1 (the
 * file is not grouped; run again with a table).  A set's false match (two
 * first words alike) only sends the pass to the table.
 *
 * Table: each cluster's s, added run by run, in the order the clusters
 * first appear; s s' summed in that order at the end.
 *
 * The set or the table may take at most `limit` bytes: beyond it,
 * MR_ERR_CLUSTERS with a message saying how to go on.
 *
 * Shared by several processes (fit/share.c), a rank does not add its
 * blocks: it writes each as bytes (mr__clusters_put_block), and every
 * rank adds every rank's, in block order, through the same streamed
 * additions (mr__clusters_add_blocks): the bits of one process. */
#ifndef MR_CLUSTERS_H
#define MR_CLUSTERS_H

#include <stddef.h>
#include <stdint.h>
#include "common/bytebuf.h"
#include "common/error.h"

typedef struct mr__clusters {
    size_t p, limit;
    int table;
    const char *display;
    double *meat;        /* p x p, upper: the result (not owned) */
    size_t *nz;
    uint64_t n;          /* clusters closed (streamed) or held (table) */
    int open;
    uint64_t open_key[2];
    double *open_vec;
    uint64_t *seen;      /* streamed: closed clusters' first words, 0 empty */
    size_t seen_cap;
    uint64_t *tkey;      /* table: keys in order of appearance, 2 words each */
    double *tvec;        /* their s, p each */
    size_t tkey_cap, tvec_cap;
    size_t *slot;        /* table: index + 1 by hash, 0 empty */
    size_t slot_cap;
} mr__clusters;

mr_status mr__clusters_init(mr__clusters *c, size_t p, int table, size_t limit, double *meat, const char *display,
                            mr__error *err);
/* key: 2 words a run; vec: the first run's s, then the last run's (when
 * nruns > 1); inner: p x p, used when nruns > 2. */
mr_status mr__clusters_add_streamed(mr__clusters *c, size_t nruns, const uint64_t *key, const double *vec,
                                    const double *inner, int *not_grouped, mr__error *err);
/* vec: every run's s, p each. */
mr_status mr__clusters_add_table(mr__clusters *c, size_t nruns, const uint64_t *key, const double *vec,
                                 mr__error *err);
/* Appends a block's streamed runs (block: its number; the arguments of
 * mr__clusters_add_streamed) to b (b->failed on out of memory): u64
 * block, u64 nruns, each run's first key word, the second words of the
 * first and the last runs, their s (as there are runs), and when
 * nruns > 2 the upper triangle of inner, column by column: 16 + 8 nruns
 * + 16 (p + 1) + 4 p (p + 1) bytes at most. */
void mr__clusters_put_block(uint64_t block, size_t p, size_t nruns, const uint64_t *key, const double *vec,
                            const double *inner, mr__bytebuf *b);
/* Adds the blocks at r, written by mr__clusters_put_block, as
 * mr__clusters_add_streamed would have; *next_block is the block they must
 * start at (advanced past them).  MR_ERR_IO on bytes that are not such
 * blocks, else as mr__clusters_add_streamed. */
mr_status mr__clusters_add_blocks(mr__clusters *c, mr__byteread *r, uint64_t *next_block, int *not_grouped,
                                  mr__error *err);
/* After the last block: the open cluster closed, or the table summed. */
mr_status mr__clusters_finish(mr__clusters *c, mr__error *err);
void mr__clusters_release(mr__clusters *c);

/* M (p x p, upper) += v v' over v's non-zero entries (nz: p of scratch). */
void mr__add_outer(double *M, size_t p, const double *v, size_t *nz);

#endif
