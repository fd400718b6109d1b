#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "millrace.h"

#ifdef MR_ALLOC_FAILURE_TESTS
#include <stdatomic.h>
/* The one piece of global state, and only in test builds: which
 * allocation is to fail (see tests/check_alloc.c). */
static atomic_long fail_countdown = -1;
void mr__alloc_fail_after(long n) { atomic_store(&fail_countdown, n); }
long mr__alloc_failures_left(void);
long mr__alloc_failures_left(void) { return atomic_load(&fail_countdown); }
static int should_fail(void)
{
    long left = atomic_load(&fail_countdown);
    while (left >= 0 && !atomic_compare_exchange_weak(&fail_countdown, &left, left - 1)) {
    }
    return left == 0;
}
#else
static int should_fail(void) { return 0; }
#endif

void *mr__malloc(size_t size) { return should_fail() ? NULL : malloc(size ? size : 1); }
void *mr__calloc(size_t count, size_t size)
{
    return should_fail() ? NULL : calloc(count ? count : 1, size ? size : 1);
}
void *mr__realloc(void *p, size_t size) { return should_fail() ? NULL : realloc(p, size ? size : 1); }
void mr__free(void *p) { free(p); }

void *mr__aligned_alloc(size_t size)
{
    size_t bytes = (size + 63) / 64 * 64;
    return should_fail() ? NULL : aligned_alloc(64, bytes ? bytes : 64);
}

void *mr__calloc_lines(size_t count, size_t size)
{
    void *p;
    if (size != 0 && count > SIZE_MAX / size - 64) return NULL;
    p = mr__aligned_alloc(count * size);
    if (p != NULL) memset(p, 0, (count * size + 63) / 64 * 64);
    return p;
}

void *mr__zalloc(size_t count, size_t size)
{
    void *p = mr__malloc_array(count ? count : 1, size ? size : 1);
    if (p != NULL) memset(p, 0, (count ? count : 1) * (size ? size : 1));
    return p;
}

void *mr__malloc_array(size_t count, size_t size)
{
    if (size != 0 && count > SIZE_MAX / size) return NULL;
    return mr__malloc(count * size);
}

mr_status mr__reserve(void **p, size_t *cap, size_t need, size_t unit)
{
    size_t nc;
    void *q;
    if (need <= *cap) return MR_OK;
    nc = *cap ? *cap : 8;
    while (nc < need) {
        if (nc > SIZE_MAX / 2 / unit) return MR_ERR_NO_MEMORY;
        nc *= 2;
    }
    q = mr__realloc(*p, nc * unit);
    if (q == NULL) return MR_ERR_NO_MEMORY;
    *p = q;
    *cap = nc;
    return MR_OK;
}

char *mr__strndup(const char *s, size_t n)
{
    char *d = mr__malloc(n + 1);
    if (d == NULL) return NULL;
    memcpy(d, s, n);
    d[n] = '\0';
    return d;
}

char *mr__strdup(const char *s) { return mr__strndup(s, strlen(s)); }

void mr__strings_free(char **s, size_t n)
{
    size_t i;
    if (s == NULL) return;
    for (i = 0; i < n; i++) mr__free(s[i]);
    mr__free(s);
}

char **mr__strings_copy(const char *const *s, size_t n)
{
    char **copy = mr__calloc(n + 1, sizeof *copy);
    size_t i;
    for (i = 0; copy != NULL && i < n; i++)
        if ((copy[i] = mr__strdup(s[i])) == NULL) {
            mr__strings_free(copy, i);
            return NULL;
        }
    return copy;
}

void mr_free(void *p) { mr__free(p); }
