/* fuzz_rowsplit.c - libFuzzer target: the row splitter, both field
 * tokenizers and the decoder on arbitrary text.
 *
 * Input: [flags] [sizes] [read sizes ...] [text]
 *   flags bit 0:    rows read in place (mr__splitter_reserve) or copied in;
 *         bits 1-2: delimiter detected from the header, or ',', '\t', ';';
 *         bit 3:    bad rows skipped (counted) or the first one fails;
 *         bits 4-5: family gaussian, poisson (the last column the exposure),
 *                   binomial (the second the trials), gamma (the last the
 *                   weight); the first column is the outcome, and the others
 *                   numeric and factor by turns;
 *         bit 6:    with bits 6-7 of the sizes byte, the text after its first
 *                   line is repeated until the rows fill more than a chunk
 *                   (at most REPEAT_CAP bytes); the splitter alone is then
 *                   checked, as a chunk of rows is slow to decode twice;
 *         bit 7:    missing tokens "" and "NA", or "NA" and "-1" (a token
 *                   that reads as a number turns the inline parser off);
 *   sizes bits 0-1: 1 to 4 read sizes follow, used in turn;
 *         bit 2:    each is (b + 1) * 257 bytes rather than b + 1;
 *         bits 6-7: see bit 6 of the flags (a slow input, so a rare one).
 *
 * Checks, each against its oracle:
 *   - the rows, their lines, the header, has_quote and the unterminated
 *     quote error: a byte-at-a-time reference splitter below, written from
 *     rowsplit.h (blank lines skipped but counted) and RFC 4180 2.6 (a line
 *     break inside quotes does not end the record);
 *   - every chunk recut from the text at its offsets is the chunk streamed,
 *     and the chunks tile the text (rowsplit.h, blockmap.h);
 *   - a quote-free chunk gives the same fields through the plain splitter as
 *     through libcsv (fields.h: "two tokenizers give the same fields");
 *   - the decoder makes the same block of a quote-free chunk through the
 *     plain splitter, with its inline number parser, as through libcsv
 *     (fields.h, numparse.h: a cell the quick path takes must give what the
 *     general path would have made of it);
 *   - nothing but malformed quoting is an error of a whole chunk (decode.h).
 */
#define _POSIX_C_SOURCE 200809L
#include <stdarg.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "input/chunk.h"
#if __has_include("accum/decode.h") /* where the layering work puts the decoder */
#include "accum/decode.h"
#else
#include "input/decode.h"
#endif
#include "input/fields.h"
#include "input/rowsplit.h"
#include "model/columns.h"
#include "model/spec.h"

#define DISPLAY "f.csv"
#define REPEAT_CAP (128u << 10)

/* The code below is the oracle and the harness, not what is explored: it
 * is left out of the coverage instrumentation (libFuzzer's comparison
 * hooks on every byte the reference splitter and the comparisons look at
 * cost more than the library's own; ASan and UBSan still check it).  The
 * library keeps its full instrumentation, and with it every feature that
 * guides the fuzzing. */
#pragma clang attribute push(__attribute__((no_sanitize("coverage"))), apply_to = function)

static void fail(const char *fmt, ...) __attribute__((format(printf, 1, 2), noreturn));
static void fail(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs("fuzz_rowsplit: ", stderr);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
    abort();
}

static void *xcalloc(size_t n, size_t size)
{
    void *p = calloc(n ? n : 1, size);
    if (p == NULL) fail("out of memory in the target");
    return p;
}

/* ---- the reference splitter ------------------------------------------ */

typedef struct ref_row {
    size_t off, len; /* terminator included */
    uint64_t line;
    int quote;
} ref_row;

typedef struct reference {
    ref_row *row;
    size_t nrows;
    int has_header;
    size_t header_off, header_len, data_off;
    int open_quote;
    uint64_t quote_line, header_line;
} reference;

static int blank_only(const char *p, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++)
        if (p[i] != ' ' && p[i] != '\t' && p[i] != '\r' && p[i] != '\n') return 0;
    return 1;
}

/* A UTF-8 byte-order mark before the header is not part of a line's
 * content: a line of a mark and blanks is blank (rowsplit.c). */
static int blank_before_header(const char *p, size_t n)
{
    if (n >= 3 && memcmp(p, "\xEF\xBB\xBF", 3) == 0) return blank_only(p + 3, n - 3);
    return blank_only(p, n);
}

static void ref_take(reference *ref, const char *t, size_t start, size_t stop, uint64_t line)
{
    if (stop == start || blank_only(t + start, stop - start)) return;
    if (!ref->has_header) {
        if (blank_before_header(t + start, stop - start)) return;
        ref->has_header = 1;
        ref->header_line = line;
        ref->header_off = start;
        ref->header_len = stop - start;
        ref->data_off = stop;
        return;
    }
    ref->row[ref->nrows].off = start;
    ref->row[ref->nrows].len = stop - start;
    ref->row[ref->nrows].line = line;
    ref->row[ref->nrows].quote = memchr(t + start, '"', stop - start) != NULL;
    ref->nrows++;
}

static void ref_split(const char *t, size_t n, reference *ref)
{
    size_t i, start = 0;
    uint64_t line = 1, row_line = 1;
    int q = 0;
    const char *nl = t;
    size_t lines = 0;
    memset(ref, 0, sizeof *ref);
    /* every row but the last ends in a line feed, and the header is one of
     * them: as many entries as line feeds and one more */
    while (n > 0 && (nl = memchr(nl, '\n', (size_t)(t + n - nl))) != NULL) {
        lines++;
        nl++;
    }
    ref->row = xcalloc(lines + 1, sizeof *ref->row);
    for (i = 0; i < n; i++) {
        if (t[i] == '"') {
            if (!q) ref->quote_line = line;
            q = !q;
        }
        if (t[i] != '\n') continue;
        line++;
        if (q) continue;
        ref_take(ref, t, start, i + 1, row_line);
        start = i + 1;
        row_line = line;
    }
    if (q) ref->open_quote = 1;
    else ref_take(ref, t, start, n, row_line);
}

/* Outside quotes, a run of carriage returns followed by anything but a
 * line feed: a header with such line ends (classic Mac OS text) is refused
 * (rowsplit.h), as the whole file would otherwise be one header row. */
static int lone_cr_header(const reference *ref, const char *t)
{
    const char *h = t + ref->header_off;
    size_t i, j, n = ref->header_len;
    int quoted = 0;
    if (!ref->has_header) return 0;
    for (i = 0; i < n; i++) {
        if (h[i] == '"') quoted = !quoted;
        if (quoted || h[i] != '\r') continue;
        for (j = i; j < n && h[j] == '\r'; j++) continue;
        if (j < n && h[j] != '\n') return 1;
        i = j - 1;
    }
    return 0;
}

/* ---- fields, logged unambiguously -------------------------------------- */

typedef struct field_log {
    char *p;
    size_t n, cap;
    size_t k;   /* next field expected */
    uint32_t r; /* next row expected */
    int order_ok;
} field_log;

static void log_add(field_log *f, const void *p, size_t n)
{
    if (f->n + n > f->cap) {
        size_t cap = f->cap ? f->cap : 4096;
        while (cap < f->n + n) cap *= 2;
        f->p = realloc(f->p, cap);
        if (f->p == NULL) fail("out of memory in the target");
        f->cap = cap;
    }
    memcpy(f->p + f->n, p, n);
    f->n += n;
}

static void log_field(void *user, size_t k, const char *p, size_t len)
{
    field_log *f = user;
    uint64_t head[2] = {k, len};
    if (k != f->k) f->order_ok = 0;
    log_add(f, head, sizeof head);
    log_add(f, p, len);
    f->k = k + 1;
}

static void log_row_end(void *user, uint32_t r, size_t nfields)
{
    field_log *f = user;
    uint64_t mark[3] = {UINT64_MAX, r, nfields};
    if (r != f->r || nfields != f->k) f->order_ok = 0;
    log_add(f, mark, sizeof mark);
    f->r = r + 1;
    f->k = 0;
}

static mr_status tokenize_logged(mr__tokenizer *t, const mr__chunk *c, field_log *f, mr__error *err)
{
    mr__field_sink sink = {f, log_field, log_row_end, NULL, 0, NULL};
    f->n = 0;
    f->k = 0;
    f->r = 0;
    f->order_ok = 1;
    return mr__tokenize_chunk(t, c, &sink, DISPLAY, err);
}

/* ---- one run ------------------------------------------------------------- */

typedef struct run {
    unsigned flags;
    int repeated; /* the splitter alone is checked */
    const char *text;
    size_t n;
    reference ref;
    size_t next_row;
    uint64_t nchunks, next_offset;
    mr__chunk *spare;
    char delim;
    /* fields: the tokenizer a worker keeps from chunk to chunk, and one
     * for the libcsv path forced on quote-free chunks */
    mr__tokenizer tok, tok_csv;
    field_log plain_log, csv_log;
    /* decoding, once the header is bound */
    int bound;
    mr__spec spec;
    mr__binding bind;
    mr__decode_cfg cfg;
    mr__family family;
    char *missing[2];
    size_t missing_len[2];
    atomic_int abandoned;
    mr__decoder dec, dec_csv;
    mr__block blk, blk_csv;
} run;

static mr__chunk recut_chunk, csv_copy;

static void check_recut(run *rn, const mr__chunk *c, int last)
{
    size_t len = (size_t)(c->end - c->offset);
    mr__error err;
    mr__error_clear(&err);
    recut_chunk.len = 0;
    if (mr__chunk_room(&recut_chunk, len, &err) == NULL) fail("out of memory");
    memcpy(recut_chunk.data, rn->text + c->offset, len);
    if (mr__splitter_recut(&recut_chunk, len, DISPLAY, c->index * MR__BLOCK_ROWS, c->first_line, c->nrows, last,
                           &err) != MR_OK)
        fail("chunk %llu: the recut fails: %s", (unsigned long long)c->index, err.msg);
    if (recut_chunk.index != c->index || recut_chunk.nrows != c->nrows || recut_chunk.first_line != c->first_line ||
        recut_chunk.has_quote != c->has_quote || recut_chunk.len != c->len ||
        memcmp(recut_chunk.data, c->data, c->len) != 0 ||
        memcmp(recut_chunk.row_start, c->row_start, (c->nrows + 1) * sizeof *c->row_start) != 0 ||
        memcmp(recut_chunk.row_line, c->row_line, c->nrows * sizeof *c->row_line) != 0)
        fail("chunk %llu: the recut differs from the chunk streamed", (unsigned long long)c->index);
}

/* The fields of a quote-free chunk, plain and through libcsv. */
static void check_fields(run *rn, const mr__chunk *c)
{
    mr__error err;
    mr_status st;
    mr__error_clear(&err);
    st = tokenize_logged(&rn->tok, c, &rn->plain_log, &err);
    if (st != MR_OK && (c->has_quote == 0 || st != MR_ERR_FORMAT))
        fail("chunk %llu: tokenizing gave status %d: %s", (unsigned long long)c->index, st, err.msg);
    if (st == MR_OK && (!rn->plain_log.order_ok || rn->plain_log.r != c->nrows))
        fail("chunk %llu: fields or rows out of order (%u rows of %u)", (unsigned long long)c->index,
             rn->plain_log.r, c->nrows);
    if (c->has_quote) return;
    /* the rows' tables as far as they are used: a whole chunk is 192 KiB */
    csv_copy.index = c->index;
    csv_copy.first_line = c->first_line;
    csv_copy.offset = c->offset;
    csv_copy.end = c->end;
    csv_copy.nrows = c->nrows;
    csv_copy.data = c->data;
    csv_copy.len = c->len;
    csv_copy.cap = c->cap;
    memcpy(csv_copy.row_start, c->row_start, (c->nrows + 1) * sizeof *c->row_start);
    memcpy(csv_copy.row_line, c->row_line, c->nrows * sizeof *c->row_line);
    csv_copy.has_quote = 1;
    if (tokenize_logged(&rn->tok_csv, &csv_copy, &rn->csv_log, &err) != MR_OK)
        fail("chunk %llu: libcsv refuses a quote-free chunk: %s", (unsigned long long)c->index, err.msg);
    if (rn->csv_log.n != rn->plain_log.n || memcmp(rn->csv_log.p, rn->plain_log.p, rn->plain_log.n) != 0)
        fail("chunk %llu: the plain splitter and libcsv give different fields", (unsigned long long)c->index);
}

#define SAME(a, b, what)                                                                                    \
    do {                                                                                                    \
        if ((a) != (b)) fail("chunk %llu: %s differs between the plain and libcsv paths", (unsigned long long)index, what); \
    } while (0)

static void same_doubles(const double *a, const double *b, size_t n, uint64_t index, const char *what)
{
    if ((a == NULL) != (b == NULL) || (a != NULL && n > 0 && memcmp(a, b, n * sizeof *a) != 0))
        fail("chunk %llu: %s differ between the plain and libcsv paths", (unsigned long long)index, what);
}

static void same_blocks(const run *rn, const mr__block *a, const mr__block *b, uint64_t index)
{
    const mr__binding *bd = &rn->bind;
    const size_t R = MR__BLOCK_ROWS;
    double sa[5] = {a->sw, a->swy, a->llc, a->swe, a->swoff}, sb[5] = {b->sw, b->swy, b->llc, b->swe, b->swoff};
    size_t k;
    SAME(a->nread, b->nread, "rows read");
    SAME(a->n, b->n, "rows kept");
    SAME(a->incomplete, b->incomplete, "incomplete rows");
    SAME(a->nbad, b->nbad, "bad rows");
    SAME(a->nbad_shown, b->nbad_shown, "bad rows shown");
    SAME(a->failed, b->failed, "failing");
    SAME(a->npos, b->npos, "positive weights");
    if (a->failed && strcmp(a->err.msg, b->err.msg) != 0)
        fail("chunk %llu: row errors differ:\n  plain:  %s\n  libcsv: %s", (unsigned long long)index, a->err.msg,
             b->err.msg);
    for (k = 0; k < a->nbad_shown; k++)
        if (a->bad[k].line != b->bad[k].line || strcmp(a->bad[k].msg, b->bad[k].msg) != 0)
            fail("chunk %llu: bad row %zu differs:\n  plain:  %s\n  libcsv: %s", (unsigned long long)index, k,
                 a->bad[k].msg, b->bad[k].msg);
    for (k = 0; k < bd->ncol; k++) SAME(a->missing[k], b->missing[k], "missing counts");
    same_doubles(sa, sb, 5, index, "first-pass sums");
    same_doubles(a->y, b->y, a->n, index, "outcomes");
    same_doubles(a->prior, b->prior, a->n, index, "prior weights");
    same_doubles(a->off, b->off, a->n, index, "offsets");
    for (k = 0; k < bd->nnum; k++) same_doubles(a->num + k * R, b->num + k * R, a->n, index, "numeric values");
    for (k = 0; k < bd->nfac; k++)
        if (a->n > 0 && memcmp(a->lev + k * R, b->lev + k * R, a->n * sizeof *a->lev) != 0)
            fail("chunk %llu: factor levels differ between the plain and libcsv paths", (unsigned long long)index);
}

static void decode(run *rn, const mr__chunk *c)
{
    mr__error err;
    mr_status st;
    if (!rn->bound) return;
    mr__error_clear(&err);
    st = mr__decode_chunk(&rn->dec, c, &rn->blk, &err);
    if (st != MR_OK && (c->has_quote == 0 || st != MR_ERR_FORMAT))
        fail("chunk %llu: decoding gave status %d: %s", (unsigned long long)c->index, st, err.msg);
    /* A quoted chunk goes through libcsv in both decoders, which keeps
     * their factor levels numbered alike. */
    if (mr__decode_chunk(&rn->dec_csv, c->has_quote ? c : &csv_copy, &rn->blk_csv, &err) != st)
        fail("chunk %llu: the libcsv path decodes with another status: %s", (unsigned long long)c->index, err.msg);
    if (st == MR_OK) same_blocks(rn, &rn->blk, &rn->blk_csv, c->index);
}

/* Source of truth for each chunk: the reference rows (see the top). */
static void check_chunk(run *rn, const mr__chunk *c, int last)
{
    const reference *ref = &rn->ref;
    size_t left = ref->nrows - rn->next_row, want = left < MR__BLOCK_ROWS ? left : MR__BLOCK_ROWS;
    int any_quote = 0;
    uint32_t r;
    if (c->index != rn->nchunks) fail("chunk %llu has index %llu", (unsigned long long)rn->nchunks, (unsigned long long)c->index);
    if (c->nrows != want) fail("chunk %llu has %u rows, the reference %zu", (unsigned long long)c->index, c->nrows, want);
    if (c->offset != rn->next_offset || c->end < c->offset || c->end > rn->n)
        fail("chunk %llu lies at [%llu, %llu), the one before ended at %llu", (unsigned long long)c->index,
             (unsigned long long)c->offset, (unsigned long long)c->end, (unsigned long long)rn->next_offset);
    if (c->row_start[0] != 0 || c->len != c->row_start[c->nrows])
        fail("chunk %llu: rows do not span its bytes", (unsigned long long)c->index);
    for (r = 0; r < c->nrows; r++) {
        const ref_row *k = &ref->row[rn->next_row + r];
        size_t len = c->row_start[r + 1] - c->row_start[r];
        any_quote |= k->quote;
        if (len != k->len || memcmp(c->data + c->row_start[r], rn->text + k->off, len) != 0)
            fail("row %zu: %zu bytes, the reference %zu at byte %zu", rn->next_row + r, len, k->len, k->off);
        if (c->first_line + c->row_line[r] != k->line)
            fail("row %zu: line %llu, the reference %llu", rn->next_row + r,
                 (unsigned long long)(c->first_line + c->row_line[r]), (unsigned long long)k->line);
    }
    if (any_quote != c->has_quote) fail("chunk %llu: has_quote %d, its rows say %d", (unsigned long long)c->index, c->has_quote, any_quote);
    check_recut(rn, c, last);
    if (!rn->repeated) {
        check_fields(rn, c);
        decode(rn, c);
    }
    rn->next_row += c->nrows;
    rn->next_offset = c->end;
    rn->nchunks++;
}

static mr__chunk *collect(void *user, mr__chunk *full, mr__error *err)
{
    run *rn = user;
    mr__chunk *next = rn->spare;
    (void)err;
    check_chunk(rn, full, rn->next_row + full->nrows == rn->ref.nrows);
    rn->spare = full;
    return next;
}

/* ---- the model bound to whatever header the text has ---------------------- */

static char *dup_name(const char *s)
{
    char *p = mr__strdup(s);
    if (p == NULL) fail("out of memory");
    return p;
}

static void make_spec(run *rn, char **names, size_t n)
{
    static const int families[4] = {MR_GAUSSIAN, MR_POISSON, MR_BINOMIAL, MR_GAMMA};
    int family = families[(rn->flags >> 4) & 3];
    size_t i, last = n > 12 ? 12 : n;
    mr__spec *s = &rn->spec;
    mr__spec_init(s);
    s->family = family;
    s->outcome = dup_name(names[0]);
    if (family == MR_BINOMIAL && last > 1) s->trials = dup_name(names[1]);
    if (family == MR_POISSON && last > 2) s->exposure = dup_name(names[--last]);
    if (family == MR_GAMMA && last > 2) s->weight = dup_name(names[--last]);
    s->cov = mr__calloc(last, sizeof *s->cov);
    if (s->cov == NULL) fail("out of memory");
    s->capcov = last;
    for (i = s->trials ? 2 : 1; i < last; i++) {
        s->cov[s->ncov].name = dup_name(names[i]);
        s->cov[s->ncov].role = i % 2 ? MR__ROLE_NUMERIC : MR__ROLE_FACTOR;
        s->ncov++;
    }
}

static void bind_header(run *rn, const char *line, size_t len)
{
    static const char delims[4] = {0, ',', '\t', ';'};
    mr__error err;
    char **names = NULL;
    size_t n = 0, i;
    mr_status st;
    mr__error_clear(&err);
    rn->delim = delims[(rn->flags >> 1) & 3] ? delims[(rn->flags >> 1) & 3] : mr__detect_delimiter(line, len);
    if (mr__tokenizer_init(&rn->tok, rn->delim, &err) != MR_OK || mr__tokenizer_init(&rn->tok_csv, rn->delim, &err) != MR_OK)
        fail("out of memory");
    st = mr__parse_header(line, len, rn->delim, &names, &n, DISPLAY, &err);
    if (st != MR_OK) {
        if (st != MR_ERR_FORMAT) fail("the header gave status %d: %s", st, err.msg);
        return;
    }
    if (n == 0) fail("a header of no names");
    make_spec(rn, names, n);
    st = mr__bind(&rn->bind, &rn->spec, names, n, DISPLAY, &err);
    if (st != MR_OK) {
        if (st != MR_ERR_FORMAT || strstr(err.msg, "duplicate column") == NULL) fail("binding gave status %d: %s", st, err.msg);
        mr__binding_release(&rn->bind);
        mr__spec_release(&rn->spec);
        return;
    }
    rn->missing[0] = (rn->flags & 128) ? "-1" : "";
    rn->missing[1] = "NA";
    for (i = 0; i < 2; i++) rn->missing_len[i] = strlen(rn->missing[i]);
    rn->cfg.bind = &rn->bind;
    rn->family = mr__spec_family(&rn->spec);
    rn->cfg.family = &rn->family;
    rn->cfg.skip_bad = (rn->flags >> 3) & 1;
    rn->cfg.delim = rn->delim;
    rn->cfg.display = DISPLAY;
    rn->cfg.missing = rn->missing;
    rn->cfg.missing_len = rn->missing_len;
    rn->cfg.nmissing = 2;
    rn->cfg.collapse_abandoned = &rn->abandoned;
    if (mr__decoder_init(&rn->dec, &rn->cfg, &err) != MR_OK || mr__decoder_init(&rn->dec_csv, &rn->cfg, &err) != MR_OK ||
        mr__block_init(&rn->blk, &rn->bind, &err) != MR_OK || mr__block_init(&rn->blk_csv, &rn->bind, &err) != MR_OK)
        fail("out of memory");
    rn->bound = 1;
}

static void release_run(run *rn)
{
    if (rn->bound) {
        mr__block_release(&rn->blk);
        mr__block_release(&rn->blk_csv);
        mr__decoder_release(&rn->dec);
        mr__decoder_release(&rn->dec_csv);
        mr__binding_release(&rn->bind);
        mr__spec_release(&rn->spec);
    }
    mr__tokenizer_release(&rn->tok);
    mr__tokenizer_release(&rn->tok_csv);
    free(rn->plain_log.p);
    free(rn->csv_log.p);
    free(rn->ref.row);
}

/* ---- feeding ----------------------------------------------------------- */

static mr_status feed_rows(mr__splitter *sp, run *rn, const char *p, size_t k, size_t *used, mr__error *err)
{
    char *at;
    if (!(rn->flags & 1)) return mr__splitter_feed(sp, p, k, used, collect, rn, err);
    if ((at = mr__splitter_reserve(sp, k, err)) == NULL) return MR_ERR_NO_MEMORY;
    memcpy(at, p, k);
    return mr__splitter_feed(sp, at, k, used, collect, rn, err);
}

static void header_done(mr__splitter *sp, run *rn, mr__chunk *first)
{
    const reference *ref = &rn->ref;
    if (!ref->has_header || sp->header_len != ref->header_len ||
        memcmp(sp->header, rn->text + ref->header_off, ref->header_len) != 0)
        fail("the header differs from the reference's (%zu bytes, the reference %zu)", sp->header_len, ref->header_len);
    rn->next_offset = ref->data_off;
    if (!rn->repeated) bind_header(rn, sp->header, sp->header_len);
    mr__splitter_start_chunk(sp, first);
}

/* Pieces of the read sizes given, in turn, as a reader would feed them. */
static mr_status split_all(run *rn, const uint8_t *sizes, size_t nsizes, size_t scale, mr__splitter *sp,
                           mr__chunk *first, mr__error *err)
{
    size_t pos = 0, turn = 0;
    while (pos < rn->n) {
        size_t k = (sizes[turn++ % nsizes] + 1u) * scale, used, rest;
        mr_status st;
        if (k > rn->n - pos) k = rn->n - pos;
        st = sp->cur == NULL ? mr__splitter_feed(sp, rn->text + pos, k, &used, collect, rn, err)
                             : feed_rows(sp, rn, rn->text + pos, k, &used, err);
        if (st != MR_OK) return st;
        if (!sp->want_header && sp->cur == NULL) {
            header_done(sp, rn, first);
            if (used < k) {
                MR__TRY(feed_rows(sp, rn, rn->text + pos + used, k - used, &rest, err));
                if (rest != k - used) fail("a data feed took %zu of %zu bytes", rest, k - used);
            }
        } else if (used != k) {
            fail("a feed took %zu of %zu bytes", used, k);
        }
        pos += k;
    }
    return MR_OK;
}

/* The text, or its first line then the rest repeated. */
static char *make_text(const char *p, size_t n, int repeat, size_t *out_n)
{
    const char *nl = memchr(p, '\n', n);
    size_t head, body, lines = 0, copies, i;
    char *t;
    if (repeat && nl != NULL) {
        head = (size_t)(nl + 1 - p);
        body = n - head;
        for (i = head; i < n; i++) lines += p[i] == '\n';
        copies = lines ? (MR__BLOCK_ROWS + 2 * lines) / lines : 1;
        if (body > 0 && copies > REPEAT_CAP / body) copies = REPEAT_CAP / body;
        if (copies < 1) copies = 1;
    } else {
        head = n;
        body = 0;
        copies = 0;
    }
    *out_n = head + body * copies;
    t = xcalloc(*out_n + 1, 1);
    memcpy(t, p, head);
    for (i = 0; i < copies; i++) memcpy(t + head + i * body, p + head, body);
    return t;
}

static void check_finish(run *rn, mr__splitter *sp, mr_status st, const mr__error *err)
{
    const reference *ref = &rn->ref;
    char where[96];
    if (lone_cr_header(ref, rn->text)) {
        snprintf(where, sizeof where, DISPLAY ":%llu: the line ends are carriage returns alone",
                 (unsigned long long)ref->header_line);
        if (st != MR_ERR_FORMAT || strstr(err->msg, where) == NULL)
            fail("a header with lone carriage returns gave status %d: %s (expected \"%s\")", st, err->msg, where);
        return;
    }
    if (ref->open_quote) {
        snprintf(where, sizeof where, DISPLAY ":%llu: unterminated quote", (unsigned long long)ref->quote_line);
        if (st != MR_ERR_FORMAT || strstr(err->msg, where) == NULL)
            fail("an open quote at the end gave status %d: %s (expected \"%s\")", st, err->msg, where);
        return;
    }
    if (st != MR_OK) fail("splitting gave status %d: %s", st, err->msg);
    if (ref->has_header != !sp->want_header) fail("a header found by one splitter only");
    if (ref->has_header && (sp->header_len != ref->header_len || memcmp(sp->header, rn->text + ref->header_off, ref->header_len) != 0))
        fail("the header differs from the reference's");
    if (rn->next_row != ref->nrows) fail("%zu rows handed over, the reference has %zu", rn->next_row, ref->nrows);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* A chunk as a reader's first is: no buffer yet.  The structures are kept
 * from run to run (their row tables are 192 KiB, which fresh would cost
 * page faults on every run). */
static mr__chunk *fresh_chunk(mr__chunk **keep)
{
    if (*keep == NULL) *keep = xcalloc(1, sizeof **keep);
    mr__free((*keep)->data);
    (*keep)->data = NULL;
    (*keep)->len = (*keep)->cap = 0;
    return *keep;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static mr__chunk *keep_a, *keep_b;
    mr__chunk *a, *b;
    size_t nsizes, head;
    mr__splitter sp;
    mr__error err;
    mr_status st;
    run rn;
    if (size < 3) return 0;
    nsizes = (data[1] & 3u) + 1;
    head = 2 + nsizes;
    if (size < head) return 0;
    memset(&rn, 0, sizeof rn);
    rn.flags = data[0];
    rn.repeated = (data[0] & 64) && (data[1] & 0xC0) == 0xC0;
    rn.text = make_text((const char *)data + head, size - head, rn.repeated, &rn.n);
    ref_split(rn.text, rn.n, &rn.ref);
    a = fresh_chunk(&keep_a);
    b = fresh_chunk(&keep_b);
    rn.spare = b;
    mr__error_clear(&err);
    mr__splitter_init(&sp, DISPLAY, 1);
    st = split_all(&rn, data + 2, nsizes, (data[1] & 4) ? 257 : 1, &sp, a, &err);
    if (st == MR_OK) st = mr__splitter_finish(&sp, collect, &rn, &err);
    check_finish(&rn, &sp, st, &err);
    mr__splitter_release(&sp);
    release_run(&rn);
    free((char *)rn.text);
    return 0;
}

#pragma clang attribute pop
