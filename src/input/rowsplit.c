#include <string.h>
#if defined(__SSE2__)
#include <emmintrin.h>
#endif

#include "common/alloc.h"
#include "input/rowsplit.h"

void mr__splitter_init(mr__splitter *sp, const char *display, int want_header)
{
    memset(sp, 0, sizeof *sp);
    sp->display = display;
    sp->want_header = want_header;
    sp->line = 1;
    sp->row_line = 1;
}

void mr__splitter_release(mr__splitter *sp)
{
    mr__free(sp->header);
    sp->header = NULL;
}

void mr__splitter_start_chunk(mr__splitter *sp, mr__chunk *c)
{
    c->index = sp->rows / MR__BLOCK_ROWS;
    c->first_line = sp->line;
    c->offset = sp->pos;
    c->nrows = 0;
    c->len = 0;
    c->has_quote = 0;
    c->row_start[0] = 0;
    sp->cur = c;
}

/* Room for n more bytes after len in *buf (*cap of them), doubling from
 * 64 KiB: the header's buffer and every chunk's grow alike.  NULL when out
 * of memory. */
static char *room_after(char **buf, size_t *cap, size_t len, size_t n, mr__error *err)
{
    if (len + n > *cap) {
        size_t nc = *cap ? *cap : 65536;
        char *q;
        while (nc < len + n) nc *= 2;
        q = mr__realloc(*buf, nc);
        if (q == NULL) {
            mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
            return NULL;
        }
        *buf = q;
        *cap = nc;
    }
    return *buf + len;
}

/* The row being built lives at the end of the chunk (or in the header
 * buffer before the header is complete). */
static mr_status append(mr__splitter *sp, const char *p, size_t n, mr__error *err)
{
    char **buf;
    size_t *len, *cap, start;
    if (sp->want_header) {
        buf = &sp->header;
        len = &sp->header_len;
        cap = &sp->header_cap;
        start = 0;
    } else {
        buf = &sp->cur->data;
        len = &sp->cur->len;
        cap = &sp->cur->cap;
        start = sp->cur->row_start[sp->cur->nrows];
    }
    if (*len - start + n > MR__MAX_ROW_BYTES)
        return mr__fail(err, MR_ERR_FORMAT, "%s:%llu: row longer than %u MiB (is this a text file?)",
                        sp->display, (unsigned long long)sp->row_line, MR__MAX_ROW_BYTES >> 20);
    /* Bytes read straight into the chunk (mr__splitter_reserve) are in
     * place already; the caller made room for them. */
    if (*buf != NULL && p == *buf + *len) {
        *len += n;
        return MR_OK;
    }
    if (room_after(buf, cap, *len, n, err) == NULL) return MR_ERR_NO_MEMORY;
    /* After a blank row is dropped, bytes read in place lie further on in
     * this very buffer: the ranges may overlap (and the buffer is not
     * reallocated, those bytes being within its size already). */
    memmove(*buf + *len, p, n);
    *len += n;
    return MR_OK;
}

char *mr__chunk_room(mr__chunk *c, size_t n, mr__error *err) { return room_after(&c->data, &c->cap, c->len, n, err); }

char *mr__splitter_reserve(mr__splitter *sp, size_t n, mr__error *err) { return mr__chunk_room(sp->cur, n, err); }

static int may_be_blank(char c) { return c == '\r' || c == '\n' || c == ' ' || c == '\t'; }

/* Only line ends and blanks: skipped, as libcsv would skip it, so that
 * both tokenizers see the same rows. */
static int is_blank_row(const char *p, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++)
        if (!may_be_blank(p[i])) return 0;
    return 1;
}

static mr_status end_row(mr__splitter *sp, mr__chunk_sink sink, void *user, mr__error *err)
{
    mr__chunk *c = sp->cur;
    if (sp->want_header) {
        if (is_blank_row(sp->header, sp->header_len)) {
            sp->header_len = 0;
        } else {
            sp->want_header = 0;
        }
        sp->row_line = sp->line;
        return MR_OK;
    }
    if (is_blank_row(c->data + c->row_start[c->nrows], c->len - c->row_start[c->nrows])) {
        c->len = c->row_start[c->nrows];
        sp->row_line = sp->line;
        return MR_OK;
    }
    c->row_line[c->nrows] = (uint32_t)(sp->row_line - c->first_line);
    c->nrows++;
    c->row_start[c->nrows] = c->len;
    sp->rows++;
    sp->row_line = sp->line;
    if (c->nrows == MR__BLOCK_ROWS) {
        mr__chunk *next;
        c->end = sp->pos;
        if (sink == NULL) {
            sp->cur = NULL;
            return MR_OK;
        }
        next = sink(user, c, err);
        if (next == NULL) return err->status != MR_OK ? err->status : MR_ERR_INTERNAL;
        mr__splitter_start_chunk(sp, next);
    }
    return MR_OK;
}

static uint64_t count_newlines(const char *p, size_t n)
{
    uint64_t k = 0;
    const char *end = p + n;
    while ((p = memchr(p, '\n', (size_t)(end - p))) != NULL) {
        k++;
        p++;
    }
    return k;
}

/* Inside quotes: everything up to and including the closing quote belongs
 * to the row.  A doubled quote closes and reopens, which is the same. */
static mr_status feed_quoted(mr__splitter *sp, const char **pp, const char *end, mr__error *err)
{
    const char *p = *pp, *q = memchr(p, '"', (size_t)(end - p));
    size_t n = q ? (size_t)(q - p) + 1 : (size_t)(end - p);
    sp->line += count_newlines(p, n);
    MR__TRY(append(sp, p, n, err));
    if (q) sp->in_quote = 0;
    *pp = p + n;
    return MR_OK;
}

/* Rows are short: a call to memchr per row costs more than the search. */
static const char *find_newline(const char *p, const char *end)
{
#if defined(__SSE2__)
    const __m128i nl = _mm_set1_epi8('\n');
    while (end - p >= 16) {
        int hits = _mm_movemask_epi8(_mm_cmpeq_epi8(_mm_loadu_si128((const __m128i *)(const void *)p), nl));
        if (hits != 0) return p + __builtin_ctz((unsigned)hits);
        p += 16;
    }
#endif
    return memchr(p, '\n', (size_t)(end - p));
}

/* The common case: rows read straight into the chunk, and no quote in the
 * buffer, so only their ends need finding.  Everything else is left to
 * the general loop in mr__splitter_feed: the row that completes the
 * chunk, a row that may be blank or is too long, bytes not in place. */
static const char *take_rows_in_place(mr__splitter *sp, const char *p, const char *end)
{
    mr__chunk *c = sp->cur;
    /* a chunk with no buffer yet holds nothing read in place (and NULL + 0
     * is undefined) */
    if (sp->want_header || sp->in_quote || c == NULL || c->data == NULL || p != c->data + c->len) return p;
    while (c->nrows + 1 < MR__BLOCK_ROWS) {
        const char *nl = find_newline(p, end), *row = c->data + c->row_start[c->nrows];
        if (nl == NULL || may_be_blank(*row) || (size_t)(nl + 1 - row) > MR__MAX_ROW_BYTES) break;
        c->row_line[c->nrows] = (uint32_t)(sp->row_line - c->first_line);
        c->nrows++;
        c->len = (size_t)(nl + 1 - c->data);
        c->row_start[c->nrows] = c->len;
        sp->rows++;
        sp->line++;
        sp->row_line = sp->line;
        p = nl + 1;
    }
    return p;
}

mr_status mr__splitter_feed(mr__splitter *sp, const char *p, size_t n, size_t *used, mr__chunk_sink sink,
                            void *user, mr__error *err)
{
    const char *start = p, *end = p + n;
    uint64_t base = sp->pos;
    int header_pending = sp->want_header;
    /* Most inputs hold no quote at all: one look per buffer spares a
     * search per row. */
    int quotes = memchr(p, '"', n) != NULL;
    *used = n;
    /* pos is where the stream stands for a chunk started now: after the row
     * end_row completes (the sink starts the next chunk there), else after
     * all n bytes. */
    sp->pos = base + n;
    while (p < end) {
        const char *nl, *q;
        size_t span;
        if (!quotes && (p = take_rows_in_place(sp, p, end)) == end) break;
        if (sp->in_quote) {
            MR__TRY(feed_quoted(sp, &p, end, err));
            continue;
        }
        nl = memchr(p, '\n', (size_t)(end - p));
        span = nl ? (size_t)(nl - p) : (size_t)(end - p);
        q = quotes ? memchr(p, '"', span) : NULL;
        if (q != NULL) {
            MR__TRY(append(sp, p, (size_t)(q - p) + 1, err));
            if (!sp->want_header) sp->cur->has_quote = 1;
            sp->in_quote = 1;
            sp->quote_line = sp->line;
            p = q + 1;
            continue;
        }
        if (nl == NULL) {
            MR__TRY(append(sp, p, span, err));
            break;
        }
        MR__TRY(append(sp, p, span + 1, err));
        sp->line++;
        p = nl + 1;
        sp->pos = base + (uint64_t)(p - start);
        MR__TRY(end_row(sp, sink, user, err));
        if ((header_pending && !sp->want_header) || (!sp->want_header && sp->cur == NULL)) {
            *used = (size_t)(p - start);
            return MR_OK;
        }
        sp->pos = base + n;
    }
    return MR_OK;
}

mr_status mr__splitter_finish(mr__splitter *sp, mr__chunk_sink sink, void *user, mr__error *err)
{
    mr__chunk *c = sp->cur;
    if (sp->in_quote)
        return mr__fail(err, MR_ERR_FORMAT, "%s:%llu: unterminated quote (the file ends inside a quoted field)",
                        sp->display, (unsigned long long)sp->quote_line);
    if (sp->want_header) {
        if (sp->header_len > 0 && !is_blank_row(sp->header, sp->header_len)) sp->want_header = 0;
        return MR_OK;
    }
    if (c != NULL && c->len > c->row_start[c->nrows]) MR__TRY(end_row(sp, sink, user, err));
    c = sp->cur;
    if (c != NULL && c->nrows > 0 && c->nrows < MR__BLOCK_ROWS) {
        c->end = sp->pos;
        if (sink == NULL) return MR_OK;
        if (sink(user, c, err) == NULL && err->status != MR_OK) return err->status;
        sp->cur = NULL;
    }
    return MR_OK;
}

mr_status mr__splitter_recut(mr__chunk *c, size_t len, const char *display, uint64_t first_row, uint64_t first_line,
                             uint32_t nrows, int at_end, mr__error *err)
{
    mr__splitter sp;
    size_t used = 0;
    mr_status st;
    mr__splitter_init(&sp, display, 0);
    sp.line = sp.row_line = first_line;
    sp.rows = first_row;
    mr__splitter_start_chunk(&sp, c);
    st = mr__splitter_feed(&sp, c->data, len, &used, NULL, NULL, err);
    if (st == MR_OK && at_end) st = mr__splitter_finish(&sp, NULL, NULL, err);
    if (st != MR_OK) return st;
    if (used != len || c->nrows != nrows || sp.in_quote)
        return mr__fail(err, MR_ERR_IO,
                        "%s: the file changed during the fit (the rows from line %llu on are not those first read)",
                        display, (unsigned long long)first_line);
    return MR_OK;
}
