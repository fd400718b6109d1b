#include <string.h>

#include "utf8.h"

static int continuation(unsigned char c) { return (c & 0xC0) == 0x80; }

/* The length a lead byte announces (0: not a lead byte) and the range its
 * second byte must lie in, which is what rules out overlong forms,
 * surrogates and code points above U+10FFFF (RFC 3629, section 4). */
static size_t lead(unsigned char c, unsigned char *lo, unsigned char *hi)
{
    *lo = 0x80;
    *hi = 0xBF;
    if (c < 0x80) return 1;
    if (c < 0xC2) return 0;
    if (c < 0xE0) return 2;
    if (c < 0xF0) {
        if (c == 0xE0) *lo = 0xA0;
        if (c == 0xED) *hi = 0x9F;
        return 3;
    }
    if (c > 0xF4) return 0;
    if (c == 0xF0) *lo = 0x90;
    if (c == 0xF4) *hi = 0x8F;
    return 4;
}

/* How many bytes of s[0..n) agree with the character s[0] begins, and the
 * length it announces (0 when s[0] is no lead byte). */
static size_t valid_prefix(const unsigned char *s, size_t n, size_t *want)
{
    unsigned char lo, hi;
    size_t k;
    *want = n > 0 ? lead(s[0], &lo, &hi) : 0;
    if (*want == 0) return 0;
    if (*want == 1) return 1;
    if (n < 2 || s[1] < lo || s[1] > hi) return 1;
    for (k = 2; k < *want && k < n && continuation(s[k]); k++) {
    }
    return k;
}

size_t mr__utf8_char_len(const char *s, size_t n)
{
    size_t want, got = valid_prefix((const unsigned char *)s, n, &want);
    return want > 0 && got == want ? want : 0;
}

size_t mr__utf8_cut(const char *s, size_t n)
{
    const unsigned char *u = (const unsigned char *)s;
    size_t back, want;
    /* a character is at most 4 bytes: only its lead byte, within the last
     * three, can begin one that n splits */
    for (back = 1; back <= 3 && back <= n; back++) {
        if (continuation(u[n - back])) continue;
        return valid_prefix(u + n - back, back, &want) == back && want > back ? n - back : n;
    }
    return n;
}

void mr__utf8_mend_cut(char *buf, size_t cap, int written)
{
    size_t len;
    if (cap == 0 || written < 0 || (size_t)written < cap) return;
    len = strlen(buf);
    buf[mr__utf8_cut(buf, len)] = '\0';
}
