#include <string.h>

#include "common/alloc.h"
#include "input/fields.h"

/* fields.h's blanks: trimmed from unquoted fields (a tab only when it is
 * not the delimiter), and a carriage return is one of them, not a record
 * end, as for the plain splitter. */
static int is_blank_or_tab(unsigned char c) { return c == ' ' || c == '\r' || c == '\t'; }
static int is_blank_not_tab(unsigned char c) { return c == ' ' || c == '\r'; }
static int is_line_feed(unsigned char c) { return c == '\n'; }

mr_status mr__tokenizer_init(mr__tokenizer *t, char delim, mr__error *err)
{
    if (csv_init(&t->csv, CSV_STRICT | CSV_STRICT_FINI) != 0)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    csv_set_delim(&t->csv, (unsigned char)delim);
    csv_set_space_func(&t->csv, delim == '\t' ? is_blank_not_tab : is_blank_or_tab);
    csv_set_term_func(&t->csv, is_line_feed);
    t->delim = delim;
    t->ready = 1;
    return MR_OK;
}

void mr__tokenizer_release(mr__tokenizer *t)
{
    if (t->ready) csv_free(&t->csv);
    t->ready = 0;
}

typedef struct csv_state {
    const mr__field_sink *sink;
    size_t k;
    uint32_t r;
} csv_state;

static void on_csv_field(void *p, size_t len, void *data)
{
    csv_state *st = data;
    st->sink->field(st->sink->user, st->k++, p ? (const char *)p : "", len);
}

static void on_csv_row(int c, void *data)
{
    csv_state *st = data;
    (void)c;
    st->sink->row_end(st->sink->user, st->r++, st->k);
    st->k = 0;
}

static mr_status csv_chunk(mr__tokenizer *t, const mr__chunk *c, const mr__field_sink *sink,
                           const char *display, mr__error *err)
{
    csv_state st = {sink, 0, 0};
    size_t done = csv_parse(&t->csv, c->data, c->len, on_csv_field, on_csv_row, &st);
    int bad = done != c->len;
    if (!bad) bad = csv_fini(&t->csv, on_csv_field, on_csv_row, &st) != 0;
    if (bad || st.r != c->nrows) {
        uint32_t r = st.r < c->nrows ? st.r : c->nrows - 1;
        /* The parser must be reset for the next chunk either way. */
        csv_fini(&t->csv, NULL, NULL, NULL);
        return mr__fail(err, MR_ERR_FORMAT,
                        "%s:%llu: malformed quoting (a quote must open and close a whole field; "
                        "a quote inside a quoted field is written twice)",
                        mr__chunk_row_display(c, r, display), (unsigned long long)(c->first_line + c->row_line[r]));
    }
    return MR_OK;
}

mr_status mr__tokenize_chunk(mr__tokenizer *t, const mr__chunk *c, const mr__field_sink *sink,
                             const char *display, mr__error *err)
{
    uint32_t r;
    if (c->has_quote) return csv_chunk(t, c, sink, display, err);
    for (r = 0; r < c->nrows; r++)
        mr__plain_row(c->data + c->row_start[r], c->data + c->row_start[r + 1], t->delim, sink, r);
    return MR_OK;
}

char mr__detect_delimiter(const char *line, size_t len)
{
    size_t i, comma = 0, tab = 0, semi = 0;
    int q = 0;
    for (i = 0; i < len; i++) {
        char ch = line[i];
        if (ch == '"') q = !q;
        else if (!q && ch == ',') comma++;
        else if (!q && ch == '\t') tab++;
        else if (!q && ch == ';') semi++;
    }
    if (tab > comma && tab >= semi) return '\t';
    if (semi > comma && semi > tab) return ';';
    return ',';
}

typedef struct header_state {
    char **names;
    size_t n, cap;
    int failed;
} header_state;

static void on_header_field(void *user, size_t k, const char *p, size_t len)
{
    header_state *h = user;
    (void)k;
    if (h->failed) return;
    if (h->n == h->cap) {
        size_t cap = h->cap ? 2 * h->cap : 16;
        char **q = mr__realloc(h->names, cap * sizeof *q);
        if (q == NULL) {
            h->failed = 1;
            return;
        }
        h->names = q;
        h->cap = cap;
    }
    h->names[h->n] = mr__strndup(p, len);
    if (h->names[h->n] == NULL) h->failed = 1;
    else h->n++;
}

static void on_header_end(void *user, uint32_t r, size_t nfields)
{
    (void)user;
    (void)r;
    (void)nfields;
}

mr_status mr__parse_header(const char *line, size_t len, char delim, char ***names, size_t *n,
                           const char *display, mr__error *err)
{
    mr__chunk *c;
    mr__tokenizer t;
    header_state h = {NULL, 0, 0, 0};
    mr__field_sink sink = {&h, on_header_field, on_header_end, NULL, 0, NULL};
    mr_status st;
    /* A UTF-8 byte order mark is not part of the first name. */
    if (len >= 3 && memcmp(line, "\xEF\xBB\xBF", 3) == 0) {
        line += 3;
        len -= 3;
    }
    c = mr__calloc(1, sizeof *c);
    if (c == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    c->data = (char *)line;
    c->len = len;
    c->nrows = 1;
    c->first_line = 1;
    c->row_start[1] = len;
    c->has_quote = memchr(line, '"', len) != NULL;
    st = mr__tokenizer_init(&t, delim, err);
    if (st == MR_OK) st = mr__tokenize_chunk(&t, c, &sink, display, err);
    mr__tokenizer_release(&t);
    mr__free(c);
    if (st == MR_OK && h.failed) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st != MR_OK) {
        mr__free_names(h.names, h.n);
        return st;
    }
    *names = h.names;
    *n = h.n;
    return MR_OK;
}

void mr__free_names(char **names, size_t n)
{
    size_t i;
    if (names == NULL) return;
    for (i = 0; i < n; i++) mr__free(names[i]);
    mr__free(names);
}

mr_status mr__row_cells_init(mr__row_cells *r, size_t nfields)
{
    memset(r, 0, sizeof *r);
    r->nfields = nfields;
    r->at = mr__calloc(nfields + 1, sizeof *r->at);
    r->len = mr__calloc(nfields + 1, sizeof *r->len);
    return r->at && r->len ? MR_OK : MR_ERR_NO_MEMORY;
}

void mr__row_cells_release(mr__row_cells *r)
{
    mr__free(r->at);
    mr__free(r->len);
    mr__free(r->buf);
    memset(r, 0, sizeof *r);
}

const char *const mr__default_missing[MR__DEFAULT_MISSING_N] = {"", "NA"};

int mr__cell_is_token(const char *const *tokens, size_t ntokens, const char *p, size_t len)
{
    size_t i;
    /* the first byte first: most cells are numbers, no token's start */
    for (i = 0; i < ntokens; i++)
        if (len == 0 ? tokens[i][0] == '\0'
                     : tokens[i][0] == p[0] && strlen(tokens[i]) == len && memcmp(tokens[i], p, len) == 0)
            return 1;
    return 0;
}

void mr__row_cells_put(mr__row_cells *r, size_t k, const char *p, size_t len)
{
    if (k >= r->nfields) return;
    if (r->used + len > r->cap) {
        size_t cap = 2 * (r->used + len) + 256;
        char *b = mr__realloc(r->buf, cap);
        if (b == NULL) {
            r->nomem = 1;
            return;
        }
        r->buf = b;
        r->cap = cap;
    }
    memcpy(r->buf + r->used, p, len);
    r->at[k] = r->used;
    r->len[k] = len;
    r->used += len;
}

typedef struct cells_sink {
    mr__row_cells *cells;
    mr__row_done *row_end;
    void *user;
} cells_sink;

static void cell_in_place(void *user, size_t k, const char *p, size_t len)
{
    mr__row_cells *r = ((cells_sink *)user)->cells;
    if (k >= r->nfields) return;
    r->at[k] = (size_t)(p - r->inplace);
    r->len[k] = len;
}

static void cell_copied(void *user, size_t k, const char *p, size_t len)
{
    mr__row_cells_put(((cells_sink *)user)->cells, k, p, len);
}

static void cells_row_end(void *user, uint32_t r, size_t nfields)
{
    cells_sink *s = user;
    s->row_end(s->user, r, nfields);
    s->cells->used = 0;
}

mr_status mr__tokenize_cells(mr__tokenizer *t, const mr__chunk *c, mr__row_cells *cells, const unsigned char *wanted,
                             size_t nwanted, mr__row_done *row_end, void *user, const char *display,
                             mr__error *err)
{
    cells_sink s = {cells, row_end, user};
    mr_status st = MR_OK;
    uint32_t r;
    cells->used = 0;
    if (c->has_quote) {
        const mr__field_sink copied = {&s, cell_copied, cells_row_end, wanted, nwanted, NULL};
        cells->inplace = NULL;
        st = mr__tokenize_chunk(t, c, &copied, display, err);
    } else {
        /* the splitter with cell_in_place inlined into it, as decode.c has it */
        const mr__field_sink in_place = {&s, cell_in_place, cells_row_end, wanted, nwanted, NULL};
        cells->inplace = c->data;
        for (r = 0; r < c->nrows; r++)
            mr__plain_row(c->data + c->row_start[r], c->data + c->row_start[r + 1], t->delim, &in_place, r);
    }
    cells->inplace = NULL;
    return st;
}
