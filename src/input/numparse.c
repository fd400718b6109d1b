/* numparse.c - correctly rounded decimal parsing for CSV fields.
 *
 * Three tiers, cheapest first; each either proves its answer is the
 * correctly rounded double or hands over to the next:
 *
 *  1. Clinger: a mantissa w <= 2^53 and a power 10^|q| <= 10^22 are both
 *     exact doubles, so one IEEE multiply or divide rounds once and is
 *     therefore correctly rounded.
 *  2. Eisel-Lemire: w * 10^q computed with a 128-bit truncated power of ten;
 *     the error bound tells us when the rounding decision is certain.  It
 *     gives up on subnormal or overflowing results and on inputs within the
 *     error bound of a tie, all rare in real data.
 *  3. strtod_l in a private C locale, fed a canonical copy of the digits
 *     built on the stack, so any field length works with no allocation.
 *
 * Assumes the default round-to-nearest mode and FLT_EVAL_METHOD 0 (true on
 * x86-64 and AArch64), as glibc strtod's own answers do.
 */
#define _GNU_SOURCE /* strtod_l and newlocale are GNU/POSIX 2008 */

#include "input/numparse.h"
#include "common/alloc.h"
#include "input/numparse_table.h" /* pow10_128 and its range, generated */

#include <locale.h>
#include <math.h>
#include <stdbool.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

/* Inlining decisions matter for the hot path: the scanner must be inlined
 * into it (twice), the rare tiers must not be. */
#if defined(__GNUC__)
#define MR__NOINLINE __attribute__((noinline))
#define MR__ALWAYS_INLINE inline __attribute__((always_inline))
#else
#define MR__NOINLINE
#define MR__ALWAYS_INLINE inline
#endif

struct mr__numparser {
    locale_t c_locale; /* created once: newlocale per call would cost more
                          than the whole parse */
};

mr__numparser *mr__numparser_new(void)
{
    mr__numparser *np = mr__malloc(sizeof *np);
    if (!np)
        return NULL;
    np->c_locale = newlocale(LC_NUMERIC_MASK, "C", (locale_t)0);
    if (np->c_locale == (locale_t)0) {
        mr__free(np);
        return NULL;
    }
    return np;
}

void mr__numparser_free(mr__numparser *np)
{
    if (!np)
        return;
    freelocale(np->c_locale);
    mr__free(np);
}

/* ------------------------------------------------------------------ */
/* Syntax                                                              */

/* A field that passed validation.  Its magnitude is D * 10^(exp10 - n_frac),
 * D being the integer spelled by the integer and fraction digits together.
 * The mantissa is n_int digits, then a '.' if n_frac > 0, then n_frac digits
 * (a trailing '.' with no fraction digits needs no mention). */
typedef struct {
    const char *mantissa;
    size_t n_int;
    size_t n_frac;
    uint64_t digits_mod_2_64; /* D mod 2^64: exactly D when D < 10^19 */
    int64_t exp10;            /* the explicit exponent, saturated */
    bool negative;
} decimal;

/* No field can hold anywhere near this many digits (it exceeds any address
 * space), so once an explicit exponent passes it the value is already
 * settled as zero or overflow, and saturating keeps the int64 sums exact. */
#define EXP10_SATURATION INT64_C(100000000000000000)

static bool is_blank(char c)
{
    return c == ' ' || c == '\t';
}

/* One compare that every blank passes (and few other bytes do). */
static bool may_be_blank(char c)
{
    return (unsigned char)c <= ' ';
}

static bool is_digit(char c)
{
    return (unsigned char)(c - '0') < 10;
}

#define ONES_8 UINT64_C(0x0101010101010101)

/* Eight bytes with p[0] in the lowest byte whatever the byte order. */
static uint64_t load_8_bytes(const char *p)
{
    uint64_t x;
    memcpy(&x, p, sizeof x);
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_BIG_ENDIAN__
    x = __builtin_bswap64(x);
#endif
    return x;
}

/* t holds 8 digit values (0..9), the first in the lowest byte. */
static uint64_t eight_digits_value(uint64_t t)
{
    t = (t * 10 + (t >> 8)) & UINT64_C(0x00FF00FF00FF00FF);
    t = (t * 100 + (t >> 16)) & UINT64_C(0x0000FFFF0000FFFF);
    return (t * 10000 + (t >> 32)) & UINT64_C(0xFFFFFFFF);
}

/* Long runs (full-precision output of other programs) go eight digits per
 * step; short ones, the usual case, never pay for the wide test. */
static MR__ALWAYS_INLINE const char *scan_digits(const char *p, const char *end, uint64_t *acc)
{
    uint64_t w = *acc;
    while (end - p >= 8) {
        uint64_t t = load_8_bytes(p) ^ (0x30 * ONES_8); /* digits become 0..9 */
        if (((t + 0x76 * ONES_8) | t) & (0x80 * ONES_8))
            break; /* some byte is above 9: not all digits */
        w = w * 100000000 + eight_digits_value(t);
        p += 8;
    }
    for (; p < end; p++) {
        unsigned digit = (unsigned)(unsigned char)*p - '0';
        if (digit > 9)
            break;
        w = w * 10 + digit;
    }
    *acc = w; /* wraps harmlessly past 19 digits */
    return p;
}

/* Returns the end of a valid exponent part starting at p (just past 'e'),
 * or NULL if it has no digits. */
static const char *scan_exponent(const char *p, const char *end, int64_t *exp10)
{
    bool negative = false;
    if (p < end && (*p == '+' || *p == '-')) {
        negative = *p == '-';
        p++;
    }
    if (p == end || !is_digit(*p))
        return NULL;
    int64_t e = 0;
    for (; p < end && is_digit(*p); p++)
        if (e < EXP10_SATURATION)
            e = e * 10 + (*p - '0');
    *exp10 = negative ? -e : e;
    return p;
}

/* len > 0. */
static bool scan_field(const char *s, size_t len, decimal *d)
{
    const char *p = s, *end = s + len;
    if (may_be_blank(*p) || may_be_blank(end[-1])) { /* rare: test before looping */
        while (p < end && is_blank(*p))
            p++;
        while (end > p && is_blank(end[-1]))
            end--;
        if (p == end)
            return false;
    }

    d->negative = *p == '-';
    if (*p == '-' || *p == '+')
        p++;

    uint64_t w = 0;
    d->mantissa = p;
    p = scan_digits(p, end, &w);
    d->n_int = (size_t)(p - d->mantissa);
    d->n_frac = 0;
    if (p < end && *p == '.') {
        const char *frac = ++p;
        p = scan_digits(p, end, &w);
        d->n_frac = (size_t)(p - frac);
    }
    if (d->n_int + d->n_frac == 0)
        return false;
    d->digits_mod_2_64 = w;

    d->exp10 = 0;
    if (p < end && (*p == 'e' || *p == 'E')) {
        p = scan_exponent(p + 1, end, &d->exp10);
        if (!p)
            return false;
    }
    return p == end;
}

/* ------------------------------------------------------------------ */
/* Exact tiers                                                         */

#define TWO_POW_53 (UINT64_C(1) << 53)
#define STORED_MANTISSA_MASK ((UINT64_C(1) << 52) - 1) /* implicit bit dropped */
#define MAX_SIGNIFICANT 19 /* 10^19 - 1 < 2^64 */

static const double exact_pow10[23] = {
    1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
    1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
};

static const uint64_t int_pow10[16] = {
    UINT64_C(1),
    UINT64_C(10),
    UINT64_C(100),
    UINT64_C(1000),
    UINT64_C(10000),
    UINT64_C(100000),
    UINT64_C(1000000),
    UINT64_C(10000000),
    UINT64_C(100000000),
    UINT64_C(1000000000),
    UINT64_C(10000000000),
    UINT64_C(100000000000),
    UINT64_C(1000000000000),
    UINT64_C(10000000000000),
    UINT64_C(100000000000000),
    UINT64_C(1000000000000000),
};

typedef struct {
    uint64_t hi, lo;
} u128_parts;

static u128_parts mul_64x64(uint64_t a, uint64_t b)
{
    u128_parts r;
#if defined(__SIZEOF_INT128__)
    __extension__ unsigned __int128 p = (unsigned __int128)a * b;
    r.hi = (uint64_t)(p >> 64);
    r.lo = (uint64_t)p;
#else
    uint64_t a_lo = (uint32_t)a, a_hi = a >> 32;
    uint64_t b_lo = (uint32_t)b, b_hi = b >> 32;
    uint64_t ll = a_lo * b_lo, lh = a_lo * b_hi, hl = a_hi * b_lo, hh = a_hi * b_hi;
    uint64_t mid = (ll >> 32) + (uint32_t)lh + (uint32_t)hl;
    r.lo = (mid << 32) | (uint32_t)ll;
    r.hi = hh + (lh >> 32) + (hl >> 32) + (mid >> 32);
#endif
    return r;
}

static int leading_zeros(uint64_t w) /* w != 0 */
{
#if defined(__GNUC__)
    return __builtin_clzll(w);
#else
    int n = 0;
    for (; !(w >> 63); w <<= 1)
        n++;
    return n;
#endif
}

/* floor(q * log2(10)) for |q| <= 350, without relying on how >> treats
 * negative numbers.  217706 / 2^16 matches log2(10) closely enough over the
 * table range (checked when the table was generated). */
static int64_t floor_log2_pow10(int64_t q)
{
    int64_t x = q * 217706;
    return x >= 0 ? x / 65536 : -((-x + 65535) / 65536);
}

/* w != 0, MIN_TABLE_EXP10 <= q <= MAX_TABLE_EXP10.  Stores the correctly
 * rounded w * 10^q when it is a normal double and the truncated product
 * leaves no doubt about the rounding; returns false otherwise. */
static bool eisel_lemire(uint64_t w, int64_t q, double *v)
{
    const uint64_t *pow = pow10_128[q - MIN_TABLE_EXP10];
    int lz = leading_zeros(w);
    uint64_t wn = w << lz;

    /* True product / 2^64 lies in [first, first + wn): the power's low word
     * (and its truncation) contribute less than wn there. */
    u128_parts first = mul_64x64(wn, pow[0]);
    uint64_t hi = first.hi, lo = first.lo;
    if ((hi & 0x1FF) == 0x1FF && lo + wn < wn) {
        /* The error could carry into the rounding bits: use the low word. */
        u128_parts second = mul_64x64(wn, pow[1]);
        uint64_t merged_lo = lo + second.hi;
        uint64_t merged_hi = hi + (merged_lo < lo);
        if ((merged_hi & 0x1FF) == 0x1FF && merged_lo == UINT64_MAX &&
            second.lo + wn < wn)
            return false;
        hi = merged_hi;
        lo = merged_lo;
    }

    unsigned top = (unsigned)(hi >> 63); /* product is in [2^190, 2^192) */
    uint64_t mantissa = hi >> (top + 9); /* 54 bits: 53 plus a round bit */
    int64_t biased_exp = floor_log2_pow10(q) + 63 + 1023 - lz + top;

    /* Looks exactly like a tie with an odd result: the truth may be the tie
     * (round down to even) or just above it (round up). */
    if (lo == 0 && (hi & 0x1FF) == 0 && (mantissa & 3) == 1)
        return false;

    mantissa += mantissa & 1;
    mantissa >>= 1;
    if (mantissa >> 53) { /* rounding carried into a new binade */
        mantissa >>= 1;
        biased_exp++;
    }
    if (biased_exp <= 0 || biased_exp >= 0x7FF)
        return false; /* subnormal or overflow: the 53-bit rounding is wrong */

    uint64_t bits = ((uint64_t)biased_exp << 52) | (mantissa & STORED_MANTISSA_MASK);
    memcpy(v, &bits, sizeof bits);
    return true;
}

/* Magnitude of w * 10^q if it can be proved correctly rounded. */
static bool exact_magnitude(uint64_t w, int64_t q, double *v)
{
    if (w == 0) {
        *v = 0.0;
        return true;
    }
    if (w <= TWO_POW_53) {
        if (q >= 0 && q <= 22) {
            *v = (double)w * exact_pow10[q];
            return true;
        }
        if (q < 0 && q >= -22) {
            *v = (double)w / exact_pow10[-q];
            return true;
        }
        /* w * 10^(q-22) may still be an exact integer <= 2^53; then only the
         * final multiply by 1e22 rounds. */
        if (q > 22 && q <= 22 + 15 && w <= TWO_POW_53 / int_pow10[q - 22]) {
            *v = (double)(w * int_pow10[q - 22]) * exact_pow10[22];
            return true;
        }
    }
    if (q < MIN_TABLE_EXP10) {
        *v = 0.0;
        return true;
    }
    if (q > MAX_TABLE_EXP10) {
        *v = HUGE_VAL;
        return true;
    }
    return eisel_lemire(w, q, v);
}

static char mantissa_digit(const decimal *d, size_t i)
{
    return d->mantissa[i < d->n_int ? i : i + 1]; /* skip the '.' */
}

static size_t count_leading_zeros(const decimal *d)
{
    size_t n = d->n_int + d->n_frac, i = 0;
    while (i < n && mantissa_digit(d, i) == '0')
        i++;
    return i;
}

/* For more than 19 significant digits: w = the first 19, q scaled to match,
 * *inexact = whether any dropped digit is nonzero. */
static void truncate_mantissa(const decimal *d, uint64_t *w, int64_t *q, bool *inexact)
{
    size_t n = d->n_int + d->n_frac;
    size_t i = count_leading_zeros(d);
    *inexact = false;
    if (n - i <= MAX_SIGNIFICANT)
        return; /* leading zeros left digits_mod_2_64 exact */
    size_t stop = i + MAX_SIGNIFICANT;
    uint64_t acc = 0;
    for (; i < stop; i++)
        acc = acc * 10 + (uint64_t)(mantissa_digit(d, i) - '0');
    *w = acc;
    *q += (int64_t)(n - stop);
    for (; i < n; i++)
        if (mantissa_digit(d, i) != '0') {
            *inexact = true;
            return;
        }
}

static bool fast_magnitude(const decimal *d, double *v)
{
    uint64_t w = d->digits_mod_2_64;
    int64_t q = d->exp10 - (int64_t)d->n_frac;
    if (d->n_int + d->n_frac <= MAX_SIGNIFICANT)
        return exact_magnitude(w, q, v);

    bool inexact;
    truncate_mantissa(d, &w, &q, &inexact);
    if (!inexact)
        return exact_magnitude(w, q, v);
    /* The true value lies strictly between w*10^q and (w+1)*10^q; rounding
     * is monotonic, so if both ends round alike so does everything between. */
    double below, above;
    if (!exact_magnitude(w, q, &below) || !exact_magnitude(w + 1, q, &above))
        return false;
    if (memcmp(&below, &above, sizeof below) != 0)
        return false;
    *v = below;
    return true;
}

/* ------------------------------------------------------------------ */
/* strtod_l fallback                                                   */

/* Every double and every midpoint between neighbouring doubles has at most
 * 768 significant decimal digits (an odd multiple of 2^-1075 below 2^-1021
 * is the worst case).  Keeping 800 digits and replacing a nonzero tail by a
 * single '1' one place further moves the value without crossing any
 * midpoint, so strtod still rounds it the same way.  Fields of any length
 * are therefore parsed exactly without a heap buffer. */
#define SLOW_DIGITS 800

static size_t format_int(char *buf, int64_t v)
{
    char tmp[24];
    size_t n = 0, k = 0;
    uint64_t u = v < 0 ? (uint64_t)0 - (uint64_t)v : (uint64_t)v;
    if (v < 0)
        buf[k++] = '-';
    do {
        tmp[n++] = (char)('0' + u % 10);
        u /= 10;
    } while (u);
    while (n)
        buf[k++] = tmp[--n];
    return k;
}

static double slow_magnitude(const mr__numparser *np, const decimal *d)
{
    size_t n = d->n_int + d->n_frac;
    size_t i = count_leading_zeros(d);
    if (i == n)
        return 0.0;
    size_t significant = n - i;
    int64_t q = d->exp10 - (int64_t)d->n_frac;

    /* Magnitude is 0.d1d2... * 10^point, so it lies in [10^(point-1), 10^point). */
    int64_t point = (int64_t)significant + q;
    if (point <= -324)
        return 0.0; /* below 10^-324, under half the smallest subnormal */
    if (point >= 310)
        return HUGE_VAL; /* at least 10^309 */

    char buf[SLOW_DIGITS + 32];
    size_t take = significant < SLOW_DIGITS ? significant : SLOW_DIGITS;
    size_t k = 0;
    for (size_t stop = i + take; i < stop; i++)
        buf[k++] = mantissa_digit(d, i);
    int64_t exp10 = q + (int64_t)(significant - take);
    for (; i < n; i++)
        if (mantissa_digit(d, i) != '0') {
            buf[k++] = '1';
            exp10--;
            break;
        }
    buf[k++] = 'e';
    k += format_int(buf + k, exp10);
    buf[k] = '\0';
    return strtod_l(buf, NULL, np->c_locale);
}

/* ------------------------------------------------------------------ */

/* Tier 1 alone, inlined into the entry point: most fields end here, and the
 * other tiers stay out of line so they do not bloat the hot path. */
static bool clinger_magnitude(const decimal *d, double *v)
{
    /* Multiplying by 1 or dividing by 1 is exact, so one table entry of
     * each kind gives w * 10^q with a single rounding and no branch on the
     * sign of q, which real columns flip between unpredictably. */
    static const double times[45] = {
        1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1,
        1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
        1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
    };
    static const double divided_by[45] = {
        1e22, 1e21, 1e20, 1e19, 1e18, 1e17, 1e16, 1e15, 1e14, 1e13, 1e12,
        1e11, 1e10, 1e9,  1e8,  1e7,  1e6,  1e5,  1e4,  1e3,  1e2,  1e1,
        1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 1,
    };
    uint64_t w = d->digits_mod_2_64;
    int64_t q = d->exp10 - (int64_t)d->n_frac;
    if (d->n_int + d->n_frac > MAX_SIGNIFICANT || w > TWO_POW_53 || q < -22 || q > 22)
        return false;
    *v = (double)w * times[q + 22] / divided_by[q + 22];
    return true;
}

/* Rounding to nearest is symmetric, so the sign can be applied last; this
 * also gives "-0" the negative zero strtod gives. */
static void store_signed(double *out, double magnitude, bool negative)
{
    uint64_t bits;
    memcpy(&bits, &magnitude, sizeof bits);
    bits |= (uint64_t)negative << 63;
    memcpy(out, &bits, sizeof bits);
}

static MR__NOINLINE int parse_general(const mr__numparser *np, const decimal *d, double *out)
{
    double v;
    if (!fast_magnitude(d, &v))
        v = slow_magnitude(np, d);
    if (isinf(v))
        return 0;
    store_signed(out, v, d->negative);
    return 1;
}

int mr__is_number_syntax(const char *s, size_t len)
{
    decimal d;
    return len > 0 && scan_field(s, len, &d);
}

int mr__parse_double(mr__numparser *np, const char *s, size_t len, double *out)
{
    decimal d;
    if (len == 0 || !scan_field(s, len, &d))
        return 0;
    double v;
    if (!clinger_magnitude(&d, &v))
        return parse_general(np, &d, out);
    store_signed(out, v, d.negative);
    return 1;
}
