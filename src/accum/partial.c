#include <string.h>

#include "accum/partial.h"

void mr__sums_add_totals(mr__block_sums *into, const mr__block_sums *from, size_t p)
{
    size_t i, j;
    for (j = 0; j < p; j++)
        for (i = 0; i <= j; i++) into->xtwx[j * p + i] += from->xtwx[j * p + i];
    for (j = 0; j < p; j++) into->xtwz[j] += from->xtwz[j];
    into->dev += from->dev;
    into->pearson += from->pearson;
    into->null_dev += from->null_dev;
    into->null_sw += from->null_sw;
    into->null_swz += from->null_swz;
    into->invalid += from->invalid;
    into->boundary += from->boundary;
}

void mr__sums_zero_totals(mr__block_sums *s, size_t p)
{
    double *a = s->xtwx, *b = s->xtwz;
    memset(s, 0, sizeof *s);
    s->xtwx = a;
    s->xtwz = b;
    memset(a, 0, p * p * sizeof *a);
    memset(b, 0, p * sizeof *b);
}

enum { HEAD = 4 + 4 + 8 + 8 + 8, NSCALAR = 5, NCOUNT = 2 };

size_t mr__partial_size(size_t p) { return HEAD + 8 * (p * (p + 1) / 2 + p + NSCALAR + NCOUNT); }

static unsigned char *put_u64(unsigned char *at, uint64_t v)
{
    int k;
    for (k = 0; k < 8; k++) at[k] = (unsigned char)(v >> (8 * k));
    return at + 8;
}

static unsigned char *put_f64(unsigned char *at, double x)
{
    uint64_t v;
    memcpy(&v, &x, sizeof v);
    return put_u64(at, v);
}

static const unsigned char *get_u64(const unsigned char *at, uint64_t *v)
{
    int k;
    *v = 0;
    for (k = 0; k < 8; k++) *v |= (uint64_t)at[k] << (8 * k);
    return at + 8;
}

static const unsigned char *get_f64(const unsigned char *at, double *x)
{
    uint64_t v;
    at = get_u64(at, &v);
    memcpy(x, &v, sizeof v);
    return at;
}

void mr__partial_encode(const mr__block_sums *s, size_t p, mr__partial_range range, unsigned char *out)
{
    unsigned char *at = out;
    size_t i, j;
    int k;
    memcpy(at, "MRPS", 4);
    for (k = 0; k < 4; k++) at[4 + k] = (unsigned char)(MR__PARTIAL_VERSION >> (8 * k));
    at = put_u64(at + 8, p);
    at = put_u64(at, range.first_block);
    at = put_u64(at, range.nblocks);
    for (j = 0; j < p; j++)
        for (i = 0; i <= j; i++) at = put_f64(at, s->xtwx[j * p + i]);
    for (j = 0; j < p; j++) at = put_f64(at, s->xtwz[j]);
    at = put_f64(at, s->dev);
    at = put_f64(at, s->pearson);
    at = put_f64(at, s->null_dev);
    at = put_f64(at, s->null_sw);
    at = put_f64(at, s->null_swz);
    at = put_u64(at, s->invalid);
    (void)put_u64(at, s->boundary);
}

mr_status mr__partial_decode(const unsigned char *in, size_t len, size_t p, mr__block_sums *s,
                             mr__partial_range *range, mr__error *err)
{
    const unsigned char *at = in;
    uint64_t version, width;
    size_t i, j;
    if (len != mr__partial_size(p) || memcmp(in, "MRPS", 4) != 0)
        return mr__fail(err, MR_ERR_IO, "partial totals: not the totals of %zu columns", p);
    version = (uint64_t)in[4] | (uint64_t)in[5] << 8 | (uint64_t)in[6] << 16 | (uint64_t)in[7] << 24;
    at = get_u64(in + 8, &width);
    if (version != MR__PARTIAL_VERSION || width != p)
        return mr__fail(err, MR_ERR_IO, "partial totals: version %llu of %llu columns, not version %u of %zu",
                        (unsigned long long)version, (unsigned long long)width, MR__PARTIAL_VERSION, p);
    at = get_u64(at, &range->first_block);
    at = get_u64(at, &range->nblocks);
    for (j = 0; j < p; j++)
        for (i = 0; i <= j; i++) at = get_f64(at, &s->xtwx[j * p + i]);
    for (j = 0; j < p; j++) at = get_f64(at, &s->xtwz[j]);
    at = get_f64(at, &s->dev);
    at = get_f64(at, &s->pearson);
    at = get_f64(at, &s->null_dev);
    at = get_f64(at, &s->null_sw);
    at = get_f64(at, &s->null_swz);
    at = get_u64(at, &s->invalid);
    (void)get_u64(at, &s->boundary);
    return MR_OK;
}
