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

#define MR__MAX_LEVELS 100000

typedef struct mr__level_entry {
    uint64_t hash;
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
} mr__levelset;

void mr__levelset_init(mr__levelset *s);
void mr__levelset_release(mr__levelset *s);

/* Adds the string if new (id = order of arrival) and stores its id in
 * *id.  Returns 0, or -1 when out of memory, or -2 when the set already
 * holds MR__MAX_LEVELS. */
int mr__levelset_add(mr__levelset *s, const char *p, size_t len, int32_t *id);
/* The id of a string, or -1. */
int32_t mr__levelset_find(const mr__levelset *s, const char *p, size_t len);

/* Merges `n` sets into a new set whose ids follow byte-wise sorted order,
 * and lists the strings in that order (*sorted[i] points into *out). */
int mr__levelset_merge_sorted(const mr__levelset *const *sets, size_t n, mr__levelset *out,
                              const char ***sorted);

#endif
