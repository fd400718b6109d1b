#include <string.h>

#include "accum/partial.h"
#include "common/bytes.h"

enum { HEAD = 4 + 4 + 8 + 8 + 8, NSCALAR = 5, NCOUNT = 2 };

_Static_assert(MR__PARAM_SUMS == 5, "the encoding holds five family sums");

size_t mr__partial_size(size_t p) { return HEAD + 8 * (p * (p + 1) / 2 + p + NSCALAR + NCOUNT + MR__PARAM_SUMS); }

void mr__partial_encode(const mr__block_sums *s, size_t p, mr__partial_range range, unsigned char *out)
{
    unsigned char *at = mr__put_head(out, "MRPS", MR__PARTIAL_VERSION);
    size_t i, j;
    at = mr__put_u64(at, p);
    at = mr__put_u64(at, range.first_block);
    at = mr__put_u64(at, range.nblocks);
    for (j = 0; j < p; j++)
        for (i = 0; i <= j; i++) at = mr__put_f64(at, s->xtwx[j * p + i]);
    for (j = 0; j < p; j++) at = mr__put_f64(at, s->xtwz[j]);
    at = mr__put_f64(at, s->dev);
    at = mr__put_f64(at, s->pearson);
    at = mr__put_f64(at, s->null_dev);
    at = mr__put_f64(at, s->null_sw);
    at = mr__put_f64(at, s->null_swz);
    at = mr__put_u64(at, s->invalid);
    at = mr__put_u64(at, s->boundary);
    for (j = 0; j < MR__PARAM_SUMS; j++) at = mr__put_f64(at, s->fam[j]);
}

mr_status mr__partial_decode(const unsigned char *in, size_t len, size_t p, mr__block_sums *s,
                             mr__partial_range *range, mr__error *err)
{
    const unsigned char *at = in;
    uint64_t width;
    uint32_t version;
    size_t i, j;
    if (len != mr__partial_size(p) || !mr__get_head(in, "MRPS", &version))
        return mr__fail(err, MR_ERR_IO, "partial totals: not the totals of %zu columns", p);
    at = mr__get_u64(in + 8, &width);
    if (version != MR__PARTIAL_VERSION || width != p)
        return mr__fail(err, MR_ERR_IO, "partial totals: version %llu of %llu columns, not version %u of %zu",
                        (unsigned long long)version, (unsigned long long)width, MR__PARTIAL_VERSION, p);
    at = mr__get_u64(at, &range->first_block);
    at = mr__get_u64(at, &range->nblocks);
    for (j = 0; j < p; j++)
        for (i = 0; i <= j; i++) at = mr__get_f64(at, &s->xtwx[j * p + i]);
    for (j = 0; j < p; j++) at = mr__get_f64(at, &s->xtwz[j]);
    at = mr__get_f64(at, &s->dev);
    at = mr__get_f64(at, &s->pearson);
    at = mr__get_f64(at, &s->null_dev);
    at = mr__get_f64(at, &s->null_sw);
    at = mr__get_f64(at, &s->null_swz);
    at = mr__get_u64(at, &s->invalid);
    at = mr__get_u64(at, &s->boundary);
    for (j = 0; j < MR__PARAM_SUMS; j++) at = mr__get_f64(at, &s->fam[j]);
    return MR_OK;
}
