#define _DEFAULT_SOURCE /* lgamma_r: lgamma writes the global signgam */
#include <math.h>
#include <string.h>

#include "accum/scan.h"
#include "common/alloc.h"
#include "millrace.h"

mr_status mr__scan_init(mr__scan_sums *s, size_t ncol, size_t nnum, mr__error *err)
{
    memset(s, 0, sizeof *s);
    s->missing = mr__calloc(ncol ? ncol : 1, sizeof *s->missing);
    s->sx = mr__calloc(nnum ? nnum : 1, sizeof *s->sx);
    s->sxx = mr__calloc(nnum ? nnum : 1, sizeof *s->sxx);
    if (!s->missing || !s->sx || !s->sxx) {
        mr__scan_release(s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

void mr__scan_release(mr__scan_sums *s)
{
    mr__free(s->missing);
    mr__free(s->sx);
    mr__free(s->sxx);
    memset(s, 0, sizeof *s);
}

void mr__scan_reset(mr__scan_sums *s, size_t ncol, size_t nnum)
{
    uint64_t *m = s->missing;
    double *sx = s->sx, *sxx = s->sxx;
    memset(s, 0, sizeof *s);
    s->missing = m;
    s->sx = sx;
    s->sxx = sxx;
    memset(m, 0, ncol * sizeof *m);
    memset(sx, 0, nnum * sizeof *sx);
    memset(sxx, 0, nnum * sizeof *sxx);
}

void mr__scan_block(const mr__block *blk, size_t ncol, size_t nnum, mr__scan_sums *s)
{
    uint32_t i;
    size_t k;
    mr__scan_reset(s, ncol, nnum);
    s->nread = blk->nread;
    s->nused = blk->n;
    s->incomplete = blk->incomplete;
    s->nbad = blk->nbad;
    s->nbad_shown = blk->nbad_shown;
    memcpy(s->bad, blk->bad, blk->nbad_shown * sizeof blk->bad[0]);
    for (k = 0; k < ncol; k++) s->missing[k] = blk->missing[k];
    for (k = 0; k < nnum; k++) {
        const double *x = blk->num + k * MR__BLOCK_ROWS;
        double a = 0, b = 0;
        for (i = 0; i < blk->n; i++) {
            a += x[i];
            b += x[i] * x[i];
        }
        s->sx[k] = a;
        s->sxx[k] = b;
    }
    s->sw = blk->sw;
    s->swy = blk->swy;
    s->llc = blk->llc;
    s->npos = blk->npos;
    s->nfraction = blk->nfraction;
    s->swe = blk->swe;
    s->swoff = blk->swoff;
}

void mr__scan_add(mr__scan_sums *into, const mr__scan_sums *from, size_t ncol, size_t nnum)
{
    size_t k;
    uint32_t i;
    into->nread += from->nread;
    into->nused += from->nused;
    into->incomplete += from->incomplete;
    into->nbad += from->nbad;
    into->npos += from->npos;
    into->nfraction += from->nfraction;
    for (k = 0; k < ncol; k++) into->missing[k] += from->missing[k];
    for (k = 0; k < nnum; k++) {
        into->sx[k] += from->sx[k];
        into->sxx[k] += from->sxx[k];
    }
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

static double xlogy(double x, double y) { return x == 0 ? 0.0 : x * log(y); }

/* lgamma(x) for the small counts that make up most registry outcomes:
 * the table holds glibc's own lgamma(1..21), so results are unchanged. */
static double log_gamma(double x)
{
    int sign;
    if (x >= 1 && x <= 21 && x == (double)(int)x) {
        static const double log_factorial[21] = {0, 0, 0.69314718055994529, 1.791759469228055, 3.1780538303479458, 4.7874917427820458, 6.5792512120101012, 8.5251613610654129, 10.604602902745251, 12.801827480081471, 15.104412573075518, 17.502307845873887, 19.987214495661888, 22.552163853123421, 25.19122118273868, 27.89927138384089, 30.671860106080675, 33.505073450136891, 36.395445208033053, 39.339884187199495, 42.335616460753485};
        return log_factorial[(int)x - 1];
    }
    return lgamma_r(x, &sign);
}

double mr__loglik_constant(int family, double y, double w, double t, int has_trials)
{
    double prior = w * t, m, c, k;
    switch (family) {
    case MR_GAUSSIAN: return prior > 0 ? log(prior) : 0.0;
    case MR_POISSON: return prior * (xlogy(y, y) - y - log_gamma(y + 1));
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return prior * log(y);
    case MR_BINOMIAL:
        m = has_trials ? t : w;
        c = has_trials ? w : 1.0;
        if (m <= 0) return 0.0;
        /* one binary trial: every term is an exact zero */
        if (m == 1 && c == 1 && (y == 0 || y == 1)) return 0.0;
        k = m * y;
        return c * (log_gamma(m + 1) - log_gamma(k + 1) - log_gamma(m - k + 1) + xlogy(k, y) + xlogy(m - k, 1 - y));
    }
    return 0.0;
}
