#include <string.h>

#include "accum/levelsums.h"
#include "common/alloc.h"

mr_status mr__level_part_init(mr__level_part *p, size_t width, size_t cap, mr__error *err)
{
    memset(p, 0, sizeof *p);
    p->width = width;
    p->cap = cap;
    p->level = mr__malloc_array(cap + 1, sizeof *p->level);
    p->val = mr__malloc_array((cap + 1) * width, sizeof *p->val);
    if (p->level == NULL || p->val == NULL) {
        mr__level_part_release(p);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

void mr__level_part_release(mr__level_part *p)
{
    mr__free(p->level);
    mr__free(p->val);
    memset(p, 0, sizeof *p);
}

mr_status mr__level_group_init(mr__level_group *g, size_t nlev, size_t width, mr__error *err)
{
    size_t l;
    memset(g, 0, sizeof *g);
    g->nlev = nlev;
    g->slot = mr__malloc_array(nlev + 1, sizeof *g->slot);
    if (g->slot == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (l = 0; l < nlev; l++) g->slot[l] = -1;
    /* grows as groups meet more levels */
    return mr__level_part_init(&g->part, width, nlev < 1024 ? nlev : 1024, err);
}

void mr__level_group_release(mr__level_group *g)
{
    mr__level_part_release(&g->part);
    mr__free(g->slot);
    memset(g, 0, sizeof *g);
}

/* A group's part never holds more than its nlev levels: no room past them. */
static mr_status grow(mr__level_part *p, size_t most, mr__error *err)
{
    size_t cap = p->cap ? 2 * p->cap : 64;
    if (cap > most) cap = most;
    int32_t *level = mr__realloc(p->level, (cap + 1) * sizeof *level);
    double *val;
    if (level == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    p->level = level;
    val = mr__realloc(p->val, (cap + 1) * p->width * sizeof *val);
    if (val == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    p->val = val;
    p->cap = cap;
    return MR_OK;
}

mr_status mr__level_group_add(mr__level_group *g, const mr__level_part *block, mr__error *err)
{
    mr__level_part *p = &g->part;
    size_t e, j, w = p->width;
    for (e = 0; e < block->n; e++) {
        int32_t lev = block->level[e], at = g->slot[lev];
        const double *from = block->val + e * w;
        double *to;
        if (at < 0) {
            if (p->n == p->cap) MR__TRY(grow(p, g->nlev, err));
            at = g->slot[lev] = (int32_t)p->n++;
            p->level[at] = lev;
            memset(p->val + (size_t)at * w, 0, w * sizeof *p->val);
        }
        to = p->val + (size_t)at * w;
        for (j = 0; j < w; j++) to[j] += from[j];
    }
    return MR_OK;
}

void mr__level_group_close(mr__level_group *g, double *total)
{
    mr__level_part *p = &g->part;
    size_t e, j, w = p->width;
    for (e = 0; e < p->n; e++) {
        double *to = total + (size_t)p->level[e] * w;
        const double *from = p->val + e * w;
        for (j = 0; j < w; j++) to[j] += from[j];
        g->slot[p->level[e]] = -1;
    }
    p->n = 0;
}

mr_status mr__level_input_init(mr__level_input *in, const mr__design *d, mr__error *err)
{
    const size_t R = MR__BLOCK_ROWS;
    memset(in, 0, sizeof *in);
    in->w = mr__malloc_array(R, sizeof *in->w);
    in->D = mr__malloc_array(R * (d->ndense + 1), sizeof *in->D);
    in->sval = mr__malloc_array(R * d->nsparse + 1, sizeof *in->sval);
    in->scol = mr__malloc_array(R * d->nsparse + 1, sizeof *in->scol);
    if (in->w == NULL || in->D == NULL || in->sval == NULL || in->scol == NULL) {
        mr__level_input_release(in);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

void mr__level_input_release(mr__level_input *in)
{
    mr__free(in->w);
    mr__free(in->D);
    mr__free(in->sval);
    mr__free(in->scol);
    memset(in, 0, sizeof *in);
}

void mr__level_input_keep(mr__level_input *in, const mr__design *d, const mr__workspace *ws, size_t n)
{
    in->n = n;
    memcpy(in->w, ws->w, n * sizeof *in->w);
    memcpy(in->D, ws->D, (d->ndense + 1) * n * sizeof *in->D);
    memcpy(in->sval, ws->sval, d->nsparse * n * sizeof *in->sval);
    memcpy(in->scol, ws->scol, d->nsparse * n * sizeof *in->scol);
}

/* Level k's row in the block, made (zeroed) the first time a row meets it. */
static double *row_for(mr__level_part *out, int32_t *slot, int32_t k)
{
    int32_t at = slot[k];
    if (at < 0) {
        at = slot[k] = (int32_t)out->n++;
        out->level[at] = k;
        memset(out->val + (size_t)at * out->width, 0, out->width * sizeof *out->val);
    }
    return out->val + (size_t)at * out->width;
}

void mr__level_part_block(const mr__irls_point *pt, const mr__block *blk, const mr__level_input *in, int32_t *slot,
                          mr__level_part *out)
{
    const mr__design *d = pt->design;
    const size_t n = in->n, m = d->ndense, ns = d->nsparse;
    const double *z = in->D + m * n;
    size_t i, j, e;
    out->n = 0;
    for (i = 0; i < n; i++) {
        int32_t k = mr__design_absorb_row(d, blk->lev, MR__BLOCK_ROWS, i);
        double s = in->w[i], *row, *c;
        if (k < 0) continue;
        row = row_for(out, slot, k);
        c = row + 2;
        row[0] += s * s;
        row[1] += s * z[i];
        for (j = 0; j < m; j++) c[d->dense_col[j]] += s * in->D[j * n + i];
        for (j = 0; j < ns; j++) {
            int32_t col = in->scol[j * n + i];
            if (col >= 0) c[col] += s * (s * in->sval[j * n + i]);
        }
    }
    for (e = 0; e < out->n; e++) slot[out->level[e]] = -1;
}
