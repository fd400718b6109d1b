#include <string.h>

#include "accum/levelsums.h"
#include "common/alloc.h"

/* An empty part for rows of `width` doubles in the totals, with room for
 * `cap` levels and `cells` c entries. */
static mr_status part_alloc(mr__level_part *p, size_t width, size_t cap, size_t cells, mr__error *err)
{
    memset(p, 0, sizeof *p);
    p->width = width;
    p->level = mr__malloc_array(cap + 1, sizeof *p->level);
    p->head = mr__malloc_array(cap + 1, sizeof *p->head);
    p->db = mr__malloc_array(2 * cap + 1, sizeof *p->db);
    p->val = mr__malloc_array(cells + 1, sizeof *p->val);
    p->col = mr__malloc_array(cells + 1, sizeof *p->col);
    p->next = mr__malloc_array(cells + 1, sizeof *p->next);
    p->scratch_col = mr__malloc_array(width + 1, sizeof *p->scratch_col);
    p->scratch_val = mr__malloc_array(width + 1, sizeof *p->scratch_val);
    if (!p->level || !p->head || !p->db || !p->val || !p->col || !p->next || !p->scratch_col || !p->scratch_val) {
        mr__level_part_release(p);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

void mr__level_part_release(mr__level_part *p)
{
    mr__free(p->level);
    mr__free(p->head);
    mr__free(p->db);
    mr__free(p->val);
    mr__free(p->col);
    mr__free(p->next);
    mr__free(p->scratch_col);
    mr__free(p->scratch_val);
    mr__free(p->source);
    memset(p, 0, sizeof *p);
}

/* A new row for `level`: d = b_D = +0, no entries. */
static int32_t new_row(mr__level_part *p, int32_t level)
{
    int32_t at = (int32_t)p->n++;
    p->level[at] = level;
    p->head[at] = -1;
    p->db[2 * at] = 0;
    p->db[2 * at + 1] = 0;
    return at;
}

/* Row e's entries += k values at increasing columns (a column may repeat:
 * its values add in the order given), each new entry +0 first, as a dense
 * row's would be; the part has room for them. */
static void add_entries(mr__level_part *p, int32_t e, const int32_t *cols, const double *vals, size_t k)
{
    int32_t *link = &p->head[e];
    size_t a = 0;
    while (a < k) {
        int32_t c = *link, made;
        if (c >= 0 && p->col[c] < cols[a]) {
            link = &p->next[c];
            continue;
        }
        if (c < 0 || p->col[c] > cols[a]) {
            made = (int32_t)p->ncell++;
            p->col[made] = cols[a];
            p->val[made] = 0;
            p->next[made] = c;
            *link = c = made;
        }
        p->val[c] += vals[a++];
    }
}

void mr__level_part_add_to(const mr__level_part *p, double *total)
{
    size_t e;
    for (e = 0; e < p->n; e++) {
        double *to = total + (size_t)p->level[e] * p->width;
        int32_t c;
        to[0] += p->db[2 * e];
        to[1] += p->db[2 * e + 1];
        for (c = p->head[e]; c >= 0; c = p->next[c]) to[2 + p->col[c]] += p->val[c];
    }
}

/* Level k's row in the block, made the first time a row meets it. */
static int32_t row_for(mr__level_part *out, int32_t *slot, int32_t k)
{
    if (slot[k] < 0) slot[k] = new_row(out, k);
    return slot[k];
}

/* Source k of a row's entries: dense column j as j, sparse slot j as
 * ndense + j; where its columns start. */
static size_t source_start(const mr__design *d, int32_t k)
{
    return (size_t)k < d->ndense ? d->dense_col[k] : d->term[d->sparse_term[(size_t)k - d->ndense]].col0;
}

/* The order in which level_rows takes a row's entries under design d:
 * its dense columns and sparse slots by where their terms' columns start.
 * A term's columns are a run of their own, so a row's entries come in
 * increasing column order, as the rows' chains keep them, with no
 * sorting a row. */
static mr_status take_order(mr__level_part *p, const mr__design *d, mr__error *err)
{
    size_t n = d->ndense + d->nsparse, a, b;
    p->source = mr__malloc_array(n + 1, sizeof *p->source);
    if (p->source == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (a = 0; a < n; a++) {
        int32_t k = (int32_t)a;
        for (b = a; b > 0 && source_start(d, p->source[b - 1]) > source_start(d, k); b--) p->source[b] = p->source[b - 1];
        p->source[b] = k;
    }
    return MR_OK;
}

mr_status mr__level_part_init(mr__level_part *p, const mr__design *d, mr__error *err)
{
    /* at most a level a row, and a row's entries each a cell */
    MR__TRY(part_alloc(p, d->p + 2, d->nabsorb + 1 < MR__BLOCK_ROWS ? d->nabsorb + 1 : MR__BLOCK_ROWS,
                       MR__BLOCK_ROWS * (d->ndense + d->nsparse), err));
    return take_order(p, d, err);
}

int32_t *mr__level_slots_new(const mr__design *d)
{
    int32_t *slot = mr__malloc_array(d->nabsorb + 1, sizeof *slot);
    size_t l;
    for (l = 0; slot != NULL && l <= d->nabsorb; l++) slot[l] = -1;
    return slot;
}

/* The block's rows into out.  From the IRLS workspace (scores 0): d +=
 * s s, b_D += s z, c += s (s x) (dense columns hold s x already, sparse
 * entries x), s = sqrt(w).  From the scores' (scores 1: mr__block_scores
 * left x unscaled and u in place of s): d += u, b_D += u u, c += u x.  The
 * products are written so that each mode's are those of its own loop. */
static void level_rows(const mr__irls_point *pt, const mr__block *blk, const mr__workspace *ws, size_t n,
                       int32_t *slot, mr__level_part *out, int scores)
{
    const mr__design *d = pt->design;
    const size_t m = d->ndense, ns = d->nsparse;
    const double *z = ws->D + m * n;
    int32_t *cols = out->scratch_col;
    double *vals = out->scratch_val;
    size_t i, j, e, k;
    out->n = 0;
    out->ncell = 0;
    for (i = 0; i < n; i++) {
        int32_t lev = mr__design_absorb_row(d, blk->lev, MR__BLOCK_ROWS, i), at;
        double s = ws->w[i], t = scores ? 1.0 : s;
        if (lev < 0) lev = (int32_t)d->nabsorb; /* the reference's own row */
        at = row_for(out, slot, lev);
        out->db[2 * at] += s * t;
        out->db[2 * at + 1] += s * (scores ? s : z[i]);
        for (j = 0, k = 0; j < m + ns; j++) {
            size_t src = (size_t)out->source[j];
            if (src < m) {
                cols[k] = (int32_t)d->dense_col[src];
                vals[k++] = s * ws->D[src * n + i];
            } else {
                int32_t col = ws->scol[(src - m) * n + i];
                if (col < 0) continue;
                cols[k] = col;
                vals[k++] = t * (s * ws->sval[(src - m) * n + i]);
            }
        }
        add_entries(out, at, cols, vals, k);
    }
    for (e = 0; e < out->n; e++) slot[out->level[e]] = -1;
}

void mr__level_part_block(const mr__irls_point *pt, const mr__block *blk, const mr__workspace *ws, size_t n,
                          int32_t *slot, mr__level_part *out)
{
    level_rows(pt, blk, ws, n, slot, out, 0);
}

void mr__level_part_scores(const mr__irls_point *pt, const mr__block *blk, const mr__workspace *ws, size_t n,
                           int32_t *slot, mr__level_part *out)
{
    level_rows(pt, blk, ws, n, slot, out, 1);
}
