/* multi.h - several fits of one file sharing its first pass (multi.c). */
#ifndef MR_MULTI_H
#define MR_MULTI_H

#include "fit/fitter.h"

/* Fits each of the n fitters' models to `path` as mr_fitter_run would
 * fit it alone (the same bits), reading, decompressing and cutting the
 * rows of the first pass once for all (accum/job_fanout.c); each run then
 * goes on alone, over its own kept blocks, patterns or the input again.
 * out[m] receives each fit (the caller frees them).  On failure every
 * out[m] is NULL, *failed names the run at fault (n when none is: the
 * input itself) and that fitter's message says why (the input's fault is
 * in the first fitter's). */
mr_status mr__fit_shared(mr_fitter *const *f, size_t n, const char *path, mr_fit **out, size_t *failed);

#endif
