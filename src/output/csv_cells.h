/* csv_cells.h - cells of the CSV files the library writes (RFC 4180; a
 * text cell: mr__strbuf_append_csv). */
#ifndef MR_CSV_CELLS_H
#define MR_CSV_CELLS_H

#include "common/error.h"
#include "common/strbuf.h"

/* A comma, then a number as the shortest text that gives the double back
 * (common/dtoa.h); NaN is the empty cell. */
void mr__csv_number(mr__strbuf *b, double x);
/* Writes `text` (built by the caller and freed here; NULL: it ran out of
 * memory) to `path` atomically (common/outfile.h, which `inputs` must not
 * be), the error into msg. */
mr_status mr__csv_write(char *text, const char *path, const char *const *inputs, size_t ninputs, char *msg,
                        size_t msgcap);

#endif
