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
 *   text the last pass's totals (accum/partial.h's encoding)
 *   u64 calibration kept (0, 1), u64 lo, u64 hi, f64 x MR__CB_N per bin
 *     of [lo, hi) (accum/calibration.h)
 * then, stage 2:
 *   text the meat (partial.h), text the bread (partial.h), u64 clusters */
#include <string.h>

#include "accum/calibration.h"
#include "accum/partial.h"
#include "common/alloc.h"
#include "common/bytebuf.h"
#include "fit/run.h"

static void put_sums(mr__bytebuf *b, const mr__block_sums *s, size_t p)
{
    mr__partial_range range = {0, 0};
    size_t n = mr__partial_size(p);
    unsigned char *at;
    mr__bytebuf_u64(b, n);
    if ((at = mr__bytebuf_room(b, n)) != NULL) mr__partial_encode(s, p, range, at);
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
    size_t p = r->design.p;
    mr__bytebuf_f64(b, r->family.dispersion);
    put_sums(b, &r->last.sums, p);
    put_calib(b, &r->last.sums.calib);
    if (stage < 2) return;
    put_sums(b, &r->meat.sums, p);
    put_sums(b, &r->meat.bread, p);
    mr__bytebuf_u64(b, r->meat.clusters);
}

static mr_status take_sums(mr__byteread *rd, mr__block_sums *s, size_t p, mr__error *err)
{
    mr__partial_range range;
    uint64_t n;
    const unsigned char *at = mr__byteread_text(rd, &n);
    mr__sums_release(s);
    MR__TRY(mr__sums_init(s, p, err));
    if (at == NULL) return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's totals are cut short");
    return mr__partial_decode(at, (size_t)n, p, s, &range, err);
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
    st = take_sums(rd, into, r->design.p, err);
    if (st == MR_OK) st = take_calib(rd, &into->calib, err);
    if (keep) r->family.dispersion = dispersion;
    mr__sums_release(&scratch);
    return st;
}

mr_status mr__checkpoint_done_take(mr__run *r, int stage, mr__error *err)
{
    size_t p = r->design.p;
    mr__byteread rd;
    mr__byteread_init(&rd, r->resume_done, r->resume_done_len);
    MR__TRY(take_last(&rd, r, stage == 1, err));
    if (stage < 2) return MR_OK;
    MR__TRY(take_sums(&rd, &r->meat.sums, p, err));
    MR__TRY(take_sums(&rd, &r->meat.bread, p, err));
    r->meat.clusters = mr__byteread_u64(&rd);
    if (rd.bad || rd.at != rd.end) return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's robust pass is damaged");
    return MR_OK;
}
