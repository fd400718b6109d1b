/* fields.h - cuts rows into fields.
 *
 * Two tokenizers give the same fields: a plain splitter for chunks with no
 * quote character (the common case, and much faster), and libcsv for
 * everything else (RFC 4180 quoting, embedded delimiters and newlines).
 * Unquoted fields lose leading and trailing blanks in both.  Only a line
 * feed ends a row (as it does for the row splitter); a carriage return
 * elsewhere is a blank, so "1\r,2" is the fields 1 and 2 whichever
 * tokenizer its chunk gets. */
#ifndef MR_FIELDS_H
#define MR_FIELDS_H

#include <csv.h>
#include <stddef.h>
#include "common/error.h"
#include "input/chunk.h"

typedef struct mr__field_sink {
    void *user;
    /* Field k (0-based) of the current row. */
    void (*field)(void *user, size_t k, const char *p, size_t len);
    /* Row r (0-based within the chunk) is complete, with nfields fields. */
    void (*row_end)(void *user, uint32_t r, size_t nfields);
    /* Optional: wanted[k] (an mr__field_use) lets the plain splitter skip
     * field k (it is still counted) or offer it to `quick` first; NULL
     * means every field goes to `field`, and k >= nwanted is skipped. */
    const unsigned char *wanted;
    size_t nwanted;
    /* Plain splitter only, for fields marked MR__FIELD_QUICK: offered the
     * raw [s, e) of the rest of the row, it may take the cell whole and
     * return where the cell ends (at the delimiter or e); or it returns
     * NULL, and the cell goes to `field` trimmed.  A cell it takes must give
     * what `field` would have made of it. */
    const char *(*quick)(void *user, size_t k, const char *s, const char *e);
} mr__field_sink;

typedef enum mr__field_use { MR__FIELD_SKIP = 0, MR__FIELD_WANTED = 1, MR__FIELD_QUICK = 2 } mr__field_use;

/* A tokenizer a worker owns; wraps a libcsv parser. */
typedef struct mr__tokenizer {
    struct csv_parser csv;
    char delim;
    int ready;
} mr__tokenizer;

mr_status mr__tokenizer_init(mr__tokenizer *t, char delim, mr__error *err);
void mr__tokenizer_release(mr__tokenizer *t);

/* The plain splitter for one row without quotes, [s, e) with its line end.
 * Inline so that a caller passing its own callbacks gets them inlined
 * (decode.c does, for the hot path).  Cells are short, so a byte loop
 * beats memchr's call; cells nobody wants are only counted. */
static inline int mr__is_blank(char c, char delim) { return c == ' ' || c == '\r' || (c == '\t' && delim != '\t'); }

static inline void mr__plain_row(const char *s, const char *e, char delim, const mr__field_sink *sink, uint32_t r)
{
    size_t k = 0;
    if (e > s && e[-1] == '\n') e--;
    /* a blank, but cut here the last cell of a CRLF row can be offered to
     * the quick path, which takes no blanks */
    if (e > s && e[-1] == '\r') e--;
    for (;;) {
        const char *d, *fs = s, *fe;
        int want = sink->wanted == NULL ? MR__FIELD_WANTED : k < sink->nwanted ? sink->wanted[k] : MR__FIELD_SKIP;
        if (want != MR__FIELD_QUICK || (d = sink->quick(sink->user, k, s, e)) == NULL) {
            for (d = s; d < e && *d != delim; d++) continue;
            if (want) {
                fe = d;
                while (fs < fe && mr__is_blank(*fs, delim)) fs++;
                while (fe > fs && mr__is_blank(fe[-1], delim)) fe--;
                sink->field(sink->user, k, fs, (size_t)(fe - fs));
            }
        }
        k++;
        if (d == e) break;
        s = d + 1;
    }
    sink->row_end(sink->user, r, k);
}

/* Calls the sink for every field and row of the chunk, in order.
 * `display` names the input in messages. */
mr_status mr__tokenize_chunk(mr__tokenizer *t, const mr__chunk *c, const mr__field_sink *sink,
                             const char *display, mr__error *err);

/* The cells of one row as a sink's `field` gives them, copied (a quoted
 * cell's bytes are the parser's until the next call), for a job that
 * reads raw rows: cell k is buf + at[k], len[k] bytes, until `used` is set
 * back to 0 for the next row.  Cells k >= nfields are left out; nomem is
 * set when the copy could not grow. */
typedef struct mr__row_cells {
    size_t *at, *len;
    char *buf;
    size_t used, cap, nfields;
    int nomem;
    /* Non-NULL while a chunk without quotes is cut: cell k is then
     * inplace + at[k], in the chunk itself, and nothing is copied. */
    const char *inplace;
} mr__row_cells;

mr_status mr__row_cells_init(mr__row_cells *r, size_t nfields);
void mr__row_cells_release(mr__row_cells *r);
void mr__row_cells_put(mr__row_cells *r, size_t k, const char *p, size_t len);

/* Cell k of the row at hand and its length. */
static inline const char *mr__row_cell(const mr__row_cells *r, size_t k, size_t *len)
{
    *len = r->len[k];
    return (r->inplace ? r->inplace : r->buf) + r->at[k];
}

/* Cuts the chunk's rows into `cells` and calls row_end(user, r, nfields)
 * after each, in order; the cells hold until row_end returns.  A chunk
 * without quotes is cut in place.  `wanted` as in mr__field_sink (only
 * WANTED and SKIP). */
typedef void mr__row_done(void *user, uint32_t r, size_t nfields);
mr_status mr__tokenize_cells(mr__tokenizer *t, const mr__chunk *c, mr__row_cells *cells, const unsigned char *wanted,
                             size_t nwanted, mr__row_done *row_end, void *user, const char *display,
                             mr__error *err);

/* Whether a cell is one of the missing-value tokens, compared whole (""
 * the empty cell).  The fit's decoder has its own quicker test for its
 * hot loop (accum/decode.c); scoring and surveys, which meet each cell
 * once, use this. */
int mr__cell_is_token(const char *const *tokens, size_t ntokens, const char *p, size_t len);

/* The missing-value tokens a fitter or survey starts with, and those of a
 * fit saved before its own were kept: the empty cell and "NA". */
#define MR__DEFAULT_MISSING_N 2
extern const char *const mr__default_missing[MR__DEFAULT_MISSING_N];

/* The delimiter a header line uses: whichever of ',', '\t', ';' occurs most
 * outside quotes (',' on a tie or when none occurs). */
char mr__detect_delimiter(const char *line, size_t len);

/* Splits the header row into names (copied; free with mr__free_names). */
mr_status mr__parse_header(const char *line, size_t len, char delim, char ***names, size_t *n,
                           const char *display, mr__error *err);
void mr__free_names(char **names, size_t n);

#endif
