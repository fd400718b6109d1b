/* fuzz_numparse.c - libFuzzer target: number parsing against glibc strtod.
 *
 * Input: one byte choosing the delimiter the inline parser stops at, then the
 * field.  Both parsers see an exact-size heap copy, so ASan catches a read
 * past the field.
 *
 * Oracles (the contract of src/input/numparse.h, as tests/check_numparse.c
 * holds it):
 *   - which fields mr__parse_double accepts: POSIX regexec on the grammar of
 *     numparse.h (blanks, sign, digits with at most one '.', an optional
 *     exponent), less those glibc strtod overflows to infinity;
 *   - the value: glibc strtod in the C locale (this program never calls
 *     setlocale), bit for bit; a rejected field leaves *out untouched;
 *   - mr__parse_short_decimal: when it takes a prefix, that prefix ends at
 *     the delimiter or the field's end, and mr__parse_double (so strtod)
 *     gives the same bits for it; when it declines, *out is untouched.
 */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <regex.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "input/numparse.h"

static const double UNTOUCHED = -12345.678;

static void fail(const char *what, const char *s, size_t len)
{
    fprintf(stderr, "fuzz_numparse: %s: \"%.*s\" (%zu bytes)\n", what, (int)(len < 200 ? len : 200), s, len);
    abort();
}

static int same_bits(double a, double b) { return memcmp(&a, &b, sizeof a) == 0; }

/* 1 and strtod's value when the field is a number by the grammar and does
 * not overflow; 0 otherwise. */
static int expected(const char *s, size_t len, double *v)
{
    static regex_t re;
    static int ready;
    char *z;
    int ok;
    if (!ready) {
        if (regcomp(&re, "^[ \t]*[+-]?([0-9]+(\\.[0-9]*)?|\\.[0-9]+)([eE][+-]?[0-9]+)?[ \t]*$",
                    REG_EXTENDED | REG_NOSUB) != 0)
            abort();
        ready = 1;
    }
    if (memchr(s, '\0', len) != NULL) return 0; /* a NUL is not in the grammar */
    z = malloc(len + 1);
    if (z == NULL) abort();
    memcpy(z, s, len);
    z[len] = '\0';
    ok = regexec(&re, z, 0, NULL, 0) == 0;
    if (ok) {
        *v = strtod(z, NULL);
        ok = isfinite(*v);
    }
    free(z);
    return ok;
}

static void check_short_decimal(mr__numparser *np, const char *s, size_t len, char stop)
{
    double fast = UNTOUCHED, slow = UNTOUCHED;
    const char *end = mr__parse_short_decimal(s, s + len, stop, &fast);
    if (end == NULL) {
        if (!same_bits(fast, UNTOUCHED)) fail("the inline parser declined but wrote its output", s, len);
        return;
    }
    if (end < s || end > s + len || (end < s + len && *end != stop))
        fail("the inline parser stopped elsewhere than at the delimiter or the end", s, len);
    if (!mr__parse_double(np, s, (size_t)(end - s), &slow))
        fail("the inline parser took a prefix the general parser rejects", s, len);
    if (!same_bits(fast, slow)) fail("the inline and general parsers give different bits", s, len);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    static mr__numparser *np;
    static const char stops[] = {',', '\t', ';', ','}; /* the delimiters a fit may use */
    size_t len;
    char *s;
    double want = 0, got = UNTOUCHED;
    int accepted, should;
    if (size == 0) return 0;
    if (np == NULL && (np = mr__numparser_new()) == NULL) abort();
    len = size - 1;
    s = malloc(len ? len : 1);
    if (s == NULL) abort();
    memcpy(s, data + 1, len);
    accepted = mr__parse_double(np, s, len, &got);
    should = expected(s, len, &want);
    if (accepted != should) fail(accepted ? "accepted, but strtod or the grammar says no" : "rejected a number", s, len);
    if (accepted && !same_bits(got, want)) fail("bits differ from glibc strtod", s, len);
    if (!accepted && !same_bits(got, UNTOUCHED)) fail("rejected but wrote its output", s, len);
    check_short_decimal(np, s, len, stops[data[0] & 3]);
    free(s);
    return 0;
}
