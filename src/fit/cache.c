/* cache.c - where later passes get their rows: memory, a cache file in
 * TMPDIR, or the input again (the cache only saves time: same bits). */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/statvfs.h>

#include "accum/first_bytes.h"
#include "common/alloc.h"
#include "fit/run.h"
/* The cache only saves time: when it cannot be had (no file can be made in
 * TMPDIR, or a write to it failed), every pass rereads the input, which
 * gives the same bits, and the fit's warnings say why, once. */
void mr__go_without_cache(mr__run *r, const char *why)
{
    mr__store_release(&r->store);
    r->use_store = r->cached = r->store_filled = 0;
    if (r->cache_note[0] == '\0')
        snprintf(r->cache_note, sizeof r->cache_note, "no cache: %s; every pass rereads the input", why);
}

/* A cache file in TMPDIR, or none (and the reason noted). */
static void open_cache(mr__run *r)
{
    mr__error scratch;
    mr__error_clear(&scratch);
    if (mr__store_init_file(&r->store, mr__temp_dir(), &scratch) != MR_OK) {
        mr__go_without_cache(r, scratch.msg);
        return;
    }
    r->store.budget = r->cache_budget;
    r->use_store = 1;
    r->cached = 1;
}

/* Where later passes get their rows: memory (asked for), a cache file
 * (default, when the disk has room), or the input again. */
void mr__choose_store(mr__run *r)
{
    const char *dir = mr__temp_dir();
    struct statvfs fs;
    struct stat in;
    double need = 0, room;
    /* Before the first pass only the input's size is known: decoded
     * columns take about 1.5 times the text, and zstd text about 4 times
     * less than that (generous on both counts, but a zstd file of blank
     * lines or repeated rows can expand far more: then a write fails and
     * the cache is given up). */
    if (r->set.n > 0) need = 8.0 * (double)r->set.total_size;
    else if (strcmp(r->path, "-") != 0 && stat(r->path, &in) == 0) need = 8.0 * (double)in.st_size;
    if (r->f->in_memory) {
        mr__store_init_packed(&r->store);
        r->use_store = 1;
        return;
    }
    mr__store_init_memory(&r->store);
    if (r->f->no_cache) return;
    if (statvfs(dir, &fs) == 0) {
        room = (double)fs.f_bavail * (double)fs.f_frsize;
        /* the estimate can be far off: the cache stops at half the room */
        r->cache_budget = room / 2 >= 1 ? (uint64_t)(room / 2) : 1;
        if (need > room / 2) {
            snprintf(r->cache_note, sizeof r->cache_note,
                     "no cache: it could need %.0f MB and %s has %.0f MB free; every pass rereads the input",
                     need / 1e6, dir, room / 1e6);
            return;
        }
    }
    open_cache(r);
}

int32_t *mr__level_map(const mr__run *r, size_t w, size_t f)
{
    const mr__levelset *local = &r->first.worker_levels[w][f];
    int32_t *map = mr__malloc_array(local->n + 1, sizeof *map);
    size_t j;
    for (j = 0; map && j <= local->n; j++) map[j] = -1;
    for (j = 0; map && j < local->cap; j++)
        if (local->slot[j].str != NULL && (size_t)local->slot[j].id < local->n)
            map[local->slot[j].id] = mr__levelset_find(&r->levels[f], local->slot[j].str, local->slot[j].len);
    return map;
}

/* Maps each first-pass decoder's level numbers to the shared ones. */
mr_status mr__build_remap(mr__run *r, mr__error *err)
{
    size_t w, f, nfac = r->bind.nfac, nw = r->first.nworkers;
    r->remap = mr__calloc(nw * nfac + 1, sizeof *r->remap);
    if (r->remap == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    r->nremap = nw * nfac;
    for (w = 0; w < nw; w++)
        for (f = 0; f < nfac; f++)
            if ((r->remap[w * nfac + f] = mr__level_map(r, w, f)) == NULL)
                return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

mr_status mr__drop_worker_levels(mr__run *r, mr__error *err)
{
    size_t w, f, n;
    if (r->design.nabsorb == 0 || r->design.absorb_var < 0 || r->collapsed || r->first.worker_levels == NULL)
        return MR_OK;
    if (r->remap == NULL) MR__TRY(mr__build_remap(r, err));
    if (r->f->checkpoint != NULL) { /* every checkpoint holds them */
        mr__first_encode(&r->first, r->bind.ncol, r->bind.nnum, r->bind.nfac, &r->first_bytes);
        if (r->first_bytes.failed) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    f = (size_t)r->design.absorb_var;
    for (w = 0; w < r->first.nworkers; w++) {
        mr__levelset *s = &r->first.worker_levels[w][f];
        n = s->n;
        mr__levelset_release(s);
        s->n = n;
    }
    return MR_OK;
}

/* After the first pass: the kept blocks are used as they are, or (when
 * the rows collapsed, or some blocks went unkept) the store starts afresh
 * and is filled by the first IRLS pass. */
mr_status mr__settle_store(mr__run *r, mr__error *err)
{
    int file = r->store.fd >= 0;
    if (!r->use_store) return MR_OK;
    if (r->first.store_failed) {
        mr__go_without_cache(r, r->first.store_err.msg);
        return MR_OK;
    }
    if (r->collapsed || r->first.store_incomplete) {
        mr__store_release(&r->store);
        if (r->collapsed) {
            r->use_store = r->cached = 0;
            return MR_OK;
        }
        if (file) open_cache(r);
        else mr__store_init_packed(&r->store);
        return MR_OK;
    }
    MR__TRY(mr__build_remap(r, err));
    mr__store_remap(&r->store, r->remap, r->bind.nfac);
    r->store_filled = 1;
    return MR_OK;
}
