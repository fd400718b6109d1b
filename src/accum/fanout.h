/* fanout.h - one pass feeding several runs' jobs (job_fanout.c): the
 * engine reads and cuts the rows once, and each run decodes every block
 * with its own columns, missing values and decoder, computes and adds it
 * with its own job, in block order, exactly as a pass of that run alone
 * would (the same calls on the same blocks, so the same bits). */
#ifndef MR_FANOUT_H
#define MR_FANOUT_H

#include "accum/pass.h"

typedef struct mr__fanout_cfg {
    size_t n;                      /* runs */
    const mr__pass_job_ops *ops;   /* every run's job (the first pass's, say) */
    const mr__pass_cfg *const *cfg; /* each run's pass configuration */
    mr__pass_result *const *res;   /* each run's result (zeroed by the pass) */
    size_t failed;                 /* out: the run whose block or job failed
                                      the pass; n when none did */
} mr__fanout_cfg;

/* The job: cfg->job_arg is an mr__fanout_cfg (not const: `failed`). */
extern const mr__pass_job_ops mr__job_fanout;

#endif
