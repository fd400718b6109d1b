#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/levels.h"

void mr__levelset_init(mr__levelset *s) { memset(s, 0, sizeof *s); }

void mr__levelset_release(mr__levelset *s)
{
    size_t i;
    for (i = 0; i < s->cap; i++) mr__free(s->slot[i].str);
    mr__free(s->slot);
    mr__free(s->name);
    mr__levelset_init(s);
}

static uint64_t entry_hash(const mr__level_entry *e) { return mr__level_hash(e->head, e->str, e->len); }

static mr_status grow(mr__levelset *s)
{
    size_t cap = s->cap ? 2 * s->cap : 64, i;
    mr__levelset bigger;
    bigger.slot = mr__zalloc(cap, sizeof *bigger.slot);
    if (bigger.slot == NULL) return MR_ERR_NO_MEMORY;
    bigger.cap = cap;
    bigger.n = s->n;
    for (i = 0; i < s->cap; i++)
        if (s->slot[i].str != NULL) *mr__level_probe(&bigger, entry_hash(&s->slot[i]), s->slot[i].head, s->slot[i].str, s->slot[i].len) = s->slot[i];
    mr__free(s->slot);
    s->slot = bigger.slot;
    s->cap = cap;
    return MR_OK;
}

static mr_status insert_hashed(mr__levelset *s, uint64_t h, uint64_t head, const char *p, size_t len, int32_t id,
                         int32_t *out, mr__level_entry **made)
{
    mr__level_entry *e;
    *made = NULL;
    if (s->n + 1 > s->cap / 2 && grow(s) != 0) return MR_ERR_NO_MEMORY;
    e = mr__level_probe(s, h, head, p, len);
    if (e->str != NULL) {
        *out = e->id;
        return MR_OK;
    }
    if (s->n >= (s->limit ? s->limit : MR__MAX_LEVELS)) return MR_ERR_DOMAIN;
    e->str = mr__strndup(p, len);
    if (e->str == NULL) return MR_ERR_NO_MEMORY;
    e->head = head;
    e->len = (uint32_t)len;
    e->id = id;
    *out = id;
    *made = e;
    s->n++;
    return MR_OK;
}

mr_status mr__levelset_insert(mr__levelset *s, const char *p, size_t len, int32_t *id)
{
    uint64_t head = mr__level_head(p, len), h = mr__level_hash(head, p, len);
    mr__level_entry *made;
    mr_status rc;
    if (mr__reserve((void **)&s->name, &s->name_cap, s->n + 1, sizeof *s->name) != 0) return MR_ERR_NO_MEMORY;
    rc = insert_hashed(s, h, head, p, len, (int32_t)s->n, id, &made);
    if (made != NULL) {
        s->name[made->id].str = made->str;
        s->name[made->id].len = made->len;
    }
    return rc;
}


/* odd: j * SLOT_STRIDE mod a power of two visits every slot once */
#define SLOT_STRIDE ((size_t)2654435761u)

static int cmp_entry(const void *a, const void *b)
{
    const mr__level_entry *x = *(const mr__level_entry *const *)a, *y = *(const mr__level_entry *const *)b;
    size_t n = x->len < y->len ? x->len : y->len;
    int c = memcmp(x->str, y->str, n);
    if (c != 0) return c;
    return (x->len > y->len) - (x->len < y->len);
}

mr_status mr__levelset_merge_sorted(const mr__levelset *const *sets, size_t n, mr__levelset *out,
                              const char ***sorted)
{
    size_t i, j, k = 0;
    mr__level_entry **all;
    const char **names;
    mr_status rc = MR_OK;
    int32_t id;
    mr__level_entry *made;
    mr__levelset_init(out);
    out->limit = (size_t)-1; /* each set was held to its factor's limit */
    /* A set's slots run in the order of their hashes' top bits, the bits
     * that place them in `out` too: taken in that order, while `out` is
     * smaller, they pile up into one ever longer run of probes (10^5
     * levels from two workers: 2.5 x 10^9 instructions).  An odd stride
     * visits every slot in an order unrelated to the hashes. */
    for (i = 0; i < n; i++)
        for (j = 0; j < sets[i]->cap; j++) {
            const mr__level_entry *e = &sets[i]->slot[(j * SLOT_STRIDE) & (sets[i]->cap - 1)];
            if (e->str != NULL && (rc = insert_hashed(out, entry_hash(e), e->head, e->str, e->len, 0, &id, &made)) != 0)
                return rc;
        }
    all = mr__malloc_array(out->n ? out->n : 1, sizeof *all);
    names = mr__malloc_array(out->n ? out->n : 1, sizeof *names);
    if (all == NULL || names == NULL) {
        mr__free(all);
        mr__free(names);
        return MR_ERR_NO_MEMORY;
    }
    for (j = 0; j < out->cap; j++)
        if (out->slot[j].str != NULL) all[k++] = &out->slot[j];
    qsort(all, k, sizeof *all, cmp_entry);
    for (i = 0; i < k; i++) {
        all[i]->id = (int32_t)i;
        names[i] = all[i]->str;
    }
    mr__free(all);
    *sorted = names;
    return MR_OK;
}
