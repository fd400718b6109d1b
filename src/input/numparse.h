/* numparse.h - correctly rounded decimal number parsing for CSV fields.
 *
 * Registry extracts are mostly short decimals ("2017", "0.25", "-3.5e2").
 * strtod is correct but slow (about 24 ns a field) and locale dependent, so
 * this module parses the common case exactly in double arithmetic and falls
 * back to strtod_l (C locale) only for inputs the fast path cannot prove
 * exact.  Either way the result is the correctly rounded double, bit for bit
 * what glibc strtod gives in the C locale.
 */
#ifndef MR_NUMPARSE_H
#define MR_NUMPARSE_H

#include <stddef.h>
#include <stdint.h>

/* Per-thread parsing context (holds the C locale used by the fallback).
 * One context is used by one thread at a time. */
typedef struct mr__numparser mr__numparser;

/* Returns NULL when out of memory.  Free with mr__numparser_free (NULL ok). */
mr__numparser *mr__numparser_new(void);
void mr__numparser_free(mr__numparser *np);

/* Parses the field [s, s+len) (not NUL terminated; may contain NULs).
 * Accepted: optional leading and trailing ASCII blanks (space, tab), an
 * optional sign, digits with at most one '.', at least one digit, and an
 * optional exponent (e|E, optional sign, at least one digit).
 * Rejected: empty or blank fields, inf, nan, hex, thousands separators,
 * anything else.  Returns 1 and stores the value on success, 0 otherwise
 * (*out untouched).  Values that overflow give 0 as well (not a usable
 * number); underflow to subnormal/zero is accepted as strtod rounds it. */
int mr__parse_double(mr__numparser *np, const char *s, size_t len, double *out);

/* 1 when [s, s+len) has the form mr__parse_double accepts, whatever its
 * magnitude: a field it refused though it has that form overflows a
 * double (1e400).  For messages only. */
int mr__is_number_syntax(const char *s, size_t len);

/* The commonest case of mr__parse_double, inline for the decoder's loop:
 * from p, an optional '-' and at most 15 digits with at most one '.', up to
 * `stop` or e.  The digits then make an integer m < 2^53 and the value is
 * m or m / 10^f (f <= 15), both exact operands, so one IEEE division gives
 * the correctly rounded result, the same bits as mr__parse_double.  Returns
 * where the number ends (at `stop` or e), or NULL for anything else (blanks,
 * exponents, more digits, not a number), which the caller hands to
 * mr__parse_double. */
static inline const char *mr__parse_short_decimal(const char *p, const char *e, char stop, double *out)
{
    static const double pow10[16] = {1e0, 1e1, 1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                     1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15};
    uint64_t m = 0; /* wraps past 19 digits, but then more than 15 were read */
    const char *digits;
    int negative = p < e && *p == '-', nfrac = 0;
    size_t ndigits;
    double v;
    digits = p += negative;
    while (p < e && (unsigned)(*p - '0') < 10) m = m * 10 + (unsigned)(*p++ - '0');
    ndigits = (size_t)(p - digits);
    if (p < e && *p == '.') {
        const char *frac = ++p;
        while (p < e && (unsigned)(*p - '0') < 10) m = m * 10 + (unsigned)(*p++ - '0');
        nfrac = (int)(p - frac);
        ndigits += (size_t)nfrac;
    }
    if ((p < e && *p != stop) || ndigits == 0 || ndigits > 15) return NULL;
    v = (double)m;
    if (nfrac > 0) v /= pow10[nfrac];
    *out = negative ? -v : v;
    return p;
}

#endif
