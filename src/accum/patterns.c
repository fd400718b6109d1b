#include <string.h>

#include "accum/patterns.h"
#include "common/alloc.h"

void mr__patterns_init(mr__pattern_table *t) { memset(t, 0, sizeof *t); }

void mr__patterns_release(mr__pattern_table *t)
{
    mr__free(t->slot);
    mr__free(t->ent);
    mr__free(t->keys);
    mr__patterns_init(t);
}

void mr__patterns_clear(mr__pattern_table *t)
{
    if (t->slot) memset(t->slot, 0, t->cap * sizeof *t->slot);
    t->n = 0;
    t->keys_len = 0;
}

/* Eight bytes a step: keys are a few dozen bytes and hashed once a row. */
uint64_t mr__patterns_hash(const char *key, size_t len)
{
    uint64_t h = 0x9e3779b97f4a7c15ULL ^ len, w;
    size_t i = 0;
    for (; i + 8 <= len; i += 8) {
        memcpy(&w, key + i, 8);
        h = (h ^ w) * 0xff51afd7ed558ccdULL;
        h ^= h >> 32;
    }
    w = 0;
    if (len > i) memcpy(&w, key + i, len - i);
    h = (h ^ w) * 0xc4ceb9fe1a85ec53ULL;
    return h ^ (h >> 29);
}

/* A slot holds the entry number + 1 in its low half and the top half of
 * the hash in its high half, so that probing past other patterns does not
 * touch their entries (the table is larger than the caches). */
#define SLOT_ENTRY(s) ((uint32_t)(s))
#define SLOT_TAG(h) ((h) & 0xffffffff00000000ULL)

static uint64_t *find_slot(const mr__pattern_table *t, uint64_t hash, const char *key, size_t len)
{
    size_t mask = t->cap - 1, i = (size_t)hash & mask;
    for (;;) {
        uint64_t *s = &t->slot[i];
        const mr__pattern *e;
        if (*s == 0) return s;
        if (SLOT_TAG(*s) == SLOT_TAG(hash)) {
            e = &t->ent[SLOT_ENTRY(*s) - 1];
            if (e->hash == hash && e->key_len == len && memcmp(t->keys + e->key_off, key, len) == 0) return s;
        }
        i = (i + 1) & mask;
    }
}

static int rehash(mr__pattern_table *t)
{
    size_t cap = t->cap ? 2 * t->cap : 1024, i;
    uint64_t *old = t->slot;
    size_t old_cap = t->cap;
    t->slot = mr__calloc(cap, sizeof *t->slot);
    if (t->slot == NULL) {
        t->slot = old;
        return -1;
    }
    t->cap = cap;
    for (i = 0; i < old_cap; i++)
        if (old[i]) {
            const mr__pattern *e = &t->ent[SLOT_ENTRY(old[i]) - 1];
            *find_slot(t, e->hash, t->keys + e->key_off, e->key_len) = old[i];
        }
    mr__free(old);
    return 0;
}

int mr__patterns_add(mr__pattern_table *t, const char *key, size_t len, uint64_t hash, double a, double b,
                     double c, double d)
{
    uint64_t *s = NULL;
    mr__pattern *e;
    if (!t->rows_only) {
        if ((t->n + 1) * 2 > t->cap && rehash(t) != 0) return -1;
        s = find_slot(t, hash, key, len);
    }
    if (t->rows_only || *s == 0) {
        if (mr__reserve((void **)&t->ent, &t->ent_cap, t->n + 1, sizeof *t->ent) != 0 ||
            mr__reserve((void **)&t->keys, &t->keys_cap, t->keys_len + len + 1, 1) != 0)
            return -1;
        e = &t->ent[t->n];
        e->hash = hash;
        e->key_off = (uint32_t)t->keys_len;
        e->key_len = (uint32_t)len;
        e->a = e->b = e->c = e->d = 0;
        memcpy(t->keys + t->keys_len, key, len);
        t->keys_len += len;
        ++t->n;
        if (t->rows_only) {
            e->a = a;
            e->b = b;
            e->c = c;
            e->d = d;
            return 0;
        }
        *s = SLOT_TAG(hash) | (uint64_t)(uint32_t)t->n;
    }
    e = &t->ent[SLOT_ENTRY(*s) - 1];
    e->a += a;
    e->b += b;
    e->c += c;
    e->d += d;
    return 0;
}

int mr__patterns_merge(mr__pattern_table *into, const mr__pattern_table *from)
{
    size_t i;
    for (i = 0; i < from->n; i++) {
        const mr__pattern *e = &from->ent[i];
        if (mr__patterns_add(into, from->keys + e->key_off, e->key_len, e->hash, e->a, e->b, e->c, e->d) != 0)
            return -1;
    }
    return 0;
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
