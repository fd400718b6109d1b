#include <math.h>
#include <string.h>

#include "accum/scan.h"
#include "common/alloc.h"

mr_status mr__scan_init(mr__scan_sums *s, size_t ncol, size_t nnum, mr__error *err)
{
    memset(s, 0, sizeof *s);
    s->missing = mr__calloc(ncol ? ncol : 1, sizeof *s->missing);
    s->sx = mr__calloc(nnum ? nnum : 1, sizeof *s->sx);
    s->dev_scale = mr__calloc(nnum ? nnum : 1, sizeof *s->dev_scale);
    s->dev_ssq = mr__calloc(nnum ? nnum : 1, sizeof *s->dev_ssq);
    s->xmin = mr__calloc(nnum ? nnum : 1, sizeof *s->xmin);
    s->xmax = mr__calloc(nnum ? nnum : 1, sizeof *s->xmax);
    if (!s->missing || !s->sx || !s->dev_scale || !s->dev_ssq || !s->xmin || !s->xmax) {
        mr__scan_release(s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

static void release_counts(mr__scan_sums *s, size_t nnum)
{
    size_t k;
    for (k = 0; s->counts && k < nnum; k++) mr__counts_release(&s->counts[k]);
    mr__free(s->counts);
    s->counts = NULL;
}

void mr__scan_release(mr__scan_sums *s)
{
    release_counts(s, s->ncounts);
    mr__free(s->missing);
    mr__free(s->sx);
    mr__free(s->dev_scale);
    mr__free(s->dev_ssq);
    mr__free(s->xmin);
    mr__free(s->xmax);
    memset(s, 0, sizeof *s);
}

void mr__scan_reset(mr__scan_sums *s, size_t ncol, size_t nnum)
{
    uint64_t *m = s->missing;
    double *sx = s->sx, *dev_scale = s->dev_scale, *dev_ssq = s->dev_ssq, *xmin = s->xmin, *xmax = s->xmax;
    release_counts(s, s->ncounts);
    memset(s, 0, sizeof *s);
    s->xmin = xmin;
    s->xmax = xmax;
    memset(xmin, 0, nnum * sizeof *xmin);
    memset(xmax, 0, nnum * sizeof *xmax);
    s->missing = m;
    s->sx = sx;
    s->dev_scale = dev_scale;
    s->dev_ssq = dev_ssq;
    memset(m, 0, ncol * sizeof *m);
    memset(sx, 0, nnum * sizeof *sx);
    memset(dev_scale, 0, nnum * sizeof *dev_scale);
    memset(dev_ssq, 0, nnum * sizeof *dev_ssq);
}

/* fmin and fmax as libm computes them when neither argument is NaN
 * (a < b ? a : b, so that of -0 and +0 the second), in line: a cell is a
 * finite number (the parser takes no "nan" or "inf" and refuses an
 * overflow), so neither is a deviation from the mean of finite numbers
 * (a sum that overflows stays at one infinity).  A call each per value
 * was a fifth of the first pass's own work on a block. */
static double min_of(double a, double b) { return a < b ? a : b; }
static double max_of(double a, double b) { return a > b ? a : b; }

/* A block's sum, least and greatest value, and its deviations from its
 * own mean, scaled by the largest of them (one more read of 128 KiB
 * already in cache).  x - mean, rounded, never decreases as x grows, so
 * the largest |x - mean| is that of the least or the greatest x: the same
 * double as the largest over every row. */
static void block_spread(const double *x, uint32_t n, mr__scan_sums *s, size_t k)
{
    double sum = 0, mean, scale, ssq = 0, lo = n ? x[0] : 0, hi = lo;
    uint32_t i;
    for (i = 0; i < n; i++) {
        sum += x[i];
        lo = min_of(lo, x[i]);
        hi = max_of(hi, x[i]);
    }
    s->xmin[k] = lo;
    s->xmax[k] = hi;
    mean = n ? sum / n : 0.0;
    scale = max_of(max_of(0.0, fabs(lo - mean)), fabs(hi - mean));
    if (scale > 0 && isfinite(scale))
        for (i = 0; i < n; i++) {
            double t = (x[i] - mean) / scale;
            ssq += t * t;
        }
    s->sx[k] = sum;
    s->dev_scale[k] = scale;
    s->dev_ssq[k] = ssq;
}

/* Chan's update of the deviations of `into` (n_a rows) by `from` (n_b):
 * M2 = M2_a + M2_b + d^2 n_a n_b / (n_a + n_b), d the difference of the
 * two means, each term kept relative to the largest scale. */
static void merge_spread(mr__scan_sums *into, const mr__scan_sums *from, size_t k)
{
    double na = (double)into->nused, nb = (double)from->nused, scale, cross, ra, rb, rc;
    if (from->nused == 0) return;
    into->xmin[k] = into->nused ? fmin(into->xmin[k], from->xmin[k]) : from->xmin[k];
    into->xmax[k] = into->nused ? fmax(into->xmax[k], from->xmax[k]) : from->xmax[k];
    if (into->nused == 0) {
        into->dev_scale[k] = from->dev_scale[k];
        into->dev_ssq[k] = from->dev_ssq[k];
        return;
    }
    cross = fabs(from->sx[k] / nb - into->sx[k] / na) * sqrt(na / (na + nb) * nb);
    scale = fmax(fmax(into->dev_scale[k], from->dev_scale[k]), cross);
    if (!(scale > 0) || !isfinite(scale)) {
        into->dev_scale[k] = scale;
        into->dev_ssq[k] = 0;
        return;
    }
    ra = into->dev_scale[k] / scale;
    rb = from->dev_scale[k] / scale;
    rc = cross / scale;
    into->dev_ssq[k] = into->dev_ssq[k] * ra * ra + from->dev_ssq[k] * rb * rb + rc * rc;
    into->dev_scale[k] = scale;
}

double mr__scan_spread(const mr__scan_sums *s, size_t k)
{
    if (s->nused == 0 || !(s->dev_scale[k] > 0)) return 0.0;
    return s->dev_scale[k] * sqrt(s->dev_ssq[k] / (double)s->nused);
}

void mr__scan_block(const mr__block *blk, size_t ncol, size_t nnum, mr__scan_sums *s)
{
    size_t k;
    mr__scan_reset(s, ncol, nnum);
    s->nread = blk->nread;
    s->nused = blk->n;
    s->incomplete = blk->incomplete;
    s->nbad = blk->nbad;
    s->nbad_shown = blk->nbad_shown;
    memcpy(s->bad, blk->bad, blk->nbad_shown * sizeof blk->bad[0]);
    for (k = 0; k < ncol; k++) s->missing[k] = blk->missing[k];
    for (k = 0; k < nnum; k++) block_spread(blk->num + k * MR__BLOCK_ROWS, blk->n, s, k);
    s->sw = blk->sw;
    s->swy = blk->swy;
    s->llc = blk->llc;
    s->npos = blk->npos;
    s->nfraction = blk->nfraction;
    s->nnonint = blk->nnonint;
    s->swe = blk->swe;
    s->swoff = blk->swoff;
    s->block_counts = blk->counts;
}

static void merge_counts(mr__scan_sums *into, const mr__scan_sums *from, size_t nnum)
{
    size_t k;
    if (from->block_counts == NULL || into->counts_failed) return;
    if (into->counts == NULL) {
        into->counts = mr__calloc(nnum ? nnum : 1, sizeof *into->counts);
        if (into->counts == NULL) {
            into->counts_failed = 1;
            return;
        }
        into->ncounts = nnum;
        for (k = 0; k < nnum; k++) mr__counts_init(&into->counts[k]);
    }
    for (k = 0; k < nnum; k++) mr__counts_merge(&into->counts[k], &from->block_counts[k]);
}

void mr__scan_add(mr__scan_sums *into, const mr__scan_sums *from, size_t ncol, size_t nnum)
{
    size_t k;
    uint32_t i;
    merge_counts(into, from, nnum);
    for (k = 0; k < nnum; k++) { /* before the counts and sums change */
        merge_spread(into, from, k);
        into->sx[k] += from->sx[k];
    }
    into->nread += from->nread;
    into->nused += from->nused;
    into->incomplete += from->incomplete;
    into->nbad += from->nbad;
    into->npos += from->npos;
    into->nfraction += from->nfraction;
    into->nnonint += from->nnonint;
    for (k = 0; k < ncol; k++) into->missing[k] += from->missing[k];
    into->sw += from->sw;
    into->swy += from->swy;
    into->swe += from->swe;
    into->swoff += from->swoff;
    into->llc += from->llc;
    for (i = 0; i < from->nbad_shown && into->nbad_shown < MR__BAD_SHOWN; i++)
        into->bad[into->nbad_shown++] = from->bad[i];
}

size_t mr__scan_outcome_warnings(const mr__scan_sums *s, int family, int proportions_weighted,
                                 const char *out[MR__SCAN_OUTCOME_WARNINGS])
{
    size_t n = 0;
    if (family == MR_BINOMIAL && !proportions_weighted && s->nfraction > 0)
        out[n++] = "outcome values between 0 and 1 with no weight or trials column: treated as proportions of one "
                   "trial";
    /* every weighted outcome 0: the maximum is at minus infinity */
    if (family == MR_POISSON && s->sw > 0 && s->swy == 0)
        out[n++] = "every outcome is 0: estimates are at the boundary and their standard errors meaningless";
    return n;
}
