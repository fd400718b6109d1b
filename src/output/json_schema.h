/* json_schema.h - the layout of the fit's JSON as data, so that the writer
 * (json.c) and the reader (json_read.c) walk the same tables and a fit
 * written, read and written again comes out byte for byte the same.
 *
 * A table is an array of fields ending with a NULL key, in the order they
 * are written.  A field's value sits at offset `at` of a base struct (the
 * fit, a factor or a term); for an `indexed` field `at` holds a pointer to
 * an array and the value is its element [index] (the coefficients' columns,
 * the model lines).  Derived fields are written from others and never
 * read; special ones have code of their own in each file. */
#ifndef MR_JSON_SCHEMA_H
#define MR_JSON_SCHEMA_H

#include <stddef.h>

typedef enum mr__jkind {
    MR__J_INT,           /* int */
    MR__J_SIZE,          /* size_t, >= 0 */
    MR__J_U64,           /* uint64_t, >= 0 */
    MR__J_I64,           /* int64_t */
    MR__J_REAL,          /* double; null stands for NaN (and infinities) */
    MR__J_BOOL,          /* int, 0 or 1 */
    MR__J_TEXT,          /* char *, never NULL (see json_text.h) */
    MR__J_TEXT_OR_NULL,  /* char *, null when NULL */
    MR__J_CHOICE,        /* int: 1 is the word `yes`, 0 the word `no` */
    MR__J_FAMILY,        /* int, an mr_family by name */
    MR__J_LINK,          /* int, an mr_link by name */
    MR__J_COMPRESSION,   /* int, an mr__compression by name */
    MR__J_CHECKSUM,      /* uint64_t as "fnv1a64w:" and 16 hex digits */
    MR__J_CHAR,          /* char as a string of one byte */
    MR__J_COUNT_OR_NULL, /* size_t; 0 is null */
    MR__J_TEXTS,         /* char ** of `count` strings */
    MR__J_REALS,         /* double * of `count` numbers */
    MR__J_OBJECT,        /* the fields `sub`, on the same base */
    MR__J_OBJECT_OR_NULL,/* as OBJECT, or null when the int at `count` is 0 */
    MR__J_OBJECT_OPTIONAL,/* as OBJECT, left out when the int at `count` is 0;
                            a file without it reads with that int 0 */
    MR__J_OBJECT_ADDED,  /* as OBJECT_OR_NULL, added within a format_version:
                            absent in older files, and read as null there */
    MR__J_RECORDS,       /* an array of `count` objects of the indexed fields `sub` */
    MR__J_RECORDS_APART, /* as RECORDS, written one record at a time into the
                            rest of the document (json.c: a `many` factor's
                            up to 10^6 levels); at most one, at depth 2 */
    MR__J_STRUCTS,       /* an array of `count` structs of `size` bytes at `at`, each the fields `sub` */
    MR__J_KEYED,         /* as STRUCTS, as an object keyed by each struct's text at `key_at` */
    MR__J_DERIVED,       /* written from other fields (`which`), never read */
    MR__J_SPECIAL,       /* a layout of its own (`which`) */
    MR__J_BOOL_ADDED     /* as BOOL, added within a format_version: absent
                            in older files, and read as false there */
} mr__jkind;

/* What derived and special fields are. */
enum {
    MR__JD_FORMAT, MR__JD_FORMAT_VERSION, MR__JD_LEFT_OUT, MR__JD_STATISTIC, MR__JD_RATIO_LABEL, MR__JD_RATIO,
    MR__JD_RATIO_LOW, MR__JD_RATIO_HIGH, MR__JD_MODIFIED, MR__JD_TERM_KIND,
    MR__JS_MISSING, MR__JS_COVARIANCE, MR__JS_TERM_COLUMNS,
    MR__JD_TERM_TEST, /* a term's joint Wald test (fit/term_test.c), null without one */
    MR__JD_FAMILY_PARAM_NAME, /* the name of the family's own parameter */
    MR__JS_ROBUST_COVARIANCE, /* the robust covariance, laid out as the covariance */
    MR__JS_LEVEL_MEANS        /* a `many` level's weighted means of the columns, by
                                 coefficient name; added within format_version 3:
                                 a level without them reads as a fit without any */
};

typedef struct mr__jfield {
    const char *key;
    mr__jkind kind;
    size_t at, count, size, key_at;
    int indexed, which;
    const char *yes, *no;
    const struct mr__jfield *sub;
} mr__jfield;

/* The whole fit, from "format" to "warnings". */
extern const mr__jfield mr__json_fit_fields[];
/* Where the MR__J_RECORDS_APART array stands in the file as json.c lays
 * it out (one space a level): the `levels` key, at depth 2, of the first
 * `many_factor` after the text MR__JSON_APART_AFTER; each record's
 * lines then open and close at depth 3. */
#define MR__JSON_APART_AFTER "\n \"many_factor\": {"
#define MR__JSON_APART_AT "\n  \"levels\": ["
#define MR__JSON_APART_DEPTH 2
/* A `many` level's fields (the records of the one MR__J_RECORDS_APART). */
extern const mr__jfield mr__json_many_level_fields[];

/* Bytes of one element of an indexed field of this kind. */
size_t mr__jfield_unit(mr__jkind kind);
/* Where a field's value is in `base` (element `index` when indexed). */
void *mr__jfield_slot(const mr__jfield *fl, const void *base, size_t index);

#endif
