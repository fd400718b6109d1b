#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/valuecount.h"

void mr__counts_init(mr__value_counts *c)
{
    memset(c, 0, sizeof *c);
    c->min = c->max = NAN;
}

void mr__counts_release(mr__value_counts *c)
{
    mr__free(c->value);
    mr__free(c->count);
    mr__free(c->slot);
    mr__counts_init(c);
}

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static mr_status reserve(mr__value_counts *c, size_t need)
{
    size_t cap = c->cap;
    if (need <= c->cap) return MR_OK;
    if (mr__reserve((void **)&c->value, &cap, need, sizeof *c->value) != MR_OK) return MR_ERR_NO_MEMORY;
    if (mr__reserve((void **)&c->count, &c->cap, need, sizeof *c->count) != MR_OK) return MR_ERR_NO_MEMORY;
    return MR_OK;
}

static void note_range(mr__value_counts *c, double lo, double hi)
{
    if (!(c->min <= lo)) c->min = lo;
    if (!(c->max >= hi)) c->max = hi;
}

mr_status mr__counts_of(mr__value_counts *c, const double *x, size_t n, double *scratch)
{
    size_t i;
    c->n = 0;
    c->total = n;
    c->over = c->failed = 0;
    c->min = c->max = NAN;
    if (n == 0) return MR_OK;
    memcpy(scratch, x, n * sizeof *x);
    qsort(scratch, n, sizeof *scratch, by_value);
    if (reserve(c, n) != MR_OK) return MR_ERR_NO_MEMORY;
    for (i = 0; i < n; i++) {
        if (c->n > 0 && c->value[c->n - 1] == scratch[i]) {
            c->count[c->n - 1]++;
            continue;
        }
        c->value[c->n] = scratch[i] == 0 ? 0.0 : scratch[i]; /* -0 as +0: one key */
        c->count[c->n++] = 1;
    }
    note_range(c, c->value[0], c->value[c->n - 1]);
    return MR_OK;
}

static void drop_table(mr__value_counts *c)
{
    mr__free(c->value);
    mr__free(c->count);
    mr__free(c->slot);
    c->value = NULL;
    c->count = NULL;
    c->slot = NULL;
    c->n = c->cap = c->nslots = 0;
}

static size_t slot_of(double v, size_t nslots)
{
    uint64_t z;
    memcpy(&z, &v, sizeof z);
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9); /* splitmix64's finaliser */
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    return (size_t)(z ^ (z >> 31)) & (nslots - 1);
}

static void insert(mr__count_slot *slot, size_t nslots, double v, uint64_t count, size_t *n)
{
    size_t i = slot_of(v, nslots);
    while (slot[i].count != 0 && slot[i].value != v) i = (i + 1) & (nslots - 1);
    if (slot[i].count == 0) {
        slot[i].value = v;
        (*n)++;
    }
    slot[i].count += count;
}

/* Room for `need` values at most half full. */
static mr_status grow(mr__value_counts *c, size_t need)
{
    size_t nslots = c->nslots ? c->nslots : 1024, i, n = 0;
    mr__count_slot *fresh;
    while (nslots < 2 * need) nslots *= 2;
    if (nslots == c->nslots) return MR_OK;
    if ((fresh = mr__calloc(nslots, sizeof *fresh)) == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < c->nslots; i++)
        if (c->slot[i].count != 0) insert(fresh, nslots, c->slot[i].value, c->slot[i].count, &n);
    mr__free(c->slot);
    c->slot = fresh;
    c->nslots = nslots;
    return MR_OK;
}

void mr__counts_merge(mr__value_counts *into, const mr__value_counts *from)
{
    size_t i;
    if (from->total == 0) return;
    into->total += from->total;
    note_range(into, from->min, from->max);
    into->over |= from->over;
    into->failed |= from->failed;
    if (!into->over && !into->failed && grow(into, into->n + from->n) != MR_OK) into->failed = 1;
    if (into->over || into->failed) {
        drop_table(into);
        return;
    }
    for (i = 0; i < from->n; i++) insert(into->slot, into->nslots, from->value[i], from->count[i], &into->n);
    if (into->n > MR__COUNT_MAX_DISTINCT) {
        into->over = 1;
        drop_table(into);
    }
}

static int by_slot_value(const void *a, const void *b)
{
    double x = ((const mr__count_slot *)a)->value, y = ((const mr__count_slot *)b)->value;
    return (x > y) - (x < y);
}

void mr__counts_finish(mr__value_counts *c)
{
    size_t i, k = 0;
    if (c->slot == NULL || c->over || c->failed) return;
    for (i = 0; i < c->nslots; i++)
        if (c->slot[i].count != 0) c->slot[k++] = c->slot[i];
    qsort(c->slot, k, sizeof *c->slot, by_slot_value);
    mr__free(c->value);
    mr__free(c->count);
    c->value = mr__malloc_array(k ? k : 1, sizeof *c->value);
    c->count = mr__malloc_array(k ? k : 1, sizeof *c->count);
    if (c->value == NULL || c->count == NULL) {
        c->failed = 1;
        drop_table(c);
        return;
    }
    for (i = 0; i < k; i++) {
        c->value[i] = c->slot[i].value;
        c->count[i] = c->slot[i].count;
    }
    c->n = c->cap = k;
    mr__free(c->slot);
    c->slot = NULL;
    c->nslots = 0;
}

double mr__counts_order_stat(const mr__value_counts *c, uint64_t r)
{
    size_t i;
    uint64_t seen = 0;
    for (i = 0; i < c->n; i++) {
        seen += c->count[i];
        if (r < seen) return c->value[i];
    }
    return c->n ? c->value[c->n - 1] : NAN;
}

/* Rows holding values below lo. */
static uint64_t rank_of(const mr__value_counts *c, double lo)
{
    uint64_t below = 0;
    size_t i;
    for (i = 0; i < c->n && c->value[i] < lo; i++) below += c->count[i];
    return below;
}

uint64_t mr__counts_within(const mr__value_counts *c, double lo, double hi)
{
    uint64_t n = 0;
    size_t i;
    for (i = 0; i < c->n; i++)
        if (c->value[i] >= lo && c->value[i] <= hi) n += c->count[i];
    return n;
}

double mr__counts_quantile(const mr__value_counts *c, double lo, double hi, double p)
{
    uint64_t n = mr__counts_within(c, lo, hi), base = rank_of(c, lo), j;
    double index, f, x_j, x_next;
    if (n == 0) return NAN;
    index = 1 + (double)(n - 1) * p;
    j = (uint64_t)floor(index);
    x_j = mr__counts_order_stat(c, base + j - 1);
    f = index - (double)j;
    if (!(f > 0)) return x_j;
    x_next = mr__counts_order_stat(c, base + j);
    if (x_next == x_j) return x_j;
    return (1 - f) * x_j + f * x_next;
}
