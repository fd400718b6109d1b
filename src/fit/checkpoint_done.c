/* checkpoint_done.c - the parts of a checkpoint written once the passes
 * are over, so that a run killed after its last pass (before its outputs
 * were in place) finishes without reading the data again.
 *
 * A checkpoint's stage (checkpoint.c): 0 while IRLS passes go on; 1 once
 * the last IRLS pass is done: the IRLS state after its last step and what
 * the published fit takes from that pass (its totals, its calibration
 * bins, the dispersion a series density was summed at); 2 once the robust
 * standard errors' pass is done too: its meat and bread and the clusters'
 * count.  These parts are read back only after the design is built (their
 * sizes depend on it), by the run's step that would otherwise make the
 * pass.
 *
 * THE PARTS (little-endian, common/bytes.h), stage 1:
 *   f64 the series density's dispersion (NaN: none)
 *   totals: the last pass's
 *   u64 calibration kept (0, 1), u64 lo, u64 hi, f64 x MR__CB_N per bin
 *     of [lo, hi) (accum/calibration.h)
 * then, stage 2:
 *   totals: the meat, totals: the bread, u64 clusters
 * where totals is text (accum/partial.h's encoding) and, with a factor
 * declared `many` only, u64 n (the level rows' doubles, 0 for none) and
 * f64 x n, its levels' rows and the reference's (accumulate.h). */
#include <string.h>

#include "accum/calibration.h"
#include "accum/levelsums.h"
#include "accum/partial.h"
#include "common/alloc.h"
#include "common/bytebuf.h"
#include "fit/run.h"

static void put_sums(mr__bytebuf *b, const mr__block_sums *s, const mr__design *d)
{
    mr__partial_range range = {0, 0};
    size_t n = mr__partial_size(d->p), i;
    unsigned char *at;
    mr__bytebuf_u64(b, n);
    if ((at = mr__bytebuf_room(b, n)) != NULL) mr__partial_encode(s, d->p, range, at);
    if (d->nabsorb == 0) return;
    n = s->lev != NULL ? mr__level_totals_size(d) : 0;
    mr__bytebuf_u64(b, n);
    for (i = 0; i < n; i++) mr__bytebuf_f64(b, s->lev[i]);
}

static void put_calib(mr__bytebuf *b, const mr__calib *c)
{
    uint32_t k;
    int j;
    mr__bytebuf_u64(b, c->bin != NULL);
    mr__bytebuf_u64(b, c->bin ? c->lo : 0);
    mr__bytebuf_u64(b, c->bin ? c->hi : 0);
    for (k = c->bin ? c->lo : 0; c->bin && k < c->hi; k++)
        for (j = 0; j < MR__CB_N; j++) mr__bytebuf_f64(b, c->bin[(size_t)k * MR__CB_N + j]);
}

void mr__checkpoint_done_put(mr__bytebuf *b, const mr__run *r, int stage)
{
    mr__bytebuf_f64(b, r->family.dispersion);
    put_sums(b, &r->last.sums, &r->design);
    put_calib(b, &r->last.sums.calib);
    if (stage < 2) return;
    put_sums(b, &r->meat.sums, &r->design);
    put_sums(b, &r->meat.bread, &r->design);
    mr__bytebuf_u64(b, r->meat.clusters);
}

/* A `many` factor's level rows after the totals (none without one). */
static mr_status take_levels(mr__byteread *rd, mr__block_sums *s, const mr__design *d, mr__error *err)
{
    uint64_t n, i;
    if (d->nabsorb == 0) return MR_OK;
    n = mr__byteread_u64(rd);
    if (rd->bad || (n != 0 && n != mr__level_totals_size(d)))
        return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's level totals are damaged");
    if (n == 0) return MR_OK;
    if ((s->lev = mr__malloc_array((size_t)n, sizeof *s->lev)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->nlev = d->nabsorb;
    for (i = 0; i < n; i++) s->lev[i] = mr__byteread_f64(rd);
    return rd->bad ? mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's level totals are cut short") : MR_OK;
}

static mr_status take_sums(mr__byteread *rd, mr__block_sums *s, const mr__design *d, mr__error *err)
{
    mr__partial_range range;
    uint64_t n;
    const unsigned char *at = mr__byteread_text(rd, &n);
    mr__sums_release(s);
    MR__TRY(mr__sums_init(s, d->p, err));
    if (at == NULL) return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's totals are cut short");
    MR__TRY(mr__partial_decode(at, (size_t)n, d->p, s, &range, err));
    return take_levels(rd, s, d, err);
}

static mr_status take_calib(mr__byteread *rd, mr__calib *c, mr__error *err)
{
    uint64_t kept = mr__byteread_u64(rd), lo = mr__byteread_u64(rd), hi = mr__byteread_u64(rd), k;
    int j;
    mr__calib_release(c);
    if (rd->bad || kept > 1 || (kept && lo < hi && hi > MR__CALIB_BINS))
        return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's calibration bins are damaged");
    if (!kept) return MR_OK;
    MR__TRY(mr__calib_init(c, err));
    c->lo = (uint32_t)lo;
    c->hi = (uint32_t)hi;
    for (k = lo; k < hi; k++)
        for (j = 0; j < MR__CB_N; j++) c->bin[k * MR__CB_N + (uint64_t)j] = mr__byteread_f64(rd);
    return rd->bad ? mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's calibration bins are cut short") : MR_OK;
}

/* Stage 1's parts into r->last (and the dispersion), or only read past
 * (keep 0: the run's own last pass may have changed them since, as a
 * collapsed fit's calibration pass does). */
static mr_status take_last(mr__byteread *rd, mr__run *r, int keep, mr__error *err)
{
    mr__block_sums scratch;
    mr__block_sums *into = keep ? &r->last.sums : &scratch;
    double dispersion = mr__byteread_f64(rd);
    mr_status st;
    memset(&scratch, 0, sizeof scratch);
    st = take_sums(rd, into, &r->design, err);
    if (st == MR_OK) st = take_calib(rd, &into->calib, err);
    if (keep) r->family.dispersion = dispersion;
    mr__sums_release(&scratch);
    return st;
}

mr_status mr__checkpoint_done_take(mr__run *r, int stage, mr__error *err)
{
    mr__byteread rd;
    mr__byteread_init(&rd, r->resume_done, r->resume_done_len);
    MR__TRY(take_last(&rd, r, stage == 1, err));
    if (stage < 2) return MR_OK;
    MR__TRY(take_sums(&rd, &r->meat.sums, &r->design, err));
    MR__TRY(take_sums(&rd, &r->meat.bread, &r->design, err));
    r->meat.clusters = mr__byteread_u64(&rd);
    if (rd.bad || rd.at != rd.end) return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's robust pass is damaged");
    return MR_OK;
}
