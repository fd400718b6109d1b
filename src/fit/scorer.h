/* scorer.h - the struct behind mr_scorer, for output/score_groups.c,
 * which writes its observed/expected table. */
#ifndef MR_SCORER_H
#define MR_SCORER_H

#include <stdint.h>
#include "common/error.h"
#include "common/levels.h"
#include "millrace.h"

/* The groups of the last run, in order of first appearance: key i is
 * groups.name[i], each key column's cell as its 4-byte little-endian length
 * and bytes. */
typedef struct mr__score_groups {
    mr__levelset groups;
    double *obs, *exp, *expo; /* expo NaN without an exposure */
    double *prior;            /* sum of prior weights (a binomial's trials) */
    uint64_t *rows;
    size_t n;
} mr__score_groups;

struct mr_scorer {
    const mr_fit *fit;
    mr__error err;
    char **keep, **by;
    size_t nkeep, nby;
    double level;
    int blank, threads;
    unsigned columns; /* mr__score_cfg.columns */
    uint64_t count[4];
    char *data; /* the last run's input, for the groups' output checks */
    mr__score_groups g;
};

/* The most groups held in memory. */
#define MR__SCORE_MAX_GROUPS 1000000

void mr__score_groups_release(mr__score_groups *g);

#endif
