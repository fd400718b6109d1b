/* rowsplit.h - cuts a byte stream into the header row and chunks of whole
 * rows.  Quote aware: a newline inside a quoted field does not end a row.
 * Blank lines (nothing but spaces, tabs and line ends) are skipped, but
 * counted, so line numbers stay true.
 *
 * The sink decides which chunk is filled next; the last chunk handed to
 * mr__splitter_finish's sink is not replaced, so the caller keeps track of
 * the chunks it gave out. */
#ifndef MR_ROWSPLIT_H
#define MR_ROWSPLIT_H

#include "common/error.h"
#include "input/chunk.h"

#define MR__MAX_ROW_BYTES (64u << 20)

typedef struct mr__splitter {
    const char *display;  /* input name for messages */
    int in_quote;
    int want_header;      /* the next row is the header */
    uint64_t line;        /* physical line of the next byte */
    uint64_t row_line;    /* line where the current row started */
    uint64_t quote_line;  /* line where the open quote started */
    uint64_t rows;        /* data rows completed */
    uint64_t pos;         /* stream bytes taken so far (a chunk's offset) */
    mr__chunk *cur;       /* chunk being filled (NULL before the first) */
    const char *const *names; /* a set of files: their names (chunk.h) */
    uint32_t file;        /* the file being read, an index into names */
    char *header;         /* the header row once complete */
    size_t header_len, header_cap;
} mr__splitter;

/* Called with each full chunk; must take it and return a fresh empty chunk
 * to fill next (or NULL with an error set to stop). */
typedef mr__chunk *(*mr__chunk_sink)(void *user, mr__chunk *full, mr__error *err);

void mr__splitter_init(mr__splitter *sp, const char *display, int want_header);
void mr__splitter_release(mr__splitter *sp);

/* Feeds bytes.  While the header is wanted, stops right after it and
 * reports in *used how many bytes it took (so the caller can bind columns
 * before any data row is cut); otherwise takes all n.  `cur` must be set
 * before data rows arrive.  A NULL sink cuts one chunk only: the feed stops
 * once `cur` is full, *used saying where, and `cur` stays as it is. */
mr_status mr__splitter_feed(mr__splitter *sp, const char *p, size_t n, size_t *used, mr__chunk_sink sink,
                            void *user, mr__error *err);
/* Room for n more bytes at the end of the current chunk, so that the
 * caller can read input straight into it and then feed that very range
 * (which mr__splitter_feed then takes in place, without a copy).  NULL
 * when out of memory. */
char *mr__splitter_reserve(mr__splitter *sp, size_t n, mr__error *err);
/* The same for any chunk: room for n more bytes after c->len. */
char *mr__chunk_room(mr__chunk *c, size_t n, mr__error *err);

/* End of input: completes a last row without a newline and hands the last
 * partial chunk to the sink (if it has rows).  An open quote is an error. */
mr_status mr__splitter_finish(mr__splitter *sp, mr__chunk_sink sink, void *user, mr__error *err);

/* A set of files: the end of one file, the next to follow.  Completes the
 * file's last row (one without a line end ends with its file), refuses a
 * quote left open, and wants the next file's header, its lines counted
 * from 1; the current chunk goes on filling. */
mr_status mr__splitter_next_file(mr__splitter *sp, uint32_t file, mr__chunk_sink sink, void *user, mr__error *err);

/* Starts a chunk: sets its index (from the rows so far), first line and
 * offset. */
void mr__splitter_start_chunk(mr__splitter *sp, mr__chunk *c);

/* Cuts the rows of one chunk already read into c->data[0, len): the bytes
 * a chunk of an earlier cut of the same stream held, from its offset on
 * (`first_row`: the rows before it; `first_line`: its line).  Fails unless
 * they make exactly `nrows` rows, the last ending at len (or, for the
 * stream's last chunk, `at_end`, at the end of the stream): the file has
 * changed since that cut. */
mr_status mr__splitter_recut(mr__chunk *c, size_t len, const char *display, uint64_t first_row, uint64_t first_line,
                             uint32_t nrows, int at_end, mr__error *err);

#endif
