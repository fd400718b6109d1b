#include <math.h>
#include <string.h>

#include "accum/scan.h"
#include "common/alloc.h"

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
