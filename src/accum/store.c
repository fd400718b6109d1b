#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "accum/store.h"
#include "common/alloc.h"

/* A kept block starts with its row count and the worker whose level
 * numbers it holds. */
#define HEADER (sizeof(uint32_t) + sizeof(int32_t))

void mr__store_init_memory(mr__store *s)
{
    memset(s, 0, sizeof *s);
    s->fd = -1;
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

/* The layout of a kept block: y, prior, offset, each numeric, each factor,
 * n entries each. */
static size_t pack_block(const mr__block *blk, const mr__binding *b, char *out)
{
    size_t o = 0, k, n = blk->n;
#define PUT(src, bytes) (memcpy(out + o, (src), (bytes)), o += (bytes))
    PUT(blk->y, n * sizeof(double));
    if (blk->prior) PUT(blk->prior, n * sizeof(double));
    if (blk->off) PUT(blk->off, n * sizeof(double));
    for (k = 0; k < b->nnum; k++) PUT(blk->num + k * MR__BLOCK_ROWS, n * sizeof(double));
    for (k = 0; k < b->nfac; k++) PUT(blk->lev + k * MR__BLOCK_ROWS, n * sizeof(int32_t));
#undef PUT
    return o;
}

static void unpack_block(const char *in, const mr__binding *b, mr__block *blk)
{
    size_t o = 0, k, n = blk->n;
#define GET(dst, bytes) (memcpy((dst), in + o, (bytes)), o += (bytes))
    GET(blk->y, n * sizeof(double));
    if (blk->prior) GET(blk->prior, n * sizeof(double));
    if (blk->off) GET(blk->off, n * sizeof(double));
    for (k = 0; k < b->nnum; k++) GET(blk->num + k * MR__BLOCK_ROWS, n * sizeof(double));
    for (k = 0; k < b->nfac; k++) GET(blk->lev + k * MR__BLOCK_ROWS, n * sizeof(int32_t));
#undef GET
}

static mr_status write_all(int fd, const char *p, size_t n, uint64_t at, mr__error *err)
{
    while (n > 0) {
        ssize_t w = pwrite(fd, p, n, (off_t)at);
        if (w < 0 && errno == EINTR) continue;
        if (w <= 0) return mr__fail(err, MR_ERR_IO, "cannot write the cache file: %s", strerror(errno));
        p += w;
        n -= (size_t)w;
        at += (uint64_t)w;
    }
    return MR_OK;
}

mr_status mr__store_keep(mr__store *s, mr__block *blk, const mr__binding *b, mr__error *err)
{
    size_t bytes;
    if (s->n == s->cap) MR__TRY(grow(s, err));
    if (s->fd < 0) {
        s->block[s->n++] = *blk;
        return mr__block_init(blk, b, err);
    }
    if (s->pack == NULL) {
        s->pack_cap = HEADER + MR__BLOCK_ROWS * mr__store_row_bytes(b);
        s->pack = mr__malloc(s->pack_cap);
        if (s->pack == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    memcpy(s->pack, &blk->n, sizeof(uint32_t));
    memcpy(s->pack + sizeof(uint32_t), &blk->worker, sizeof(int32_t));
    bytes = HEADER + pack_block(blk, b, s->pack + HEADER);
    MR__TRY(write_all(s->fd, s->pack, bytes, s->offset[s->n], err));
    s->offset[s->n + 1] = s->offset[s->n] + bytes;
    s->n++;
    s->bytes += bytes;
    return MR_OK;
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
    while (n > 0) {
        ssize_t r = pread(fd, p, n, (off_t)at);
        if (r < 0 && errno == EINTR) continue;
        if (r <= 0) return mr__fail(err, MR_ERR_IO, "cannot read the cache file: %s", r ? strerror(errno) : "short");
        p += r;
        n -= (size_t)r;
        at += (uint64_t)r;
    }
    return MR_OK;
}

mr_status mr__store_load(const mr__store *s, size_t i, const mr__binding *b, mr__block *dst,
                         const mr__block **use, mr__error *err)
{
    size_t bytes;
    if (s->fd < 0) {
        *use = &s->block[i];
        return MR_OK;
    }
    bytes = (size_t)(s->offset[i + 1] - s->offset[i]);
    MR__TRY(read_all(s->fd, s->pack, bytes, s->offset[i], err));
    memcpy(&dst->n, s->pack, sizeof(uint32_t));
    memcpy(&dst->worker, s->pack + sizeof(uint32_t), sizeof(int32_t));
    dst->index = i;
    dst->nread = dst->n;
    dst->failed = 0;
    unpack_block(s->pack + HEADER, b, dst);
    if (s->remap) map_levels(s, dst);
    *use = dst;
    return MR_OK;
}

void mr__store_remap(mr__store *s, int32_t **remap, size_t nfac)
{
    size_t i;
    s->remap = remap;
    s->nfac = nfac;
    if (s->fd >= 0 || remap == NULL) return;
    for (i = 0; i < s->n; i++) map_levels(s, &s->block[i]);
    s->remap = NULL;
}
