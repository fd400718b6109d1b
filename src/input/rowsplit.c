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
    c->names = sp->names;
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

/* Outside quotes, carriage returns followed by something other than a
 * line feed: the lines end in a CR alone (classic Mac OS text), and the
 * whole file would be read as one header row. */
static int has_lone_cr(const char *p, size_t n)
{
    size_t i, j;
    int quoted = 0;
    for (i = 0; i < n; i++) {
        if (p[i] == '"') quoted = !quoted;
        if (quoted || p[i] != '\r') continue;
        for (j = i; j < n && p[j] == '\r'; j++) continue;
        if (j < n && p[j] != '\n') return 1;
        i = j - 1;
    }
    return 0;
}

static mr_status refuse_cr_only(const mr__splitter *sp, mr__error *err)
{
    return mr__fail(err, MR_ERR_FORMAT,
                    "%s:%llu: the line ends are carriage returns alone (classic Mac OS text); convert them to line "
                    "feeds (LF or CRLF)",
                    sp->display, (unsigned long long)sp->row_line);
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
    if (*len - start + n > MR__MAX_ROW_BYTES && sp->want_header && has_lone_cr(*buf, *len))
        return refuse_cr_only(sp, err);
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

#if defined(__SSE2__)
/* Bit i set where p[i] may be part of a blank line. */
static unsigned blank_mask16(const char *p)
{
    const __m128i v = _mm_loadu_si128((const __m128i *)(const void *)p);
    __m128i m = _mm_or_si128(_mm_cmpeq_epi8(v, _mm_set1_epi8('\n')), _mm_cmpeq_epi8(v, _mm_set1_epi8('\r')));
    m = _mm_or_si128(m, _mm_or_si128(_mm_cmpeq_epi8(v, _mm_set1_epi8(' ')), _mm_cmpeq_epi8(v, _mm_set1_epi8('\t'))));
    return (unsigned)_mm_movemask_epi8(m);
}

static unsigned newline_mask16(const char *p)
{
    const __m128i v = _mm_loadu_si128((const __m128i *)(const void *)p);
    return (unsigned)_mm_movemask_epi8(_mm_cmpeq_epi8(v, _mm_set1_epi8('\n')));
}
#endif

/* Where the run of blank bytes from p ends (at most at end), with the
 * newlines in it counted and the last one noted (NULL: none). */
static const char *blank_run(const char *p, const char *end, uint64_t *newlines, const char **last_newline)
{
    *newlines = 0;
    *last_newline = NULL;
#if defined(__SSE2__)
    while (end - p >= 16) {
        unsigned blank = blank_mask16(p), nl = newline_mask16(p);
        unsigned run = blank == 0xffffu ? 16 : (unsigned)__builtin_ctz(~blank); /* blank bytes first */
        nl &= run == 16 ? 0xffffu : (1u << run) - 1;
        if (nl != 0) {
            *newlines += (uint64_t)__builtin_popcount(nl);
            *last_newline = p + 31 - __builtin_clz(nl);
        }
        if (run < 16) return p + run;
        p += 16;
    }
#endif
    for (; p < end && may_be_blank(*p); p++)
        if (*p == '\n') {
            ++*newlines;
            *last_newline = p;
        }
    return p;
}

/* A run of blank lines at the start of a row, taken in one sweep instead
 * of a row at a time (a zstd file of gigabytes of blank lines is a few
 * hundred kilobytes): the lines are counted and nothing is kept, as
 * end_row would drop each of them.  Returns where the rows go on (p when
 * no whole blank line starts there). */
static const char *skip_blank_lines(mr__splitter *sp, const char *p, const char *end)
{
    const char *last;
    uint64_t newlines;
    const mr__chunk *c = sp->cur;
    int row_empty = sp->want_header ? sp->header_len == 0 : c != NULL && c->len == c->row_start[c->nrows];
    if (!row_empty || !may_be_blank(*p)) return p;
    (void)blank_run(p, end, &newlines, &last);
    if (last == NULL) return p;
    sp->line += newlines;
    sp->row_line = sp->line;
    return last + 1;
}

/* A UTF-8 byte-order mark before the header is not part of it
 * (mr__parse_header drops it): a line holding only one is blank. */
static int header_is_blank(const mr__splitter *sp)
{
    const char *h = sp->header;
    size_t n = sp->header_len;
    if (n >= 3 && memcmp(h, "\xEF\xBB\xBF", 3) == 0) {
        h += 3;
        n -= 3;
    }
    return is_blank_row(h, n);
}

static mr_status end_row(mr__splitter *sp, mr__chunk_sink sink, void *user, mr__error *err)
{
    mr__chunk *c = sp->cur;
    if (sp->want_header) {
        if (header_is_blank(sp)) {
            sp->header_len = 0;
        } else {
            if (has_lone_cr(sp->header, sp->header_len)) return refuse_cr_only(sp, err);
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
    c->row_line[c->nrows] = sp->row_line - c->first_line;
    if (sp->names != NULL) c->row_file[c->nrows] = sp->file;
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
        c->row_line[c->nrows] = sp->row_line - c->first_line;
        if (sp->names != NULL) c->row_file[c->nrows] = sp->file;
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
        if ((p = skip_blank_lines(sp, p, end)) == end) break;
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

static mr_status refuse_open_quote(const mr__splitter *sp, mr__error *err)
{
    return mr__fail(err, MR_ERR_FORMAT, "%s:%llu: unterminated quote (the file ends inside a quoted field)",
                    sp->display, (unsigned long long)sp->quote_line);
}

mr_status mr__splitter_next_file(mr__splitter *sp, uint32_t file, mr__chunk_sink sink, void *user, mr__error *err)
{
    mr__chunk *c = sp->cur;
    if (sp->in_quote) return refuse_open_quote(sp, err);
    if (c != NULL && c->len > c->row_start[c->nrows]) MR__TRY(end_row(sp, sink, user, err));
    sp->file = file;
    sp->display = sp->names[file];
    sp->want_header = 1;
    sp->header_len = 0;
    sp->line = sp->row_line = 1;
    return MR_OK;
}

mr_status mr__splitter_finish(mr__splitter *sp, mr__chunk_sink sink, void *user, mr__error *err)
{
    mr__chunk *c = sp->cur;
    if (sp->in_quote) return refuse_open_quote(sp, err);
    if (sp->want_header) {
        if (sp->header_len == 0 || header_is_blank(sp)) return MR_OK;
        if (has_lone_cr(sp->header, sp->header_len)) return refuse_cr_only(sp, err);
        sp->want_header = 0;
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
