#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "accum/store.h"
#include "common/alloc.h"
#include "common/fileio.h"
#include "common/sysio.h"

/* A kept block starts with its row count and the worker whose level
 * numbers it holds. */
#define HEADER (sizeof(uint32_t) + sizeof(int32_t))

void mr__store_init_memory(mr__store *s)
{
    memset(s, 0, sizeof *s);
    s->fd = -1;
}

void mr__store_init_packed(mr__store *s)
{
    mr__store_init_memory(s);
    s->packed = 1;
}

mr_status mr__store_init_file(mr__store *s, const char *dir, mr__error *err)
{
    char path[4096];
    mr__store_init_memory(s);
    snprintf(path, sizeof path, "%s/millrace-cache-XXXXXX", dir);
    s->fd = mkstemp(path);
    if (s->fd < 0) return mr__fail(err, MR_ERR_IO, "cannot create a cache file in %s: %s", dir, strerror(errno));
    unlink(path);
    return MR_OK;
}

void mr__store_release(mr__store *s)
{
    size_t i;
    for (i = 0; s->block && i < s->n; i++) mr__block_release(&s->block[i]);
    for (i = 0; s->packs && i < s->n; i++) mr__free(s->packs[i]);
    for (i = 0; i < s->nspare; i++) mr__free(s->spare[i]);
    mr__free(s->packs);
    mr__free(s->spare);
    mr__free(s->block);
    mr__free(s->offset);
    mr__free(s->pack);
    if (s->fd >= 0) close(s->fd);
    mr__store_init_memory(s);
}

size_t mr__store_row_bytes(const mr__binding *b)
{
    return sizeof(double) * (1 + (b->has_weight || b->has_trials) + (b->has_offset || b->has_exposure) + b->nnum) +
           sizeof(int32_t) * b->nfac;
}

static mr_status grow(mr__store *s, mr__error *err)
{
    size_t cap = s->cap ? 2 * s->cap : 256;
    if (s->fd < 0) {
        mr__block *p = mr__realloc(s->block, cap * sizeof *p);
        if (p == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory keeping the data in memory");
        s->block = p;
    } else {
        uint64_t *o = mr__realloc(s->offset, (cap + 1) * sizeof *o);
        if (o == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        if (s->offset == NULL) o[0] = 0;
        s->offset = o;
    }
    s->cap = cap;
    return MR_OK;
}

/* ---- the packed form of a block (file backend) -------------------------
 *
 * The cache is written once and read every pass, and registry columns are
 * mostly small integers and short decimals, so each column of each block is
 * stored in the narrowest form that gives back the same bits: as integers
 * m of 1, 2 or 4 bytes standing for m / 10^s (s = 0..3), or as raw doubles.
 * A column is written as one tag byte (width | scale << 4) and its values. */

enum { RAW = 0, W1 = 1, W2 = 2, W4 = 4 };
static const double scale_of[4] = {1, 10, 100, 1000};

static double from_int(int32_t m, int si) { return si ? (double)m / scale_of[si] : (double)m; }

static int same_bits(double a, double b) { return memcmp(&a, &b, sizeof a) == 0; }

static unsigned width_for(int64_t lo, int64_t hi)
{
    if (lo >= INT8_MIN && hi <= INT8_MAX) return W1;
    if (lo >= INT16_MIN && hi <= INT16_MAX) return W2;
    return W4;
}

static void put_int(char *p, unsigned w, int32_t v)
{
    int8_t b = (int8_t)v;
    int16_t h = (int16_t)v;
    if (w == W1) memcpy(p, &b, 1);
    else if (w == W2) memcpy(p, &h, 2);
    else memcpy(p, &v, 4);
}

static int32_t get_int(const char *p, unsigned w)
{
    int8_t b;
    int16_t h;
    int32_t v;
    if (w == W1) return memcpy(&b, p, 1), b;
    if (w == W2) return memcpy(&h, p, 2), h;
    return memcpy(&v, p, 4), v;
}

/* Values 4 bytes apart at p become w bytes apart, in place (w <= 4, so no
 * value is overwritten before it is read). */
static void narrow(char *p, size_t n, unsigned w)
{
    size_t i;
    for (i = 0; w != W4 && i < n; i++) put_int(p + i * w, w, get_int(p + i * W4, W4));
}

/* Tries each scale in turn, writing the integers as 4-byte values while it
 * checks them; the first value that does not fit ends a try, so a raw
 * column costs a few values per scale. */
static size_t pack_doubles(const double *x, size_t n, char *out)
{
    int si;
    for (si = 0; si < 4; si++) {
        int64_t lo = 0, hi = 0;
        size_t i;
        unsigned w;
        for (i = 0; i < n; i++) {
            double m = nearbyint(x[i] * scale_of[si]);
            if (!(fabs(m) <= 2147483647.0) || !same_bits(from_int((int32_t)m, si), x[i])) break;
            put_int(out + 1 + i * W4, W4, (int32_t)m);
            if ((int64_t)m < lo) lo = (int64_t)m;
            if ((int64_t)m > hi) hi = (int64_t)m;
        }
        if (i < n) continue;
        w = width_for(lo, hi);
        narrow(out + 1, n, w);
        out[0] = (char)(w | (unsigned)si << 4);
        return 1 + n * w;
    }
    out[0] = RAW;
    memcpy(out + 1, x, n * sizeof *x);
    return 1 + n * sizeof *x;
}

/* One loop per width, so that each is a plain conversion the compiler
 * vectorises (later passes unpack every block). */
#define WIDEN(T, p, n, out)                                                                                           \
    do {                                                                                                              \
        size_t i_;                                                                                                    \
        for (i_ = 0; i_ < (n); i_++) {                                                                                \
            T v_;                                                                                                     \
            memcpy(&v_, (p) + i_ * sizeof v_, sizeof v_);                                                             \
            (out)[i_] = v_;                                                                                           \
        }                                                                                                             \
    } while (0)

static size_t unpack_doubles(const char *in, size_t n, double *x)
{
    unsigned tag = (unsigned char)in[0], w = tag & 15;
    int si = (int)(tag >> 4);
    size_t i;
    if (w == RAW) {
        memcpy(x, in + 1, n * sizeof *x);
        return 1 + n * sizeof *x;
    }
    if (w == W1) WIDEN(int8_t, in + 1, n, x);
    else if (w == W2) WIDEN(int16_t, in + 1, n, x);
    else WIDEN(int32_t, in + 1, n, x);
    if (si) { /* from_int's division, one IEEE operation per value */
        const double scale = scale_of[si];
        for (i = 0; i < n; i++) x[i] /= scale;
    }
    return 1 + n * w;
}

static size_t pack_levels(const int32_t *lev, size_t n, char *out)
{
    int32_t lo = 0, hi = 0;
    unsigned w;
    size_t i;
    for (i = 0; i < n; i++) {
        if (lev[i] < lo) lo = lev[i];
        if (lev[i] > hi) hi = lev[i];
    }
    w = width_for(lo, hi);
    out[0] = (char)w;
    for (i = 0; i < n; i++) put_int(out + 1 + i * w, w, lev[i]);
    return 1 + n * w;
}

static size_t unpack_levels(const char *in, size_t n, int32_t *lev)
{
    unsigned w = (unsigned char)in[0];
    if (w == W1) WIDEN(int8_t, in + 1, n, lev);
    else if (w == W2) WIDEN(int16_t, in + 1, n, lev);
    else WIDEN(int32_t, in + 1, n, lev);
    return 1 + n * w;
}

size_t mr__store_pack_bound(const mr__binding *b)
{
    size_t ncol = 1 + (b->has_weight || b->has_trials) + (b->has_offset || b->has_exposure) + b->nnum + b->nfac;
    return HEADER + ncol + MR__BLOCK_ROWS * mr__store_row_bytes(b);
}

/* Column order: y, prior, offset, each numeric, each factor. */
size_t mr__store_pack(const mr__block *blk, const mr__binding *b, char *out)
{
    size_t o = HEADER, k, n = blk->n;
    memcpy(out, &blk->n, sizeof(uint32_t));
    memcpy(out + sizeof(uint32_t), &blk->worker, sizeof(int32_t));
    o += pack_doubles(blk->y, n, out + o);
    if (blk->prior) o += pack_doubles(blk->prior, n, out + o);
    if (blk->off) o += pack_doubles(blk->off, n, out + o);
    for (k = 0; k < b->nnum; k++) o += pack_doubles(blk->num + k * MR__BLOCK_ROWS, n, out + o);
    for (k = 0; k < b->nfac; k++) o += pack_levels(blk->lev + k * MR__BLOCK_ROWS, n, out + o);
    return o;
}

static void unpack_block(const char *in, const mr__binding *b, mr__block *blk)
{
    size_t o = HEADER, k, n;
    memcpy(&blk->n, in, sizeof(uint32_t));
    memcpy(&blk->worker, in + sizeof(uint32_t), sizeof(int32_t));
    n = blk->n;
    o += unpack_doubles(in + o, n, blk->y);
    if (blk->prior) o += unpack_doubles(in + o, n, blk->prior);
    if (blk->off) o += unpack_doubles(in + o, n, blk->off);
    for (k = 0; k < b->nnum; k++) o += unpack_doubles(in + o, n, blk->num + k * MR__BLOCK_ROWS);
    for (k = 0; k < b->nfac; k++) o += unpack_levels(in + o, n, blk->lev + k * MR__BLOCK_ROWS);
}

static mr_status stage(mr__store *s, const mr__binding *b, mr__error *err)
{
    if (s->pack != NULL) return MR_OK;
    s->pack_cap = mr__store_pack_bound(b);
    s->pack = mr__malloc(s->pack_cap);
    return s->pack ? MR_OK : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
}

static mr_status write_all(int fd, const char *p, size_t n, uint64_t at, mr__error *err)
{
    while (n > 0) {
        ssize_t w = mr__pwrite(fd, p, n, (off_t)at);
        if (w < 0 && errno == EINTR) continue;
        if (w <= 0) return mr__fail(err, MR_ERR_IO, "cannot write the cache file: %s", strerror(errno));
        p += w;
        n -= (size_t)w;
        at += (uint64_t)w;
    }
    return MR_OK;
}

mr_status mr__store_append(mr__store *s, const char *packed, size_t bytes, mr__error *err)
{
    if (s->budget != 0 && s->bytes + bytes > s->budget)
        return mr__fail(err, MR_ERR_IO, "the cache file grew past half the free space of its directory (%.0f MB)",
                        (double)s->budget / 1e6);
    if (s->n == s->cap) MR__TRY(grow(s, err));
    MR__TRY(write_all(s->fd, packed, bytes, s->offset[s->n], err));
    s->offset[s->n + 1] = s->offset[s->n] + bytes;
    s->n++;
    s->bytes += bytes;
    return MR_OK;
}

int mr__store_keeps_bytes(const mr__store *s) { return s->fd >= 0 || s->packed; }

mr_status mr__store_put_packed(mr__store *s, const char *packed, size_t bytes, mr__error *err)
{
    return s->packed ? mr__store_add_packed(s, packed, bytes, err) : mr__store_append(s, packed, bytes, err);
}

mr_status mr__store_keep(mr__store *s, mr__block *blk, const mr__binding *b, mr__error *err)
{
    if (!mr__store_keeps_bytes(s)) {
        if (s->n == s->cap) MR__TRY(grow(s, err));
        s->block[s->n++] = *blk;
        return mr__block_init(blk, b, err);
    }
    MR__TRY(stage(s, b, err));
    return mr__store_put_packed(s, s->pack, mr__store_pack(blk, b, s->pack), err);
}

static void map_levels(const mr__store *s, mr__block *blk)
{
    size_t f, i;
    if (blk->worker < 0) return;
    for (f = 0; f < s->nfac; f++) {
        const int32_t *map = s->remap[(size_t)blk->worker * s->nfac + f];
        int32_t *lev = blk->lev + f * MR__BLOCK_ROWS;
        for (i = 0; i < blk->n; i++) lev[i] = map[lev[i]];
    }
    blk->worker = -1;
}

static mr_status read_all(int fd, char *p, size_t n, uint64_t at, mr__error *err)
{
    mr_status rc = mr__pread_full(fd, p, n, at);
    if (rc != MR_OK) return mr__fail(err, MR_ERR_IO, "cannot read the cache file: %s", rc == MR_ERR_IO ? strerror(errno) : "short");
    return MR_OK;
}

/* Room for one more block (and, should it be dropped, one more spare). */
static mr_status grow_packs(mr__store *s, mr__error *err)
{
    size_t cap = s->cap ? 2 * s->cap : 64;
    char **p, **q;
    if (s->n + 1 < s->cap) return MR_OK;
    if ((p = mr__realloc(s->packs, cap * sizeof *p)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->packs = p;
    if ((q = mr__realloc(s->spare, cap * sizeof *q)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->spare = q;
    s->cap = cap;
    return MR_OK;
}

mr_status mr__store_add_packed(mr__store *s, const char *packed, size_t bytes, mr__error *err)
{
    char *copy;
    MR__TRY(grow_packs(s, err));
    if ((copy = mr__malloc(bytes)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    memcpy(copy, packed, bytes);
    s->packs[s->n++] = copy;
    s->bytes += bytes;
    return MR_OK;
}

mr_status mr__store_adopt_packed(mr__store *s, char **buf, size_t bytes, mr__error *err)
{
    MR__TRY(grow_packs(s, err));
    s->packs[s->n++] = *buf;
    s->bytes += bytes;
    *buf = s->nspare > 0 ? s->spare[--s->nspare] : NULL;
    return MR_OK;
}

const char *mr__store_packed(const mr__store *s, size_t i) { return s->packs[i]; }

void mr__store_drop_odd(mr__store *s)
{
    size_t i, k = 0;
    for (i = 0; i < s->n; i++) {
        if (i % 2 == 0) s->packs[k++] = s->packs[i];
        else if (s->nspare < s->cap) s->spare[s->nspare++] = s->packs[i];
        else mr__free(s->packs[i]);
    }
    s->n = k;
}

mr_status mr__store_read(const mr__store *s, size_t i, char *buf, mr__error *err)
{
    return read_all(s->fd, buf, (size_t)(s->offset[i + 1] - s->offset[i]), s->offset[i], err);
}

void mr__store_unpack(const mr__store *s, const char *packed, size_t i, const mr__binding *b, mr__block *dst)
{
    unpack_block(packed, b, dst);
    dst->index = i;
    dst->nread = dst->n;
    dst->failed = 0;
    if (s->remap) map_levels(s, dst);
}

void mr__store_remap(mr__store *s, int32_t **remap, size_t nfac)
{
    size_t i;
    s->remap = remap;
    s->nfac = nfac;
    if (s->fd >= 0 || s->packed || remap == NULL) return;
    for (i = 0; i < s->n; i++) map_levels(s, &s->block[i]);
    s->remap = NULL;
}
