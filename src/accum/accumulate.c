#include <math.h>
#include <string.h>

#include "accum/accumulate.h"
#include "accum/crossprod.h"
#include "common/alloc.h"
#include "family/family.h"

/* 64-byte alignment: whole cache lines per column start, and the lane
 * vectors of the cross products never straddle two. */
static double *aligned_doubles(size_t n) { return mr__aligned_alloc(n * sizeof(double)); }

/* A factor term's column meets, in row i, one column of every other
 * factor term and every dense column: index accumulation, so the cost
 * grows with the number of terms, never with the number of levels.
 *
 * Its products with the dense columns and with sqrt(w) z (its share of
 * X'Wz) go to a p x dense_width buffer first, row c holding column c's
 * sums: a row of the block adds v times its dense values to one such row,
 * a plain vector loop.  For that the dense values of ROW_TILE rows at a
 * time are copied into rows of their own, padded with zeros to a multiple
 * of four.  Every sum still takes its terms in row order. */
enum { ROW_TILE = 64 };

_Static_assert(MR__MAX_DENSE + 1 <= MR__CROSSPROD_MAX_COLS, "the dense columns and sqrt(w) z fit the kernels");

static size_t dense_width(const mr__design *d) { return (d->ndense + 1 + 3) / 4 * 4; }

mr_status mr__workspace_init(mr__workspace *ws, const mr__design *d, mr__error *err)
{
    const size_t R = MR__BLOCK_ROWS;
    memset(ws, 0, sizeof *ws);
    ws->p = d->p;
    /* The dense columns, then sqrt(w) z as one more column: its products
     * with them are X'Wz, formed in the same sweep as X'WX. */
    ws->D = aligned_doubles(R * (d->ndense + 1));
    ws->lanes = aligned_doubles(MR__CROSSPROD_SCRATCH(d->ndense + 1));
    ws->sval = aligned_doubles(R * (d->nsparse + 1));
    ws->scol = mr__aligned_alloc(R * (d->nsparse + 1) * sizeof(int32_t));
    ws->dd = aligned_doubles((d->ndense + 1) * (d->ndense + 1));
    ws->bd = aligned_doubles(d->ndense + 1);
    ws->bs = aligned_doubles(d->p + 1);
    ws->sd = aligned_doubles(d->p * dense_width(d));
    /* zeroed once: rows are padded with zeros that no block overwrites */
    ws->tile = mr__calloc_lines(ROW_TILE * dense_width(d), sizeof(double));
    ws->eta = aligned_doubles(R);
    ws->mu = aligned_doubles(R);
    ws->mu_eta = aligned_doubles(R);
    ws->var = aligned_doubles(R);
    ws->dev = aligned_doubles(R);
    ws->w = aligned_doubles(R);
    if (!ws->sd || !ws->tile || !ws->D || !ws->lanes || !ws->sval || !ws->scol || !ws->dd || !ws->bd || !ws->bs || !ws->eta ||
        !ws->mu || !ws->mu_eta || !ws->var || !ws->dev || !ws->w) {
        mr__workspace_release(ws);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

void mr__workspace_release(mr__workspace *ws)
{
    mr__free(ws->D);
    mr__free(ws->lanes);
    mr__free(ws->sval);
    mr__free(ws->scol);
    mr__free(ws->dd);
    mr__free(ws->bd);
    mr__free(ws->bs);
    mr__free(ws->sd);
    mr__free(ws->tile);
    mr__free(ws->eta);
    mr__free(ws->mu);
    mr__free(ws->mu_eta);
    mr__free(ws->var);
    mr__free(ws->dev);
    mr__free(ws->w);
    memset(ws, 0, sizeof *ws);
}

static mr_status sums_alloc(mr__block_sums *s, size_t entries, size_t p, int bins, mr__error *err)
{
    memset(s, 0, sizeof *s);
    s->xtwx = aligned_doubles(entries);
    s->xtwz = aligned_doubles(p);
    if (!s->xtwx || !s->xtwz) {
        mr__sums_release(s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    memset(s->xtwx, 0, entries * sizeof *s->xtwx);
    memset(s->xtwz, 0, p * sizeof *s->xtwz);
    if (!bins) {
        mr__calib_release(&s->calib); /* none kept */
        return MR_OK;
    }
    if (mr__calib_init(&s->calib, err) != MR_OK) {
        mr__sums_release(s);
        return MR_ERR_NO_MEMORY;
    }
    return MR_OK;
}

mr_status mr__sums_init(mr__block_sums *s, size_t p, mr__error *err) { return sums_alloc(s, p * p, p, 1, err); }

mr_status mr__sums_init_block(mr__block_sums *s, const mr__design *d, mr__error *err)
{
    return sums_alloc(s, d->nnz, d->p, 1, err);
}

mr_status mr__sums_init_pass(mr__block_sums *s, size_t p, int bins, mr__error *err)
{
    return sums_alloc(s, p * p, p, bins, err);
}

mr_status mr__sums_init_block_pass(mr__block_sums *s, const mr__design *d, int bins, mr__error *err)
{
    return sums_alloc(s, d->nnz, d->p, bins, err);
}

void mr__sums_release(mr__block_sums *s)
{
    mr__free(s->xtwx);
    mr__free(s->xtwz);
    mr__free(s->lev);
    mr__calib_release(&s->calib);
    memset(s, 0, sizeof *s);
}

static void zero_sums(mr__block_sums *s, size_t entries, size_t p)
{
    double *a = s->xtwx, *b = s->xtwz, *lev = s->lev;
    size_t nlev = s->nlev;
    mr__calib c = s->calib;
    mr__calib_zero(&c);
    memset(s, 0, sizeof *s);
    s->xtwx = a;
    s->xtwz = b;
    s->lev = lev;
    s->nlev = nlev;
    s->calib = c;
    memset(a, 0, entries * sizeof *a);
    memset(b, 0, p * sizeof *b);
    if (lev != NULL) memset(lev, 0, nlev * (p + 2) * sizeof *lev);
}

void mr__sums_zero(mr__block_sums *s, const mr__design *d) { zero_sums(s, d->nnz, d->p); }

void mr__sums_zero_totals(mr__block_sums *s, size_t p) { zero_sums(s, p * p, p); }

/* X'Wz and the scalars: the same additions for a block and for a group. */
static void add_vector_and_scalars(mr__block_sums *into, const mr__block_sums *from, size_t p)
{
    size_t j;
    for (j = 0; j < p; j++) into->xtwz[j] += from->xtwz[j];
    into->dev += from->dev;
    into->pearson += from->pearson;
    into->null_dev += from->null_dev;
    into->null_sw += from->null_sw;
    into->null_swz += from->null_swz;
    into->invalid += from->invalid;
    into->boundary += from->boundary;
    mr__calib_add(&into->calib, &from->calib);
    for (j = 0; j < MR__PARAM_SUMS; j++) into->fam[j] += from->fam[j];
}

void mr__sums_add(mr__block_sums *into, const mr__block_sums *from, const mr__design *d)
{
    size_t r, k;
    for (r = 0; r < d->nruns; r++) {
        double *to = into->xtwx + d->run_at[r];
        const double *add = from->xtwx + d->run_off[r];
        for (k = 0; k < d->run_len[r]; k++) to[k] += add[k];
    }
    add_vector_and_scalars(into, from, d->p);
}

void mr__sums_add_totals(mr__block_sums *into, const mr__block_sums *from, size_t p)
{
    size_t i, j;
    for (j = 0; j < p; j++)
        for (i = 0; i <= j; i++) into->xtwx[j * p + i] += from->xtwx[j * p + i];
    add_vector_and_scalars(into, from, p);
}

/* eta, mu, dmu/deta for each row: from the coefficients, or on the first
 * pass from the family's starting means. */
static void linear_predictor(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws, size_t n)
{
    const mr__design *d = pt->design;
    size_t i, j, s;
    if (pt->beta == NULL) {
        /* mu stays the starting mean itself (g^-1(g(mu)) need not give
         * its bits back): the inverse's means go to var, which the
         * variances overwrite next */
        pt->family->ops->mustart_n(pt->family, blk->y, blk->prior, n, ws->mu);
        pt->link->fun_n(ws->mu, n, ws->eta);
        pt->link->inv_n(ws->eta, n, ws->var, ws->mu_eta);
        return;
    }
    for (i = 0; i < n; i++) ws->eta[i] = blk->off ? blk->off[i] : 0.0;
    for (j = 0; j < d->ndense; j++) ws->bd[j] = pt->beta[d->dense_col[j]];
    mr__matvec_add(ws->D, n, n, d->ndense, ws->bd, ws->eta);
    /* Reference rows (column -1) pick the 0 in front of the shifted
     * coefficients: no branch, whose outcome would be a coin toss for a
     * two-level factor. */
    ws->bs[0] = 0.0;
    memcpy(ws->bs + 1, pt->beta, d->p * sizeof *ws->bs);
    for (s = 0; s < d->nsparse; s++) {
        const int32_t *col = ws->scol + s * n;
        const double *val = ws->sval + s * n, *bs = ws->bs + 1;
        double *eta = ws->eta;
        for (i = 0; i < n; i++) eta[i] += val[i] * bs[col[i]];
    }
    if (d->nabsorb > 0) {
        const double *bl = pt->beta + d->p;
        for (i = 0; i < n; i++) {
            int32_t k = mr__design_absorb_row(d, blk->lev, MR__BLOCK_ROWS, i);
            if (k >= 0) ws->eta[i] += bl[k];
        }
    }
    pt->link->inv_n(ws->eta, n, ws->mu, ws->mu_eta);
}

/* Without an offset the null model's eta is one number: its mean, weight
 * and variance are worked out once (the same expressions, so the same
 * bits as row by row). */
static void null_model_constant(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws,
                                mr__block_sums *out)
{
    double eta = pt->null_intercept ? pt->null_b0 : 0.0, me, var;
    double mu = mr__link_inv1(pt->link, eta, &me);
    uint32_t i;
    pt->family->ops->variance_n(pt->family, &mu, 1, &var);
    for (i = 0; i < blk->n; i++) ws->mu[i] = mu;
    pt->family->ops->unit_deviance_n(pt->family, blk->y, ws->mu, blk->n, ws->dev);
    for (i = 0; i < blk->n; i++) {
        double prior = blk->prior ? blk->prior[i] : 1.0, w = prior * me * me / var;
        out->null_dev += prior * ws->dev[i];
        out->null_sw += w;
        out->null_swz += w * (eta + (blk->y[i] - mu) / me);
    }
}

/* With an offset, row by row through the family's vector functions (the
 * same expressions as one row at a time, so the same bits), in the
 * workspace's per-row vectors, which the model's sums are done with. */
static void null_model_rows(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws, mr__block_sums *out)
{
    const size_t n = blk->n;
    const double b0 = pt->null_intercept ? pt->null_b0 : 0.0;
    size_t i;
    if (blk->off == NULL) {
        null_model_constant(pt, blk, ws, out);
        return;
    }
    for (i = 0; i < n; i++) ws->eta[i] = b0 + blk->off[i];
    pt->link->inv_n(ws->eta, n, ws->mu, ws->mu_eta);
    pt->family->ops->variance_n(pt->family, ws->mu, n, ws->var);
    pt->family->ops->unit_deviance_n(pt->family, blk->y, ws->mu, n, ws->dev);
    for (i = 0; i < n; i++) {
        double prior = blk->prior ? blk->prior[i] : 1.0, me = ws->mu_eta[i];
        double w = prior * me * me / ws->var[i];
        out->null_dev += prior * ws->dev[i];
        out->null_sw += w;
        out->null_swz += w * ((ws->eta[i] - blk->off[i]) + (blk->y[i] - ws->mu[i]) / me);
    }
}

/* The rows' bins.  With an offset, by the mean per unit of exposure,
 * g^-1(eta - offset): a collapsed pattern's offset is the log of its
 * rows' total exposure, so its mean is their total and its rate theirs.
 * var, dev and eta are free by now (the null model's rows refill them). */
static void calibration_rows(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws, size_t n,
                             mr__block_sums *out)
{
    const double *rate = NULL;
    size_t i;
    if (pt->calib_rate && blk->off != NULL) {
        for (i = 0; i < n; i++) ws->var[i] = ws->eta[i] - blk->off[i];
        pt->link->inv_n(ws->var, n, ws->dev, ws->eta);
        rate = ws->dev;
    }
    mr__calib_rows(&out->calib, blk->y, ws->mu, rate, blk->prior, blk->cal_rows, blk->cal_weight, n, pt->calib_unit);
}

/* Entry (a, b) or (b, a) of the block's packed X'WX. */
static size_t packed_index(const mr__design *d, size_t a, size_t b)
{
    return a <= b ? mr__design_packed_index(d, a, b) : mr__design_packed_index(d, b, a);
}

/* The dense columns' block of X'WX and their share of X'Wz: the cross
 * products of D with the sqrt(w) z column after it, scattered into place. */
static void dense_cross_products(const mr__design *d, mr__workspace *ws, size_t n, mr__block_sums *out)
{
    const size_t m = d->ndense, mz = m + 1;
    size_t a, b;
    if (m == 0) return;
    mr__crossprod_upper(ws->D, n, n, mz, ws->dd, ws->lanes);
    for (b = 0; b < m; b++)
        for (a = 0; a <= b; a++) out->xtwx[packed_index(d, d->dense_col[a], d->dense_col[b])] += ws->dd[b * mz + a];
    for (a = 0; a < m; a++) out->xtwz[d->dense_col[a]] += ws->dd[m * mz + a];
}

static void tile_rows(const double *D, size_t n, size_t m, size_t width, size_t i0, size_t rows, double *out)
{
    size_t j, r;
    for (j = 0; j <= m; j++) { /* column m is sqrt(w) z */
        const double *col = D + j * n + i0;
        for (r = 0; r < rows; r++) out[r * width + j] = col[r];
    }
}

/* to[j] += v x[j], j < width (a multiple of 4): fours the compiler turns
 * into vector operations without a scalar tail or a test for overlap. */
static void add_scaled(double *restrict to, double v, const double *restrict x, size_t width)
{
    size_t j;
    for (j = 0; j < width; j += 4) {
        to[j] += v * x[j];
        to[j + 1] += v * x[j + 1];
        to[j + 2] += v * x[j + 2];
        to[j + 3] += v * x[j + 3];
    }
}

static void sparse_cross_products(const mr__design *d, mr__workspace *ws, size_t n, mr__block_sums *out)
{
    const size_t p = d->p, m = d->ndense, ns = d->nsparse, width = dense_width(d);
    const double *w = ws->w;
    double *G = out->xtwx, *SD = ws->sd, *tile = ws->tile;
    size_t i0, r, s, t, j, c;
    memset(SD, 0, p * width * sizeof *SD);
    for (i0 = 0; i0 < n; i0 += ROW_TILE) {
        const size_t rows = n - i0 < ROW_TILE ? n - i0 : ROW_TILE;
        tile_rows(ws->D, n, m, width, i0, rows, tile);
        for (r = 0; r < rows; r++) {
            const size_t i = i0 + r;
            const double *dense = tile + r * width;
            for (s = 0; s < ns; s++) {
                int32_t cs = ws->scol[s * n + i];
                double v;
                if (cs < 0) continue;
                v = ws->sval[s * n + i] * w[i];
                G[mr__design_packed_index(d, (size_t)cs, (size_t)cs)] += v * v;
                for (t = s + 1; t < ns; t++) {
                    int32_t c2 = ws->scol[t * n + i];
                    if (c2 >= 0) G[packed_index(d, (size_t)cs, (size_t)c2)] += v * ws->sval[t * n + i] * w[i];
                }
                add_scaled(SD + (size_t)cs * width, v, dense, width);
            }
        }
    }
    for (c = 0; c < p; c++) {
        const double *sd = SD + c * width;
        for (j = 0; j < m; j++)
            if (sd[j] != 0.0) G[packed_index(d, c, d->dense_col[j])] += sd[j];
        if (sd[m] != 0.0) out->xtwz[c] += sd[m]; /* dense columns' rows stay zero */
    }
}

/* The bins of a pass at pt alone (mr__irls_point.calib_only): the same
 * means as mr__accumulate_block's, the same rows and blocks left out. */
static void calibration_only(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws, mr__block_sums *out)
{
    const size_t n = blk->n;
    mr__design_fill_split(pt->design, blk->num, blk->lev, MR__BLOCK_ROWS, n, ws->D, ws->scol, ws->sval);
    linear_predictor(pt, blk, ws, n);
    out->invalid = mr__count_invalid_n(pt->family->ops, pt->link, ws->eta, ws->mu, n);
    if (out->invalid == 0) calibration_rows(pt, blk, ws, n, out);
}

void mr__accumulate_block(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws,
                          mr__block_sums *out)
{
    const mr__design *d = pt->design;
    const mr__family_ops *fam = pt->family->ops;
    const size_t n = blk->n;
    size_t i, j;
    double dev = 0, pearson = 0, *z;
    mr__sums_zero(out, d);
    if (n == 0) return;
    if (pt->calib_only) {
        calibration_only(pt, blk, ws, out);
        return;
    }
    mr__design_fill_split(d, blk->num, blk->lev, MR__BLOCK_ROWS, n, ws->D, ws->scol, ws->sval);
    linear_predictor(pt, blk, ws, n);
    fam->variance_n(pt->family, ws->mu, n, ws->var);
    fam->unit_deviance_n(pt->family, blk->y, ws->mu, n, ws->dev);
    out->invalid = mr__count_invalid_n(fam, pt->link, ws->eta, ws->mu, n);
    if (fam->count_boundary) out->boundary = fam->count_boundary(pt->family, ws->mu, n);
    /* w holds sqrt(w) and z, the column after the dense ones, sqrt(w) z:
     * the rows of the weighted least-squares problem. */
    z = ws->D + d->ndense * n;
    for (i = 0; i < n; i++) {
        double prior = blk->prior ? blk->prior[i] : 1.0, r = blk->y[i] - ws->mu[i];
        double off = blk->off ? blk->off[i] : 0.0;
        double s = sqrt(prior * ws->mu_eta[i] * ws->mu_eta[i] / ws->var[i]);
        dev += prior * ws->dev[i];
        pearson += (prior * r * r + (blk->extra ? blk->extra[i] : 0.0)) / ws->var[i];
        ws->w[i] = s;
        z[i] = ((ws->eta[i] - off) + r / ws->mu_eta[i]) * s;
    }
    out->dev = dev;
    out->pearson = pearson;
    if (out->invalid) return; /* the caller halves the step; sums are not used */
    /* before the null model's rows reuse mu */
    if (pt->calibrate) calibration_rows(pt, blk, ws, n, out);
    if (fam->param_sums_n) fam->param_sums_n(pt->family, blk->y, ws->mu, blk->prior, n, out->fam);
    for (j = 0; j < d->ndense; j++) {
        double *col = ws->D + j * n;
        for (i = 0; i < n; i++) col[i] *= ws->w[i];
    }
    dense_cross_products(d, ws, n, out);
    sparse_cross_products(d, ws, n, out);
    if (!pt->null_skip) null_model_rows(pt, blk, ws, out);
}

/* Robust standard errors: each row's score is u x, with
 * u = prior (y - mu) (dmu/deta) / V(mu) (the working residual times the
 * working weight; the dispersion cancels in the sandwich). */
void mr__block_scores(const mr__irls_point *pt, const mr__block *blk, mr__workspace *ws)
{
    const size_t n = blk->n;
    size_t i;
    if (n == 0) return;
    mr__design_fill_split(pt->design, blk->num, blk->lev, MR__BLOCK_ROWS, n, ws->D, ws->scol, ws->sval);
    linear_predictor(pt, blk, ws, n);
    pt->family->ops->variance_n(pt->family, ws->mu, n, ws->var);
    for (i = 0; i < n; i++) {
        double prior = blk->prior ? blk->prior[i] : 1.0;
        ws->w[i] = prior * (blk->y[i] - ws->mu[i]) * ws->mu_eta[i] / ws->var[i];
    }
}

/* The same sweep as X'WX with u in place of sqrt(w) and 1 in place of z:
 * sum u^2 x x' (the meat's rows) and sum u x (the score), by the same
 * kernels, so in the same fixed order. */
void mr__accumulate_scores(const mr__design *d, const mr__block *blk, mr__workspace *ws, mr__block_sums *out)
{
    const size_t n = blk->n;
    size_t i, j;
    double *one = ws->D + d->ndense * n;
    mr__sums_zero(out, d);
    if (n == 0) return;
    for (i = 0; i < n; i++) one[i] = 1.0;
    for (j = 0; j < d->ndense; j++) {
        double *col = ws->D + j * n;
        for (i = 0; i < n; i++) col[i] *= ws->w[i];
    }
    dense_cross_products(d, ws, n, out);
    sparse_cross_products(d, ws, n, out);
}
