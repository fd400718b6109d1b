/* levels.h - the distinct values of a factor column.
 *
 * During the first pass each worker collects the strings it meets in a set
 * of its own; the sets are merged and sorted once, and from then on the
 * sorted set is read-only and shared by every worker to turn a cell into a
 * level number. */
#ifndef MR_LEVELS_H
#define MR_LEVELS_H

#include <stddef.h>
#include <stdint.h>
#include <string.h>
#include "millrace.h"

#define MR__MAX_LEVELS 100000
/* A factor declared `many` (its levels eliminated, solve/absorb.h: memory
 * linear in them, no column each) may have more.  Below 2^21, the level
 * numbers accum/level_outcomes.h packs (a `many` factor is in no
 * interaction, but a key must never alias another). */
#define MR__MAX_MANY_LEVELS 1000000

/* 24 bytes: the hash is not kept (growing and merging make it again from
 * head and str), since a set of 10^5 levels holds 2^18 entries. */
typedef struct mr__level_entry {
    uint64_t head; /* the first 8 bytes, zero-padded: most levels are that short */
    char *str;
    uint32_t len;
    int32_t id;
} mr__level_entry;

typedef struct mr__level_name {
    const char *str; /* owned by the set's entry */
    uint32_t len;
} mr__level_name;

typedef struct mr__levelset {
    mr__level_entry *slot;
    size_t cap, n;
    /* Sets filled by mr__levelset_add: each id's string, in id order. */
    mr__level_name *name;
    size_t name_cap;
    /* Most levels the set takes; 0 = MR__MAX_LEVELS. */
    size_t limit;
} mr__levelset;

/* ---- the look-up, inline: it runs for every factor cell ---------- */

/* Levels are met once a cell, so the common short ones are compared as
 * one word and hashed from it, with no call to memcmp.  The word must be
 * the same for the same bytes and differ for other bytes of the same
 * length; two overlapping loads give that on a little-endian machine. */
static inline uint64_t mr__level_head(const char *p, size_t len)
{
    uint64_t w = 0;
    if (len >= 8) { /* numeric values are kept as their 8 bytes */
        memcpy(&w, p, 8);
        return w;
    }
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
    if (len >= 4) {
        uint32_t lo, hi;
        memcpy(&lo, p, 4);
        memcpy(&hi, p + len - 4, 4);
        return (uint64_t)lo | (uint64_t)hi << (8 * (len - 4));
    }
    if (len == 0) return 0;
    return (uint64_t)(unsigned char)p[0] | (uint64_t)(unsigned char)p[len / 2] << (8 * (len / 2)) |
           (uint64_t)(unsigned char)p[len - 1] << (8 * (len - 1));
#else
    for (size_t i = 0; i < len; i++) w |= (uint64_t)(unsigned char)p[i] << (8 * i);
    return w;
#endif
}

/* One multiplication; the table takes its slot from the top bits, which
 * every input bit reaches (numeric values, kept as their 8 bytes, differ
 * only in their high bits). */
static inline uint64_t mr__level_hash(uint64_t head, const char *p, size_t len)
{
    uint64_t h = head ^ ((uint64_t)len << 59);
    size_t i;
    for (i = 8; i < len; i++) h = (h ^ (unsigned char)p[i]) * 0x100000001b3ULL;
    return h * 0x9e3779b97f4a7c15ULL;
}

static inline size_t mr__level_home(const mr__levelset *s, uint64_t h) { return (size_t)(h >> (64 - __builtin_ctzll(s->cap))); }

static inline mr__level_entry *mr__level_probe(const mr__levelset *s, uint64_t h, uint64_t head, const char *p, size_t len)
{
    size_t mask = s->cap - 1, i = mr__level_home(s, h);
    for (;;) {
        mr__level_entry *e = &s->slot[i];
        if (e->str == NULL) return e;
        if (e->head == head && e->len == len && (len <= 8 || memcmp(e->str + 8, p + 8, len - 8) == 0)) return e;
        i = (i + 1) & mask;
    }
}

/* 1 and the id in *id when the set holds the string; 0 when not. */
static inline int mr__levelset_lookup(const mr__levelset *s, const char *p, size_t len, int32_t *id)
{
    uint64_t head;
    const mr__level_entry *e;
    if (s->cap == 0) return 0;
    head = mr__level_head(p, len);
    e = mr__level_probe(s, mr__level_hash(head, p, len), head, p, len);
    if (e->str == NULL) return 0;
    *id = e->id;
    return 1;
}

void mr__levelset_init(mr__levelset *s);
void mr__levelset_release(mr__levelset *s);

/* mr__levelset_add's rare case, out of line: the string is not in the set. */
mr_status mr__levelset_insert(mr__levelset *s, const char *p, size_t len, int32_t *id);

/* Adds the string if new (id = order of arrival) and stores its id in
 * *id.  Returns MR_OK, or MR_ERR_NO_MEMORY, or MR_ERR_DOMAIN when the set
 * already holds its limit.  Inline: nearly every cell is met before. */
static inline mr_status mr__levelset_add(mr__levelset *s, const char *p, size_t len, int32_t *id)
{
    return mr__levelset_lookup(s, p, len, id) ? MR_OK : mr__levelset_insert(s, p, len, id);
}
/* The id of a string, or -1. */
static inline int32_t mr__levelset_find(const mr__levelset *s, const char *p, size_t len)
{
    int32_t id;
    return mr__levelset_lookup(s, p, len, &id) ? id : -1;
}

/* Merges `n` sets into a new set whose ids follow byte-wise sorted order,
 * and lists the strings in that order (*sorted[i] points into *out).
 * MR_OK, or MR_ERR_NO_MEMORY (or MR_ERR_DOMAIN: more than MR__MAX_LEVELS
 * strings in all). */
mr_status mr__levelset_merge_sorted(const mr__levelset *const *sets, size_t n, mr__levelset *out,
                              const char ***sorted);

#endif
