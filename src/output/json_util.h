/* json_util.h - building and writing JSON with jansson, shared by every
 * JSON the library writes (the fit, the drift between two fits, the run
 * log's lines).  The builders pass NULL on: jansson returns NULL only when
 * out of memory, so a NULL anywhere reaches the root and means exactly
 * that. */
#ifndef MR_JSON_UTIL_H
#define MR_JSON_UTIL_H

#include <jansson.h>
#include <stddef.h>

#include "common/error.h"

/* a[] += v (stolen); NULL (both freed) when either is NULL or on failure. */
json_t *mr__json_append(json_t *a, json_t *v);
/* o[key] = v (stolen), the key escaped as all text is (json_text.h). */
json_t *mr__json_put(json_t *o, const char *key, json_t *v);
/* A number; NaN and infinities have no JSON spelling and become null. */
json_t *mr__json_num(double x);

/* How the fit's JSON is laid out: one space a level, 17 significant
 * digits, keys in their order. */
#define MR__JSON_FILE_FLAGS (JSON_INDENT(1) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER)

/* Writes root, indented, with 17 significant digits, to `path` through
 * common/outfile.c (atomically, checked against `inputs`). */
mr_status mr__json_write_file(json_t *root, const char *path, const char *const *inputs, size_t ninputs,
                              mr__error *err);

/* root on one line, newline ended, in *out (free with mr__free), its
 * length in *n. */
mr_status mr__json_line(json_t *root, char **out, size_t *n, mr__error *err);

#endif
