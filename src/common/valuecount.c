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
        c->value[c->n] = scratch[i];
        c->count[c->n++] = 1;
    }
    note_range(c, c->value[0], c->value[c->n - 1]);
    return MR_OK;
}

/* The union of two sorted tables, into fresh arrays. */
static mr_status merge_tables(mr__value_counts *into, const mr__value_counts *from)
{
    size_t i = 0, j = 0, k = 0, need = into->n + from->n;
    double *v = mr__malloc_array(need ? need : 1, sizeof *v);
    uint64_t *n = mr__malloc_array(need ? need : 1, sizeof *n);
    if (v == NULL || n == NULL) {
        mr__free(v);
        mr__free(n);
        return MR_ERR_NO_MEMORY;
    }
    while (i < into->n || j < from->n) {
        if (j == from->n || (i < into->n && into->value[i] < from->value[j])) {
            v[k] = into->value[i];
            n[k++] = into->count[i++];
        } else if (i == into->n || from->value[j] < into->value[i]) {
            v[k] = from->value[j];
            n[k++] = from->count[j++];
        } else {
            v[k] = into->value[i];
            n[k++] = into->count[i++] + from->count[j++];
        }
    }
    mr__free(into->value);
    mr__free(into->count);
    into->value = v;
    into->count = n;
    into->n = into->cap = k;
    return MR_OK;
}

static void drop_table(mr__value_counts *c)
{
    mr__free(c->value);
    mr__free(c->count);
    c->value = NULL;
    c->count = NULL;
    c->n = c->cap = 0;
}

void mr__counts_merge(mr__value_counts *into, const mr__value_counts *from)
{
    if (from->total == 0) return;
    into->total += from->total;
    note_range(into, from->min, from->max);
    into->over |= from->over;
    into->failed |= from->failed;
    if (into->over || into->failed) {
        drop_table(into);
        return;
    }
    if (merge_tables(into, from) != MR_OK) {
        into->failed = 1;
        drop_table(into);
    } else if (into->n > MR__COUNT_MAX_DISTINCT) {
        into->over = 1;
        drop_table(into);
    }
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
