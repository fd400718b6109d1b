/* strbuf.h - a growable string for building reports and messages. */
#ifndef MR_STRBUF_H
#define MR_STRBUF_H

#include <stddef.h>

typedef struct mr__strbuf {
    char *data;
    size_t len, cap;
    int failed; /* an allocation failed: the text is incomplete */
} mr__strbuf;

void mr__strbuf_init(mr__strbuf *b);
void mr__strbuf_printf(mr__strbuf *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
void mr__strbuf_append(mr__strbuf *b, const char *s, size_t n);
/* A CSV cell (RFC 4180) of the n bytes at s: as they are, or quoted when
 * they hold a comma, a quote or a line break, quotes doubled. */
void mr__strbuf_append_csv(mr__strbuf *b, const char *s, size_t n);
/* Hands the text to the caller (free with mr__free); NULL if anything
 * failed.  The buffer is empty afterwards. */
char *mr__strbuf_take(mr__strbuf *b);
void mr__strbuf_release(mr__strbuf *b);

#endif
