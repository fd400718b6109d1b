#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"
#include "strbuf.h"

void mr__strbuf_init(mr__strbuf *b)
{
    b->data = NULL;
    b->len = b->cap = 0;
    b->failed = 0;
}

static int reserve(mr__strbuf *b, size_t extra)
{
    size_t need = b->len + extra + 1, cap;
    char *p;
    if (b->failed) return 0;
    if (need <= b->cap) return 1;
    cap = b->cap ? b->cap : 256;
    while (cap < need) cap *= 2;
    p = mr__realloc(b->data, cap);
    if (p == NULL) {
        b->failed = 1;
        return 0;
    }
    b->data = p;
    b->cap = cap;
    return 1;
}

void mr__strbuf_append(mr__strbuf *b, const char *s, size_t n)
{
    if (!reserve(b, n)) return;
    memcpy(b->data + b->len, s, n);
    b->len += n;
    b->data[b->len] = '\0';
}

void mr__strbuf_printf(mr__strbuf *b, const char *fmt, ...)
{
    va_list ap;
    int n;
    va_start(ap, fmt);
    n = vsnprintf(NULL, 0, fmt, ap);
    va_end(ap);
    if (n < 0 || !reserve(b, (size_t)n)) return;
    va_start(ap, fmt);
    vsnprintf(b->data + b->len, (size_t)n + 1, fmt, ap);
    va_end(ap);
    b->len += (size_t)n;
}

char *mr__strbuf_take(mr__strbuf *b)
{
    char *s;
    if (b->failed || !reserve(b, 0)) {
        mr__strbuf_release(b);
        return NULL;
    }
    s = b->data;
    mr__strbuf_init(b);
    return s;
}

void mr__strbuf_release(mr__strbuf *b)
{
    mr__free(b->data);
    mr__strbuf_init(b);
}

void mr__strbuf_append_csv(mr__strbuf *b, const char *s, size_t n)
{
    size_t i;
    if (memchr(s, ',', n) == NULL && memchr(s, '"', n) == NULL && memchr(s, '\n', n) == NULL &&
        memchr(s, '\r', n) == NULL) {
        mr__strbuf_append(b, s, n);
        return;
    }
    mr__strbuf_append(b, "\"", 1);
    for (i = 0; i < n; i++) {
        if (s[i] == '"') mr__strbuf_append(b, "\"", 1);
        mr__strbuf_append(b, s + i, 1);
    }
    mr__strbuf_append(b, "\"", 1);
}
