/* level_outcomes.c - see level_outcomes.h. */
#include <string.h>

#include "accum/level_outcomes.h"
#include "common/alloc.h"
#include "family/family.h"

mr__level_outcomes *mr__level_outcomes_new(size_t nfac, size_t ntables)
{
    mr__level_outcomes *lo = mr__calloc(1, sizeof *lo);
    if (lo == NULL) return NULL;
    lo->nfac = nfac;
    lo->ntables = ntables;
    lo->level = mr__calloc(nfac + 1, sizeof *lo->level);
    lo->nlevel = mr__calloc(nfac + 1, sizeof *lo->nlevel);
    lo->cells = mr__calloc(ntables + 1, sizeof *lo->cells);
    if (lo->level && lo->nlevel && lo->cells) return lo;
    mr__level_outcomes_free(lo);
    return NULL;
}

void mr__level_outcomes_free(mr__level_outcomes *lo)
{
    size_t i;
    if (lo == NULL) return;
    for (i = 0; lo->level && i < lo->nfac; i++) mr__free(lo->level[i]);
    for (i = 0; lo->cells && i < lo->ntables; i++) mr__free(lo->cells[i].slot);
    mr__free(lo->kind);
    mr__free(lo->tally);
    mr__free(lo->level);
    mr__free(lo->nlevel);
    mr__free(lo->cells);
    mr__free(lo);
}

static void count(mr__outcome_counts *c, double y, int binomial)
{
    c->rows++;
    c->above_zero += y > 0;
    c->below_max += binomial ? y < 1 : 1;
}

/* Level `id` of factor f, growing the array to hold it. */
static mr__outcome_counts *level_entry(mr__level_outcomes *lo, size_t f, uint32_t id)
{
    if (id >= lo->nlevel[f]) {
        size_t n = lo->nlevel[f] ? lo->nlevel[f] : 16;
        mr__outcome_counts *grown;
        while (n <= id) n *= 2;
        grown = mr__realloc(lo->level[f], n * sizeof *grown);
        if (grown == NULL) return NULL;
        memset(grown + lo->nlevel[f], 0, (n - lo->nlevel[f]) * sizeof *grown);
        lo->level[f] = grown;
        lo->nlevel[f] = n;
    }
    return &lo->level[f][id];
}

static size_t hash_key(uint64_t key, size_t cap)
{
    key ^= key >> 29;
    key *= 0xbf58476d1ce4e5b9ull;
    key ^= key >> 32;
    return (size_t)key & (cap - 1);
}

static int grow_cells(mr__cell_table *t)
{
    size_t cap = t->cap ? 2 * t->cap : 64, i, h;
    mr__cell_counts *slot = mr__calloc(cap, sizeof *slot);
    if (slot == NULL) return -1;
    for (i = 0; i < t->cap; i++) {
        if (t->slot[i].key == 0) continue;
        for (h = hash_key(t->slot[i].key, cap); slot[h].key != 0; h = (h + 1) & (cap - 1)) {
        }
        slot[h] = t->slot[i];
    }
    mr__free(t->slot);
    t->slot = slot;
    t->cap = cap;
    return 0;
}

static mr__outcome_counts *cell_entry(mr__cell_table *t, uint64_t key, int insert)
{
    size_t h;
    if (insert && 2 * (t->n + 1) > t->cap && grow_cells(t) != 0) return NULL;
    if (t->cap == 0) return NULL;
    for (h = hash_key(key, t->cap); t->slot[h].key != 0; h = (h + 1) & (t->cap - 1))
        if (t->slot[h].key == key) return &t->slot[h].c;
    if (!insert) return NULL;
    t->slot[h].key = key;
    t->n++;
    return &t->slot[h].c;
}

static uint64_t cell_key(uint32_t a, uint32_t b) { return ((uint64_t)a << 32 | b) + 1; }

int mr__cell_table_add(mr__cell_table *t, uint32_t a, uint32_t b, const mr__outcome_counts *c)
{
    return mr__cell_table_add_key(t, cell_key(a, b), c);
}

int mr__cell_table_add_key(mr__cell_table *t, uint64_t key, const mr__outcome_counts *c)
{
    mr__outcome_counts *e = cell_entry(t, key, 1);
    if (e == NULL) return -1;
    e->rows += c->rows;
    e->above_zero += c->above_zero;
    e->below_max += c->below_max;
    return 0;
}

int mr__cell_table_slot(const mr__cell_table *t, size_t i, uint32_t *a, uint32_t *b)
{
    uint64_t key = t->slot[i].key;
    if (key == 0) return 0;
    *a = (uint32_t)((key - 1) >> 32);
    *b = (uint32_t)(key - 1);
    return 1;
}

const mr__outcome_counts *mr__cell_table_find(const mr__cell_table *t, uint32_t a, uint32_t b)
{
    return cell_entry((mr__cell_table *)t, cell_key(a, b), 0);
}

const mr__outcome_counts *mr__cell_table_find_key(const mr__cell_table *t, uint64_t key)
{
    return cell_entry((mr__cell_table *)t, key, 0);
}

#define LEVEL_MASK ((1u << MR__CELL_LEVEL_BITS) - 1)

uint64_t mr__cell_key3(uint32_t a, uint32_t b, uint32_t c)
{
    return ((uint64_t)a << (2 * MR__CELL_LEVEL_BITS) | (uint64_t)b << MR__CELL_LEVEL_BITS | c) + 1;
}

void mr__cell_key3_levels(uint64_t key, uint32_t lev[3])
{
    key--;
    lev[0] = (uint32_t)(key >> (2 * MR__CELL_LEVEL_BITS));
    lev[1] = (uint32_t)(key >> MR__CELL_LEVEL_BITS) & LEVEL_MASK;
    lev[2] = (uint32_t)key & LEVEL_MASK;
}

int mr__cell_table_slot3(const mr__cell_table *t, size_t i, uint32_t lev[3])
{
    if (t->slot[i].key == 0) return 0;
    mr__cell_key3_levels(t->slot[i].key, lev);
    return 1;
}

/* Row i's cell of triple k: every level below 2^MR__CELL_LEVEL_BITS (a
 * worker numbers at most the levels it met, fewer than MR__MAX_LEVELS, but
 * a key must never alias another), else 0. */
static uint64_t triple_key(const mr__block *blk, const int32_t *f, uint32_t i)
{
    uint32_t lev[3];
    int k;
    for (k = 0; k < 3; k++) {
        lev[k] = (uint32_t)blk->lev[(size_t)f[k] * MR__BLOCK_ROWS + i];
        if (lev[k] > LEVEL_MASK) return 0;
    }
    return mr__cell_key3(lev[0], lev[1], lev[2]);
}

static void count_triples(mr__level_outcomes *lo, const mr__block *blk, const mr__decode_cfg *cfg, uint32_t i, double y,
                          int binomial)
{
    size_t k;
    for (k = 0; k < cfg->ntriples && !lo->failed; k++) {
        uint64_t key = triple_key(blk, cfg->triples[k], i);
        mr__outcome_counts *c = key ? cell_entry(&lo->cells[cfg->npairs + k], key, 1) : NULL;
        if (c == NULL) lo->failed = 1;
        else count(c, y, binomial);
    }
}

/* Factor f's counts, row by row (rows of weight 0 left out). */
static void count_rows(mr__outcome_counts *c, const int32_t *lev, const mr__block *blk, int binomial)
{
    const double *y = blk->y, *prior = blk->prior;
    uint32_t i;
    for (i = 0; i < blk->n; i++) {
        mr__outcome_counts *e = &c[(uint32_t)lev[i]];
        if (prior && !(prior[i] > 0)) continue;
        e->rows++;
        e->above_zero += y[i] > 0;
        e->below_max += binomial ? y[i] < 1 : 1;
    }
}

/* A row's kind: bit 1 its outcome above 0, bit 0 below the maximum (for
 * other families than the binomial, always). */
enum { KINDS = 4 };

/* The block's rows' kinds into lo->kind, the same for every factor. */
static int row_kinds(mr__level_outcomes *lo, const mr__block *blk, int binomial)
{
    uint32_t i;
    if (lo->kind == NULL && (lo->kind = mr__malloc_array(MR__BLOCK_ROWS, sizeof *lo->kind)) == NULL) return -1;
    for (i = 0; i < blk->n; i++)
        lo->kind[i] = (uint8_t)((blk->y[i] > 0) << 1 | (binomial ? blk->y[i] < 1 : 1));
    return 0;
}

/* Factor f's counts by a tally of (level, kind) pairs, one increment a
 * row, added into the counts per level afterwards: integers, the same
 * totals as row by row. */
static int tally_rows(mr__level_outcomes *lo, mr__outcome_counts *c, const int32_t *lev, uint32_t n, uint32_t top)
{
    size_t need = ((size_t)top + 1) * KINDS, l;
    uint32_t *t, i;
    if (need > lo->ntally) {
        uint32_t *grown = mr__realloc(lo->tally, need * sizeof *grown);
        if (grown == NULL) return -1;
        lo->tally = grown;
        lo->ntally = need;
    }
    t = lo->tally;
    memset(t, 0, need * sizeof *t);
    for (i = 0; i < n; i++) t[(size_t)(uint32_t)lev[i] * KINDS + lo->kind[i]]++;
    for (l = 0; l <= top; l++, t += KINDS) {
        uint32_t rows = t[0] + t[1] + t[2] + t[3];
        c[l].rows += rows;
        c[l].above_zero += t[2] + t[3];
        c[l].below_max += t[1] + t[3];
    }
    return 0;
}

/* Factor f's counts: its array grown once to the block's greatest level,
 * then the rows tallied where the levels are fewer than the rows and
 * every row counts (no weight column), else counted one by one. */
static int count_factor(mr__level_outcomes *lo, size_t f, const mr__block *blk, int binomial, int kinds,
                        const mr__levelset *local)
{
    const int32_t *lev = blk->lev + f * MR__BLOCK_ROWS;
    uint32_t i, top = 0;
    if (local != NULL && local[f].n > 0) top = (uint32_t)local[f].n - 1;
    else
        for (i = 0; i < blk->n; i++) top = (uint32_t)lev[i] > top ? (uint32_t)lev[i] : top;
    if (level_entry(lo, f, top) == NULL) return -1;
    if (kinds && top < blk->n) return tally_rows(lo, lo->level[f], lev, blk->n, top);
    count_rows(lo->level[f], lev, blk, binomial);
    return 0;
}

/* The cells of the pairs and triples of factors, row by row. */
static void count_cells(mr__level_outcomes *lo, const mr__block *blk, const mr__decode_cfg *cfg, int binomial)
{
    size_t k;
    uint32_t i;
    for (i = 0; i < blk->n && !lo->failed; i++) {
        double y = blk->y[i];
        if (blk->prior && !(blk->prior[i] > 0)) continue;
        for (k = 0; k < cfg->npairs; k++) {
            uint32_t a = (uint32_t)blk->lev[(size_t)cfg->pairs[k][0] * MR__BLOCK_ROWS + i];
            uint32_t b = (uint32_t)blk->lev[(size_t)cfg->pairs[k][1] * MR__BLOCK_ROWS + i];
            mr__outcome_counts *c = cell_entry(&lo->cells[k], cell_key(a, b), 1);
            if (c == NULL) {
                lo->failed = 1;
                return;
            }
            count(c, y, binomial);
        }
        count_triples(lo, blk, cfg, i, y, binomial);
    }
}

void mr__level_outcomes_block(mr__level_outcomes *lo, const mr__block *blk, const mr__decode_cfg *cfg,
                              const mr__levelset *local)
{
    int binomial = cfg->family->ops->takes_trials; /* the binomial: y a proportion */
    size_t f;
    int kinds;
    if (lo->failed || blk->n == 0) return;
    kinds = lo->nfac > 0 && blk->prior == NULL && row_kinds(lo, blk, binomial) == 0;
    for (f = 0; f < lo->nfac; f++)
        if (count_factor(lo, f, blk, binomial, kinds, local) != 0) {
            lo->failed = 1;
            return;
        }
    if (cfg->npairs + cfg->ntriples > 0) count_cells(lo, blk, cfg, binomial);
}
