/* bytes.h - numbers as little-endian bytes whatever the host, for the
 * encodings a checkpoint or another process reads back (accum/partial.c,
 * fit/irls.c).  A double goes as the u64 of its IEEE-754 bits: every
 * value, NaN payloads and signed zeros included, comes back bit for bit. */
#ifndef MR_BYTES_H
#define MR_BYTES_H

#include <stdint.h>
#include <string.h>

static inline unsigned char *mr__put_u64(unsigned char *at, uint64_t v)
{
    int k;
    for (k = 0; k < 8; k++) at[k] = (unsigned char)(v >> (8 * k));
    return at + 8;
}

static inline unsigned char *mr__put_f64(unsigned char *at, double x)
{
    uint64_t v;
    memcpy(&v, &x, sizeof v);
    return mr__put_u64(at, v);
}

static inline const unsigned char *mr__get_u64(const unsigned char *at, uint64_t *v)
{
    int k;
    *v = 0;
    for (k = 0; k < 8; k++) *v |= (uint64_t)at[k] << (8 * k);
    return at + 8;
}

static inline const unsigned char *mr__get_f64(const unsigned char *at, double *x)
{
    uint64_t v;
    at = mr__get_u64(at, &v);
    memcpy(x, &v, sizeof v);
    return at;
}

/* A 4-byte tag and a u32 version: the head of every encoding. */
static inline unsigned char *mr__put_head(unsigned char *at, const char tag[4], uint32_t version)
{
    int k;
    memcpy(at, tag, 4);
    for (k = 0; k < 4; k++) at[4 + k] = (unsigned char)(version >> (8 * k));
    return at + 8;
}

/* Whether the head is `tag`; its version in *version. */
static inline int mr__get_head(const unsigned char *at, const char tag[4], uint32_t *version)
{
    *version = (uint32_t)at[4] | (uint32_t)at[5] << 8 | (uint32_t)at[6] << 16 | (uint32_t)at[7] << 24;
    return memcmp(at, tag, 4) == 0;
}

#endif
