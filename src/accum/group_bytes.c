/* group_bytes.c - see group_bytes.h. */
#include "accum/group_bytes.h"

void mr__group_encode(const mr__block_sums *s, size_t p, mr__partial_range range, mr__bytebuf *b)
{
    size_t n = mr__partial_size(p), k;
    const mr__calib *c = &s->calib;
    unsigned char *at;
    uint32_t lo = c->bin && c->lo < c->hi ? c->lo : 0, hi = c->bin && c->lo < c->hi ? c->hi : 0;
    mr__bytebuf_u64(b, n);
    if ((at = mr__bytebuf_room(b, n)) != NULL) mr__partial_encode(s, p, range, at);
    mr__bytebuf_u64(b, lo);
    mr__bytebuf_u64(b, hi);
    for (k = (size_t)lo * MR__CB_N; k < (size_t)hi * MR__CB_N; k++) mr__bytebuf_f64(b, c->bin[k]);
}

/* The bins of one group into c (zeroed, kept bins), as they were. */
static mr_status read_bins(mr__byteread *r, mr__calib *c, mr__error *err)
{
    uint64_t lo = mr__byteread_count(r, MR__CALIB_BINS, 0), hi = mr__byteread_count(r, MR__CALIB_BINS, 0), k;
    if (r->bad || lo > hi || (hi - lo) * MR__CB_N > (uint64_t)(r->end - r->at) / 8)
        return mr__fail(err, MR_ERR_IO, "group totals: calibration bins out of range");
    if (lo == hi) return MR_OK;
    if (c->bin == NULL) {
        r->at += (hi - lo) * MR__CB_N * 8; /* nothing kept them on this side either */
        return MR_OK;
    }
    for (k = lo * MR__CB_N; k < hi * MR__CB_N; k++) c->bin[k] = mr__byteread_f64(r);
    c->lo = (uint32_t)lo;
    c->hi = (uint32_t)hi;
    return MR_OK;
}

static mr_status add_one(mr__byteread *r, size_t p, mr__block_sums *g, mr__block_sums *total, uint64_t *next,
                         mr__error *err)
{
    mr__partial_range range;
    uint64_t n = mr__byteread_count(r, UINT64_MAX, 1);
    const unsigned char *at = mr__byteread_take(r, n);
    if (at == NULL) return mr__fail(err, MR_ERR_IO, "group totals: cut short");
    MR__TRY(mr__partial_decode(at, (size_t)n, p, g, &range, err));
    if (range.first_block != *next || range.nblocks == 0 || range.nblocks > MR__GROUP_BLOCKS)
        return mr__fail(err, MR_ERR_IO, "group totals: blocks %llu.. where %llu.. were due",
                        (unsigned long long)range.first_block, (unsigned long long)*next);
    *next += range.nblocks;
    mr__calib_zero(&g->calib);
    MR__TRY(read_bins(r, &g->calib, err));
    mr__sums_add_totals(total, g, p);
    return MR_OK;
}

mr_status mr__group_add_each(mr__byteread *r, size_t p, mr__block_sums *const *totals, size_t k,
                             uint64_t *next_block, mr__error *err)
{
    mr__block_sums g;
    mr_status st = MR_OK;
    size_t i = 0;
    MR__TRY(mr__sums_init(&g, p, err));
    if (totals[0]->calib.bin == NULL) mr__calib_release(&g.calib);
    while (st == MR_OK && r->at < r->end) {
        st = add_one(r, p, &g, totals[i], &next_block[i], err);
        i = (i + 1) % k;
    }
    mr__sums_release(&g);
    return st == MR_OK && i != 0 ? mr__fail(err, MR_ERR_IO, "group totals: a group's entries cut short") : st;
}

mr_status mr__group_add_all(mr__byteread *r, size_t p, mr__block_sums *total, uint64_t *next_block, mr__error *err)
{
    return mr__group_add_each(r, p, &total, 1, next_block, err);
}
