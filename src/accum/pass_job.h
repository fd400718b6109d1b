/* pass_job.h - what a pass computes, as a table of operations the pass
 * engine (pass.c) calls: the engine owns the threads, the ring of slots,
 * reading (the stream, a plain file by the first pass's map, kept blocks),
 * block order, progress and stop, and the buffers handed from pass to
 * pass; a job owns everything else.  The engine is an ordered reduction:
 *
 *   open      once, before the header is read: the job's state, the
 *             result zeroed
 *   slot_init once per ring slot (the columns are bound): the job's
 *             per-block partial result, in slot->part
 *   start     once, after the header and the slots, before any worker
 *   worker_init / worker_release   once per worker: its scratch, in
 *             worker->part
 *   wants_packed   on a worker, after a block is decoded from its chunk:
 *             whether the engine should pack it (for the job to keep)
 *   compute   on a worker: the block's partial result into slot->part;
 *             a failure goes to slot->st and slot->err
 *   add       on the calling thread, block by block in block order: the
 *             partial result added into the job's totals; rows a job
 *             writes out are written here, so in input order
 *   finish    once, after the last block and the threads' end (st: how
 *             the pass went so far; the result's source fields are set)
 *   slot_release, close   tear-down, also after a failure
 *
 * The order in which add sees blocks is the numeric contract: block
 * numbers alone decide it, never thread timing (accum/partial.h gives
 * the order of additions within a pass). */
#ifndef MR_PASS_JOB_H
#define MR_PASS_JOB_H

#include <stdint.h>
#include "accum/accumulate.h"
#include "accum/decode.h"
#include "input/chunk.h"

/* pass.h includes this header and defines these */
struct mr__pass_cfg;
struct mr__pass_result;
struct mr__pass_pool;

/* One block in the ring, as a job sees it. */
typedef struct mr__pass_slot {
    uint64_t index;           /* block number, from the first data row */
    mr__chunk *chunk;         /* its rows, when it was read from the input */
    mr__block block;          /* decoded or unpacked here */
    const mr__block *use;     /* the block to compute from */
    int decoded;              /* use came from chunk on this pass (not from a store) */
    uint64_t raw_bytes;       /* input consumed when the chunk was complete */
    char *packed;             /* the block packed (wants_packed), packed_len bytes */
    size_t packed_len;        /* 0: nothing packed */
    void *part;               /* the job's partial result for this block */
    mr_status st;
    mr__error err;
    /* the engine's own */
    int state;
    const char *kept;
    size_t kept_index;
} mr__pass_slot;

/* One worker, as a job sees it. */
typedef struct mr__pass_worker {
    size_t number;
    mr__decoder dec;
    void *part;               /* the job's scratch for this worker */
} mr__pass_worker;

/* What the engine tells a job about the pass. */
typedef struct mr__pass_env {
    const struct mr__pass_cfg *cfg;
    struct mr__pass_result *res;
    size_t nworkers;
    mr__pass_worker **worker; /* nworkers of them, once started */
    int plain;                /* the input is plain text (not zstd) */
} mr__pass_env;

typedef struct mr__pass_job_ops {
    const char *name;
    int packs;                /* its slots need a packing buffer */
    int raw_rows;             /* compute reads slot->chunk's rows itself:
                                 the engine decodes nothing */
    mr_status (*open)(const mr__pass_env *env, void **job, mr__error *err);
    mr_status (*slot_init)(void *job, mr__pass_slot *s, mr__error *err);
    mr_status (*start)(void *job, mr__error *err);
    mr_status (*worker_init)(void *job, mr__pass_worker *w, mr__error *err);
    int (*wants_packed)(void *job, const mr__pass_slot *s);
    void (*compute)(void *job, mr__pass_worker *w, mr__pass_slot *s);
    mr_status (*add)(void *job, mr__pass_slot *s, mr__error *err);
    mr_status (*finish)(void *job, mr_status st, mr__error *err);
    void (*worker_release)(void *job, mr__pass_worker *w);
    void (*slot_release)(void *job, mr__pass_slot *s);
    void (*close)(void *job);
} mr__pass_job_ops;

extern const mr__pass_job_ops mr__job_scan; /* job_scan.c: the first pass */
extern const mr__pass_job_ops mr__job_irls; /* job_irls.c: an IRLS pass */
extern const mr__pass_job_ops mr__job_score; /* job_score.c: a fit applied to rows */
extern const mr__pass_job_ops mr__job_meat; /* job_meat.c: the sandwich's meat */
extern const mr__pass_job_ops mr__job_survey; /* job_survey.c: a file's columns described */

/* Services of the engine for jobs. */
/* The block's own row error, if it failed (fail mode). */
mr_status mr__pass_block_status(const mr__pass_slot *s, mr__error *err);
/* The block as the store's next one; a cache file that cannot be written
 * is given up for the rest of the pass (res->store_failed). */
mr_status mr__pass_keep_block(const struct mr__pass_cfg *cfg, struct mr__pass_result *res, mr__pass_slot *s,
                              mr__error *err);
/* Whether blocks of this pass are packed for the store. */
int mr__pass_store_packs(const struct mr__pass_cfg *cfg);
/* n doubles of level totals, zeroed: those the pool kept when of that
 * size (their pages already mapped), else new; NULL when out of memory. */
double *mr__pass_pool_take_levels(struct mr__pass_pool *pool, size_t n);
/* A workspace for worker i from the pool (1), or none kept (0); and back. */
int mr__pass_pool_take_workspace(struct mr__pass_pool *pool, const mr__design *d, size_t i, mr__workspace *ws);
void mr__pass_pool_keep_workspace(struct mr__pass_pool *pool, const mr__design *d, size_t nworkers, size_t i,
                                  mr__workspace *ws);

#endif
