/* calibration.c - the bins of calibration.h. */
#include <math.h>
#include <string.h>

#include "accum/calibration.h"
#include "common/alloc.h"

mr_status mr__calib_init(mr__calib *c, mr__error *err)
{
    c->bin = mr__calloc((size_t)MR__CALIB_BINS * MR__CB_N, sizeof *c->bin);
    c->lo = MR__CALIB_BINS;
    c->hi = 0;
    if (c->bin == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

void mr__calib_release(mr__calib *c)
{
    mr__free(c->bin);
    c->bin = NULL;
    c->lo = MR__CALIB_BINS;
    c->hi = 0;
}

/* Only the bins touched: a block's means span a few of the 4097. */
void mr__calib_zero(mr__calib *c)
{
    if (c->bin != NULL && c->lo < c->hi)
        memset(c->bin + (size_t)c->lo * MR__CB_N, 0, (size_t)(c->hi - c->lo) * MR__CB_N * sizeof *c->bin);
    c->lo = MR__CALIB_BINS;
    c->hi = 0;
}

static void bin_add(double *to, const double *from)
{
    if (from[MR__CB_ROWS] == 0) return;
    if (to[MR__CB_ROWS] == 0) {
        memcpy(to, from, MR__CB_N * sizeof *to);
        return;
    }
    to[MR__CB_ROWS] += from[MR__CB_ROWS];
    to[MR__CB_WEIGHT] += from[MR__CB_WEIGHT];
    to[MR__CB_OBSERVED] += from[MR__CB_OBSERVED];
    to[MR__CB_EXPECTED] += from[MR__CB_EXPECTED];
    if (from[MR__CB_LOW] < to[MR__CB_LOW]) to[MR__CB_LOW] = from[MR__CB_LOW];
    if (from[MR__CB_HIGH] > to[MR__CB_HIGH]) to[MR__CB_HIGH] = from[MR__CB_HIGH];
}

void mr__calib_add(mr__calib *into, const mr__calib *from)
{
    uint32_t b;
    if (into->bin == NULL || from->bin == NULL) return;
    for (b = from->lo; b < from->hi; b++) bin_add(into->bin + (size_t)b * MR__CB_N, from->bin + (size_t)b * MR__CB_N);
    if (from->lo < into->lo) into->lo = from->lo;
    if (from->hi > into->hi) into->hi = from->hi;
}

/* 0 .. MR__CALIB_HALF - 1, increasing with a > 0: the exponent and top
 * fraction bits, clamped to the grid. */
static uint32_t magnitude_bin(double a)
{
    uint64_t bits;
    int64_t k;
    memcpy(&bits, &a, sizeof bits);
    k = (int64_t)(bits >> (52 - MR__CALIB_FRACTION_BITS)) -
        ((int64_t)(1023 - MR__CALIB_EXPONENTS / 2) << MR__CALIB_FRACTION_BITS);
    if (k < 0) return 0;
    if (k >= MR__CALIB_HALF) return MR__CALIB_HALF - 1;
    return (uint32_t)k;
}

uint32_t mr__calib_bin(double mu, int unit)
{
    if (unit) {
        if (mu <= 0.5) return magnitude_bin(mu > 0 ? mu : 0.0);
        return MR__CALIB_BINS - 1 - magnitude_bin(mu < 1 ? 1.0 - mu : 0.0);
    }
    if (mu > 0) return MR__CALIB_HALF + 1 + magnitude_bin(mu);
    if (mu < 0) return MR__CALIB_HALF - 1 - magnitude_bin(-mu);
    return MR__CALIB_HALF;
}

void mr__calib_rows(mr__calib *c, const double *y, const double *mu, const double *rate, const double *prior,
                    const double *rows, const double *weight, size_t n, int unit)
{
    size_t i;
    if (c->bin == NULL) return;
    for (i = 0; i < n; i++) {
        double w = prior ? prior[i] : 1.0, m = rate ? rate[i] : mu[i], *b;
        uint32_t k;
        if (!(w > 0) || !isfinite(m) || !isfinite(mu[i])) continue;
        k = mr__calib_bin(m, unit);
        b = c->bin + (size_t)k * MR__CB_N;
        if (b[MR__CB_ROWS] == 0 || m < b[MR__CB_LOW]) b[MR__CB_LOW] = m;
        if (b[MR__CB_ROWS] == 0 || m > b[MR__CB_HIGH]) b[MR__CB_HIGH] = m;
        b[MR__CB_ROWS] += rows ? rows[i] : 1.0;
        b[MR__CB_WEIGHT] += weight ? weight[i] : w;
        b[MR__CB_OBSERVED] += w * y[i];
        b[MR__CB_EXPECTED] += w * mu[i];
        if (k < c->lo) c->lo = k;
        if (k + 1 > c->hi) c->hi = k + 1;
    }
}

static void group_add(mr__calib_group *g, const double *b)
{
    if (g->rows == 0) {
        g->mean_low = b[MR__CB_LOW];
        g->mean_high = b[MR__CB_HIGH];
    }
    g->rows += (uint64_t)b[MR__CB_ROWS];
    g->weight += b[MR__CB_WEIGHT];
    g->observed += b[MR__CB_OBSERVED];
    g->expected += b[MR__CB_EXPECTED];
    if (b[MR__CB_LOW] < g->mean_low) g->mean_low = b[MR__CB_LOW];
    if (b[MR__CB_HIGH] > g->mean_high) g->mean_high = b[MR__CB_HIGH];
}

size_t mr__calib_groups(const mr__calib *c, mr__calib_group out[MR__CALIB_GROUPS])
{
    uint64_t total = 0, seen = 0, tenth = 1;
    size_t ng = 0;
    uint32_t b;
    memset(out, 0, MR__CALIB_GROUPS * sizeof *out);
    if (c->bin == NULL) return 0;
    for (b = c->lo; b < c->hi; b++) total += (uint64_t)c->bin[(size_t)b * MR__CB_N + MR__CB_ROWS];
    if (total == 0) return 0;
    for (b = c->lo; b < c->hi; b++) {
        const double *bin = c->bin + (size_t)b * MR__CB_N;
        if (bin[MR__CB_ROWS] == 0) continue;
        group_add(&out[ng], bin);
        seen += (uint64_t)bin[MR__CB_ROWS];
        /* seen / total >= tenth / 10, in integers (no rounding) */
        if (seen * MR__CALIB_GROUPS >= tenth * total || seen == total) {
            ng++;
            while (tenth <= MR__CALIB_GROUPS && seen * MR__CALIB_GROUPS >= tenth * total) tenth++;
        }
    }
    return ng;
}
