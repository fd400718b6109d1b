/* bytebuf.h - a growing byte buffer to encode into and a bounded reader
 * to decode from (bytes.h's little-endian numbers): the first pass's
 * result and the checkpoint (accum/first_bytes.c, fit/checkpoint.c).
 * A failed write (out of memory) or a read past the end is remembered,
 * so a run of calls is checked once at its end. */
#ifndef MR_BYTEBUF_H
#define MR_BYTEBUF_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "common/alloc.h"
#include "common/bytes.h"

typedef struct mr__bytebuf {
    unsigned char *data;
    size_t len, cap;
    int failed; /* out of memory: data is no longer complete */
} mr__bytebuf;

/* Room for n more bytes: a pointer to them (len grown), or NULL once failed. */
static inline unsigned char *mr__bytebuf_room(mr__bytebuf *b, size_t n)
{
    unsigned char *at;
    if (b->failed) return NULL;
    if (b->cap - b->len < n) {
        size_t cap = b->cap ? b->cap : 256;
        unsigned char *grown;
        while (cap - b->len < n) {
            if (cap > SIZE_MAX / 2) {
                b->failed = 1;
                return NULL;
            }
            cap *= 2;
        }
        grown = mr__realloc(b->data, cap);
        if (grown == NULL) {
            b->failed = 1;
            return NULL;
        }
        b->data = grown;
        b->cap = cap;
    }
    at = b->data + b->len;
    b->len += n;
    return at;
}

static inline void mr__bytebuf_u64(mr__bytebuf *b, uint64_t v)
{
    unsigned char *at = mr__bytebuf_room(b, 8);
    if (at) mr__put_u64(at, v);
}

static inline void mr__bytebuf_f64(mr__bytebuf *b, double x)
{
    unsigned char *at = mr__bytebuf_room(b, 8);
    if (at) mr__put_f64(at, x);
}

static inline void mr__bytebuf_head(mr__bytebuf *b, const char tag[4], uint32_t version)
{
    unsigned char *at = mr__bytebuf_room(b, 8);
    if (at) mr__put_head(at, tag, version);
}

/* n bytes as a u64 length and the bytes. */
static inline void mr__bytebuf_text(mr__bytebuf *b, const void *p, size_t n)
{
    unsigned char *at;
    mr__bytebuf_u64(b, n);
    at = mr__bytebuf_room(b, n);
    if (at && n) memcpy(at, p, n);
}

static inline void mr__bytebuf_release(mr__bytebuf *b)
{
    mr__free(b->data);
    memset(b, 0, sizeof *b);
}

typedef struct mr__byteread {
    const unsigned char *at, *end;
    int bad; /* a read went past the end, or a value was out of its range */
} mr__byteread;

static inline void mr__byteread_init(mr__byteread *r, const unsigned char *p, size_t n)
{
    r->at = p;
    r->end = p + n;
    r->bad = 0;
}

/* The next n bytes, or NULL (and bad) when fewer are left. */
static inline const unsigned char *mr__byteread_take(mr__byteread *r, uint64_t n)
{
    const unsigned char *at = r->at;
    if (r->bad || n > (uint64_t)(r->end - r->at)) {
        r->bad = 1;
        return NULL;
    }
    r->at += n;
    return at;
}

static inline uint64_t mr__byteread_u64(mr__byteread *r)
{
    const unsigned char *at = mr__byteread_take(r, 8);
    uint64_t v = 0;
    if (at) mr__get_u64(at, &v);
    return v;
}

static inline double mr__byteread_f64(mr__byteread *r)
{
    const unsigned char *at = mr__byteread_take(r, 8);
    double x = 0;
    if (at) mr__get_f64(at, &x);
    return x;
}

/* A u64 that must be at most `max` (a count: its items must fit in what
 * is left, at `each` bytes at least per item). */
static inline uint64_t mr__byteread_count(mr__byteread *r, uint64_t max, uint64_t each)
{
    uint64_t v = mr__byteread_u64(r);
    if (r->bad || v > max || (each && v > (uint64_t)(r->end - r->at) / each)) {
        r->bad = 1;
        return 0;
    }
    return v;
}

/* A length-prefixed run of bytes (mr__bytebuf_text): its start and *n. */
static inline const unsigned char *mr__byteread_text(mr__byteread *r, uint64_t *n)
{
    *n = mr__byteread_count(r, UINT32_MAX, 1);
    return r->bad ? NULL : mr__byteread_take(r, *n);
}

#endif
