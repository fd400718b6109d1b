/* alloc.h - the one allocation pair the library uses, so that a test can
 * make any allocation fail and every failure path is one kind of path. */
#ifndef MR_ALLOC_H
#define MR_ALLOC_H

#include <stddef.h>
#include "millrace.h"

void *mr__malloc(size_t size);
void *mr__calloc(size_t count, size_t size);
void *mr__realloc(void *p, size_t size);
void mr__free(void *p);
char *mr__strdup(const char *s);
/* 64-byte aligned memory (size rounded up), freed with mr__free. */
void *mr__aligned_alloc(size_t size);
/* Zeroed, and on cache lines of its own: for what one thread writes
 * often, so that no other thread's data shares its lines. */
void *mr__calloc_lines(size_t count, size_t size);

#ifdef MR_ALLOC_FAILURE_TESTS
/* Test builds only: the allocation after the next n fails (n < 0: none
 * fails).  Process-wide, so that worker threads' allocations count too. */
void mr__alloc_fail_after(long n);
#endif
char *mr__strndup(const char *s, size_t n);
/* Grows the array *p (of *cap elements of `unit` bytes) to hold at least
 * `need` elements, doubling; returns MR_OK, or MR_ERR_NO_MEMORY (the
 * array is then unchanged). */
mr_status mr__reserve(void **p, size_t *cap, size_t need, size_t unit);
/* A copy of n strings (each copied), or NULL when out of memory (nothing
 * then left allocated); n 0 gives an empty array.  Freed with
 * mr__strings_free (NULL is fine). */
char **mr__strings_copy(const char *const *s, size_t n);
void mr__strings_free(char **s, size_t n);
/* Zeroed by writing (malloc, then memset), for tables read before they
 * are written (hash tables probed, totals added into): calloc's fresh
 * pages are the shared zero page until written, so a read then a write
 * costs each page a copy-on-write fault, which with threads running
 * flushes every core's TLB; a write first maps the page once.  NULL on
 * overflow or when out of memory. */
void *mr__zalloc(size_t count, size_t size);
/* Overflow-checked count * size for array allocations; NULL on overflow. */
void *mr__malloc_array(size_t count, size_t size);

#endif
