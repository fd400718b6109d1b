/* threads.h - a loop split over a few short-lived threads, for work done
 * between passes (the pass engine keeps its own workers). */
#ifndef MR_COMMON_THREADS_H
#define MR_COMMON_THREADS_H

#include <stddef.h>

/* Threads at most, the calling thread included. */
#define MR__THREADS_MAX 64

/* fn(work + t * size) for t < T (at most MR__THREADS_MAX), on T threads,
 * the calling thread taking the last; a thread that cannot be made leaves
 * its share to the calling thread.  Each share computes the same numbers
 * whichever thread runs it, so the result does not depend on T's success. */
void mr__run_threads(void *(*fn)(void *), void *work, size_t size, size_t T);

#endif
