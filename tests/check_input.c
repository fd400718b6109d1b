/* check_input.c - tests of src/input: rowsplit.c, fields.c and source.c.
 *
 * Sources of truth, named beside each check:
 *   - RFC 4180 (the CSV record grammar): where a record ends, what a quoted
 *     field holds.  The generator below writes each row knowing its bytes
 *     and its physical line, so the splitter is compared with the text as
 *     written, not with itself.
 *   - Python's csv module (csv.reader on a file opened with newline=''),
 *     for the fields of fixed examples; the expected values were worked out
 *     by hand from its documented RFC 4180 behaviour.
 *   - the contracts written in src/input/{rowsplit,fields,source}.h
 *     (blank lines skipped but counted, blanks trimmed from unquoted
 *     fields, the delimiter rule, BOM handling, error kinds).
 *   - the zstd command-line tool (`zstd -q`), an independent compressor,
 *     and the zstd frame format (RFC 8878) for skippable frames.
 *   - the gzip command-line tool (`gzip -n`), an independent compressor,
 *     and the gzip format (RFC 1952: members one after another, a 10-byte
 *     header, the CRC-32 and length of the text in an 8-byte trailer) and
 *     the deflate format (RFC 1951: block type 11 is reserved, an error).
 * Random inputs come from a fixed-seed splitmix64 so a failure reproduces;
 * MR_TEST_QUICK=1 shortens the random parts for sanitizer runs.
 */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "common/alloc.h"
#include "input/chunk.h"
#include "input/codec.h"
#include "input/fields.h"
#include "input/rowsplit.h"
#include "input/source.h"
#include "check_common.h"

/* ------------------------------------------------------------------ */
/* Small helpers                                                        */

typedef struct {
    uint64_t state;
} rng;

static uint64_t rng_next(rng *r) /* splitmix64 */
{
    uint64_t z = (r->state += UINT64_C(0x9E3779B97F4A7C15));
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    return z ^ (z >> 31);
}

static size_t rng_below(rng *r, size_t n) { return (size_t)(rng_next(r) % n); }

static int quick(void)
{
    const char *q = getenv("MR_TEST_QUICK");
    return q != NULL && strcmp(q, "1") == 0;
}

typedef struct {
    char *p;
    size_t n, cap;
} bytes;

static void bytes_add(bytes *b, const char *s, size_t n)
{
    if (b->n + n + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 256;
        while (cap < b->n + n + 1) cap *= 2;
        b->p = realloc(b->p, cap);
        if (b->p == NULL) ck_abort_msg("out of memory in the test");
        b->cap = cap;
    }
    memcpy(b->p + b->n, s, n);
    b->n += n;
    b->p[b->n] = '\0';
}

static void bytes_str(bytes *b, const char *s) { bytes_add(b, s, strlen(s)); }

static void bytes_free(bytes *b)
{
    free(b->p);
    memset(b, 0, sizeof *b);
}

static size_t count_char(const char *p, size_t n, char c)
{
    size_t i, k = 0;
    for (i = 0; i < n; i++) k += p[i] == c;
    return k;
}

static mr__chunk *new_chunk(void)
{
    mr__chunk *c = calloc(1, sizeof *c);
    ck_assert_ptr_nonnull(c);
    return c;
}

/* Chunk data is grown by the library's allocator, so it is freed by it. */
static void free_chunk(mr__chunk *c)
{
    if (c == NULL) return;
    mr__free(c->data);
    free(c);
}

typedef struct {
    char dir[64];
} tmpdir;

#define PATH_CAP 256

static void tmp_open(tmpdir *t)
{
    strcpy(t->dir, "/tmp/mr-check-input-XXXXXX");
    ck_assert_ptr_nonnull(mkdtemp(t->dir));
}

static void tmp_path(const tmpdir *t, const char *name, char *out)
{
    int n = snprintf(out, PATH_CAP, "%s/%s", t->dir, name);
    ck_assert(n > 0 && n < PATH_CAP);
}

static void tmp_close(tmpdir *t)
{
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", t->dir);
    ck_assert_int_eq(system(cmd), 0);
}

static void write_file(const char *path, const char *p, size_t n)
{
    FILE *f = fopen(path, "wb");
    ck_assert_ptr_nonnull(f);
    ck_assert_uint_eq(fwrite(p, 1, n, f), n);
    ck_assert_int_eq(fclose(f), 0);
}

static void read_file(const char *path, bytes *out)
{
    char buf[65536];
    size_t n;
    FILE *f = fopen(path, "rb");
    ck_assert_ptr_nonnull(f);
    memset(out, 0, sizeof *out);
    bytes_str(out, "");
    while ((n = fread(buf, 1, sizeof buf, f)) > 0) bytes_add(out, buf, n);
    fclose(f);
}

static void run(const char *fmt, const char *a, const char *b)
{
    char cmd[1024];
    snprintf(cmd, sizeof cmd, fmt, a, b);
    ck_assert_msg(system(cmd) == 0, "command failed: %s", cmd);
}

/* ------------------------------------------------------------------ */
/* A CSV corpus that knows its own rows                                 */

typedef struct {
    size_t off, len; /* bytes of the row in the text, terminator included */
    uint64_t line;   /* physical line the row starts on (1-based) */
    int quoted;
} known_row;

typedef struct {
    bytes text;
    const char *header; /* the header row with its terminator */
    known_row *row;
    size_t nrows;
} corpus;

/* One cell of the second column, chosen to exercise every quoting rule of
 * RFC 4180 section 2 (items 5-7). */
static int add_name_cell(bytes *t, rng *r, size_t i)
{
    char cell[64];
    switch (rng_below(r, 8)) {
    case 0: snprintf(cell, sizeof cell, "\"a,%zu\"", i); break;            /* delimiter inside */
    case 1: snprintf(cell, sizeof cell, "\"say \"\"hi\"\" %zu\"", i); break; /* doubled quotes */
    case 2: snprintf(cell, sizeof cell, "\"l1\nl2 %zu\"", i); break;       /* embedded LF */
    case 3: snprintf(cell, sizeof cell, "\"x\r\ny\n\nz%zu\"", i); break;   /* CRLF and a blank line inside */
    case 4: snprintf(cell, sizeof cell, "\"\""); break;                    /* quoted empty */
    case 5: cell[0] = '\0'; break;                                         /* empty */
    default: snprintf(cell, sizeof cell, "w%zu", i); break;
    }
    bytes_str(t, cell);
    return strchr(cell, '"') != NULL;
}

static void make_corpus(corpus *cp, size_t nrows, uint64_t seed, int last_terminated)
{
    rng r = {seed};
    uint64_t line;
    size_t i;
    memset(cp, 0, sizeof *cp);
    cp->header = "id,name,value\n";
    cp->row = calloc(nrows, sizeof *cp->row);
    ck_assert_ptr_nonnull(cp->row);
    bytes_str(&cp->text, cp->header);
    line = 2;
    for (i = 0; i < nrows; i++) {
        known_row *k = &cp->row[i];
        char num[32];
        if (rng_below(&r, 20) == 0) { /* blank lines: skipped, but they are lines */
            bytes_str(&cp->text, rng_below(&r, 2) ? "\r\n" : "\n");
            line++;
        }
        k->off = cp->text.n;
        k->line = line;
        snprintf(num, sizeof num, "%zu,", i);
        bytes_str(&cp->text, num);
        k->quoted = add_name_cell(&cp->text, &r, i);
        snprintf(num, sizeof num, ",%u.%u", (unsigned)rng_below(&r, 1000), (unsigned)rng_below(&r, 10));
        bytes_str(&cp->text, num);
        if (i + 1 < nrows || last_terminated) bytes_str(&cp->text, rng_below(&r, 2) ? "\r\n" : "\n");
        k->len = cp->text.n - k->off;
        line += count_char(cp->text.p + k->off, k->len, '\n');
        cp->nrows++;
    }
}

static void free_corpus(corpus *cp)
{
    bytes_free(&cp->text);
    free(cp->row);
}

/* ------------------------------------------------------------------ */
/* Feeding the splitter and checking each chunk as it is handed over    */

typedef struct {
    const corpus *cp;
    size_t next_row;
    uint64_t nchunks;
    mr__chunk *spare;
    char problem[512];
} collector;

/* Keeps the first mismatch only: later ones usually follow from it. */
static void note(collector *col, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void note(collector *col, const char *fmt, ...)
{
    va_list ap;
    if (col->problem[0] != '\0') return;
    va_start(ap, fmt);
    vsnprintf(col->problem, sizeof col->problem, fmt, ap);
    va_end(ap);
}

/* A chunk recut from the corpus bytes at the offsets the stream gave it
 * (as a later pass reads a plain file's blocks, blockmap.h) must be the
 * streamed chunk itself, which check_chunk holds to the corpus. */
static void check_recut(collector *col, const mr__chunk *c)
{
    const corpus *cp = col->cp;
    mr__chunk *r = new_chunk();
    size_t len = (size_t)(c->end - c->offset);
    int last = col->next_row + c->nrows == cp->nrows;
    mr__error err;
    mr__error_clear(&err);
    if (c->end < c->offset || c->end > cp->text.n || mr__chunk_room(r, len, &err) == NULL) {
        note(col, "chunk %llu: bytes [%llu, %llu) out of range", (unsigned long long)c->index,
             (unsigned long long)c->offset, (unsigned long long)c->end);
        free_chunk(r);
        return;
    }
    memcpy(r->data, cp->text.p + c->offset, len);
    if (mr__splitter_recut(r, len, "corpus.csv", c->index * MR__BLOCK_ROWS, c->first_line, c->nrows, last, &err) != MR_OK)
        note(col, "chunk %llu recut: %s", (unsigned long long)c->index, err.msg);
    else if (r->index != c->index || r->nrows != c->nrows || r->first_line != c->first_line ||
             r->has_quote != c->has_quote || r->len != c->len || memcmp(r->data, c->data, c->len) != 0 ||
             memcmp(r->row_start, c->row_start, (c->nrows + 1) * sizeof *c->row_start) != 0 ||
             memcmp(r->row_line, c->row_line, c->nrows * sizeof *c->row_line) != 0)
        note(col, "chunk %llu recut differs from the streamed chunk", (unsigned long long)c->index);
    free_chunk(r);
}

/* Source of truth: the corpus as written (RFC 4180 records) and chunk.h
 * (MR__BLOCK_ROWS rows a chunk, index counted from the first data row). */
static void check_chunk(collector *col, const mr__chunk *c)
{
    const corpus *cp = col->cp;
    size_t left = cp->nrows - col->next_row, want = left < MR__BLOCK_ROWS ? left : MR__BLOCK_ROWS;
    int any_quote = 0;
    uint32_t r;
    if (c->index != col->nchunks)
        note(col, "chunk %llu has index %llu", (unsigned long long)col->nchunks, (unsigned long long)c->index);
    if (c->nrows != want) note(col, "chunk %llu has %u rows, expected %zu", (unsigned long long)col->nchunks, c->nrows, want);
    for (r = 0; r < c->nrows && r < want; r++) {
        const known_row *k = &cp->row[col->next_row + r];
        size_t len = c->row_start[r + 1] - c->row_start[r];
        any_quote |= k->quoted;
        if (c->first_line + c->row_line[r] != k->line)
            note(col, "row %zu: line %llu, expected %llu", col->next_row + r,
                 (unsigned long long)(c->first_line + c->row_line[r]), (unsigned long long)k->line);
        if (len != k->len || memcmp(c->data + c->row_start[r], cp->text.p + k->off, len) != 0)
            note(col, "row %zu: %zu bytes differ from the %zu written", col->next_row + r, len, k->len);
    }
    /* fields.h: has_quote picks the tokenizer, so it must see every quote. */
    if (any_quote && !c->has_quote) note(col, "chunk %llu has quotes but has_quote = 0", (unsigned long long)col->nchunks);
    if (c->len != c->row_start[c->nrows])
        note(col, "chunk %llu: len %zu != end of last row %zu", (unsigned long long)col->nchunks, c->len,
             c->row_start[c->nrows]);
    check_recut(col, c);
    col->next_row += c->nrows;
    col->nchunks++;
}

/* Takes the full chunk and hands back the other buffer (two alternate, as
 * the real reader alternates slots). */
static mr__chunk *collect(void *user, mr__chunk *full, mr__error *err)
{
    collector *col = user;
    mr__chunk *next = col->spare;
    (void)err;
    check_chunk(col, full);
    col->spare = full;
    return next;
}

/* Feeds a piece of data rows.  in_place: copies it first into the room
 * mr__splitter_reserve gives at the end of the chunk, as the reader does
 * (the splitter then takes whole rows without a copy). */
static mr_status feed_rows(mr__splitter *sp, const char *p, size_t k, int in_place, size_t *used, collector *col,
                           mr__error *err)
{
    char *at;
    if (!in_place) return mr__splitter_feed(sp, p, k, used, collect, col, err);
    if ((at = mr__splitter_reserve(sp, k, err)) == NULL) return MR_ERR_NO_MEMORY;
    memcpy(at, p, k);
    return mr__splitter_feed(sp, at, k, used, collect, col, err);
}

/* piece > 0: pieces of that size; piece == 0: random sizes in 1..maxrand.
 * Check's assertions write to a pipe each time they run, so the loop only
 * tests and aborts on a failure. */
static void split_corpus_as(const corpus *cp, size_t piece, size_t maxrand, uint64_t seed, int in_place,
                            collector *col)
{
    mr__splitter sp;
    mr__chunk *a = new_chunk(), *b = new_chunk();
    mr__error err;
    rng r = {seed};
    size_t pos = 0, n = cp->text.n;
    memset(col, 0, sizeof *col);
    col->cp = cp;
    col->spare = b;
    mr__error_clear(&err);
    mr__splitter_init(&sp, "corpus.csv", 1);
    while (pos < n) {
        size_t k = piece ? piece : 1 + rng_below(&r, maxrand), used;
        if (k > n - pos) k = n - pos;
        mr_status st = sp.cur == NULL ? mr__splitter_feed(&sp, cp->text.p + pos, k, &used, collect, col, &err)
                                      : feed_rows(&sp, cp->text.p + pos, k, in_place, &used, col, &err);
        if (st != MR_OK) ck_abort_msg("feed at byte %zu: %s", pos, err.msg);
        if (!sp.want_header && sp.cur == NULL) {
            /* rowsplit.h: the feed stops right after the header. */
            mr__splitter_start_chunk(&sp, a);
            if (used < k) {
                size_t rest;
                if (feed_rows(&sp, cp->text.p + pos + used, k - used, in_place, &rest, col, &err) != MR_OK)
                    ck_abort_msg("feed after the header: %s", err.msg);
                if (rest != k - used) ck_abort_msg("data feed took %zu of %zu bytes", rest, k - used);
            }
        } else if (used != k) {
            ck_abort_msg("feed at byte %zu took %zu of %zu bytes", pos, used, k);
        }
        pos += k;
    }
    ck_assert_int_eq(mr__splitter_finish(&sp, collect, col, &err), MR_OK);
    /* Source of truth: the header row as written, terminator included. */
    ck_assert_uint_eq(sp.header_len, strlen(cp->header));
    ck_assert(memcmp(sp.header, cp->header, sp.header_len) == 0);
    mr__splitter_release(&sp);
    free_chunk(a);
    free_chunk(b);
}

static void split_corpus(const corpus *cp, size_t piece, size_t maxrand, uint64_t seed, collector *col)
{
    split_corpus_as(cp, piece, maxrand, seed, 0, col);
}

static void expect_all_rows(const collector *col, const corpus *cp, const char *how, size_t piece)
{
    ck_assert_msg(col->problem[0] == '\0', "%s %zu: %s", how, piece, col->problem);
    ck_assert_msg(col->next_row == cp->nrows, "%s %zu: %zu rows delivered, %zu written", how, piece, col->next_row,
                  cp->nrows);
    ck_assert_uint_eq(col->nchunks, (cp->nrows + MR__BLOCK_ROWS - 1) / MR__BLOCK_ROWS);
}

START_TEST(test_split_every_piece_size)
{
    /* Source of truth: the corpus rows as written (RFC 4180 records); the
     * chunking must not depend on read sizes (chunk.h). */
    corpus cp;
    collector col;
    size_t piece;
    make_corpus(&cp, 10000, 11, _i);
    for (piece = 1; piece <= 64; piece++) {
        split_corpus(&cp, piece, 0, 0, &col);
        expect_all_rows(&col, &cp, "piece size", piece);
        split_corpus_as(&cp, piece, 0, 0, 1, &col);
        expect_all_rows(&col, &cp, "piece size, read in place", piece);
    }
    free_corpus(&cp);
}
END_TEST

START_TEST(test_split_large_and_random_pieces)
{
    /* Source of truth: as above, the corpus rows as written. */
    static const size_t fixed[] = {97, 1000, 4093, 65536, 1u << 22};
    corpus cp;
    collector col;
    size_t i, runs = quick() ? 2 : 8;
    make_corpus(&cp, 10000, 23, 1);
    for (i = 0; i < sizeof fixed / sizeof fixed[0]; i++) {
        split_corpus(&cp, fixed[i], 0, 0, &col);
        expect_all_rows(&col, &cp, "piece size", fixed[i]);
        split_corpus_as(&cp, fixed[i], 0, 0, 1, &col);
        expect_all_rows(&col, &cp, "piece size, read in place", fixed[i]);
    }
    for (i = 0; i < runs; i++) {
        split_corpus_as(&cp, 0, i % 2 ? 300 : 20000, 1000 + i, (int)(i / 2 % 2), &col);
        expect_all_rows(&col, &cp, "random pieces, seed", 1000 + i);
    }
    free_corpus(&cp);
}
END_TEST

/* Splits a short text whole; rows go to one chunk kept in *out. */
static mr__chunk *keep_last(void *user, mr__chunk *full, mr__error *err)
{
    (void)user;
    (void)err;
    return full;
}

static mr__chunk *split_small(const char *text, size_t len, int want_header, mr__splitter *sp, mr_status *finish,
                              mr__error *err)
{
    mr__chunk *c = new_chunk();
    size_t used;
    mr__error_clear(err);
    mr__splitter_init(sp, "t.csv", want_header);
    if (want_header) {
        ck_assert_int_eq(mr__splitter_feed(sp, text, len, &used, keep_last, NULL, err), MR_OK);
        text += used;
        len -= used;
    }
    mr__splitter_start_chunk(sp, c);
    ck_assert_int_eq(mr__splitter_feed(sp, text, len, &used, keep_last, NULL, err), MR_OK);
    *finish = mr__splitter_finish(sp, keep_last, NULL, err);
    return c;
}

static void expect_row(const mr__chunk *c, uint32_t r, const char *bytes_, uint64_t line)
{
    size_t len = c->row_start[r + 1] - c->row_start[r];
    ck_assert_uint_eq(len, strlen(bytes_));
    ck_assert(memcmp(c->data + c->row_start[r], bytes_, len) == 0);
    ck_assert_uint_eq(c->first_line + c->row_line[r], line);
}

START_TEST(test_split_many_chunks_recut)
{
    /* Source of truth: the corpus rows as written; several chunks, so
     * that chunk offsets after the first (and a last partial chunk, with
     * or without a final newline) are recut too (check_recut). */
    corpus cp;
    collector col;
    make_corpus(&cp, 2 * MR__BLOCK_ROWS + 777, 31, _i);
    split_corpus_as(&cp, 4093, 0, 0, 1, &col);
    expect_all_rows(&col, &cp, "piece size, read in place", 4093);
    split_corpus(&cp, 0, 20000, 77, &col);
    expect_all_rows(&col, &cp, "random pieces, seed", 77);
    free_corpus(&cp);
}
END_TEST

/* Alternates two chunks, as the reader alternates slots. */
static mr__chunk *swap_chunks(void *user, mr__chunk *full, mr__error *err)
{
    mr__chunk **pair = user;
    (void)err;
    return full == pair[0] ? pair[1] : pair[0];
}

/* Recuts [from, to) of text as chunk `index` (first line `line`). */
static mr_status recut_text(const char *text, size_t from, size_t to, uint64_t index, uint64_t line, uint32_t nrows,
                            int last, mr__error *err)
{
    mr__chunk *c = new_chunk();
    mr_status st;
    mr__error_clear(err);
    ck_assert_ptr_nonnull(mr__chunk_room(c, to - from, err));
    memcpy(c->data, text + from, to - from);
    st = mr__splitter_recut(c, to - from, "t.csv", index * MR__BLOCK_ROWS, line, nrows, last, err);
    free_chunk(c);
    return st;
}

START_TEST(test_recut_notices_changed_bytes)
{
    /* Source of truth: rowsplit.h (a recut of other bytes than the stream
     * held fails as a changed file).  MR__BLOCK_ROWS + 3 rows "1,2\n" cut
     * by the streaming splitter: a full chunk, then one of 3 rows. */
    size_t nrows = MR__BLOCK_ROWS + 3, n = 4 + 4 * nrows, i, used, row100 = 4 + 4 * 100;
    char *text = malloc(n), *copy = malloc(n);
    mr__splitter sp;
    mr__chunk *a = new_chunk(), *b = new_chunk(), *pair[2] = {a, b};
    mr__error err;
    ck_assert_ptr_nonnull(text);
    ck_assert_ptr_nonnull(copy);
    memcpy(text, "h,k\n", 4);
    for (i = 0; i < nrows; i++) memcpy(text + 4 + 4 * i, "1,2\n", 4);
    mr__error_clear(&err);
    mr__splitter_init(&sp, "t.csv", 1);
    ck_assert_int_eq(mr__splitter_feed(&sp, text, n, &used, keep_last, NULL, &err), MR_OK);
    ck_assert_uint_eq(used, 4);
    mr__splitter_start_chunk(&sp, a);
    ck_assert_int_eq(mr__splitter_feed(&sp, text + 4, n - 4, &used, swap_chunks, pair, &err), MR_OK);
    ck_assert_int_eq(mr__splitter_finish(&sp, swap_chunks, pair, &err), MR_OK);
    ck_assert_uint_eq(a->offset, 4);
    ck_assert_uint_eq(a->end, 4 + 4 * MR__BLOCK_ROWS);
    ck_assert_uint_eq(b->offset, a->end);
    ck_assert_uint_eq(b->end, n);
    ck_assert_int_eq(recut_text(text, a->offset, a->end, 0, 2, MR__BLOCK_ROWS, 0, &err), MR_OK);
    ck_assert_int_eq(recut_text(text, b->offset, b->end, 1, 2 + MR__BLOCK_ROWS, 3, 1, &err), MR_OK);
    /* a row joined to the next: the chunk is a row short */
    memcpy(copy, text, n);
    copy[row100 + 3] = ',';
    ck_assert_int_eq(recut_text(copy, a->offset, a->end, 0, 2, MR__BLOCK_ROWS, 0, &err), MR_ERR_IO);
    ck_assert_msg(strstr(err.msg, "changed") != NULL, "%s", err.msg);
    /* a row split in two: the chunk is full before its bytes end */
    copy[row100 + 3] = '\n';
    copy[row100 + 1] = '\n';
    ck_assert_int_eq(recut_text(copy, a->offset, a->end, 0, 2, MR__BLOCK_ROWS, 0, &err), MR_ERR_IO);
    /* a quote opened and never closed */
    copy[row100 + 1] = '"';
    ck_assert_int_eq(recut_text(copy, a->offset, a->end, 0, 2, MR__BLOCK_ROWS, 0, &err), MR_ERR_IO);
    /* the last chunk cut short by a row */
    ck_assert_int_eq(recut_text(text, b->offset, b->end - 4, 1, 2 + MR__BLOCK_ROWS, 3, 1, &err), MR_ERR_IO);
    mr__splitter_release(&sp);
    free_chunk(a);
    free_chunk(b);
    free(text);
    free(copy);
}
END_TEST

START_TEST(test_split_line_numbers_after_embedded_newlines)
{
    /* Source of truth: the physical lines of this text, counted by hand:
     * 1 header, 2-3 row "1", 4 blank, 5 row "2", 6-8 row "3", 9 blank
     * (CRLF), 10 row "4" with no final newline (RFC 4180 2.2 allows it). */
    static const char text[] = "h1,h2,h3\n"
                               "1,\"a\nb\",c\n"
                               "\n"
                               "2,x,y\r\n"
                               "3,\"p\r\nq\r\nr\",s\n"
                               "\r\n"
                               "4,y,z";
    mr__splitter sp;
    mr__error err;
    mr_status fin;
    mr__chunk *c = split_small(text, sizeof text - 1, 1, &sp, &fin, &err);
    ck_assert_int_eq(fin, MR_OK);
    ck_assert_uint_eq(c->nrows, 4);
    ck_assert_int_eq(c->has_quote, 1);
    expect_row(c, 0, "1,\"a\nb\",c\n", 2);
    expect_row(c, 1, "2,x,y\r\n", 5);
    expect_row(c, 2, "3,\"p\r\nq\r\nr\",s\n", 6);
    expect_row(c, 3, "4,y,z", 10);
    mr__splitter_release(&sp);
    free_chunk(c);
}
END_TEST

START_TEST(test_split_line_numbers_past_2_to_the_32)
{
    /* Source of truth: arithmetic.  Row 1 is on line 1; then 2^32 blank
     * lines (skipped but counted: the splitter's line count is moved on
     * by them here, as feeding them one by one would); row 2 follows on
     * line 2 + 2^32, in the same chunk, and must not be read modulo 2^32. */
    static const char row1[] = "1,2\n", row2[] = "3,4\n";
    const uint64_t blank = (uint64_t)1 << 32;
    mr__splitter sp;
    mr__error err;
    mr__chunk *c = new_chunk();
    size_t used;
    mr__error_clear(&err);
    mr__splitter_init(&sp, "t.csv", 0);
    mr__splitter_start_chunk(&sp, c);
    ck_assert_int_eq(mr__splitter_feed(&sp, row1, sizeof row1 - 1, &used, keep_last, NULL, &err), MR_OK);
    sp.line += blank;
    sp.row_line = sp.line;
    ck_assert_int_eq(mr__splitter_feed(&sp, row2, sizeof row2 - 1, &used, keep_last, NULL, &err), MR_OK);
    ck_assert_int_eq(mr__splitter_finish(&sp, keep_last, NULL, &err), MR_OK);
    ck_assert_uint_eq(c->nrows, 2);
    expect_row(c, 0, "1,2\n", 1);
    expect_row(c, 1, "3,4\n", 2 + blank);
    mr__splitter_release(&sp);
    free_chunk(c);
}
END_TEST

START_TEST(test_split_blank_lines_before_header)
{
    /* Source of truth: rowsplit.h (blank lines are skipped but counted). */
    static const char text[] = "\n\r\nh1,h2\n1,2\n";
    mr__splitter sp;
    mr__error err;
    mr_status fin;
    mr__chunk *c = split_small(text, sizeof text - 1, 1, &sp, &fin, &err);
    ck_assert_int_eq(fin, MR_OK);
    ck_assert_uint_eq(sp.header_len, 6);
    ck_assert(memcmp(sp.header, "h1,h2\n", 6) == 0);
    ck_assert_uint_eq(c->nrows, 1);
    expect_row(c, 0, "1,2\n", 4);
    mr__splitter_release(&sp);
    free_chunk(c);
}
END_TEST

START_TEST(test_split_unterminated_quote)
{
    /* Source of truth: rowsplit.h (an open quote at the end is an error);
     * the quote opens on physical line 3 of this text. */
    static const char text[] = "h1,h2\n1,ok\n2,\"open\n3,x\n";
    mr__splitter sp;
    mr__error err;
    mr_status fin;
    mr__chunk *c = split_small(text, sizeof text - 1, 1, &sp, &fin, &err);
    ck_assert_int_eq(fin, MR_ERR_FORMAT);
    ck_assert_int_eq(err.status, MR_ERR_FORMAT);
    ck_assert_msg(strstr(err.msg, "t.csv:3") != NULL, "message: %s", err.msg);
    ck_assert_msg(strstr(err.msg, "unterminated quote") != NULL, "message: %s", err.msg);
    mr__splitter_release(&sp);
    free_chunk(c);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Tokenizer                                                            */

/* Fields are logged joined by US, rows ended by RS, so one string holds a
 * whole chunk's fields and can be compared in one go. */
#define US "\x1f"
#define RS "\x1e"

typedef struct {
    bytes log;
    size_t k;     /* next field index expected */
    uint32_t r;   /* next row index expected */
    int order_ok; /* fields and rows arrived in order with right counts */
} field_log;

static void log_field(void *user, size_t k, const char *p, size_t len)
{
    field_log *f = user;
    if (k != f->k) f->order_ok = 0;
    if (k > 0) bytes_str(&f->log, US);
    bytes_add(&f->log, p, len);
    f->k = k + 1;
}

static void log_row_end(void *user, uint32_t r, size_t nfields)
{
    field_log *f = user;
    if (r != f->r || nfields != f->k) f->order_ok = 0;
    bytes_str(&f->log, RS);
    f->r = r + 1;
    f->k = 0;
}

static mr_status tokenize_logged(const mr__chunk *c, char delim, field_log *f, mr__error *err)
{
    mr__tokenizer t;
    mr__field_sink sink = {f, log_field, log_row_end, NULL, 0, NULL};
    mr_status st;
    memset(f, 0, sizeof *f);
    f->order_ok = 1;
    bytes_str(&f->log, "");
    ck_assert_int_eq(mr__tokenizer_init(&t, delim, err), MR_OK);
    st = mr__tokenize_chunk(&t, c, &sink, "t.csv", err);
    mr__tokenizer_release(&t);
    return st;
}

/* Fields of `text` (no header) through whichever path the splitter picks,
 * and through the libcsv path forced on a copy of the chunk. */
static void tokenize_both(const char *text, char delim, field_log *auto_path, field_log *csv_path, int *had_quote)
{
    mr__splitter sp;
    mr__error err;
    mr_status fin;
    mr__chunk *c = split_small(text, strlen(text), 0, &sp, &fin, &err), copy;
    ck_assert_int_eq(fin, MR_OK);
    *had_quote = c->has_quote;
    ck_assert_int_eq(tokenize_logged(c, delim, auto_path, &err), MR_OK);
    memcpy(&copy, c, sizeof copy);
    copy.has_quote = 1;
    ck_assert_msg(tokenize_logged(&copy, delim, csv_path, &err) == MR_OK, "libcsv path: %s", err.msg);
    ck_assert_uint_eq(auto_path->r, c->nrows);
    ck_assert_uint_eq(csv_path->r, c->nrows);
    mr__splitter_release(&sp);
    free_chunk(c);
}

typedef struct {
    const char *text;
    const char *fields;
} csv_case;

static void expect_fields(const csv_case *cases, size_t n, char delim)
{
    size_t i;
    for (i = 0; i < n; i++) {
        field_log a, b;
        int q;
        tokenize_both(cases[i].text, delim, &a, &b, &q);
        ck_assert_msg(a.order_ok && b.order_ok, "case %zu: fields out of order", i);
        ck_assert_msg(strcmp(a.log.p, cases[i].fields) == 0, "case %zu (%s path): got [%s]", i, q ? "libcsv" : "plain",
                      a.log.p);
        ck_assert_msg(strcmp(b.log.p, cases[i].fields) == 0, "case %zu (libcsv path): got [%s]", i, b.log.p);
        bytes_free(&a.log);
        bytes_free(&b.log);
    }
}

START_TEST(test_fields_match_python_csv)
{
    /* Source of truth: Python's csv.reader (newline='') on the same text,
     * worked out by hand from RFC 4180 section 2: a quoted field may hold
     * the delimiter (2.6), line breaks (2.6) and doubled quotes (2.7); the
     * record's line break is not part of the last field (2.1). */
    static const csv_case cases[] = {
        {"a,b,c\n", "a" US "b" US "c" RS},
        {"\"a,b\",c\n", "a,b" US "c" RS},
        {"\"say \"\"hi\"\"\",x\n", "say \"hi\"" US "x" RS},
        {"\"line1\nline2\",z\n", "line1\nline2" US "z" RS},
        {"\"a\r\nb\",c\r\n", "a\r\nb" US "c" RS},
        {",,\n", "" US "" US "" RS},
        {"\"\",x\n", "" US "x" RS},
        {"x,\"\"\n", "x" US "" RS},
        {"\"\"\"\"\n", "\"" RS},
        {"p,q\r\nr,s\r\n", "p" US "q" RS "r" US "s" RS},
        {"1,\"2\"\n3,4", "1" US "2" RS "3" US "4" RS},
    };
    expect_fields(cases, sizeof cases / sizeof cases[0], ',');
}
END_TEST

START_TEST(test_fields_other_delimiters)
{
    /* Source of truth: Python's csv.reader with delimiter='\t' / ';'
     * (hand-worked, RFC 4180 rules with another separator). */
    static const csv_case tab[] = {
        {"a\tb\tc\n", "a" US "b" US "c" RS},
        {"\"x\ty\"\tz\n", "x\ty" US "z" RS},
        {"a,b\tc\n", "a,b" US "c" RS},
    };
    static const csv_case semi[] = {
        {"a;b;c\n", "a" US "b" US "c" RS},
        {"\"1;2\";3,5\n", "1;2" US "3,5" RS},
    };
    expect_fields(tab, sizeof tab / sizeof tab[0], '\t');
    expect_fields(semi, sizeof semi / sizeof semi[0], ';');
}
END_TEST

START_TEST(test_fields_trimming_and_cr)
{
    /* Source of truth: fields.h (unquoted fields lose leading and trailing
     * blanks in both tokenizers, a carriage return being one; a quoted
     * field keeps them) and RFC 4180 2.1 (CRLF ends the record, so no field
     * ends in CR).  A lone CR beside a cell was once a record end to libcsv
     * only (fuzz_rowsplit found it): the same row then gave other fields in
     * a chunk with a quote somewhere. */
    static const csv_case comma[] = {
        {"  a  , b ,c\t\n", "a" US "b" US "c" RS},
        {"a b , c d\r\n", "a b" US "c d" RS},
        {" , \n", "" US "" RS},
        {"x,y\r", "x" US "y" RS},
        {"1\r,2\n", "1" US "2" RS},
        {"a\r\r\n", "a" RS},
        {"\r x \r,\ry\r\n3,4\n", "x" US "y" RS "3" US "4" RS},
        {"a\rb,c\n", "a\rb" US "c" RS},
    };
    static const csv_case quoted[] = {
        {"\" a \",b \n", " a " US "b" RS},
        {"  \"q\",  r  \r\n", "q" US "r" RS},
        {"\"q\"\r,r\r\r\n", "q" US "r" RS},
        {"\"a\rb\",c\r\n", "a\rb" US "c" RS},
    };
    /* With a tab delimiter only spaces (and CRs) are blanks. */
    static const csv_case tab[] = {
        {"  a \t b  \t\n", "a" US "b" US "" RS},
        {"a\r\tb\r\r\n", "a" US "b" RS},
    };
    expect_fields(comma, sizeof comma / sizeof comma[0], ',');
    expect_fields(quoted, sizeof quoted / sizeof quoted[0], ',');
    expect_fields(tab, sizeof tab / sizeof tab[0], '\t');
}
END_TEST

/* Random quote-free rows: letters, digits, blanks, empty fields, LF and
 * CRLF.  A row is never blanks only (see test_blank_only_row). */
static void random_plain_text(bytes *t, rng *r, size_t nrows, char delim)
{
    static const char alpha[] = "ab1. \t";
    size_t i, f, c;
    for (i = 0; i < nrows; i++) {
        size_t nf = 1 + rng_below(r, 6);
        bytes_str(t, "k");
        for (f = 0; f < nf; f++) {
            size_t len = rng_below(r, 6);
            bytes_add(t, &delim, 1);
            for (c = 0; c < len; c++) {
                char ch = alpha[rng_below(r, sizeof alpha - 1)];
                if (ch == delim) ch = ' ';
                bytes_add(t, &ch, 1);
            }
        }
        bytes_str(t, rng_below(r, 2) ? "\r\n" : "\n");
    }
}

START_TEST(test_plain_and_libcsv_paths_agree)
{
    /* Source of truth: fields.h ("two tokenizers give the same fields");
     * libcsv is the independent implementation here. */
    static const char delims[] = {',', '\t', ';'};
    rng r = {77};
    size_t d, rounds = quick() ? 2 : 10, i;
    for (d = 0; d < sizeof delims; d++)
        for (i = 0; i < rounds; i++) {
            bytes t = {0};
            field_log a, b;
            int q;
            random_plain_text(&t, &r, 3000, delims[d]);
            tokenize_both(t.p, delims[d], &a, &b, &q);
            ck_assert_int_eq(q, 0);
            ck_assert(a.order_ok && b.order_ok);
            ck_assert_msg(a.log.n == b.log.n && memcmp(a.log.p, b.log.p, a.log.n) == 0,
                          "delimiter %d round %zu: the plain and libcsv fields differ", delims[d], i);
            bytes_free(&a.log);
            bytes_free(&b.log);
            bytes_free(&t);
        }
}
END_TEST

/* Tokenizes each chunk as the splitter hands it over, into one log. */
typedef struct {
    mr__tokenizer tok;
    field_log log;
    mr_status st;
    mr__error err;
} chunk_fields;

static mr__chunk *tokenize_full(void *user, mr__chunk *full, mr__error *err)
{
    chunk_fields *cf = user;
    mr__field_sink sink = {&cf->log, log_field, log_row_end, NULL, 0, NULL};
    (void)err;
    cf->log.r = 0; /* row numbers restart in every chunk */
    if (cf->st == MR_OK) cf->st = mr__tokenize_chunk(&cf->tok, full, &sink, "corpus.csv", &cf->err);
    return full;
}

START_TEST(test_corpus_fields_match_python_csv)
{
    /* Source of truth: Python's csv module (csv.reader, newline='') run on
     * the same file; the corpus cells have no outer blanks, so trimming
     * plays no part.  Python reports a blank line as an empty row, which
     * rowsplit.h skips, so those are dropped from its output. */
    static const char script[] =
        "import csv, sys\n"
        "rows = list(csv.reader(open(sys.argv[1], newline='', encoding='ascii')))\n"
        "out = ''.join('\\x1f'.join(r) + '\\x1e' for r in rows[1:] if r)\n"
        "open(sys.argv[2], 'w', newline='', encoding='ascii').write(out)\n";
    corpus cp;
    tmpdir t;
    char csv_path[PATH_CAP], py_path[PATH_CAP], out_path[PATH_CAP], cmd[1024];
    chunk_fields cf;
    mr__splitter sp;
    mr__chunk *c = new_chunk();
    bytes want;
    size_t used;
    make_corpus(&cp, 10000, 31, 0);
    tmp_open(&t);
    tmp_path(&t, "corpus.csv", csv_path);
    tmp_path(&t, "read.py", py_path);
    tmp_path(&t, "fields.txt", out_path);
    write_file(csv_path, cp.text.p, cp.text.n);
    write_file(py_path, script, sizeof script - 1);
    snprintf(cmd, sizeof cmd, "/usr/bin/python3 '%s' '%s' '%s'", py_path, csv_path, out_path);
    ck_assert_msg(system(cmd) == 0, "command failed: %s", cmd);
    read_file(out_path, &want);

    memset(&cf, 0, sizeof cf);
    cf.log.order_ok = 1;
    bytes_str(&cf.log.log, "");
    mr__error_clear(&cf.err);
    ck_assert_int_eq(mr__tokenizer_init(&cf.tok, ',', &cf.err), MR_OK);
    mr__splitter_init(&sp, "corpus.csv", 1);
    ck_assert_int_eq(mr__splitter_feed(&sp, cp.text.p, cp.text.n, &used, tokenize_full, &cf, &cf.err), MR_OK);
    mr__splitter_start_chunk(&sp, c);
    ck_assert_int_eq(mr__splitter_feed(&sp, cp.text.p + used, cp.text.n - used, &used, tokenize_full, &cf, &cf.err),
                     MR_OK);
    ck_assert_int_eq(mr__splitter_finish(&sp, tokenize_full, &cf, &cf.err), MR_OK);
    ck_assert_msg(cf.st == MR_OK, "%s", cf.err.msg);
    ck_assert(cf.log.order_ok);
    ck_assert_uint_eq(count_char(cf.log.log.p, cf.log.log.n, '\x1e'), cp.nrows);
    ck_assert_msg(cf.log.log.n == want.n && memcmp(cf.log.log.p, want.p, want.n) == 0,
                  "fields differ from Python's csv module (%zu vs %zu bytes)", cf.log.log.n, want.n);

    mr__tokenizer_release(&cf.tok);
    mr__splitter_release(&sp);
    free_chunk(c);
    bytes_free(&cf.log.log);
    bytes_free(&want);
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

START_TEST(test_blank_only_row)
{
    /* Source of truth: rowsplit.h (a line of blanks only is a blank line,
     * skipped but counted) -- chosen so that both tokenizers agree, since
     * libcsv drops such a row.  Lines by hand: 1 header, 2 "a", 3 blanks,
     * 4 "b" with a quote. */
    static const char text[] = "h\na\n   \t\r\n\"b\"\n";
    mr__splitter sp;
    mr__error err;
    mr_status fin;
    mr__chunk *c = split_small(text, sizeof text - 1, 1, &sp, &fin, &err);
    ck_assert_int_eq(fin, MR_OK);
    ck_assert_uint_eq(c->nrows, 2);
    expect_row(c, 0, "a\n", 2);
    expect_row(c, 1, "\"b\"\n", 4);
    mr__splitter_release(&sp);
    free_chunk(c);
}
END_TEST

START_TEST(test_malformed_quoting_is_format_error)
{
    /* Source of truth: RFC 4180 2.5/2.7 (text after a closing quote is not
     * allowed) and fields.h (libcsv, strict, handles quoted chunks). */
    static const char text[] = "1,\"ab\"c,2\n";
    mr__splitter sp;
    mr__error err;
    mr_status fin;
    field_log f;
    mr__chunk *c = split_small(text, sizeof text - 1, 0, &sp, &fin, &err);
    ck_assert_int_eq(fin, MR_OK);
    ck_assert_int_eq(tokenize_logged(c, ',', &f, &err), MR_ERR_FORMAT);
    ck_assert_msg(strstr(err.msg, "t.csv:1") != NULL, "message: %s", err.msg);
    bytes_free(&f.log);
    mr__splitter_release(&sp);
    free_chunk(c);
}
END_TEST

START_TEST(test_detect_delimiter)
{
    /* Source of truth: fields.h (most frequent of , TAB ; outside quotes;
     * ',' on a tie or when none occurs). */
    static const struct {
        const char *line;
        char want;
    } cases[] = {
        {"a,b,c\n", ','},          {"a\tb\tc\n", '\t'},      {"a;b;c\r\n", ';'},
        {"x;y,z;w", ';'},          {"\"a;b;c\",d", ','},     {"\"t\tt\tt\";u", ';'},
        {"single", ','},           {"a,b;c", ','},           {"a\tb\tc,d;e", '\t'},
        {"a\tb,c;d", ','},          {"a\tb\tc,d,e;f;g", ','}, {"", ','},
    };
    size_t i;
    for (i = 0; i < sizeof cases / sizeof cases[0]; i++)
        ck_assert_msg(mr__detect_delimiter(cases[i].line, strlen(cases[i].line)) == cases[i].want, "case %zu: %s", i,
                      cases[i].line);
}
END_TEST

static void expect_header(const char *line, size_t len, char delim, const char *const *want, size_t nwant)
{
    char **names = NULL;
    size_t n = 0, i;
    mr__error err;
    mr__error_clear(&err);
    ck_assert_msg(mr__parse_header(line, len, delim, &names, &n, "t.csv", &err) == MR_OK, "%s", err.msg);
    ck_assert_uint_eq(n, nwant);
    for (i = 0; i < n; i++) ck_assert_str_eq(names[i], want[i]);
    mr__free_names(names, n);
}

START_TEST(test_parse_header)
{
    /* Source of truth: Python's csv.reader on the same header (hand-worked)
     * and fields.h (a UTF-8 byte order mark is not part of the first name;
     * the Unicode standard gives the BOM as EF BB BF). */
    static const char quoted[] = "\"first name\",age,\"x \"\"q\"\"\",\"a,b\"\n";
    static const char *const quoted_want[] = {"first name", "age", "x \"q\"", "a,b"};
    static const char bom[] = "\xEF\xBB\xBFid,value\n";
    static const char *const bom_want[] = {"id", "value"};
    static const char bom_quoted[] = "\xEF\xBB\xBF\"id\";\"v w\"\r\n";
    static const char *const bom_quoted_want[] = {"id", "v w"};
    static const char no_newline[] = " a , b ";
    static const char *const no_newline_want[] = {"a", "b"};
    expect_header(quoted, sizeof quoted - 1, ',', quoted_want, 4);
    expect_header(bom, sizeof bom - 1, ',', bom_want, 2);
    expect_header(bom_quoted, sizeof bom_quoted - 1, ';', bom_quoted_want, 2);
    expect_header(no_newline, sizeof no_newline - 1, ',', no_newline_want, 2);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Source: plain, zstd and gzip input                                   */

/* Reads the whole input through the source; returns the read status. */
static mr_status read_source(const char *path, size_t read_size, size_t cap, bytes *out, int *compression,
                             uint64_t *raw_bytes, mr__error *err)
{
    mr__source *s;
    char *buf = malloc(cap);
    mr_status st;
    ck_assert_ptr_nonnull(buf);
    memset(out, 0, sizeof *out);
    bytes_str(out, "");
    mr__error_clear(err);
    ck_assert_int_eq(mr__source_open(&s, path, path, read_size, -1, err), MR_OK);
    for (;;) {
        size_t got;
        st = mr__source_read(s, buf, cap, &got, err);
        if (st != MR_OK || got == 0) break;
        if (got > cap) ck_abort_msg("read %zu bytes into a buffer of %zu", got, cap);
        bytes_add(out, buf, got);
    }
    *compression = mr__source_compression(s);
    ck_assert_int_eq(mr__source_is_zstd(s), *compression); /* the older name, read as "compressed" */
    *raw_bytes = mr__source_raw_bytes(s);
    if (st == MR_OK) ck_assert_uint_eq(mr__source_out_bytes(s), out->n);
    mr__source_close(s);
    free(buf);
    return st;
}

static const size_t READ_SIZES[] = {16, 17, 1000, 65536, 1u << 20};
static const size_t CAPS[] = {1, 7, 4096, 131072, 1u << 21};

/* Source of truth: the plain text written; the zstd or gzip tool
 * compressed it. */
static void expect_same_text(const char *path, const bytes *plain, int want_compression)
{
    struct stat stt;
    size_t i, j;
    ck_assert_int_eq(stat(path, &stt), 0);
    for (i = 0; i < sizeof READ_SIZES / sizeof READ_SIZES[0]; i++)
        for (j = 0; j < sizeof CAPS / sizeof CAPS[0]; j++) {
            bytes got;
            int z;
            uint64_t raw;
            mr__error err;
            /* One output byte a call over a 16-byte read buffer is slow and
             * adds nothing the 7-byte case does not cover. */
            if (CAPS[j] == 1 && (READ_SIZES[i] > 17 || plain->n > 100000)) continue;
            mr_status st = read_source(path, READ_SIZES[i], CAPS[j], &got, &z, &raw, &err);
            ck_assert_msg(st == MR_OK, "read %zu cap %zu: %s", READ_SIZES[i], CAPS[j], err.msg);
            ck_assert_int_eq(z, want_compression);
            ck_assert_uint_eq(raw, (uint64_t)stt.st_size);
            ck_assert_msg(got.n == plain->n && memcmp(got.p, plain->p, got.n) == 0,
                          "read %zu cap %zu: %zu bytes out, %zu expected", READ_SIZES[i], CAPS[j], got.n, plain->n);
            bytes_free(&got);
        }
}

START_TEST(test_source_zstd_roundtrip)
{
    /* Source of truth: the zstd command-line tool (independent compressor)
     * and the bytes it was given. */
    corpus cp;
    tmpdir t;
    char plain_path[PATH_CAP], zpath[PATH_CAP];
    make_corpus(&cp, quick() ? 3000 : 12000, 5, 1); /* several 128 KiB zstd blocks at full size */
    tmp_open(&t);
    tmp_path(&t, "a.csv", plain_path);
    tmp_path(&t, "a.csv.zst", zpath);
    write_file(plain_path, cp.text.p, cp.text.n);
    run("zstd -q -f -o '%s' '%s'", zpath, plain_path);
    expect_same_text(zpath, &cp.text, MR__COMPRESSION_ZSTD);
    /* source.h: plain input is recognised as plain. */
    expect_same_text(plain_path, &cp.text, MR__COMPRESSION_NONE);
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

START_TEST(test_source_zstd_without_checksum)
{
    /* Source of truth: RFC 8878 3.1.1 (the content checksum is optional)
     * and the zstd tool's --no-check; the bytes must come out all the same
     * whatever the output buffer size. */
    corpus cp;
    tmpdir t;
    char plain_path[PATH_CAP], zpath[PATH_CAP];
    make_corpus(&cp, 3000, 9, 1);
    tmp_open(&t);
    tmp_path(&t, "n.csv", plain_path);
    tmp_path(&t, "n.csv.zst", zpath);
    write_file(plain_path, cp.text.p, cp.text.n);
    run("zstd -q -f --no-check -o '%s' '%s'", zpath, plain_path);
    expect_same_text(zpath, &cp.text, MR__COMPRESSION_ZSTD);
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

START_TEST(test_source_concatenated_frames)
{
    /* Source of truth: RFC 8878 section 3 (a zstd stream is a sequence of
     * frames, decompressed one after another) and source.h. */
    static const char a[] = "h,x\n1,2\n3,4\n", b[] = "5,6\n7,\"8\n9\"\n";
    tmpdir t;
    char pa[PATH_CAP], pb[PATH_CAP], pc[PATH_CAP], cmd[1024];
    bytes both = {0};
    tmp_open(&t);
    tmp_path(&t, "a", pa);
    tmp_path(&t, "b", pb);
    tmp_path(&t, "ab.zst", pc);
    write_file(pa, a, sizeof a - 1);
    write_file(pb, b, sizeof b - 1);
    run("zstd -q -f '%s' && zstd -q -f '%s'", pa, pb);
    snprintf(cmd, sizeof cmd, "cat '%s.zst' '%s.zst' > '%s'", pa, pb, pc);
    ck_assert_int_eq(system(cmd), 0);
    bytes_str(&both, a);
    bytes_str(&both, b);
    expect_same_text(pc, &both, MR__COMPRESSION_ZSTD);
    bytes_free(&both);
    tmp_close(&t);
}
END_TEST

START_TEST(test_source_skippable_frame_first)
{
    /* Source of truth: RFC 8878 3.1.2 (skippable frame: magic 0x184D2A5?
     * little-endian, 4-byte little-endian size, then that many user bytes,
     * which a decoder ignores) and source.h (it marks zstd input too). */
    static const char text[] = "h\n1\n2\n";
    static const unsigned char skip[] = {0x50, 0x2A, 0x4D, 0x18, 5, 0, 0, 0, 'j', 'u', 'n', 'k', '!'};
    tmpdir t;
    char p[PATH_CAP], pz[PATH_CAP], q[PATH_CAP];
    bytes z, plain = {0};
    FILE *f;
    tmp_open(&t);
    tmp_path(&t, "s", p);
    tmp_path(&t, "s.zst", pz);
    tmp_path(&t, "skip.zst", q);
    write_file(p, text, sizeof text - 1);
    run("zstd -q -f -o '%s' '%s'", pz, p);
    read_file(pz, &z);
    f = fopen(q, "wb");
    ck_assert_ptr_nonnull(f);
    ck_assert_uint_eq(fwrite(skip, 1, sizeof skip, f), sizeof skip);
    ck_assert_uint_eq(fwrite(z.p, 1, z.n, f), z.n);
    ck_assert_int_eq(fclose(f), 0);
    bytes_str(&plain, text);
    expect_same_text(q, &plain, MR__COMPRESSION_ZSTD);
    bytes_free(&z);
    bytes_free(&plain);
    tmp_close(&t);
}
END_TEST

static void expect_format_error(const char *path, const char *must_say)
{
    size_t i, j;
    for (i = 0; i < sizeof READ_SIZES / sizeof READ_SIZES[0]; i++)
        for (j = 1; j < sizeof CAPS / sizeof CAPS[0]; j++) {
            bytes got;
            int z;
            uint64_t raw;
            mr__error err;
            mr_status st = read_source(path, READ_SIZES[i], CAPS[j], &got, &z, &raw, &err);
            ck_assert_msg(st == MR_ERR_FORMAT, "read %zu cap %zu: status %d (%s)", READ_SIZES[i], CAPS[j], st,
                          err.msg);
            ck_assert_int_eq(err.status, MR_ERR_FORMAT);
            if (must_say) ck_assert_msg(strstr(err.msg, must_say) != NULL, "message: %s", err.msg);
            bytes_free(&got);
        }
}

START_TEST(test_source_truncated_and_corrupt)
{
    /* Source of truth: RFC 8878 (a frame missing its last bytes is
     * incomplete; altered block bytes fail decoding or the content
     * checksum, which the zstd tool writes by default) and source.h
     * (both are MR_ERR_FORMAT). */
    corpus cp;
    tmpdir t;
    char plain_path[PATH_CAP], zpath[PATH_CAP], bad[PATH_CAP];
    bytes z;
    size_t mid, i;
    make_corpus(&cp, 3000, 17, 1);
    tmp_open(&t);
    tmp_path(&t, "c.csv", plain_path);
    tmp_path(&t, "c.csv.zst", zpath);
    write_file(plain_path, cp.text.p, cp.text.n);
    run("zstd -q -f -o '%s' '%s'", zpath, plain_path);
    read_file(zpath, &z);
    ck_assert_uint_gt(z.n, 100);

    tmp_path(&t, "trunc.zst", bad);
    write_file(bad, z.p, z.n - 10);
    expect_format_error(bad, "truncated");

    mid = z.n / 2;
    for (i = 0; i < 16; i++) z.p[mid + i] = (char)(z.p[mid + i] ^ 0x5A);
    tmp_path(&t, "corrupt.zst", bad);
    write_file(bad, z.p, z.n);
    expect_format_error(bad, NULL);

    bytes_free(&z);
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

START_TEST(test_source_tiny_plain_files)
{
    /* Source of truth: source.h (fewer than 4 bytes cannot hold the zstd
     * magic, nor 1 byte the gzip magic, so such input is plain; an empty
     * file reads as empty). */
    static const char *const texts[] = {"", "a", "ab\n", "(\xB5/", "\x1f"};
    tmpdir t;
    char path[PATH_CAP];
    size_t i;
    tmp_open(&t);
    tmp_path(&t, "tiny", path);
    for (i = 0; i < sizeof texts / sizeof texts[0]; i++) {
        bytes plain = {0};
        bytes_str(&plain, texts[i]);
        write_file(path, plain.p, plain.n);
        expect_same_text(path, &plain, MR__COMPRESSION_NONE);
        bytes_free(&plain);
    }
    tmp_close(&t);
}
END_TEST

/* The corpus text gzipped by the gzip tool, as one member or as members of
 * pieces cut at random places (rows cut in two included), with an empty
 * member among them: the text a multi-member file holds is its members'
 * texts one after another (RFC 1952 2.2). */
static void write_gzip_members(const tmpdir *t, const bytes *text, size_t nparts, uint64_t seed, const char *out)
{
    rng r = {seed};
    char piece[PATH_CAP], gz[PATH_CAP], cmd[1024];
    size_t k, from = 0;
    tmp_path(t, "piece", piece);
    tmp_path(t, "piece.gz", gz);
    snprintf(cmd, sizeof cmd, ": > '%s'", out);
    ck_assert_int_eq(system(cmd), 0);
    for (k = 0; k < nparts; k++) {
        size_t to = k + 1 == nparts ? text->n : from + rng_below(&r, text->n - from + 1);
        write_file(piece, text->p + from, to - from);
        run("gzip -n -c < '%s' > '%s'", piece, gz);
        snprintf(cmd, sizeof cmd, "cat '%s' >> '%s'", gz, out);
        ck_assert_int_eq(system(cmd), 0);
        if (k == 0) { /* an empty member (gzip of nothing) after the first */
            write_file(piece, "", 0);
            run("gzip -n -c < '%s' > '%s'", piece, gz);
            snprintf(cmd, sizeof cmd, "cat '%s' >> '%s'", gz, out);
            ck_assert_int_eq(system(cmd), 0);
        }
        from = to;
    }
}

START_TEST(test_source_gzip_roundtrip)
{
    /* Source of truth: the gzip command-line tool (an independent
     * compressor), the bytes it was given, RFC 1952 (members). */
    corpus cp;
    tmpdir t;
    char plain_path[PATH_CAP], gpath[PATH_CAP];
    make_corpus(&cp, quick() ? 3000 : 12000, 6, 1);
    tmp_open(&t);
    tmp_path(&t, "a.csv", plain_path);
    tmp_path(&t, "a.csv.gz", gpath);
    write_file(plain_path, cp.text.p, cp.text.n);
    run("gzip -q -c '%s' > '%s'", plain_path, gpath); /* a header with the file name */
    expect_same_text(gpath, &cp.text, MR__COMPRESSION_GZIP);
    write_gzip_members(&t, &cp.text, 3, 41, gpath);
    expect_same_text(gpath, &cp.text, MR__COMPRESSION_GZIP);
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

/* A stream decoded straight from memory by codec c, as a fuzz target
 * would: the input handed over in slices of random sizes (each in a
 * buffer of its own, so that a read past a slice is caught under ASan),
 * the output taken in pieces of random sizes. */
static void decode_in_slices(const mr__codec *c, const bytes *in, bytes *out, uint64_t seed)
{
    static const unsigned char none[1] = {0};
    rng r = {seed};
    char piece[4096];
    unsigned char *slice = NULL;
    mr__codec_io io = {none, 0, 0, 0, piece, 0, 0};
    uint64_t fed = 0;
    mr__error err;
    void *dec;
    memset(out, 0, sizeof *out);
    bytes_str(out, "");
    ck_assert_int_eq(c->open(&dec, "memory", &err), MR_OK);
    for (;;) {
        if (io.in_pos == io.in_len && fed < in->n) {
            size_t k = rng_below(&r, 3) == 0 ? 1 + rng_below(&r, 9) : 1 + rng_below(&r, 40000);
            if (k > in->n - fed) k = (size_t)(in->n - fed);
            free(slice);
            slice = malloc(k);
            ck_assert_ptr_nonnull(slice);
            memcpy(slice, in->p + fed, k);
            io.in = slice;
            io.in_len = k;
            io.in_pos = 0;
            io.in_offset = fed;
            fed += k;
        }
        io.out_pos = 0;
        io.out_cap = rng_below(&r, 8) == 0 ? 1 + rng_below(&r, 3) : 1 + rng_below(&r, sizeof piece);
        ck_assert_msg(c->step(dec, &io, &err) == MR_OK, "%s", err.msg);
        bytes_add(out, piece, io.out_pos);
        if (fed == in->n && io.in_pos == io.in_len && io.out_pos == 0) break;
    }
    ck_assert_msg(c->end(dec, fed, &err) == MR_OK, "%s", err.msg);
    c->close(dec);
    free(slice);
}

START_TEST(test_codec_random_slices)
{
    /* Source of truth: the gzip and zstd tools (independent compressors)
     * and the bytes they were given; codec.h (a decoder driven from memory
     * gives the text whatever the slices). */
    static const char *const tools[] = {"gzip -n -c < '%s' > '%s'", "zstd -q -c < '%s' > '%s'"};
    corpus cp;
    tmpdir t;
    char plain_path[PATH_CAP], cpath[PATH_CAP];
    size_t k, round;
    make_corpus(&cp, quick() ? 2000 : 6000, 8, 1);
    tmp_open(&t);
    tmp_path(&t, "s.csv", plain_path);
    tmp_path(&t, "s.csv.c", cpath);
    write_file(plain_path, cp.text.p, cp.text.n);
    for (k = 0; k < 3; k++) {
        bytes packed;
        const mr__codec *c;
        if (k < 2) run(tools[k], plain_path, cpath);
        else write_gzip_members(&t, &cp.text, 4, 77, cpath);
        read_file(cpath, &packed);
        c = mr__codec_find((const unsigned char *)packed.p, packed.n);
        ck_assert_ptr_eq(c, k == 1 ? &mr__codec_zstd : &mr__codec_gzip);
        for (round = 0; round < (quick() ? 3u : 12u); round++) {
            bytes got;
            decode_in_slices(c, &packed, &got, 1000 * k + round);
            ck_assert_msg(got.n == cp.text.n && memcmp(got.p, cp.text.p, got.n) == 0,
                          "codec %s round %zu: %zu bytes out, %zu expected", c->name, round, got.n, cp.text.n);
            bytes_free(&got);
        }
        bytes_free(&packed);
    }
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

START_TEST(test_source_gzip_errors)
{
    /* Source of truth: RFC 1952 (a member ends with the CRC-32 and the
     * length of its text; a file is members and nothing else), RFC 1951
     * (block type 11 is an error; byte 10 of a header without a name
     * starts the first block, its bits 1-2 the type), and source.h (each
     * is MR_ERR_FORMAT).  gzip -n writes a 10-byte header. */
    corpus cp;
    tmpdir t;
    char plain_path[PATH_CAP], gpath[PATH_CAP], bad[PATH_CAP];
    bytes g, b;
    make_corpus(&cp, 3000, 19, 1);
    tmp_open(&t);
    tmp_path(&t, "e.csv", plain_path);
    tmp_path(&t, "e.csv.gz", gpath);
    tmp_path(&t, "bad.gz", bad);
    write_file(plain_path, cp.text.p, cp.text.n);
    run("gzip -n -c < '%s' > '%s'", plain_path, gpath);
    read_file(gpath, &g);
    ck_assert_uint_gt(g.n, 100);

    write_file(bad, g.p, 5); /* inside the header */
    expect_format_error(bad, "the gzip stream ends inside a member (member 1, from offset 0");
    write_file(bad, g.p, g.n / 2); /* inside the data */
    expect_format_error(bad, "the gzip stream ends inside a member (member 1");
    write_file(bad, g.p, g.n - 3); /* inside the trailer */
    expect_format_error(bad, "the gzip stream ends inside a member");

    read_file(gpath, &b);
    b.p[b.n - 8] = (char)(b.p[b.n - 8] ^ 0x01); /* the CRC-32 */
    write_file(bad, b.p, b.n);
    expect_format_error(bad, "corrupt gzip stream (member 1, found at offset");
    expect_format_error(bad, "the CRC-32 in its trailer does not match its data");

    bytes_free(&b);
    read_file(gpath, &b);
    b.p[10] = 0x07; /* last block, type 11 */
    write_file(bad, b.p, b.n);
    expect_format_error(bad, "corrupt gzip stream (member 1, found at offset");

    /* A second member whose trailer is damaged: the message counts it. */
    bytes_free(&b);
    read_file(gpath, &b);
    bytes_add(&b, g.p, g.n);
    b.p[b.n - 1] = (char)(b.p[b.n - 1] ^ 0x01); /* the length */
    write_file(bad, b.p, b.n);
    expect_format_error(bad, "member 2");
    expect_format_error(bad, "the length in its trailer does not match its data");

    b.n = g.n;
    bytes_str(&b, "x,y\n1,2\n"); /* a plain tail */
    write_file(bad, b.p, b.n);
    {
        char want[128];
        snprintf(want, sizeof want, "trailing garbage: the bytes from offset %zu on, after gzip member 1", g.n);
        expect_format_error(bad, want);
    }
    b.n = g.n;
    bytes_add(&b, "\x1f", 1); /* the first byte of a member, no more */
    write_file(bad, b.p, b.n);
    expect_format_error(bad, "the gzip stream ends inside a member (member 2");
    b.n = g.n;
    bytes_add(&b, "\x1f\x8c", 2); /* not quite the magic */
    write_file(bad, b.p, b.n);
    expect_format_error(bad, "trailing garbage");

    write_file(bad, "\x1f\x8b", 2); /* the magic alone */
    expect_format_error(bad, "the gzip stream ends inside a member");

    bytes_free(&b);
    bytes_free(&g);
    tmp_close(&t);
    free_corpus(&cp);
}
END_TEST

START_TEST(test_source_missing_file)
{
    /* Source of truth: source.h / millrace.h (an unopenable file is
     * MR_ERR_IO, and the message names the input). */
    mr__source *s = (mr__source *)1;
    mr__error err;
    mr__error_clear(&err);
    ck_assert_int_eq(mr__source_open(&s, "/nonexistent/x.csv", "x.csv", 4096, -1, &err), MR_ERR_IO);
    ck_assert_ptr_null(s);
    ck_assert_msg(strstr(err.msg, "x.csv") != NULL, "message: %s", err.msg);
}
END_TEST

static Suite *input_suite(void)
{
    Suite *s = suite_create("input");
    TCase *split = tcase_create("rowsplit");
    TCase *fields = tcase_create("fields");
    TCase *source = tcase_create("source");

    tcase_add_loop_test(split, test_split_every_piece_size, 0, 2); /* last row without / with newline */
    tcase_add_test(split, test_split_large_and_random_pieces);
    tcase_add_loop_test(split, test_split_many_chunks_recut, 0, 2);
    tcase_add_test(split, test_recut_notices_changed_bytes);
    tcase_add_test(split, test_split_line_numbers_after_embedded_newlines);
    tcase_add_test(split, test_split_line_numbers_past_2_to_the_32);
    tcase_add_test(split, test_split_blank_lines_before_header);
    tcase_add_test(split, test_split_unterminated_quote);
    tcase_set_timeout(split, 120); /* sanitizer builds are slow */
    suite_add_tcase(s, split);

    tcase_add_test(fields, test_fields_match_python_csv);
    tcase_add_test(fields, test_fields_other_delimiters);
    tcase_add_test(fields, test_fields_trimming_and_cr);
    tcase_add_test(fields, test_plain_and_libcsv_paths_agree);
    tcase_add_test(fields, test_corpus_fields_match_python_csv);
    tcase_add_test(fields, test_blank_only_row);
    tcase_add_test(fields, test_malformed_quoting_is_format_error);
    tcase_add_test(fields, test_detect_delimiter);
    tcase_add_test(fields, test_parse_header);
    tcase_set_timeout(fields, 60);
    suite_add_tcase(s, fields);

    tcase_add_test(source, test_source_zstd_roundtrip);
    tcase_add_test(source, test_source_zstd_without_checksum);
    tcase_add_test(source, test_source_concatenated_frames);
    tcase_add_test(source, test_source_skippable_frame_first);
    tcase_add_test(source, test_source_truncated_and_corrupt);
    tcase_add_test(source, test_source_tiny_plain_files);
    tcase_add_test(source, test_source_gzip_roundtrip);
    tcase_add_test(source, test_codec_random_slices);
    tcase_add_test(source, test_source_gzip_errors);
    tcase_add_test(source, test_source_missing_file);
    tcase_set_timeout(source, 120);
    suite_add_tcase(s, source);
    return s;
}

int main(void) { return mr_check_run(input_suite(), 0); }
