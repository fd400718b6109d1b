#include <string.h>

#include "accum/clusters.h"
#include "common/alloc.h"
#include "input/chunk.h"

#define MIB (1024.0 * 1024.0)

void mr__add_outer(double *M, size_t p, const double *v, size_t *nz)
{
    size_t a, b, k = 0;
    for (a = 0; a < p; a++)
        if (v[a] != 0.0) nz[k++] = a;
    for (b = 0; b < k; b++)
        for (a = 0; a <= b; a++) M[nz[b] * p + nz[a]] += v[nz[a]] * v[nz[b]];
}

mr_status mr__clusters_init(mr__clusters *c, size_t p, int table, size_t limit, double *meat, const char *display,
                            mr__error *err)
{
    memset(c, 0, sizeof *c);
    c->p = p;
    c->table = table;
    c->limit = limit;
    c->meat = meat;
    c->display = display;
    c->nz = mr__malloc_array(p + 1, sizeof *c->nz);
    c->open_vec = mr__calloc(p + 1, sizeof *c->open_vec);
    if (c->nz == NULL || c->open_vec == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

void mr__clusters_release(mr__clusters *c)
{
    mr__free(c->nz);
    mr__free(c->open_vec);
    mr__free(c->seen);
    mr__free(c->tkey);
    mr__free(c->tvec);
    mr__free(c->slot);
    memset(c, 0, sizeof *c);
}

static mr_status over_limit(const mr__clusters *c, mr__error *err)
{
    if (c->table)
        return mr__fail(err, MR_ERR_CLUSTERS,
                        "%s: the rows of each cluster are not together (a cluster comes back after others), and "
                        "holding the sums of its %llu clusters so far would take more than the %.0f MiB allowed "
                        "for robust standard errors: group the file by the cluster column (sort the rows by it, "
                        "the header first) and fit again, or allow more memory (--cluster-memory)",
                        c->display, (unsigned long long)c->n, (double)c->limit / MIB);
    return mr__fail(err, MR_ERR_CLUSTERS,
                    "%s: the %llu clusters met so far need more than the %.0f MiB allowed for robust standard "
                    "errors to check that each comes once: allow more memory (--cluster-memory)",
                    c->display, (unsigned long long)c->n, (double)c->limit / MIB);
}

/* ---- streamed ------------------------------------------------------------ */

static uint64_t fingerprint(const uint64_t *key) { return key[0] ? key[0] : 1; }

static int seen_has(const mr__clusters *c, uint64_t fp)
{
    size_t i;
    if (c->seen_cap == 0) return 0;
    for (i = fp & (c->seen_cap - 1); c->seen[i] != 0; i = (i + 1) & (c->seen_cap - 1))
        if (c->seen[i] == fp) return 1;
    return 0;
}

static void seen_put(uint64_t *set, size_t cap, uint64_t fp)
{
    size_t i;
    for (i = fp & (cap - 1); set[i] != 0 && set[i] != fp; i = (i + 1) & (cap - 1)) {
    }
    set[i] = fp;
}

/* The set grows by doubling at three quarters full. */
static mr_status seen_insert(mr__clusters *c, uint64_t fp, mr__error *err)
{
    if ((c->n + 1) * 4 > (uint64_t)c->seen_cap * 3) {
        size_t cap = c->seen_cap ? 2 * c->seen_cap : 4096, i;
        uint64_t *grown;
        if ((double)cap * sizeof *grown > (double)c->limit) return over_limit(c, err);
        grown = mr__calloc(cap, sizeof *grown);
        if (grown == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (i = 0; i < c->seen_cap; i++)
            if (c->seen[i] != 0) seen_put(grown, cap, c->seen[i]);
        mr__free(c->seen);
        c->seen = grown;
        c->seen_cap = cap;
    }
    seen_put(c->seen, c->seen_cap, fp);
    return MR_OK;
}

static mr_status close_open(mr__clusters *c, mr__error *err)
{
    if (!c->open) return MR_OK;
    mr__add_outer(c->meat, c->p, c->open_vec, c->nz);
    MR__TRY(seen_insert(c, fingerprint(c->open_key), err));
    c->n++;
    c->open = 0;
    return MR_OK;
}

static void open_cluster(mr__clusters *c, const uint64_t *key, const double *vec)
{
    c->open = 1;
    c->open_key[0] = key[0];
    c->open_key[1] = key[1];
    memcpy(c->open_vec, vec, c->p * sizeof *vec);
}

mr_status mr__clusters_add_streamed(mr__clusters *c, size_t nruns, const uint64_t *key, const double *vec,
                                    const double *inner, int *not_grouped, mr__error *err)
{
    size_t r, a, b;
    for (r = 0; r < nruns; r++) {
        const uint64_t *k = key + 2 * r;
        if (r == 0 && c->open && k[0] == c->open_key[0] && k[1] == c->open_key[1]) {
            for (a = 0; a < c->p; a++) c->open_vec[a] += vec[a];
            continue;
        }
        MR__TRY(close_open(c, err));
        if (seen_has(c, fingerprint(k))) {
            *not_grouped = 1;
            return mr__fail(err, MR_ERR_CLUSTERS, "%s: a cluster comes back after others", c->display);
        }
        if (r == 0 || r == nruns - 1) {
            open_cluster(c, k, r == 0 ? vec : vec + c->p);
            continue;
        }
        MR__TRY(seen_insert(c, fingerprint(k), err));
        c->n++;
    }
    if (nruns > 2)
        for (b = 0; b < c->p; b++)
            for (a = 0; a <= b; a++) c->meat[b * c->p + a] += inner[b * c->p + a];
    return MR_OK;
}

/* ---- streamed, as bytes ------------------------------------------------- */

void mr__clusters_put_block(uint64_t block, size_t p, size_t nruns, const uint64_t *key, const double *vec,
                            const double *inner, mr__bytebuf *b)
{
    size_t i, a, nvec = nruns < 2 ? nruns : 2;
    mr__bytebuf_u64(b, block);
    mr__bytebuf_u64(b, nruns);
    /* a run between the first and the last is only ever seen by its
     * fingerprint, its first word */
    for (i = 0; i < nruns; i++) mr__bytebuf_u64(b, key[2 * i]);
    for (i = 0; i < nvec; i++) mr__bytebuf_u64(b, key[2 * (i == 0 ? 0 : nruns - 1) + 1]);
    for (i = 0; i < nvec * p; i++) mr__bytebuf_f64(b, vec[i]);
    if (nruns > 2)
        for (i = 0; i < p; i++)
            for (a = 0; a <= i; a++) mr__bytebuf_f64(b, inner[i * p + a]);
}

/* One block back into key, vec (2 p) and inner (p x p, upper): its runs,
 * or (size_t)-1 when the bytes are not a block. */
static size_t get_block(mr__byteread *r, size_t p, uint64_t *key, double *vec, double *inner)
{
    size_t i, a, nruns = (size_t)mr__byteread_count(r, MR__BLOCK_ROWS, 8), nvec = nruns < 2 ? nruns : 2;
    for (i = 0; i < nruns; i++) {
        key[2 * i] = mr__byteread_u64(r);
        key[2 * i + 1] = 0;
    }
    for (i = 0; i < nvec; i++) key[2 * (i == 0 ? 0 : nruns - 1) + 1] = mr__byteread_u64(r);
    for (i = 0; i < nvec * p; i++) vec[i] = mr__byteread_f64(r);
    if (nruns > 2)
        for (i = 0; i < p; i++)
            for (a = 0; a <= i; a++) inner[i * p + a] = mr__byteread_f64(r);
    return r->bad ? (size_t)-1 : nruns;
}

mr_status mr__clusters_add_blocks(mr__clusters *c, mr__byteread *r, uint64_t *next_block, int *not_grouped,
                                  mr__error *err)
{
    uint64_t *key = mr__malloc_array(2 * MR__BLOCK_ROWS, sizeof *key);
    double *vec = mr__malloc_array(2 * c->p + 1, sizeof *vec);
    double *inner = mr__malloc_array(c->p * c->p + 1, sizeof *inner);
    mr_status st = key && vec && inner ? MR_OK : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    while (st == MR_OK && r->at < r->end) {
        uint64_t block = mr__byteread_u64(r);
        size_t nruns = get_block(r, c->p, key, vec, inner);
        if (nruns == (size_t)-1 || block != *next_block) {
            st = mr__fail(err, MR_ERR_IO, "clusters' sums: bytes that are not the next block's");
            break;
        }
        (*next_block)++;
        st = mr__clusters_add_streamed(c, nruns, key, vec, inner, not_grouped, err);
    }
    mr__free(key);
    mr__free(vec);
    mr__free(inner);
    return st;
}

/* ---- table --------------------------------------------------------------- */

static size_t slot_of(const mr__clusters *c, const uint64_t *key, int *found)
{
    size_t i;
    for (i = key[0] & (c->slot_cap - 1); c->slot[i] != 0; i = (i + 1) & (c->slot_cap - 1)) {
        const uint64_t *t = c->tkey + 2 * (c->slot[i] - 1);
        if (t[0] == key[0] && t[1] == key[1]) {
            *found = 1;
            return i;
        }
    }
    *found = 0;
    return i;
}

static mr_status grow_slots(mr__clusters *c, mr__error *err)
{
    size_t cap = c->slot_cap ? 2 * c->slot_cap : 4096, i, g;
    size_t *grown = mr__calloc(cap, sizeof *grown);
    if (grown == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (g = 0; g < c->n; g++) {
        for (i = c->tkey[2 * g] & (cap - 1); grown[i] != 0; i = (i + 1) & (cap - 1)) {
        }
        grown[i] = g + 1;
    }
    mr__free(c->slot);
    c->slot = grown;
    c->slot_cap = cap;
    return MR_OK;
}

/* A cluster new to the table: its key, a zero s, a slot. */
static mr_status table_new(mr__clusters *c, const uint64_t *key, size_t *index, mr__error *err)
{
    double bytes = (double)(c->n + 1) * (double)(2 * sizeof(uint64_t) + c->p * sizeof(double));
    int found;
    size_t i;
    if (bytes + (double)c->slot_cap * sizeof(size_t) > (double)c->limit) return over_limit(c, err);
    if ((c->n + 1) * 4 > (uint64_t)c->slot_cap * 3) MR__TRY(grow_slots(c, err));
    if (mr__reserve((void **)&c->tkey, &c->tkey_cap, c->n + 1, 2 * sizeof *c->tkey) != MR_OK ||
        mr__reserve((void **)&c->tvec, &c->tvec_cap, c->n + 1, c->p * sizeof *c->tvec) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    i = slot_of(c, key, &found);
    c->tkey[2 * c->n] = key[0];
    c->tkey[2 * c->n + 1] = key[1];
    memset(c->tvec + c->n * c->p, 0, c->p * sizeof *c->tvec);
    c->slot[i] = c->n + 1;
    *index = c->n++;
    return MR_OK;
}

mr_status mr__clusters_add_table(mr__clusters *c, size_t nruns, const uint64_t *key, const double *vec,
                                 mr__error *err)
{
    size_t r, a, g = 0;
    for (r = 0; r < nruns; r++) {
        int found = 0;
        double *s;
        if (c->slot_cap) {
            size_t i = slot_of(c, key + 2 * r, &found);
            g = found ? c->slot[i] - 1 : 0;
        }
        if (!found) MR__TRY(table_new(c, key + 2 * r, &g, err));
        s = c->tvec + g * c->p;
        for (a = 0; a < c->p; a++) s[a] += vec[r * c->p + a];
    }
    return MR_OK;
}

mr_status mr__clusters_finish(mr__clusters *c, mr__error *err)
{
    size_t g;
    if (!c->table) return close_open(c, err);
    for (g = 0; g < c->n; g++) mr__add_outer(c->meat, c->p, c->tvec + g * c->p, c->nz);
    return MR_OK;
}
