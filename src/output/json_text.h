/* json_text.h - what the fit's JSON writer and reader share: the format's
 * name and version, and how the library's text is written as JSON strings.
 *
 * The library's text is bytes as they came (column names, factor levels
 * and paths in whatever encoding the file or system used), while a JSON
 * string is Unicode.  So that nothing is dropped or altered, text is
 * written through one reversible escape, applied after UTF-8 decoding of
 * the JSON string:
 *   - a byte that is not part of a well-formed UTF-8 character is written
 *     as the four characters \xHH (HH its value, two upper-case hex digits);
 *   - a backslash is written as two backslashes;
 *   - everything else (all well-formed UTF-8) is written as it is.
 * In the JSON file itself the backslash is escaped again by JSON's own
 * rules, so the Latin-1 byte E9 appears there as "\\xE9". */
#ifndef MR_JSON_TEXT_H
#define MR_JSON_TEXT_H

#include <jansson.h>
#include <stddef.h>
#include "millrace.h"

#define MR__JSON_FORMAT "millrace-fit"
#define MR__JSON_FORMAT_VERSION 3
/* The oldest version the reader takes (json_upgrade.c brings it up). */
#define MR__JSON_FORMAT_VERSION_OLDEST 2

/* s escaped as above, NUL-terminated (free with mr__free); NULL when out
 * of memory. */
char *mr__json_escape(const char *s);

/* A new JSON string holding s escaped, JSON null for a NULL s; NULL when
 * out of memory. */
json_t *mr__json_text(const char *s);

/* The bytes a string written by mr__json_text stands for (NUL-terminated,
 * free with mr__free) in *out.  MR_ERR_FORMAT for a backslash that begins
 * neither escape, or an escape that stands for a NUL byte; MR_ERR_NO_MEMORY. */
mr_status mr__json_unescape(const char *s, size_t n, char **out);

#endif
