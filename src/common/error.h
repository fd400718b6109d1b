/* error.h - the status + message pair every internal call reports through.
 *
 * A message names where the problem is (file, line, column, value) so the
 * analyst can find the cell; callers fill it once, at the point that knows
 * the most, and pass the status up unchanged. */
#ifndef MR_ERROR_H
#define MR_ERROR_H

#include <stddef.h>
#include "millrace.h"

#define MR__MSG_CAP 1024

typedef struct mr__error {
    mr_status status;
    char msg[MR__MSG_CAP];
} mr__error;

/* Records status and a printf-style message; returns status, so callers
 * can write `return mr__fail(err, MR_ERR_IO, "...")`.  err may be NULL. */
mr_status mr__fail(mr__error *err, mr_status status, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

void mr__error_clear(mr__error *err);

/* Copies the message into a caller's buffer of `cap` bytes (the public
 * calls that take msg, msgcap); cap may be 0. */
void mr__error_export(const mr__error *err, char *msg, size_t cap);

/* The one escaping of input text in messages: copies s[0, len) into out
 * (cap bytes with the NUL), each control byte (below 0x20, and 0x7f)
 * written as \xNN, so that no escape sequence from a file reaches a
 * terminal.  Stops where the room ends; returns the bytes of s taken.
 * mr__fail applies it to every message. */
size_t mr__escape_text(char *out, size_t cap, const char *s, size_t len);

/* A cell quoted in a message: escaped as above, cut with "..." to fit
 * `cap` bytes; always NUL terminates. */
void mr__quote_value(char *out, size_t cap, const char *s, size_t len);

#define MR__TRY(expr)                          \
    do {                                       \
        mr_status mr__st_ = (expr);            \
        if (mr__st_ != MR_OK) return mr__st_;  \
    } while (0)

#endif
