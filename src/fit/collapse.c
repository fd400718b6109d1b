/* collapse.c - rows that share their covariates, collapsed into one
 * weighted row each (the first pass found them): the blocks the IRLS passes
 * replay instead of the file, and the deviance within the patterns. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "family/family.h"
#include "fit/run.h"
int mr__collapse_mode(const mr__run *r)
{
    const mr__spec *s = &r->f->spec;
    /* a likelihood summed row by row needs each row's y (family.h) */
    if (r->f->no_collapse || r->family.estimate || r->family.ops->loglik_by_rows) return 0;
    if (s->offset == NULL && s->exposure == NULL) return r->family.ops->saturated_term != NULL;
    return r->family.ops->log_offset_patterns && mr__spec_link(s) == MR_LOG ? 2 : 0;
}

static mr_status new_pattern_block(mr__run *r, mr__block *blk, mr__error *err)
{
    MR__TRY(mr__block_init(blk, &r->bind, err));
    if (blk->prior == NULL) blk->prior = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->prior);
    blk->extra = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->extra);
    blk->cal_rows = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->cal_rows);
    blk->cal_weight = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->cal_weight);
    if (blk->prior == NULL || blk->extra == NULL || blk->cal_rows == NULL || blk->cal_weight == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* For each key column, global value number -> what a row holds: the
 * shared sorted level number of a factor, the value of a numeric. */
typedef struct pattern_values {
    int32_t **level;
    double **value;
} pattern_values;

static void release_pattern_values(pattern_values *v, size_t nfac, size_t nnum)
{
    size_t k;
    for (k = 0; v->level && k < nfac; k++) mr__free(v->level[k]);
    for (k = 0; v->value && k < nnum; k++) mr__free(v->value[k]);
    mr__free(v->level);
    mr__free(v->value);
}

static mr_status resolve_pattern_values(const mr__run *r, pattern_values *v, mr__error *err)
{
    const mr__levelset *set = r->first.patterns.values;
    size_t k, j, nfac = r->bind.nfac, nnum = r->bind.nnum;
    v->level = mr__calloc(nfac + 1, sizeof *v->level);
    v->value = mr__calloc(nnum + 1, sizeof *v->value);
    if (v->level == NULL || v->value == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; k < nfac; k++) {
        v->level[k] = mr__malloc_array(set[k].n + 1, sizeof **v->level);
        if (v->level[k] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (j = 0; j < set[k].n; j++) {
            v->level[k][j] = mr__levelset_find(&r->levels[k], set[k].name[j].str, set[k].name[j].len);
            if (v->level[k][j] < 0) return mr__fail(err, MR_ERR_INTERNAL, "a pattern names an unknown level");
        }
    }
    for (k = 0; k < nnum; k++) { /* a numeric's values are kept as their 8 bytes */
        const mr__levelset *nv = &set[nfac + k];
        v->value[k] = mr__malloc_array(nv->n + 1, sizeof **v->value);
        if (v->value[k] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (j = 0; j < nv->n; j++) memcpy(&v->value[k][j], nv->name[j].str, sizeof(double));
    }
    return MR_OK;
}

static void pattern_covariates(const mr__run *r, const pattern_values *v, size_t e, mr__block *blk, uint32_t i)
{
    const mr__pattern_table *t = &r->first.patterns.table;
    size_t k, nfac = r->bind.nfac;
    for (k = 0; k < nfac; k++) blk->lev[k * MR__BLOCK_ROWS + i] = v->level[k][mr__pattern_id(t, e, k)];
    for (k = 0; k < r->bind.nnum; k++) blk->num[k * MR__BLOCK_ROWS + i] = v->value[k][mr__pattern_id(t, e, nfac + k)];
}

/* One pattern as one row, and what the rows add beyond it. */
static void pattern_row(mr__run *r, const double *pt, mr__block *blk, uint32_t i)
{
    double a = pt[MR__PATTERN_A], b = pt[MR__PATTERN_B], c = pt[MR__PATTERN_C], d = pt[MR__PATTERN_D];
    blk->cal_rows[i] = pt[MR__PATTERN_N];
    blk->cal_weight[i] = pt[MR__PATTERN_W];
    if (r->dcfg.collapse == 1) {
        double ybar = b / a;
        blk->y[i] = ybar;
        blk->prior[i] = a;
        blk->extra[i] = c - b * ybar;
        r->within_deviance += 2 * (d - a * r->family.ops->saturated_term(&r->family, ybar));
    } else {
        blk->y[i] = b;
        blk->prior[i] = 1.0;
        blk->off[i] = log(a);
        blk->extra[i] = c * a - b * b;
        r->within_deviance += 2 * (d - (b > 0 ? b * log(b / a) : 0.0));
    }
}

mr_status mr__build_patterns(mr__run *r, mr__error *err)
{
    const mr__pattern_table *t = &r->first.patterns.table;
    pattern_values v;
    mr__block blk;
    size_t e;
    mr_status st;
    memset(&blk, 0, sizeof blk);
    memset(&v, 0, sizeof v);
    mr__store_init_memory(&r->patterns);
    st = resolve_pattern_values(r, &v, err);
    for (e = 0; e < t->n && st == MR_OK; e++) {
        double pt[MR__PATTERN_SUMS];
        mr__pattern_sums(t, e, pt);
        if (!(pt[MR__PATTERN_A] > 0)) continue; /* only rows of weight 0 */
        if (blk.y == NULL) st = new_pattern_block(r, &blk, err);
        if (st != MR_OK) break;
        pattern_covariates(r, &v, e, &blk, blk.n);
        pattern_row(r, pt, &blk, blk.n);
        blk.index = r->patterns.n;
        if (++blk.n == MR__BLOCK_ROWS) st = mr__store_keep(&r->patterns, &blk, &r->bind, err);
        if (st == MR_OK && blk.n == 0) {
            mr__block_release(&blk);
        }
    }
    if (st == MR_OK && blk.y != NULL && blk.n > 0) st = mr__store_keep(&r->patterns, &blk, &r->bind, err);
    mr__block_release(&blk);
    release_pattern_values(&v, r->bind.nfac, r->bind.nnum);
    r->npatterns = t->n;
    r->collapsed = st == MR_OK;
    return st;
}
