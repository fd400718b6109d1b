/* meat.h - what a pass of job_meat.c (the sandwich's meat, for robust
 * standard errors) is asked for, through mr__pass_cfg.job_arg.  Its result
 * is mr__pass_result.sums.xtwx (p x p, upper triangle, column-major): the
 * sum over rows of u^2 x x', or over clusters of s s' (clusters.h), and
 * with clusters mr__pass_result.clusters, their number. */
#ifndef MR_MEAT_H
#define MR_MEAT_H

#include <stddef.h>

typedef struct mr__meat_cfg {
    int clusters;   /* 1: by the binding's cluster column; 0: by rows */
    int by_levels;  /* clusters that are the design's eliminated factor's
                       levels (clusters 0): each level's score sums, as
                       rows of the result's sums.lev, and the levels with
                       rows counted in mr__pass_result.clusters */
    int table;      /* clusters: held in a table (the file is not grouped);
                       0: streamed, which stops the pass with
                       mr__pass_result.clusters_not_grouped set when a
                       cluster comes back after others */
    size_t limit;   /* bytes the clusters' bookkeeping may take */
    const char *display; /* the input's name in messages */
    /* shared by several processes, streamed clusters: each block's runs
     * appended here (clusters.h's bytes) instead of added; fit/share.c
     * adds every rank's.  NULL: added here. */
    struct mr__bytebuf *blocks_out;
} mr__meat_cfg;

#endif
