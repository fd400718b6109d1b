/* utf8.h - where UTF-8 characters begin and end, for text the library cuts
 * to a length (messages, quoted cells) and for the JSON output, which must
 * tell well-formed text from stray bytes (a Latin-1 file, a path in another
 * encoding).  Well-formed means RFC 3629: no overlong forms, no surrogates,
 * nothing above U+10FFFF. */
#ifndef MR_UTF8_H
#define MR_UTF8_H

#include <stddef.h>

/* The length (1 to 4) of the well-formed character at s[0..n), or 0 when
 * s[0] does not begin one (a stray byte, or a character cut short). */
size_t mr__utf8_char_len(const char *s, size_t n);

/* Where to cut s to at most n bytes without splitting a character: n, or
 * less when s[0..n) ends with the first bytes of a character that needs
 * more (the text goes on past n, or did before it was cut). */
size_t mr__utf8_cut(const char *s, size_t n);

/* After snprintf/vsnprintf returned `written` for a buffer of `cap` bytes:
 * when the text was cut, cuts it back to the end of a whole character. */
void mr__utf8_mend_cut(char *buf, size_t cap, int written);

#endif
