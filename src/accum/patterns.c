#include <string.h>

#include "accum/patterns.h"
#include "common/alloc.h"
#include "input/chunk.h"

/* ---- a block's rows (workers) ------------------------------------------ */

mr_status mr__pattern_rows_init(mr__pattern_rows *r, size_t nkey)
{
    memset(r, 0, sizeof *r);
    r->nkey = nkey;
    r->ids = mr__malloc_array((size_t)MR__BLOCK_ROWS * (nkey ? nkey : 1), sizeof *r->ids);
    r->sums = mr__malloc_array((size_t)MR__BLOCK_ROWS * MR__PATTERN_SUMS, sizeof *r->sums);
    r->from = mr__calloc(nkey + 1, sizeof *r->from);
    r->to = mr__calloc(nkey + 1, sizeof *r->to);
    if (r->ids && r->sums && r->from && r->to) return MR_OK;
    mr__pattern_rows_release(r);
    return MR_ERR_NO_MEMORY;
}

void mr__pattern_rows_release(mr__pattern_rows *r)
{
    mr__free(r->ids);
    mr__free(r->sums);
    mr__free(r->from);
    mr__free(r->to);
    mr__free(r->text);
    memset(r, 0, sizeof *r);
}

void mr__pattern_rows_begin(mr__pattern_rows *r, const mr__levelset *const *sets)
{
    size_t k;
    r->n = 0;
    r->text_len = 0;
    for (k = 0; k < r->nkey; k++) r->from[k] = r->to[k] = (uint32_t)sets[k]->n;
}

mr_status mr__pattern_rows_end(mr__pattern_rows *r, const mr__levelset *const *sets)
{
    size_t k, id;
    for (k = 0; k < r->nkey; k++) {
        r->to[k] = (uint32_t)sets[k]->n;
        for (id = r->from[k]; id < r->to[k]; id++) {
            const mr__level_name *v = &sets[k]->name[id];
            if (mr__reserve((void **)&r->text, &r->text_cap, r->text_len + sizeof v->len + v->len, 1) != 0) return MR_ERR_NO_MEMORY;
            memcpy(r->text + r->text_len, &v->len, sizeof v->len);
            memcpy(r->text + r->text_len + sizeof v->len, v->str, v->len);
            r->text_len += sizeof v->len + v->len;
        }
    }
    return MR_OK;
}

/* ---- the table of distinct patterns ------------------------------------- */

static void table_init(mr__pattern_table *t, size_t nkey)
{
    memset(t, 0, sizeof *t);
    t->nkey = nkey;
    t->kwords = (nkey + 1) / 2;
}

static void table_release(mr__pattern_table *t)
{
    mr__free(t->slot);
    mr__free(t->sums);
    mr__free(t->keys);
    table_init(t, t->nkey);
}

static double *sums_of(const mr__pattern_table *t, size_t i) { return t->sums + i * MR__PATTERN_SUMS; }
static const uint64_t *key_of(const mr__pattern_table *t, size_t i) { return t->keys + i * t->kwords; }

void mr__pattern_sums(const mr__pattern_table *t, size_t i, double out[MR__PATTERN_SUMS])
{
    memcpy(out, sums_of(t, i), MR__PATTERN_SUMS * sizeof *out);
}

uint32_t mr__pattern_id(const mr__pattern_table *t, size_t i, size_t k)
{
    return (uint32_t)(key_of(t, i)[k / 2] >> (32 * (k & 1)));
}

static uint64_t hash_key(const uint64_t *key, size_t n)
{
    uint64_t h = 0x9e3779b97f4a7c15ULL;
    size_t i;
    for (i = 0; i < n; i++) {
        h = (h ^ key[i]) * 0xff51afd7ed558ccdULL;
        h ^= h >> 32;
    }
    /* keys are small numbers: mix every bit into the low ones the table uses */
    h = (h ^ (h >> 33)) * 0xc4ceb9fe1a85ec53ULL;
    return h ^ (h >> 33);
}

/* A slot holds the record number + 1 in its low half and the top half of
 * the hash in its high half, so that probing past other patterns seldom
 * touches their records (the table is larger than the caches). */
#define SLOT_RECORD(s) ((uint32_t)(s))
#define SLOT_TAG(h) ((h) & 0xffffffff00000000ULL)

static uint64_t *find_slot(const mr__pattern_table *t, uint64_t hash, const uint64_t *key)
{
    size_t mask = t->cap - 1, i = (size_t)hash & mask, w;
    for (;;) {
        uint64_t *s = &t->slot[i];
        if (*s == 0) return s;
        if (SLOT_TAG(*s) == SLOT_TAG(hash)) {
            const uint64_t *k = key_of(t, SLOT_RECORD(*s) - 1);
            for (w = 0; w < t->kwords && k[w] == key[w]; w++) continue;
            if (w == t->kwords) return s;
        }
        i = (i + 1) & mask;
    }
}

/* Slots are rebuilt from the records, whose order alone matters. */
static mr_status rebuild_slots(mr__pattern_table *t, size_t cap)
{
    uint64_t *slot = mr__zalloc(cap, sizeof *slot);
    size_t i;
    if (slot == NULL) return MR_ERR_NO_MEMORY;
    mr__free(t->slot);
    t->slot = slot;
    t->cap = cap;
    for (i = 0; i < t->n; i++) {
        const uint64_t *k = key_of(t, i);
        uint64_t h = hash_key(k, t->kwords);
        *find_slot(t, h, k) = SLOT_TAG(h) | (uint64_t)(uint32_t)(i + 1);
    }
    return MR_OK;
}

/* Slots for n patterns and the next one, at most half full. */
static size_t slots_for(size_t n)
{
    size_t cap = 1024;
    while (cap < 2 * (n + 1)) cap *= 2;
    return cap;
}

/* Doubles the room of both arrays; the sums stay 64-byte aligned. */
static mr_status grow_records(mr__pattern_table *t)
{
    size_t room = t->room ? 2 * t->room : 4096;
    double *sums = mr__aligned_alloc(room * MR__PATTERN_SUMS * sizeof *sums);
    uint64_t *keys = mr__malloc_array(room * (t->kwords ? t->kwords : 1), sizeof *keys);
    if (sums == NULL || keys == NULL) {
        mr__free(sums);
        mr__free(keys);
        return MR_ERR_NO_MEMORY;
    }
    if (t->n > 0) {
        memcpy(sums, t->sums, t->n * MR__PATTERN_SUMS * sizeof *sums);
        memcpy(keys, t->keys, t->n * t->kwords * sizeof *keys);
    }
    mr__free(t->sums);
    mr__free(t->keys);
    t->sums = sums;
    t->keys = keys;
    t->room = room;
    return MR_OK;
}

/* A new pattern with zero sums: its record number, or -1 when out of
 * memory. */
static int64_t new_record(mr__pattern_table *t, const uint64_t *key)
{
    if (t->n == t->room && grow_records(t) != 0) return -1;
    memset(sums_of(t, t->n), 0, MR__PATTERN_SUMS * sizeof(double)); /* all bits zero is +0.0 */
    memcpy(t->keys + t->n * t->kwords, key, t->kwords * sizeof *key);
    return (int64_t)t->n++;
}

static void add_sums(mr__pattern_table *t, size_t i, const double *sums)
{
    double *acc = sums_of(t, i);
    size_t j;
    for (j = 0; j < MR__PATTERN_SUMS; j++) acc[j] += sums[j];
}

static mr_status table_add(mr__pattern_table *t, const uint64_t *key, uint64_t hash, const double *sums)
{
    uint64_t *s;
    if ((t->n + 1) * 2 > t->cap && rebuild_slots(t, slots_for(t->n)) != 0) return MR_ERR_NO_MEMORY;
    s = find_slot(t, hash, key);
    if (*s == 0) {
        int64_t i = new_record(t, key);
        if (i < 0) return MR_ERR_NO_MEMORY;
        *s = SLOT_TAG(hash) | (uint64_t)(uint32_t)(i + 1);
    }
    add_sums(t, SLOT_RECORD(*s) - 1, sums);
    return MR_OK;
}

/* A pattern read back (accum/first_bytes.c): appended as it comes, with no
 * hash slot (a table read back is only read, never merged into). */
mr_status mr__pattern_table_put(mr__pattern_table *t, const uint64_t *key, const double sums[MR__PATTERN_SUMS])
{
    int64_t i = new_record(t, key);
    if (i < 0) return MR_ERR_NO_MEMORY;
    memcpy(sums_of(t, (size_t)i), sums, MR__PATTERN_SUMS * sizeof *sums);
    return MR_OK;
}

/* ---- the merge (calling thread) ---------------------------------------- */

mr_status mr__pattern_merge_init(mr__pattern_merge *m, size_t nkey, size_t nworkers)
{
    size_t k;
    memset(m, 0, sizeof *m);
    m->nkey = nkey;
    m->nworkers = nworkers;
    table_init(&m->table, nkey);
    m->values = mr__calloc(nkey + 1, sizeof *m->values);
    m->map = mr__calloc(nworkers * nkey + 1, sizeof *m->map);
    m->map_cap = mr__calloc(nworkers * nkey + 1, sizeof *m->map_cap);
    m->key = mr__calloc((size_t)MR__BLOCK_ROWS * m->table.kwords + 1, sizeof *m->key);
    m->hash = mr__calloc(MR__BLOCK_ROWS, sizeof *m->hash);
    m->bits = mr__calloc(nkey + 1, 1);
    m->shift = mr__calloc(nkey + 1, 1);
    if (!m->values || !m->map || !m->map_cap || !m->key || !m->hash || !m->bits || !m->shift) {
        mr__pattern_merge_release(m);
        return MR_ERR_NO_MEMORY;
    }
    for (k = 0; k < nkey; k++) mr__levelset_init(&m->values[k]);
    return MR_OK;
}

void mr__pattern_merge_release(mr__pattern_merge *m)
{
    size_t i;
    for (i = 0; m->values && i < m->nkey; i++) mr__levelset_release(&m->values[i]);
    for (i = 0; m->map && i < m->nworkers * m->nkey; i++) mr__free(m->map[i]);
    mr__free(m->values);
    mr__free(m->map);
    mr__free(m->map_cap);
    mr__free(m->key);
    mr__free(m->hash);
    mr__free(m->dense);
    mr__free(m->bits);
    mr__free(m->shift);
    table_release(&m->table);
    memset(m, 0, sizeof *m);
}

/* Gives the worker's newly met values their global numbers. */
static mr_status learn_values(mr__pattern_merge *m, int32_t worker, const mr__pattern_rows *rows)
{
    size_t k, o = 0, id;
    for (k = 0; k < m->nkey; k++) {
        size_t at = (size_t)worker * m->nkey + k;
        if (rows->to[k] > rows->from[k] &&
            mr__reserve((void **)&m->map[at], &m->map_cap[at], rows->to[k], sizeof *m->map[at]) != 0)
            return MR_ERR_NO_MEMORY;
        for (id = rows->from[k]; id < rows->to[k]; id++) {
            uint32_t len;
            memcpy(&len, rows->text + o, sizeof len);
            if (mr__levelset_add(&m->values[k], rows->text + o + sizeof len, len, &m->map[at][id]) != 0) return MR_ERR_NO_MEMORY;
            o += sizeof len + len;
        }
    }
    return MR_OK;
}

static unsigned bits_for(size_t count)
{
    unsigned b = 0;
    while (((size_t)1 << b) < count) b++;
    return b;
}

/* Lays the direct index out afresh when a key column has outgrown its
 * bits, or hands over to the hash table for good when the cells would be
 * too many.  Either way the records, hence every result, are untouched. */
static mr_status fit_dense(mr__pattern_merge *m)
{
    const mr__pattern_table *t = &m->table;
    size_t k, i, total = 0;
    int grown = 0;
    for (k = 0; k < m->nkey; k++) {
        unsigned b = bits_for(m->values[k].n);
        if (b > m->bits[k]) {
            m->bits[k] = (unsigned char)b;
            grown = 1;
        }
        total += m->bits[k];
    }
    if (!grown && m->dense != NULL) return MR_OK;
    mr__free(m->dense);
    m->dense = NULL;
    if (total > MR__DENSE_MAX_BITS) {
        m->hashed = 1;
        return rebuild_slots(&m->table, slots_for(t->n));
    }
    if ((m->dense = mr__calloc((size_t)1 << total, sizeof *m->dense)) == NULL) return MR_ERR_NO_MEMORY;
    for (k = 0, total = 0; k < m->nkey; k++) {
        m->shift[k] = (unsigned char)total;
        total += m->bits[k];
    }
    for (i = 0; i < t->n; i++) {
        size_t cell = 0;
        for (k = 0; k < m->nkey; k++) cell |= (size_t)mr__pattern_id(t, i, k) << m->shift[k];
        m->dense[cell] = (uint32_t)(i + 1);
    }
    return MR_OK;
}

static void pack_key(const mr__pattern_merge *m, int32_t *const *map, const uint32_t *own, uint64_t *key)
{
    size_t k;
    memset(key, 0, m->table.kwords * sizeof *key);
    for (k = 0; k < m->nkey; k++) key[k / 2] |= (uint64_t)(uint32_t)map[k][own[k]] << (32 * (k & 1));
}

/* The pattern tables are larger than the caches, so a row's slot (or cell)
 * and record are fetched well before the row is added. */
enum { SLOT_AHEAD = 16, RECORD_AHEAD = 8 };

static void prefetch_ahead(const mr__pattern_table *t, const uint64_t *hash, size_t i, size_t n)
{
    size_t mask = t->cap - 1;
    if (i + SLOT_AHEAD < n) __builtin_prefetch(&t->slot[hash[i + SLOT_AHEAD] & mask]);
    if (i + RECORD_AHEAD < n) {
        uint64_t s = t->slot[hash[i + RECORD_AHEAD] & mask];
        if (s != 0) __builtin_prefetch(key_of(t, SLOT_RECORD(s) - 1));
    }
}

static mr_status add_hashed(mr__pattern_merge *m, int32_t *const *map, const mr__pattern_rows *rows)
{
    size_t i, kw = m->table.kwords;
    for (i = 0; i < rows->n; i++) {
        pack_key(m, map, rows->ids + i * m->nkey, m->key + i * kw);
        m->hash[i] = hash_key(m->key + i * kw, kw);
    }
    for (i = 0; i < rows->n; i++) {
        prefetch_ahead(&m->table, m->hash, i, rows->n);
        if (table_add(&m->table, m->key + i * kw, m->hash[i], rows->sums + i * MR__PATTERN_SUMS) != 0) return MR_ERR_NO_MEMORY;
    }
    return MR_OK;
}

static void prefetch_cell(const mr__pattern_merge *m, const uint64_t *cell, size_t i, size_t n)
{
    if (i + SLOT_AHEAD < n) __builtin_prefetch(&m->dense[cell[i + SLOT_AHEAD]]);
    if (i + RECORD_AHEAD < n) {
        uint32_t r = m->dense[cell[i + RECORD_AHEAD]];
        if (r != 0) __builtin_prefetch(sums_of(&m->table, r - 1), 1);
    }
}

static mr_status add_dense(mr__pattern_merge *m, int32_t *const *map, const mr__pattern_rows *rows)
{
    uint64_t *cell = m->hash;
    size_t i, k;
    for (i = 0; i < rows->n; i++) {
        const uint32_t *own = rows->ids + i * m->nkey;
        uint64_t c = 0;
        for (k = 0; k < m->nkey; k++) c |= (uint64_t)(uint32_t)map[k][own[k]] << m->shift[k];
        cell[i] = c;
    }
    for (i = 0; i < rows->n; i++) {
        uint32_t *at = &m->dense[cell[i]];
        prefetch_cell(m, cell, i, rows->n);
        if (*at == 0) {
            int64_t r;
            pack_key(m, map, rows->ids + i * m->nkey, m->key);
            if ((r = new_record(&m->table, m->key)) < 0) return MR_ERR_NO_MEMORY;
            *at = (uint32_t)(r + 1);
        }
        add_sums(&m->table, *at - 1, rows->sums + i * MR__PATTERN_SUMS);
    }
    return MR_OK;
}

mr_status mr__pattern_merge_add(mr__pattern_merge *m, int32_t worker, const mr__pattern_rows *rows)
{
    int32_t *const *map = m->map + (size_t)worker * m->nkey;
    if (learn_values(m, worker, rows) != 0) return MR_ERR_NO_MEMORY;
    if (!m->hashed && fit_dense(m) != 0) return MR_ERR_NO_MEMORY;
    return m->hashed ? add_hashed(m, map, rows) : add_dense(m, map, rows);
}

int mr__few_distinct(const double *x, size_t n, size_t limit)
{
    enum { CAP = 2048 };
    uint64_t seen[CAP];
    unsigned char used[CAP];
    size_t i, count = 0;
    memset(used, 0, sizeof used);
    for (i = 0; i < n; i++) {
        uint64_t bits, h;
        size_t s;
        memcpy(&bits, &x[i], sizeof bits);
        h = bits * 0x9e3779b97f4a7c15ULL;
        s = (size_t)(h >> 53) & (CAP - 1);
        while (used[s] && seen[s] != bits) s = (s + 1) & (CAP - 1);
        if (used[s]) continue;
        if (++count > limit) return 0;
        used[s] = 1;
        seen[s] = bits;
    }
    return 1;
}
