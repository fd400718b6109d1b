/* pass.h - one read of the data, spread over threads.
 *
 * DESIGN.  A reader thread decompresses and cuts the stream into chunks of
 * MR__BLOCK_ROWS rows; N workers decode chunks and compute each block's
 * partial result; the calling thread adds the partial results in block
 * order.  What the partial result is, and what adding it does, is the
 * pass's job (pass_job.h: the first pass is job_scan.c, an IRLS pass
 * job_irls.c); this engine only runs the ordered reduction.
 * Block i lives in slot i % W of a ring of W slots, and the reader may
 * start block i only once block i - W has been added, so memory is bounded
 * by W blocks whatever the file size, and the order of additions (hence
 * every bit of the result) is independent of thread timing, thread count
 * and read size.
 *
 * Given a store (accum/store.h), the first pass keeps each decoded block
 * (or, if that pass could not keep them all, the first IRLS pass does), and
 * later passes hand the kept blocks to the workers instead of reading the
 * file: the same per-block arithmetic, so the same bits.
 *
 * The first pass also maps where each block lies in the stream
 * (input/blockmap.h).  Given that map of a plain file, a later pass has no
 * reader: each worker reads the next block from the file itself and cuts
 * its rows, and a pass over the rows no longer waits on one thread. */
#ifndef MR_PASS_H
#define MR_PASS_H

#include <stdint.h>
#include "accum/accumulate.h"
#include "accum/scan.h"
#include "accum/store.h"
#include "input/blockmap.h"
#include "input/inputset.h"
#include "accum/decode.h"
#include "accum/level_outcomes.h"
#include "millrace.h"
#include "accum/pass_job.h"
#include "accum/partial.h"
#include "common/bytebuf.h"

/* Which job the pass runs: mr__job_scan or mr__job_irls. */
typedef enum mr__pass_kind { MR__PASS_SCAN, MR__PASS_IRLS, MR__PASS_SCORE, MR__PASS_MEAT, MR__PASS_SURVEY } mr__pass_kind;

/* Memory one pass leaves to the next pass of the same fit: its slots'
 * buffers (a chunk, a decoded block, a packed block: about 3 MiB each) and
 * its workers' scratch (a block of the design each).  Taken fresh from the
 * kernel for every pass, and handed back after it, they cost a 2-worker
 * pass over 2e6 rows a third of its time in page faults and in the
 * interrupts that unmapping sends to every core.  A zeroed pool is empty;
 * whoever runs the passes owns it and empties it with
 * mr__pass_pool_release once the last pass is over.  Private to
 * pass_pool.c. */
typedef struct mr__pass_pool {
    const mr__binding *bind;    /* what the kept blocks were made for */
    struct mr__pool_slot *slot; /* nslot of them */
    size_t nslot;
    const mr__design *design;   /* what the kept workspaces were made for */
    mr__workspace *ws;          /* nws of them, a zeroed one empty */
    size_t nws;
    /* An eliminated factor's pass totals (accum/levelsums.h), nlev_doubles
     * of them, NULL: none kept.  A factor of 10^5 levels and 60 columns
     * takes 51 MB a pass: fresh from the kernel, its first writes cost each
     * pass a page fault per 4 KiB, each a copy-on-write with a TLB
     * shootdown to the other cores (a sixth of a 2-worker fit's time). */
    double *lev;
    size_t nlev_doubles;
} mr__pass_pool;

/* Keeps *lev, n doubles, for the next pass's totals (*lev NULL then),
 * when the pool holds none; else leaves it. */
void mr__pass_pool_keep_levels(mr__pass_pool *pool, double **lev, size_t n);

void mr__pass_pool_release(mr__pass_pool *pool);


/* Called on the calling thread once the header row is read. */
typedef mr_status (*mr__header_fn)(void *user, const char *line, size_t len, mr__error *err);

typedef struct mr__pass_cfg {
    mr__pass_kind kind;
    const char *path;     /* what to open ("-" = standard input) */
    const mr__inputset *set; /* NULL, or several files read as one (path unused) */
    const char *display;  /* the name in messages */
    size_t read_size;
    int tee_fd;           /* -1, or where to copy raw input (standard input) */
    int nthreads;
    mr__header_fn on_header;
    void *header_user;
    mr__decode_cfg *dcfg; /* completed by on_header on the first pass */
    const mr__irls_point *point; /* MR__PASS_IRLS: its design gives p */
    mr__store *store;     /* NULL, or kept blocks (memory or cache file) */
    int store_fill;       /* 1: keep decoded blocks in store; 0 with store: replay it.
                             The first pass keeps its blocks when given a store. */
    size_t replay_stride; /* with a store to replay: every stride-th block (0, 1: all) */
    const mr__block_map *map; /* MR__PASS_IRLS reading the file: the first pass's map */
    mr__pass_pool *pool;  /* NULL, or memory to take from and leave to the next pass */
    const void *job_arg;  /* MR__PASS_SCORE: its mr__score_cfg (accum/score.h);
                             MR__PASS_MEAT: its mr__meat_cfg (accum/meat.h);
                             MR__PASS_SURVEY: its mr__survey_cfg (accum/survey.h) */
    const mr__pass_job_ops *ops; /* NULL: the job of `kind`; else this one
                                    (job_fanout.c: several runs' jobs) */
    /* MR__PASS_IRLS on one of several processes (fit/share.h): NULL, or
     * the only blocks computed and added (whole groups); the others are
     * read from a stream and passed over, never decoded.  A store being
     * filled keeps these alone (mr__store.first_block). */
    const mr__partial_range *range;
    mr__bytebuf *groups_out; /* NULL, or each group total appended (accum/group_bytes.h) */
    int pass_number;
    mr_progress_fn progress;
    mr_progress_stop_fn progress_stop; /* nonzero: the pass fails with MR_ERR_STOPPED */
    void *progress_user;
} mr__pass_cfg;

typedef struct mr__pass_result {
    mr__scan_sums scan;    /* MR__PASS_SCAN */
    mr__block_sums sums;   /* MR__PASS_IRLS */
    uint64_t raw_bytes, out_bytes, size, checksum;
    int64_t mtime_ns;
    int zstd;
    /* A set: each file's identity (nfiles of them); the totals above are
     * then the bytes summed, the sizes summed, the newest time, the set's
     * checksum (inputset.h) and the first file's compression. */
    mr__file_identity *files;
    size_t nfiles;
    /* First pass: each worker's factor levels (nthreads decoders' sets),
     * valid until mr__pass_result_release. */
    mr__levelset **worker_levels;
    /* First pass: each worker's outcome counts by its own level numbers
     * (level_outcomes.h), likewise. */
    mr__level_outcomes **worker_outcomes;
    size_t nworkers;
    double seconds;
    /* First pass: an evenly spread sample of the blocks (every
     * sample_stride-th, at most MR__SAMPLE_BLOCKS), packed in memory, for
     * cheap fits whose coefficients start the full IRLS. */
    mr__store sample;
    uint64_t sample_stride;
    /* First pass with collapsing: the file's covariate patterns, merged in
     * block order; `collapsed` is 0 when collapsing was given up. */
    mr__pattern_merge patterns;
    int collapsed;
    /* First pass with a store: 1 when some blocks were not kept. */
    int store_incomplete;
    /* A pass filling a cache file: 1 when a write to it failed and the
     * pass went on without it (store_err says why); the store is then
     * incomplete and the caller gives it up. */
    int store_failed;
    mr__error store_err;
    /* First pass: where its blocks lay (usable when the file is plain). */
    mr__block_map map;
    /* The workers read the blocks by the map: raw_bytes counts the header
     * only, and the blocks were checked one by one instead. */
    int by_map;
    /* MR__PASS_MEAT by clusters: how many; and, streamed, 1 when a cluster
     * came back after others (the pass stopped: the file is not grouped). */
    uint64_t clusters;
    int clusters_not_grouped;
    /* MR__PASS_MEAT: X'WX at its point (the sandwich's bread, p x p upper) */
    mr__block_sums bread;
} mr__pass_result;

#define MR__SAMPLE_BLOCKS 32

mr_status mr__pass_run(const mr__pass_cfg *cfg, mr__pass_result *res, mr__error *err);
void mr__pass_result_release(mr__pass_result *res, size_t nfac);

#endif
