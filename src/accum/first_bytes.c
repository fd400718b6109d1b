/* first_bytes.c - the first pass's result as bytes and back (first_bytes.h
 * has the layout).  Every value goes as its bits and every list in its
 * order, so a result read back is the one encoded, bit for bit; the
 * decoder trusts no count it reads (each must fit in the bytes left). */
#define _POSIX_C_SOURCE 200809L
#include <string.h>

#include "accum/first_bytes.h"
#include "common/alloc.h"

/* ---- encoding ------------------------------------------------------------ */

static void put_counts(mr__bytebuf *b, mr__value_counts *c)
{
    size_t i, n;
    mr__counts_finish(c);
    n = c->over || c->failed ? 0 : c->n;
    mr__bytebuf_u64(b, n);
    for (i = 0; i < n; i++) {
        mr__bytebuf_f64(b, c->value[i]);
        mr__bytebuf_u64(b, c->count[i]);
    }
    mr__bytebuf_u64(b, c->total);
    mr__bytebuf_f64(b, c->min);
    mr__bytebuf_f64(b, c->max);
    mr__bytebuf_u64(b, (uint64_t)c->over);
    mr__bytebuf_u64(b, (uint64_t)c->failed);
}

static void put_scan(mr__bytebuf *b, mr__scan_sums *s, size_t ncol, size_t nnum)
{
    size_t i;
    uint64_t head[7] = {s->nread, s->nused, s->incomplete, s->nbad, s->npos, s->nfraction, s->nnonint};
    double tail[5] = {s->sw, s->swy, s->swe, s->swoff, s->llc};
    for (i = 0; i < 7; i++) mr__bytebuf_u64(b, head[i]);
    for (i = 0; i < ncol; i++) mr__bytebuf_u64(b, s->missing[i]);
    for (i = 0; i < nnum; i++) {
        mr__bytebuf_f64(b, s->sx[i]);
        mr__bytebuf_f64(b, s->dev_scale[i]);
        mr__bytebuf_f64(b, s->dev_ssq[i]);
        mr__bytebuf_f64(b, s->xmin[i]);
        mr__bytebuf_f64(b, s->xmax[i]);
    }
    for (i = 0; i < 5; i++) mr__bytebuf_f64(b, tail[i]);
    mr__bytebuf_u64(b, s->nbad_shown);
    for (i = 0; i < s->nbad_shown; i++) {
        mr__bytebuf_u64(b, s->bad[i].line);
        mr__bytebuf_text(b, s->bad[i].msg, strnlen(s->bad[i].msg, sizeof s->bad[i].msg));
    }
    mr__bytebuf_u64(b, s->counts != NULL);
    mr__bytebuf_u64(b, (uint64_t)s->counts_failed);
    for (i = 0; s->counts && i < nnum; i++) put_counts(b, &s->counts[i]);
}

/* A set's strings in the order of their numbers. */
static void put_levelset(mr__bytebuf *b, const mr__levelset *set)
{
    const mr__level_entry **by_id = mr__calloc(set->n + 1, sizeof *by_id);
    size_t j;
    if (by_id == NULL) {
        b->failed = 1;
        return;
    }
    for (j = 0; j < set->cap; j++)
        if (set->slot[j].str != NULL && set->slot[j].id >= 0 && (size_t)set->slot[j].id < set->n)
            by_id[set->slot[j].id] = &set->slot[j];
    mr__bytebuf_u64(b, set->n);
    for (j = 0; j < set->n; j++) {
        if (by_id[j] == NULL) b->failed = 1; /* numbers not 0..n-1: never made so */
        else mr__bytebuf_text(b, by_id[j]->str, by_id[j]->len);
    }
    mr__free(by_id);
}

static void put_outcome(mr__bytebuf *b, const mr__outcome_counts *c)
{
    mr__bytebuf_u64(b, c->rows);
    mr__bytebuf_u64(b, c->above_zero);
    mr__bytebuf_u64(b, c->below_max);
}

/* A worker's outcome counts: per factor the levels it numbered (its array
 * may run longer, zeroed), per pair or triple of factors its cells in slot
 * order (a key's halves: level_outcomes.h). */
static void put_outcomes(mr__bytebuf *b, const mr__level_outcomes *lo, const mr__levelset *levels)
{
    size_t f, k, i;
    mr__bytebuf_u64(b, lo != NULL && !lo->failed);
    if (lo == NULL || lo->failed) return;
    mr__bytebuf_u64(b, lo->ntables);
    for (f = 0; f < lo->nfac; f++) {
        size_t n = lo->nlevel[f] < levels[f].n ? lo->nlevel[f] : levels[f].n;
        mr__bytebuf_u64(b, n);
        for (i = 0; i < n; i++) put_outcome(b, &lo->level[f][i]);
    }
    for (k = 0; k < lo->ntables; k++) {
        const mr__cell_table *t = &lo->cells[k];
        mr__bytebuf_u64(b, t->n);
        for (i = 0; i < t->cap; i++) {
            uint32_t a, c;
            if (!mr__cell_table_slot(t, i, &a, &c)) continue;
            mr__bytebuf_u64(b, a);
            mr__bytebuf_u64(b, c);
            put_outcome(b, &t->slot[i].c);
        }
    }
}

static void put_map(mr__bytebuf *b, const mr__block_map *m)
{
    size_t i;
    mr__bytebuf_u64(b, m->n);
    mr__bytebuf_u64(b, (uint64_t)m->usable);
    mr__bytebuf_u64(b, (uint64_t)m->mostly_blank);
    for (i = 0; i < m->n; i++) {
        const mr__block_span *s = &m->span[i];
        mr__bytebuf_u64(b, s->offset);
        mr__bytebuf_u64(b, s->end);
        mr__bytebuf_u64(b, s->first_line);
        mr__bytebuf_u64(b, s->rows_hash);
        mr__bytebuf_u64(b, s->nrows);
    }
}

static void put_patterns(mr__bytebuf *b, const mr__pattern_merge *m)
{
    const mr__pattern_table *t = &m->table;
    size_t k, i;
    mr__bytebuf_u64(b, m->nkey);
    for (k = 0; k < m->nkey; k++) put_levelset(b, &m->values[k]);
    mr__bytebuf_u64(b, t->n);
    mr__bytebuf_u64(b, t->kwords);
    for (i = 0; i < t->n; i++) {
        for (k = 0; k < MR__PATTERN_SUMS; k++) mr__bytebuf_f64(b, t->sums[i * MR__PATTERN_SUMS + k]);
        for (k = 0; k < t->kwords; k++) mr__bytebuf_u64(b, t->keys[i * t->kwords + k]);
    }
}

void mr__first_encode(mr__pass_result *res, size_t ncol, size_t nnum, size_t nfac, mr__bytebuf *b)
{
    uint64_t input[6] = {res->size, (uint64_t)res->mtime_ns, res->raw_bytes, res->out_bytes, res->checksum,
                         (uint64_t)res->zstd};
    size_t i, f;
    mr__bytebuf_head(b, "MRFP", MR__FIRST_VERSION);
    for (i = 0; i < 6; i++) mr__bytebuf_u64(b, input[i]);
    mr__bytebuf_u64(b, ncol);
    mr__bytebuf_u64(b, nnum);
    mr__bytebuf_u64(b, nfac);
    put_scan(b, &res->scan, ncol, nnum);
    mr__bytebuf_u64(b, res->nworkers);
    for (i = 0; i < res->nworkers; i++)
        for (f = 0; f < nfac; f++) put_levelset(b, &res->worker_levels[i][f]);
    mr__bytebuf_u64(b, res->worker_outcomes != NULL);
    for (i = 0; res->worker_outcomes && i < res->nworkers; i++)
        put_outcomes(b, res->worker_outcomes[i], res->worker_levels[i]);
    put_map(b, &res->map);
    mr__bytebuf_u64(b, (uint64_t)res->collapsed);
    mr__bytebuf_u64(b, (uint64_t)res->store_incomplete);
    if (res->collapsed) put_patterns(b, &res->patterns);
}

/* ---- decoding ------------------------------------------------------------ */

#define MAX_COLUMNS (1u << 20)
#define MAX_WORKERS 4096u

static mr_status get_counts(mr__byteread *r, mr__value_counts *c)
{
    uint64_t i, n = mr__byteread_count(r, MR__COUNT_MAX_DISTINCT, 16);
    mr__counts_init(c);
    c->value = mr__malloc_array(n + 1, sizeof *c->value);
    c->count = mr__malloc_array(n + 1, sizeof *c->count);
    if (c->value == NULL || c->count == NULL) return MR_ERR_NO_MEMORY;
    c->n = c->cap = (size_t)n;
    for (i = 0; i < n; i++) {
        c->value[i] = mr__byteread_f64(r);
        c->count[i] = mr__byteread_u64(r);
    }
    c->total = mr__byteread_u64(r);
    c->min = mr__byteread_f64(r);
    c->max = mr__byteread_f64(r);
    c->over = mr__byteread_count(r, 1, 0) != 0;
    c->failed = mr__byteread_count(r, 1, 0) != 0;
    return MR_OK;
}

static mr_status get_value_counts(mr__byteread *r, mr__scan_sums *s, size_t nnum)
{
    uint64_t present = mr__byteread_count(r, 1, 0);
    size_t k;
    s->counts_failed = mr__byteread_count(r, 1, 0) != 0;
    if (!present || r->bad) return MR_OK;
    s->counts = mr__calloc(nnum + 1, sizeof *s->counts);
    if (s->counts == NULL) return MR_ERR_NO_MEMORY;
    s->ncounts = nnum;
    for (k = 0; k < nnum; k++) mr__counts_init(&s->counts[k]);
    for (k = 0; k < nnum && !r->bad; k++) MR__TRY(get_counts(r, &s->counts[k]));
    return MR_OK;
}

static mr_status get_scan(mr__byteread *r, mr__scan_sums *s, size_t ncol, size_t nnum, mr__error *err)
{
    uint64_t *head[7] = {&s->nread, &s->nused, &s->incomplete, &s->nbad, &s->npos, &s->nfraction, &s->nnonint};
    double *tail[5] = {&s->sw, &s->swy, &s->swe, &s->swoff, &s->llc};
    size_t i;
    MR__TRY(mr__scan_init(s, ncol, nnum, err));
    for (i = 0; i < 7; i++) *head[i] = mr__byteread_u64(r);
    for (i = 0; i < ncol; i++) s->missing[i] = mr__byteread_u64(r);
    for (i = 0; i < nnum; i++) {
        s->sx[i] = mr__byteread_f64(r);
        s->dev_scale[i] = mr__byteread_f64(r);
        s->dev_ssq[i] = mr__byteread_f64(r);
        s->xmin[i] = mr__byteread_f64(r);
        s->xmax[i] = mr__byteread_f64(r);
    }
    for (i = 0; i < 5; i++) *tail[i] = mr__byteread_f64(r);
    s->nbad_shown = (uint32_t)mr__byteread_count(r, MR__BAD_SHOWN, 16);
    for (i = 0; i < s->nbad_shown && !r->bad; i++) {
        uint64_t n;
        const unsigned char *msg;
        s->bad[i].line = mr__byteread_u64(r);
        msg = mr__byteread_text(r, &n);
        if (msg == NULL || n >= sizeof s->bad[i].msg) r->bad = 1;
        else memcpy(s->bad[i].msg, msg, n);
    }
    if (get_value_counts(r, s, nnum) != MR_OK) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* Strings numbered in the order they come, as they were. */
static mr_status get_levelset(mr__byteread *r, mr__levelset *set)
{
    uint64_t j, n = mr__byteread_count(r, UINT32_MAX, 8);
    mr__levelset_init(set);
    set->limit = (size_t)-1; /* the count was checked where the set was made */
    for (j = 0; j < n && !r->bad; j++) {
        uint64_t len;
        int32_t id;
        const unsigned char *p = mr__byteread_text(r, &len);
        mr_status st;
        if (p == NULL) break;
        st = mr__levelset_add(set, (const char *)p, (size_t)len, &id);
        if (st == MR_ERR_NO_MEMORY) return st;
        if (st != MR_OK || (uint64_t)id != j) r->bad = 1; /* a string twice */
    }
    return MR_OK;
}

static mr_status get_worker_levels(mr__byteread *r, mr__pass_result *res, size_t nfac)
{
    size_t i, f, n = (size_t)mr__byteread_count(r, MAX_WORKERS, 0);
    res->worker_levels = mr__calloc(n + 1, sizeof *res->worker_levels);
    if (res->worker_levels == NULL) return MR_ERR_NO_MEMORY;
    res->nworkers = n;
    for (i = 0; i < n && !r->bad; i++) {
        res->worker_levels[i] = mr__calloc(nfac + 1, sizeof **res->worker_levels);
        if (res->worker_levels[i] == NULL) return MR_ERR_NO_MEMORY;
        for (f = 0; f < nfac; f++) MR__TRY(get_levelset(r, &res->worker_levels[i][f]));
    }
    return MR_OK;
}

static void get_outcome(mr__byteread *r, mr__outcome_counts *c)
{
    c->rows = mr__byteread_u64(r);
    c->above_zero = mr__byteread_u64(r);
    c->below_max = mr__byteread_u64(r);
}

static mr_status get_cells(mr__byteread *r, mr__cell_table *t)
{
    uint64_t i, n = mr__byteread_count(r, UINT32_MAX, 40);
    for (i = 0; i < n && !r->bad; i++) {
        /* below 2^32 - 1: the table's key of that cell would read as an empty slot */
        uint64_t a = mr__byteread_count(r, UINT32_MAX - 1, 0), b = mr__byteread_count(r, UINT32_MAX - 1, 0);
        mr__outcome_counts c;
        get_outcome(r, &c);
        if (r->bad) break;
        if (mr__cell_table_find(t, (uint32_t)a, (uint32_t)b) != NULL) r->bad = 1; /* a cell twice */
        else if (mr__cell_table_add(t, (uint32_t)a, (uint32_t)b, &c) != 0) return MR_ERR_NO_MEMORY;
    }
    return MR_OK;
}

/* One worker's counts (NULL when it had none whole: the zero-cell check is
 * then left out, as it was). */
static mr_status get_outcomes(mr__byteread *r, mr__level_outcomes **out, size_t nfac)
{
    mr__level_outcomes *lo;
    size_t f, k, i, ntables;
    if (mr__byteread_count(r, 1, 0) == 0) return MR_OK;
    ntables = (size_t)mr__byteread_count(r, 1024, 0);
    if (r->bad || (lo = *out = mr__level_outcomes_new(nfac, ntables)) == NULL) return r->bad ? MR_OK : MR_ERR_NO_MEMORY;
    for (f = 0; f < nfac && !r->bad; f++) {
        size_t n = (size_t)mr__byteread_count(r, UINT32_MAX, 24);
        if (r->bad) break;
        lo->level[f] = mr__calloc(n + 1, sizeof *lo->level[f]);
        if (lo->level[f] == NULL) return MR_ERR_NO_MEMORY;
        lo->nlevel[f] = n;
        for (i = 0; i < n; i++) get_outcome(r, &lo->level[f][i]);
    }
    for (k = 0; k < ntables && !r->bad; k++) MR__TRY(get_cells(r, &lo->cells[k]));
    return MR_OK;
}

static mr_status get_worker_outcomes(mr__byteread *r, mr__pass_result *res, size_t nfac)
{
    size_t i;
    if (mr__byteread_count(r, 1, 0) == 0 || r->bad) return MR_OK;
    res->worker_outcomes = mr__calloc(res->nworkers + 1, sizeof *res->worker_outcomes);
    if (res->worker_outcomes == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < res->nworkers && !r->bad; i++) MR__TRY(get_outcomes(r, &res->worker_outcomes[i], nfac));
    return MR_OK;
}

static mr_status get_map(mr__byteread *r, mr__block_map *m)
{
    uint64_t i, n = mr__byteread_count(r, UINT64_MAX, 40);
    m->usable = mr__byteread_count(r, 1, 0) != 0;
    m->mostly_blank = mr__byteread_count(r, 1, 0) != 0;
    if (r->bad) return MR_OK;
    m->span = mr__calloc((size_t)n + 1, sizeof *m->span);
    if (m->span == NULL) return MR_ERR_NO_MEMORY;
    m->n = m->cap = (size_t)n;
    for (i = 0; i < n; i++) {
        mr__block_span *s = &m->span[i];
        s->offset = mr__byteread_u64(r);
        s->end = mr__byteread_u64(r);
        s->first_line = mr__byteread_u64(r);
        s->rows_hash = mr__byteread_u64(r);
        s->nrows = (uint32_t)mr__byteread_count(r, UINT32_MAX, 0);
    }
    return MR_OK;
}

/* Every pattern's key numbers a value its column has: the patterns are
 * made into rows by those numbers (fit/collapse.c). */
static int keys_in_range(const mr__pattern_merge *m)
{
    size_t i, k;
    for (i = 0; i < m->table.n; i++)
        for (k = 0; k < m->nkey; k++)
            if (mr__pattern_id(&m->table, i, k) >= m->values[k].n) return 0;
    return 1;
}

static mr_status get_patterns(mr__byteread *r, mr__pattern_merge *m, size_t nkey_bound)
{
    uint64_t i, k, n, kwords, nkey = mr__byteread_count(r, MAX_COLUMNS, 8), *key;
    double sums[MR__PATTERN_SUMS];
    mr_status st = MR_OK;
    if (r->bad || nkey != nkey_bound) {
        r->bad = 1;
        return MR_OK;
    }
    if (mr__pattern_merge_init(m, (size_t)nkey, 1) != MR_OK) return MR_ERR_NO_MEMORY;
    for (k = 0; k < nkey && !r->bad; k++) MR__TRY(get_levelset(r, &m->values[k]));
    n = mr__byteread_count(r, MR__MAX_PATTERNS, 8 * MR__PATTERN_SUMS);
    kwords = mr__byteread_u64(r);
    if (kwords != m->table.kwords) r->bad = 1;
    if (r->bad) return MR_OK;
    key = mr__calloc((size_t)kwords + 1, sizeof *key);
    if (key == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < n && !r->bad && st == MR_OK; i++) {
        for (k = 0; k < MR__PATTERN_SUMS; k++) sums[k] = mr__byteread_f64(r);
        for (k = 0; k < kwords; k++) key[k] = mr__byteread_u64(r);
        if (!r->bad) st = mr__pattern_table_put(&m->table, key, sums);
    }
    mr__free(key);
    if (st == MR_OK && !r->bad && !keys_in_range(m)) r->bad = 1;
    return st;
}

static mr_status get_body(mr__byteread *r, mr__pass_result *res, size_t ncol, size_t nnum, size_t nfac,
                          mr__error *err)
{
    MR__TRY(get_scan(r, &res->scan, ncol, nnum, err));
    if (get_worker_levels(r, res, nfac) != MR_OK || get_worker_outcomes(r, res, nfac) != MR_OK ||
        get_map(r, &res->map) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    res->collapsed = mr__byteread_count(r, 1, 0) != 0;
    res->store_incomplete = mr__byteread_count(r, 1, 0) != 0;
    if (res->collapsed && get_patterns(r, &res->patterns, nfac + nnum) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

mr_status mr__first_decode(mr__byteread *r, mr__pass_result *res, size_t *ncol, size_t *nnum, size_t *nfac,
                           mr__error *err)
{
    uint64_t *input[5] = {&res->size, NULL, &res->raw_bytes, &res->out_bytes, &res->checksum};
    const unsigned char *head = mr__byteread_take(r, 8);
    uint32_t version;
    mr_status st;
    size_t i;
    memset(res, 0, sizeof *res);
    if (head == NULL || !mr__get_head(head, "MRFP", &version) || version != MR__FIRST_VERSION)
        return mr__fail(err, MR_ERR_IO, "first-pass result: not a version-%u result", MR__FIRST_VERSION);
    for (i = 0; i < 5; i++)
        if (input[i]) *input[i] = mr__byteread_u64(r);
        else res->mtime_ns = (int64_t)mr__byteread_u64(r);
    res->zstd = (int)mr__byteread_count(r, 255, 0);
    *ncol = (size_t)mr__byteread_count(r, MAX_COLUMNS, 0);
    *nnum = (size_t)mr__byteread_count(r, *ncol, 0);
    *nfac = (size_t)mr__byteread_count(r, *ncol, 0);
    st = r->bad ? MR_OK : get_body(r, res, *ncol, *nnum, *nfac, err);
    if (st == MR_OK && r->bad) st = mr__fail(err, MR_ERR_IO, "first-pass result: the bytes end early or hold a value out of range");
    if (st != MR_OK) mr__pass_result_release(res, *nfac);
    return st;
}
