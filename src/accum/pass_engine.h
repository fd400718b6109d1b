/* pass_engine.h - the pass engine's own state, shared by its files and
 * private to them: pass.c (the workers, the ring of slots, the ordered
 * combine, set-up and tear-down), pass_read.c (reading: the stream, a set's
 * next file, a plain file by the first pass's map, kept blocks; the reader
 * thread) and pass_pool.c (the buffers handed from pass to pass).  Jobs see
 * none of this (pass_job.h).  The pass's types are named by their struct
 * tags, as pass_job.h does: pass.h's module includes this one. */
#ifndef MR_PASS_ENGINE_H
#define MR_PASS_ENGINE_H

#include <pthread.h>
#include <stdint.h>

#include "accum/pass_job.h"
#include "input/inputset.h"
#include "input/rowsplit.h"
#include "input/source.h"

enum { SLOT_FREE, SLOT_FILLING, SLOT_FILLED, SLOT_BUSY, SLOT_DONE };

typedef mr__pass_slot slot;

typedef struct worker {
    _Alignas(64) struct engine *e; /* a worker's state starts a cache line */
    pthread_t thread;
    int started;
    mr__pass_worker w;
} worker;

typedef struct engine {
    const struct mr__pass_cfg *cfg;
    const mr__pass_job_ops *ops;
    void *job;
    mr__pass_env env;
    pthread_mutex_t mu;
    /* One condition per kind of waiter, each signalled only when that
     * waiter can go on: a wake-up costs more than the work of many rows on
     * a virtual machine. */
    pthread_cond_t slot_free;   /* the reader */
    pthread_cond_t slot_filled; /* the workers */
    pthread_cond_t slot_done;   /* the calling thread */
    slot *slots;
    size_t W;
    uint64_t next_take;     /* next block a worker may take */
    uint64_t next_combine;  /* next block to add */
    uint64_t emitted;       /* blocks handed over by the reader */
    uint64_t rows_done;     /* rows in the blocks added so far */
    int reader_done, abort;
    int by_map;             /* workers read the file's blocks by the first pass's map */
    mr_status reader_st;
    mr__error reader_err;
    mr__source *src;
    mr__splitter sp;
    worker *workers;
    mr__pass_worker **worker_view;
    size_t nworkers;
    pthread_t reader;
    int reader_started;
    char *buf;
    size_t buf_cap, pending_off, pending_len;
    uint64_t bytes_total;   /* the input's size, or the set's */
    /* a set of files (cfg->set): the one being read, the raw bytes of
     * those before it, each one's identity, the first one's header */
    size_t file;
    uint64_t raw_before;
    mr__file_identity *files;
    char *first_header;
    size_t first_header_len;
} engine;

/* pass.c: the kept blocks a replay takes (every stride-th); the ring's
 * slots made (from the pool when it kept some); workers to fetch blocks
 * [lo, n), or the range's within them, with no reader. */
size_t mr__pass_replay_stride(const struct mr__pass_cfg *cfg);
mr_status mr__pass_init_slots(engine *e, mr__error *err);
void mr__pass_fetch_between(engine *e, uint64_t lo, uint64_t n);

/* pass_read.c: the input opened, its header read and bound, the first slot
 * ready for the reader (or the pass set to go by the map); the reader
 * thread; a worker's own block (by the map, or kept); the input's
 * identity and checksum into the result. */
mr_status mr__pass_begin_stream(engine *e, mr__error *err);
void *mr__pass_reader_main(void *arg);
void mr__pass_fetch_block(const engine *e, slot *s);
void mr__pass_finish_source(engine *e, struct mr__pass_result *res);

/* pass_pool.c: slot i's buffers from the pool (1) or none kept (0); slot
 * i's buffers left to the pool (1), or 0 when it has no room for them. */
int mr__pass_pool_take_slot(struct mr__pass_pool *pool, const mr__binding *b, size_t i, slot *s);
int mr__pass_pool_leave_slot(struct mr__pass_pool *pool, const mr__binding *b, size_t W, size_t i, slot *s);

#endif
