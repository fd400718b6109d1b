/* pass_pool.c - the buffers one pass leaves to the next (mr__pass_pool,
 * pass.h): the ring's slots' chunks, blocks and packing buffers, and the
 * workers' workspaces.  Apart from pass.c because it is memory kept across
 * passes, not the running of one. */
#include <string.h>

#include "accum/pass.h"
#include "accum/pass_engine.h"
#include "common/alloc.h"

struct mr__pool_slot {
    mr__chunk *chunk; /* NULL: nothing kept here */
    mr__block block;
    char *packed;
};

/* Slot i's buffers from the pool, when it kept some for this binding. */
int mr__pass_pool_take_slot(mr__pass_pool *pool, const mr__binding *b, size_t i, slot *s)
{
    struct mr__pool_slot *k;
    if (pool == NULL || pool->bind != b || i >= pool->nslot || pool->slot[i].chunk == NULL) return 0;
    k = &pool->slot[i];
    s->chunk = k->chunk;
    s->block = k->block;
    s->packed = k->packed;
    memset(k, 0, sizeof *k);
    return 1;
}

/* Leaves slot i's buffers to the pool; 0 when it has no room for them. */
int mr__pass_pool_leave_slot(mr__pass_pool *pool, const mr__binding *b, size_t W, size_t i, slot *s)
{
    struct mr__pool_slot *k;
    if (pool == NULL || s->chunk == NULL || (pool->bind != NULL && pool->bind != b)) return 0;
    if (pool->slot == NULL) {
        if ((pool->slot = mr__calloc(W, sizeof *pool->slot)) == NULL) return 0;
        pool->nslot = W;
        pool->bind = b;
    }
    if (i >= pool->nslot || pool->slot[i].chunk != NULL) return 0;
    k = &pool->slot[i];
    k->chunk = s->chunk;
    k->block = s->block;
    k->packed = s->packed;
    s->chunk = NULL;
    s->packed = NULL;
    memset(&s->block, 0, sizeof s->block);
    return 1;
}

int mr__pass_pool_take_workspace(mr__pass_pool *pool, const mr__design *d, size_t i, mr__workspace *ws)
{
    if (pool == NULL || pool->design != d || i >= pool->nws || pool->ws[i].D == NULL) return 0;
    *ws = pool->ws[i];
    memset(&pool->ws[i], 0, sizeof *ws);
    return 1;
}

void mr__pass_pool_keep_workspace(mr__pass_pool *pool, const mr__design *d, size_t nworkers, size_t i,
                                  mr__workspace *ws)
{
    if (pool == NULL || ws->D == NULL || (pool->design != NULL && pool->design != d)) return;
    if (pool->ws == NULL) {
        if ((pool->ws = mr__calloc(nworkers, sizeof *pool->ws)) == NULL) return;
        pool->nws = nworkers;
        pool->design = d;
    }
    if (i >= pool->nws || pool->ws[i].D != NULL) return;
    pool->ws[i] = *ws;
    memset(ws, 0, sizeof *ws);
}

void mr__pass_pool_keep_levels(mr__pass_pool *pool, double **lev, size_t n)
{
    if (pool == NULL || pool->lev != NULL || *lev == NULL) return;
    pool->lev = *lev;
    pool->nlev_doubles = n;
    *lev = NULL;
}

double *mr__pass_pool_take_levels(mr__pass_pool *pool, size_t n)
{
    double *lev;
    if (pool == NULL || pool->lev == NULL || pool->nlev_doubles != n) return mr__zalloc(n, sizeof(double));
    lev = pool->lev;
    pool->lev = NULL;
    memset(lev, 0, n * sizeof *lev);
    return lev;
}

void mr__pass_pool_release(mr__pass_pool *pool)
{
    size_t i;
    for (i = 0; i < pool->nslot; i++) {
        struct mr__pool_slot *k = &pool->slot[i];
        if (k->chunk) mr__free(k->chunk->data);
        mr__free(k->chunk);
        mr__free(k->packed);
        mr__block_release(&k->block);
    }
    for (i = 0; i < pool->nws; i++) mr__workspace_release(&pool->ws[i]);
    mr__free(pool->slot);
    mr__free(pool->ws);
    mr__free(pool->lev);
    memset(pool, 0, sizeof *pool);
}
