#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/utf8.h"
#include "family/family.h"
#include "accum/decode.h"

mr_status mr__block_init(mr__block *b, const mr__binding *bind, mr__error *err)
{
    const size_t R = MR__BLOCK_ROWS;
    memset(b, 0, sizeof *b);
    b->y = mr__malloc_array(R, sizeof *b->y);
    if (bind->has_weight || bind->has_trials) b->prior = mr__malloc_array(R, sizeof *b->prior);
    if (bind->has_offset || bind->has_exposure) b->off = mr__malloc_array(R, sizeof *b->off);
    b->num = mr__malloc_array(R * (bind->nnum ? bind->nnum : 1), sizeof *b->num);
    b->lev = mr__malloc_array(R * (bind->nfac ? bind->nfac : 1), sizeof *b->lev);
    b->missing = mr__calloc(bind->ncol, sizeof *b->missing);
    if (bind->has_cluster) b->cluster = mr__malloc_array(2 * R, sizeof *b->cluster);
    if (!b->y || !b->num || !b->lev || !b->missing || ((bind->has_weight || bind->has_trials) && !b->prior) ||
        ((bind->has_offset || bind->has_exposure) && !b->off) || (bind->has_cluster && !b->cluster)) {
        mr__block_release(b);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

static void release_counts(mr__block *b)
{
    size_t k;
    for (k = 0; b->counts && k < b->ncounts; k++) mr__counts_release(&b->counts[k]);
    mr__free(b->counts);
    mr__free(b->count_scratch);
}

void mr__block_release(mr__block *b)
{
    mr__free(b->y);
    mr__free(b->prior);
    mr__free(b->off);
    mr__free(b->num);
    mr__free(b->lev);
    mr__free(b->cluster);
    mr__free(b->missing);
    release_counts(b);
    mr__free(b->new_levels);
    mr__free(b->extra);
    mr__free(b->cal_rows);
    mr__free(b->cal_weight);
    if (b->patterns) mr__pattern_rows_release(b->patterns);
    mr__free(b->patterns);
    memset(b, 0, sizeof *b);
}

void mr__block_settle_offsets(mr__block *b)
{
    uint32_t i;
    if (!b->off_is_exposure) return;
    for (i = 0; i < b->n; i++) b->off[i] = log(b->off[i]);
    b->off_is_exposure = 0;
}

/* A missing token that reads as a number ("-1", "999") must be tested for
 * before a cell is parsed, which the quick path does not do. */
static int numeric_missing_token(const mr__decode_cfg *cfg)
{
    size_t i;
    for (i = 0; i < cfg->nmissing; i++) {
        double v;
        const char *m = cfg->missing[i], *e = m + cfg->missing_len[i];
        if (cfg->missing_len[i] > 0 && mr__parse_short_decimal(m, e, cfg->delim, &v) == e) return 1;
    }
    return 0;
}

mr_status mr__decoder_init(mr__decoder *d, const mr__decode_cfg *cfg, mr__error *err)
{
    const mr__binding *b = cfg->bind;
    size_t f;
    int quick;
    memset(d, 0, sizeof *d);
    d->cfg = cfg;
    d->np = mr__numparser_new();
    /* A worker writes these for every cell: lines of their own. */
    d->val = mr__calloc_lines(b->ncol, sizeof *d->val);
    d->lev = mr__calloc_lines(b->ncol, sizeof *d->lev);
    d->miss = mr__calloc_lines(b->ncol, 1);
    if (cfg->levels == NULL) d->local = mr__calloc_lines(b->nfac ? b->nfac : 1, sizeof *d->local);
    if (cfg->levels == NULL && cfg->collapse) {
        d->numvals = mr__calloc_lines(b->nnum ? b->nnum : 1, sizeof *d->numvals);
        d->keysets = mr__calloc(b->nfac + b->nnum + 1, sizeof *d->keysets);
    }
    d->wanted = mr__calloc(b->nfields + 1, 1);
    quick = !numeric_missing_token(cfg);
    for (f = 0; d->wanted && f < b->nfields; f++) {
        int col = b->col_of_field[f];
        /* the cluster's cell is hashed by on_field, which a quick cell skips */
        d->wanted[f] = col < 0 ? MR__FIELD_SKIP
                       : quick && b->col[col].use != MR__USE_FACTOR && !(b->has_cluster && col == b->cluster_col) ? MR__FIELD_QUICK
                                                                    : MR__FIELD_WANTED;
    }
    for (f = 0; f < cfg->nmissing; f++) {
        if (cfg->missing_len[f] == 0) d->missing_empty = 1;
        else d->missing_first[(unsigned char)cfg->missing[f][0]] = 1;
    }
    d->cluster_col = b->has_cluster ? b->cluster_col : -1;
    d->outcome = cfg->family->ops->outcome;
    d->defer_offset = cfg->levels == NULL && cfg->collapse == 2 && b->has_exposure && !b->has_offset;
    if (!d->np || !d->val || !d->lev || !d->miss || !d->wanted || (cfg->levels == NULL && !d->local) ||
        (cfg->levels == NULL && cfg->collapse && (!d->numvals || !d->keysets))) {
        mr__decoder_release(d);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    /* One level beyond the limit is taken, so that the calling thread, which
     * counts every worker's levels in block order, sees the file's first
     * level beyond it before any worker's set is full (accum/census.h). */
    for (f = 0; d->local && f < b->nfac; f++) {
        mr__levelset_init(&d->local[f]);
        d->local[f].limit = mr__factor_level_limit(b, f) + 1;
    }
    for (f = 0; d->numvals && f < b->nnum; f++) mr__levelset_init(&d->numvals[f]);
    for (f = 0; d->keysets && f < b->nfac + b->nnum; f++)
        d->keysets[f] = f < b->nfac ? &d->local[f] : &d->numvals[f - b->nfac];
    return mr__tokenizer_init(&d->tok, cfg->delim, err);
}

void mr__decoder_release(mr__decoder *d)
{
    size_t f;
    if (d->cfg == NULL) return;
    mr__tokenizer_release(&d->tok);
    mr__numparser_free(d->np);
    if (d->local)
        for (f = 0; f < d->cfg->bind->nfac; f++) mr__levelset_release(&d->local[f]);
    if (d->numvals)
        for (f = 0; f < d->cfg->bind->nnum; f++) mr__levelset_release(&d->numvals[f]);
    mr__free(d->local);
    mr__free(d->numvals);
    mr__free(d->keysets);
    mr__free(d->val);
    mr__free(d->lev);
    mr__free(d->miss);
    mr__free(d->wanted);
    memset(d, 0, sizeof *d);
}

static int is_missing(const mr__decoder *d, const char *p, size_t len)
{
    const mr__decode_cfg *cfg = d->cfg;
    size_t i;
    if (len == 0) return d->missing_empty;
    if (!d->missing_first[(unsigned char)p[0]]) return 0;
    for (i = 0; i < cfg->nmissing; i++)
        if (cfg->missing_len[i] == len && memcmp(cfg->missing[i], p, len) == 0)
            return 1;
    return 0;
}

void mr__cell_message(char *out, size_t cap, const mr__column *c, const char *what, const char *p, size_t len)
{
    char v[64];
    mr__quote_value(v, sizeof v, p, len);
    mr__utf8_mend_cut(out, cap, snprintf(out, cap, "%zu: column '%s': %s (value '%s')", c->field + 1, c->name, what, v));
}

/* Only the first problem of a row is kept: it is the one to fix first. */
static void row_problem(mr__decoder *d, size_t col, mr_status kind, const char *what, const char *p, size_t len)
{
    const mr__column *c = &d->cfg->bind->col[col];
    if (d->row_bad) return;
    d->row_bad = 1;
    d->row_status = kind;
    d->bad_field = c->field;
    mr__cell_message(d->row_msg, sizeof d->row_msg, c, what, p, len);
}

/* First pass: the level is new to this worker; the block lists it. */
static void first_pass_level(mr__decoder *d, int col, const char *p, size_t len)
{
    const mr__column *c = &d->cfg->bind->col[col];
    mr__levelset *set = &d->local[c->var];
    mr__block *blk = d->blk;
    mr_status rc;
    if (mr__levelset_lookup(set, p, len, &d->lev[col])) return;
    /* names are C strings: "A\0B" and "A\0C" would both print as "A" */
    if (memchr(p, '\0', len) != NULL) {
        row_problem(d, (size_t)col, MR_ERR_FORMAT, "a NUL byte in a level (is this a text file?)", p, len);
        return;
    }
    rc = mr__levelset_insert(set, p, len, &d->lev[col]);
    if (rc == MR_ERR_DOMAIN)
        row_problem(d, (size_t)col, MR_ERR_DOMAIN, mr__too_many_levels(d->cfg->bind, (size_t)c->var), p, len);
    if (rc == MR_OK)
        rc = mr__reserve((void **)&blk->new_levels, &blk->new_levels_cap, blk->nnew_levels + 1,
                         sizeof *blk->new_levels);
    if (rc == MR_ERR_NO_MEMORY) d->stop = 1;
    if (rc != MR_OK) return;
    blk->new_levels[blk->nnew_levels].str = set->name[d->lev[col]].str;
    blk->new_levels[blk->nnew_levels].len = set->name[d->lev[col]].len;
    blk->new_levels[blk->nnew_levels].row = d->row;
    blk->new_levels[blk->nnew_levels++].var = (size_t)c->var;
}

static void decode_level(mr__decoder *d, int col, const char *p, size_t len)
{
    const mr__column *c = &d->cfg->bind->col[col];
    if (d->cfg->levels == NULL) {
        first_pass_level(d, col, p, len);
        return;
    }
    d->lev[col] = mr__levelset_find(&d->cfg->levels[c->var], p, len);
    if (d->lev[col] < 0) row_problem(d, (size_t)col, MR_ERR_FORMAT, "level not seen in the first pass: the input changed during the fit", p, len);
}

static uint64_t mix64(uint64_t x)
{
    x ^= x >> 30;
    x *= 0xbf58476d1ce4e5b9ULL;
    x ^= x >> 27;
    x *= 0x94d049bb133111ebULL;
    return x ^ (x >> 31);
}

/* A cluster is its cell's text; two words of hash stand for it, so that
 * rows compare in constant time and 10^7 clusters need no copy of their
 * names (two distinct texts share both words with odds of about 2^-128). */
static void cluster_hash(const char *p, size_t len, uint64_t out[2])
{
    uint64_t a = 0x9e3779b97f4a7c15ULL ^ len, b = 0xd6e8feb86659fd93ULL + len;
    size_t i;
    for (i = 0; i < len; i += 8) {
        uint64_t w = 0;
        memcpy(&w, p + i, len - i < 8 ? len - i : 8);
        a = mix64(a ^ w) + 0x632be59bd9b4e019ULL;
        b = mix64((b + w) * 0xff51afd7ed558ccdULL) ^ (b >> 29);
    }
    out[0] = mix64(a);
    out[1] = mix64(b ^ a);
}

static void on_field(void *user, size_t k, const char *p, size_t len)
{
    mr__decoder *d = user;
    int col;
    if (k >= d->cfg->bind->nfields || d->stop) return;
    col = d->cfg->bind->col_of_field[k];
    if (col < 0) return;
    if (is_missing(d, p, len)) {
        d->miss[col] = 1;
        d->row_missing = 1;
        return;
    }
    if (d->cfg->bind->col[col].use == MR__USE_FACTOR) {
        decode_level(d, col, p, len);
        return;
    }
    if (!mr__parse_double(d->np, p, len, &d->val[col]))
        row_problem(d, (size_t)col, MR_ERR_FORMAT,
                    mr__is_number_syntax(p, len) ? "a number out of the range of a double (beyond 1.8e308 in size)"
                                                 : "not a number",
                    p, len);
}

/* The sink's field callback with a cluster column (only then, so that a
 * fit without one pays nothing for it per cell): the cluster's cell, not
 * missing, is hashed, and decoded as well where the column has another
 * use; every other cell goes to on_field. */
static void on_field_cluster(void *user, size_t k, const char *p, size_t len)
{
    mr__decoder *d = user;
    int col = k < d->cfg->bind->nfields && !d->stop ? d->cfg->bind->col_of_field[k] : -1;
    if (col >= 0 && col == d->cluster_col && !is_missing(d, p, len)) {
        cluster_hash(p, len, d->cluster_key);
        if (d->cfg->bind->col[col].use == MR__USE_CLUSTER) return;
    }
    on_field(user, k, p, len);
}

static void domain_problem(mr__decoder *d, mr__use use, const char *what)
{
    char v[40];
    size_t c = (size_t)d->cfg->bind->role_col[use];
    snprintf(v, sizeof v, "%.17g", d->val[c]);
    row_problem(d, c, MR_ERR_DOMAIN, what, v, strlen(v));
}

static double column_value(const mr__decoder *d, mr__use use, int present, double dflt)
{
    int c = d->cfg->bind->role_col[use];
    return present && c >= 0 ? d->val[c] : dflt;
}

/* Turns the row's raw values into y, prior weight and offset, checking
 * that the model can take them. */
static void finish_row_values(mr__decoder *d, double *y, double *prior, double *off)
{
    const mr__binding *b = d->cfg->bind;
    double w = column_value(d, MR__USE_WEIGHT, b->has_weight, 1.0);
    double t = column_value(d, MR__USE_TRIALS, b->has_trials, 1.0);
    double e = column_value(d, MR__USE_EXPOSURE, b->has_exposure, 1.0);
    const char *why;
    *y = column_value(d, MR__USE_OUTCOME, 1, 0.0);
    *off = column_value(d, MR__USE_OFFSET, b->has_offset, 0.0);
    if (w < 0) domain_problem(d, MR__USE_WEIGHT, "a weight cannot be negative");
    if (b->has_exposure && !(e > 0)) domain_problem(d, MR__USE_EXPOSURE, "exposure must be > 0");
    if (b->has_trials) {
        if (t < 0) domain_problem(d, MR__USE_TRIALS, "trials cannot be negative");
        else if (*y < 0) domain_problem(d, MR__USE_OUTCOME, "successes cannot be negative");
        else if (*y > t) domain_problem(d, MR__USE_OUTCOME, "successes exceed trials");
        *y = t > 0 ? *y / t : 0.0;
    } else if ((why = mr__outcome_problem(&d->outcome, *y)) != NULL) {
        domain_problem(d, MR__USE_OUTCOME, why);
    }
    *prior = w * t;
    if (b->has_exposure) *off = d->defer_offset ? e : *off + log(e);
    if (d->cfg->levels != NULL) return;
    /* first pass: the null start's and the patterns' e^offset, which for
     * an exposure alone is e itself (no exp(log(e)) per row) */
    d->row_eoff = b->has_offset ? exp(*off) : e;
    d->row_llc = d->cfg->family->ops->loglik_row(d->cfg->family, *y, w, t, b->has_trials);
}

static void record_bad(mr__decoder *d, uint32_t r, const char *msg)
{
    mr__block *blk = d->blk;
    uint64_t line = d->chunk->first_line + d->chunk->row_line[r];
    if (!d->cfg->skip_bad) {
        blk->failed = 1;
        mr__fail(&blk->err, d->row_status, "%s:%llu:%s", mr__chunk_row_display(d->chunk, r, d->cfg->display),
                 (unsigned long long)line, msg);
        d->stop = 1;
        return;
    }
    if (blk->nbad_shown < MR__BAD_SHOWN) {
        blk->bad[blk->nbad_shown].line = line;
        blk->bad[blk->nbad_shown].file = mr__chunk_row_display(d->chunk, r, NULL);
        snprintf(blk->bad[blk->nbad_shown].msg, sizeof blk->bad[0].msg, "%s", msg);
        blk->nbad_shown++;
    }
    blk->nbad++;
}

static int any_missing(mr__decoder *d)
{
    size_t c;
    int any = 0;
    for (c = 0; c < d->cfg->bind->ncol; c++)
        if (d->miss[c]) {
            d->blk->missing[c]++;
            any = 1;
        }
    return any;
}

/* y != floor(y), without the call: below 2^52 in magnitude a double is
 * whole exactly when its truncation to an integer gives it back; at or
 * above, every double is whole (and an infinity is its own floor, a NaN
 * never). */
static int not_whole(double y) { return fabs(y) < 0x1p52 ? (double)(int64_t)y != y : y != y; }

static void store_row(mr__decoder *d, double y, double prior, double off)
{
    mr__block *blk = d->blk;
    const mr__binding *b = d->cfg->bind;
    uint32_t i = blk->n++;
    size_t k;
    blk->y[i] = y;
    if (d->cfg->levels == NULL) { /* the first pass's totals */
        blk->sw += prior;
        blk->swy += prior * y;
        blk->llc += d->row_llc;
        blk->npos += prior > 0;
        blk->nfraction += y > 0 && y < 1;
        /* read only where the family's parameter is estimated (fit/result_warnings.c) */
        if (d->cfg->family->estimate) blk->nnonint += not_whole(y);
        if (b->has_exposure || b->has_offset) {
            /* a deferred offset is only ever wanted with a log link, which
             * starts from swe alone */
            blk->swe += prior * d->row_eoff;
            if (!d->defer_offset) blk->swoff += prior * off;
        }
    }
    if (blk->prior) blk->prior[i] = prior;
    if (blk->off) blk->off[i] = off;
    if (blk->cluster) {
        blk->cluster[2 * i] = d->cluster_key[0];
        blk->cluster[2 * i + 1] = d->cluster_key[1];
    }
    for (k = 0; k < b->nnum; k++) blk->num[k * MR__BLOCK_ROWS + i] = d->val[b->num_col[k]];
    for (k = 0; k < b->nfac; k++) blk->lev[k * MR__BLOCK_ROWS + i] = d->lev[b->fac_col[k]];
}

static void abandon_collapse(const mr__decode_cfg *cfg) { atomic_store(cfg->collapse_abandoned, 1); }

/* The row's key (each factor's level number, then each numeric's value
 * number, both the worker's own) and its sums. */
static void add_pattern(mr__decoder *d, double y, double prior, double off)
{
    mr__pattern_rows *rows = d->blk->patterns;
    const mr__binding *b = d->cfg->bind;
    uint32_t *ids = rows->ids + rows->n * rows->nkey;
    double *sum = rows->sums + rows->n * MR__PATTERN_SUMS;
    size_t k;
    if (atomic_load_explicit(d->cfg->collapse_abandoned, memory_order_relaxed)) return;
    for (k = 0; k < b->nfac; k++) ids[k] = (uint32_t)d->lev[b->fac_col[k]];
    for (k = 0; k < b->nnum; k++) {
        int32_t id;
        /* too many values (or no memory) only means no collapsing */
        if (mr__levelset_add(&d->numvals[k], (const char *)&d->val[b->num_col[k]], sizeof(double), &id) != 0) {
            abandon_collapse(d->cfg);
            return;
        }
        ids[b->nfac + k] = (uint32_t)id;
    }
    if (d->cfg->collapse == 1) {
        sum[MR__PATTERN_A] = prior;
        sum[MR__PATTERN_B] = prior * y;
        sum[MR__PATTERN_C] = prior * y * y;
        sum[MR__PATTERN_D] = prior * d->cfg->family->ops->saturated_term(d->cfg->family, y);
    } else {
        double e = d->row_eoff;
        /* a deferred offset matters only where y > 0 (y * off is +0) */
        if (d->defer_offset) off = y != 0 ? log(e) : 0.0;
        sum[MR__PATTERN_A] = prior * e;
        sum[MR__PATTERN_B] = prior * y;
        sum[MR__PATTERN_C] = prior * y * y / e;
        sum[MR__PATTERN_D] = prior * ((y > 0 ? y * log(y) : 0.0) - y * off);
    }
    sum[MR__PATTERN_N] = prior > 0 ? 1.0 : 0.0;
    sum[MR__PATTERN_W] = prior;
    rows->n++;
}

static void on_row_end(void *user, uint32_t r, size_t nfields)
{
    mr__decoder *d = user;
    const mr__binding *b = d->cfg->bind;
    double y, prior, off;
    if (d->stop) return;
    d->blk->nread++;
    if (nfields != b->nfields && !d->row_bad) {
        d->row_bad = 1;
        d->row_status = MR_ERR_FORMAT;
        snprintf(d->row_msg, sizeof d->row_msg, "%zu: expected %zu fields as in the header, found %zu",
                 nfields < b->nfields ? nfields : b->nfields + 1, b->nfields, nfields);
    }
    if (!d->row_bad && !(d->row_missing && any_missing(d))) {
        finish_row_values(d, &y, &prior, &off);
        if (!d->row_bad) store_row(d, y, prior, off);
        if (!d->row_bad && d->blk->patterns) add_pattern(d, y, prior, off);
    } else if (!d->row_bad) {
        d->blk->incomplete++;
    }
    if (d->row_bad) record_bad(d, r, d->row_msg);
    d->row_bad = 0;
    if (d->row_missing) memset(d->miss, 0, b->ncol);
    d->row_missing = 0;
    d->row = r + 1;
}

/* The plain splitter's quick path for numeric cells: parsed as they are
 * scanned for the delimiter; anything unusual (blanks, missing tokens,
 * exponents, bad numbers) is left to on_field, so both give the same rows. */
static const char *quick_number(void *user, size_t k, const char *s, const char *e)
{
    mr__decoder *d = user;
    const mr__binding *b = d->cfg->bind;
    if (d->stop) return NULL;
    return mr__parse_short_decimal(s, e, d->cfg->delim, &d->val[b->col_of_field[k]]);
}

static void check_collapsible(mr__decoder *d, const mr__block *blk)
{
    size_t k;
    for (k = 0; k < d->cfg->bind->nnum; k++)
        if (!mr__few_distinct(blk->num + k * MR__BLOCK_ROWS, blk->n, MR__COLLAPSE_MAX_DISTINCT))
            abandon_collapse(d->cfg);
}

/* First pass: the distinct values of the numerics the binding counts. */
static mr_status count_values(const mr__binding *b, mr__block *blk, mr__error *err)
{
    size_t k;
    if (blk->counts == NULL) {
        blk->counts = mr__calloc(b->nnum, sizeof *blk->counts);
        blk->count_scratch = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->count_scratch);
        if (blk->counts == NULL || blk->count_scratch == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        blk->ncounts = b->nnum;
        for (k = 0; k < b->nnum; k++) mr__counts_init(&blk->counts[k]);
    }
    for (k = 0; k < b->nnum; k++)
        if (b->counted[k] &&
            mr__counts_of(&blk->counts[k], blk->num + k * MR__BLOCK_ROWS, blk->n, blk->count_scratch) != MR_OK)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

static mr__field_sink decoder_sink(mr__decoder *d)
{
    mr__field_sink sink = {d, d->cluster_col >= 0 ? on_field_cluster : on_field, on_row_end, d->wanted,
                           d->cfg->bind->nfields, quick_number};
    return sink;
}

mr_status mr__decode_chunk(mr__decoder *d, const mr__chunk *c, mr__block *blk, mr__error *err)
{
    const mr__field_sink sink = decoder_sink(d);
    mr_status st;
    size_t k;
    blk->index = c->index;
    blk->worker = d->worker;
    blk->nread = blk->n = blk->incomplete = blk->nbad = blk->nbad_shown = 0;
    blk->sw = blk->swy = blk->llc = blk->swe = blk->swoff = 0;
    blk->npos = blk->nfraction = blk->nnonint = 0;
    blk->off_is_exposure = d->defer_offset;
    blk->failed = 0;
    blk->nnew_levels = 0;
    mr__error_clear(&blk->err);
    for (k = 0; k < d->cfg->bind->ncol; k++) blk->missing[k] = 0;
    if (blk->patterns) mr__pattern_rows_begin(blk->patterns, d->keysets);
    d->blk = blk;
    d->chunk = c;
    d->row = 0;
    d->stop = 0;
    d->row_bad = 0;
    d->row_missing = 0;
    memset(d->miss, 0, d->cfg->bind->ncol);
    if (c->has_quote) {
        st = mr__tokenize_chunk(&d->tok, c, &sink, d->cfg->display, err);
    } else {
        /* The same splitter as mr__tokenize_chunk, with this file's
         * callbacks inlined into it: a sink of its own, whose address goes
         * nowhere else, so the compiler knows them. */
        const mr__field_sink plain = decoder_sink(d);
        uint32_t r;
        for (r = 0; r < c->nrows; r++)
            mr__plain_row(c->data + c->row_start[r], c->data + c->row_start[r + 1], d->cfg->delim, &plain, r);
        st = MR_OK;
    }
    if (st == MR_OK && d->stop && !blk->failed) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK && d->cfg->levels == NULL && d->cfg->bind->ncounted > 0) st = count_values(d->cfg->bind, blk, err);
    if (st == MR_OK && blk->patterns && !atomic_load_explicit(d->cfg->collapse_abandoned, memory_order_relaxed)) {
        check_collapsible(d, blk);
        if (mr__pattern_rows_end(blk->patterns, d->keysets) != 0) abandon_collapse(d->cfg);
    }
    return st;
}
