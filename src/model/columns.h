/* columns.h - the model's columns found in the file header.
 *
 * Binding turns names into field positions once, so that per row the
 * decoder only asks "is field k used, and as what?". */
#ifndef MR_COLUMNS_H
#define MR_COLUMNS_H

#include <stddef.h>
#include "common/levels.h"
#include "model/spec.h"

typedef enum mr__use {
    MR__USE_OUTCOME,
    MR__USE_TRIALS,
    MR__USE_WEIGHT,
    MR__USE_OFFSET,
    MR__USE_EXPOSURE,
    MR__USE_NUMERIC,
    MR__USE_FACTOR,
    MR__USE_CLUSTER   /* the cluster column of robust standard errors alone:
                         its cells are told apart, never parsed */
} mr__use;

typedef struct mr__column {
    const char *name; /* points into the spec */
    size_t field;     /* 0-based position in the row */
    mr__use use;
    int var;          /* index among numerics or factors; -1 otherwise */
} mr__column;

typedef struct mr__binding {
    char **header;
    size_t nfields;
    mr__column *col;
    size_t ncol;
    int *col_of_field; /* nfields entries, -1 = not used */
    size_t nnum, nfac;
    /* Column index of each numeric / factor variable, in declaration order. */
    size_t *num_col, *fac_col;
    /* Per numeric: 1 when the first pass counts its distinct values (a
     * spline's column: its knots come from them); ncounted of them. */
    unsigned char *counted;
    size_t ncounted;
    int has_trials, has_weight, has_offset, has_exposure;
    /* Bound column of each role (mr__use up to MR__USE_EXPOSURE), -1 if absent. */
    int role_col[MR__USE_EXPOSURE + 1];
    /* has_cluster: the bound column cluster_col's cells name each row's
     * cluster (a column of its own, or one the model uses too); a zeroed
     * binding has none. */
    int has_cluster, cluster_col;
    /* has_many: factor variable many_fac is declared `many` (a zeroed
     * binding has none). */
    int has_many, many_fac;
} mr__binding;

/* The most levels factor variable f may have. */
static inline size_t mr__factor_level_limit(const mr__binding *b, size_t f)
{
    return b->has_many && (size_t)b->many_fac == f ? MR__MAX_MANY_LEVELS : MR__MAX_LEVELS;
}

/* Takes ownership of `header` (nfields names).  Errors: a model column not
 * in the header, a duplicate header name, a column used twice. */
mr_status mr__bind(mr__binding *b, const mr__spec *spec, char **header, size_t nfields, const char *display,
                   mr__error *err);
/* After mr__bind: the column `name` also names each row's cluster (robust
 * standard errors by cluster).  A column the model uses is shared; any
 * other is bound as MR__USE_CLUSTER.  MR_ERR_USAGE when the header lacks it. */
mr_status mr__bind_cluster(mr__binding *b, const char *name, const char *display, mr__error *err);
void mr__binding_release(mr__binding *b);

#endif
