/* dtoa.c - the shortest decimal of a double (see dtoa.h), after R. Giulietti,
 * "The Schubfach way to render doubles" (2020).
 *
 * A finite positive double is c 2^q.  The reals that round to it fill an
 * interval around it; scaled by 10^-k for the k with 2^q 10^-k in [1, 10)
 * (one unit of the double spans one to ten units of the last decimal
 * place), the interval holds at least one integer and at most one multiple
 * of ten.  So the shortest decimal is that multiple of ten when there is
 * one (fewer digits), otherwise s or s + 1 where s is the integer part of
 * the scaled double: whichever lies inside, or the nearer when both do.
 * The scaled double and the interval's ends are computed to a quarter of
 * a unit with a sticky last bit ("round to odd"), from a 126-bit multiple
 * of 10^-k (dtoa_table.h); the paper proves this precision decides every
 * comparison as exact arithmetic would. */
#include <stdint.h>
#include <string.h>

#include "common/dtoa.h"
#include "common/dtoa_table.h"

enum {
    PRECISION = 53,         /* significand bits, the hidden one included */
    Q_MIN = -1074,          /* the exponent of the smallest subnormal */
    BIASED_EXP_MAX = 0x7ff, /* infinities and NaNs */
    SCI_LOW = -5,           /* plain decimal for SCI_LOW < X < SCI_HIGH */
    SCI_HIGH = 17           /* (printf's %.17g switches at the same X) */
};
#define C_MIN (UINT64_C(1) << (PRECISION - 1))
#define MASK63 ((UINT64_C(1) << 63) - 1)

/* The high 64 bits of a 128-bit product. */
static uint64_t mul_high(uint64_t a, uint64_t b)
{
#ifdef __SIZEOF_INT128__
    __extension__ typedef unsigned __int128 u128;
    return (uint64_t)(((u128)a * b) >> 64);
#else
    uint64_t al = a & 0xffffffffu, ah = a >> 32, bl = b & 0xffffffffu, bh = b >> 32;
    uint64_t ll = al * bl, lh = al * bh, hl = ah * bl, hh = ah * bh;
    uint64_t mid = (ll >> 32) + (lh & 0xffffffffu) + (hl & 0xffffffffu);
    return hh + (lh >> 32) + (hl >> 32) + (mid >> 32);
#endif
}

/* floor(q log10 2), floor(log10(3/4 2^q)), floor(e log2 10): exact over the
 * exponents used here (tools/gen_dtoa_table.py checks each). */
static int floor_log10_pow2(int q) { return (int)(((int64_t)q * 661971961083) >> 41); }
static int floor_log10_three_quarters_pow2(int q) { return (int)(((int64_t)q * 661971961083 - 274743187321) >> 41); }
static int floor_log2_pow10(int e) { return (int)(((int64_t)e * 913124641741) >> 38); }

/* (g cp) / 2^127 for g = g1 2^63 + g0, its last bit set when anything
 * below was cut off (round to odd). */
static uint64_t round_to_odd(uint64_t g1, uint64_t g0, uint64_t cp)
{
    uint64_t x1 = mul_high(g0, cp);
    uint64_t y0 = g1 * cp, y1 = mul_high(g1, cp);
    uint64_t z = (y0 >> 1) + x1;
    uint64_t vbp = y1 + (z >> 63);
    return vbp | (((z & MASK63) + MASK63) >> 63);
}

/* c 2^q (c > 0) as f 10^e with f the fewest digits.  The multiple of ten
 * is tried whatever s (one digit is a valid answer: 5e-324, 1e+23); a
 * renderer that wants at least two digits would skip it for s < 100. */
static void shortest(int q, uint64_t c, uint64_t *f, int *e)
{
    int out = (int)(c & 1); /* an odd c's interval leaves out its ends */
    uint64_t cb = c << 2, cbr = cb + 2, cbl, g1, g0, vb, vbl, vbr, s, t, sp10, tp10;
    int k, h, upin, wpin, uin, win;
    if (c != C_MIN || q == Q_MIN) {
        cbl = cb - 2;
        k = floor_log10_pow2(q);
    } else { /* a power of two: the double below is half as far */
        cbl = cb - 1;
        k = floor_log10_three_quarters_pow2(q);
    }
    h = q + floor_log2_pow10(-k) + 2;
    g1 = mr__dtoa_g[k - MR__DTOA_K_MIN][0];
    g0 = mr__dtoa_g[k - MR__DTOA_K_MIN][1];
    vb = round_to_odd(g1, g0, cb << h);
    vbl = round_to_odd(g1, g0, cbl << h);
    vbr = round_to_odd(g1, g0, cbr << h);
    s = vb >> 2;
    *e = k;
    sp10 = s / 10 * 10;
    tp10 = sp10 + 10;
    upin = vbl + (uint64_t)out <= sp10 << 2;
    wpin = (tp10 << 2) + (uint64_t)out <= vbr;
    if (upin != wpin) {
        *f = upin ? sp10 : tp10;
        return;
    }
    t = s + 1;
    uin = vbl + (uint64_t)out <= s << 2;
    win = (t << 2) + (uint64_t)out <= vbr;
    if (uin != win) {
        *f = uin ? s : t;
        return;
    }
    /* both inside: the nearer, the even one on a tie */
    *f = vb < (s + t) << 1 || (vb == (s + t) << 1 && (s & 1) == 0) ? s : t;
}

static const char pairs[201] = "00010203040506070809101112131415161718192021222324252627282930313233343536373839"
                               "40414243444546474849505152535455565758596061626364656667686970717273747576777879"
                               "8081828384858687888990919293949596979899";

/* v's 8 digits (leading zeros too) at d. */
static void put_eight(uint32_t v, char *d)
{
    uint32_t hi = v / 10000, lo = v % 10000;
    memcpy(d, pairs + 2 * (hi / 100), 2);
    memcpy(d + 2, pairs + 2 * (hi % 100), 2);
    memcpy(d + 4, pairs + 2 * (lo / 100), 2);
    memcpy(d + 6, pairs + 2 * (lo % 100), 2);
}

/* f's n digits at d (no NUL): eight at a time in 32-bit arithmetic, which
 * costs fewer instructions than 64-bit division by constants. */
static void put_digits(uint64_t f, int n, char *d)
{
    uint32_t v;
    while (n > 8) {
        put_eight((uint32_t)(f % 100000000), d + n - 8);
        f /= 100000000;
        n -= 8;
    }
    v = (uint32_t)f;
    while (n >= 2) {
        memcpy(d + n - 2, pairs + 2 * (v % 100), 2);
        v /= 100;
        n -= 2;
    }
    if (n) d[0] = (char)('0' + v);
}

static const uint64_t powers_of_ten[20] = {UINT64_C(1), UINT64_C(10), UINT64_C(100), UINT64_C(1000),
                                           UINT64_C(10000), UINT64_C(100000), UINT64_C(1000000),
                                           UINT64_C(10000000), UINT64_C(100000000), UINT64_C(1000000000),
                                           UINT64_C(10000000000), UINT64_C(100000000000),
                                           UINT64_C(1000000000000), UINT64_C(10000000000000),
                                           UINT64_C(100000000000000), UINT64_C(1000000000000000),
                                           UINT64_C(10000000000000000), UINT64_C(100000000000000000),
                                           UINT64_C(1000000000000000000), UINT64_C(10000000000000000000)};

/* The number of digits of f > 0: from its bit length (1233 / 4096 is just
 * above log10 2), one comparison to correct. */
static int count_digits(uint64_t f)
{
#ifdef __GNUC__
    int t = ((64 - __builtin_clzll(f)) * 1233) >> 12;
    return t + 1 - (f < powers_of_ten[t]);
#else
    int n = 1;
    while (n < 20 && f >= powers_of_ten[n]) n++;
    return n;
#endif
}

/* "d.ddde+XX": the n digits of f, x the exponent of the first. */
static size_t put_scientific(char *p, uint64_t f, int n, int x)
{
    size_t at = 0;
    unsigned ax = (unsigned)(x < 0 ? -x : x);
    put_digits(f, n, p + 1);
    p[0] = p[1];
    if (n > 1) p[1] = '.', at = (size_t)n + 1;
    else at = 1;
    p[at++] = 'e';
    p[at++] = x < 0 ? '-' : '+';
    if (ax >= 100) p[at++] = (char)('0' + ax / 100);
    memcpy(p + at, pairs + 2 * (ax % 100), 2);
    return at + 2;
}

/* Plain decimal: the n digits of f times 10^e, x the exponent of the
 * first digit, SCI_LOW < x < SCI_HIGH. */
static size_t put_plain(char *p, uint64_t f, int n, int e, int x)
{
    if (e >= 0) { /* an integer: its digits, then e zeros */
        put_digits(f, n, p);
        memset(p + n, '0', (size_t)e);
        return (size_t)(n + e);
    }
    if (x >= 0) { /* the point inside the digits */
        put_digits(f, n, p + 1);
        memmove(p, p + 1, (size_t)x + 1);
        p[x + 1] = '.';
        return (size_t)n + 1;
    }
    /* "0.", then -x - 1 zeros, then the digits */
    p[0] = '0';
    p[1] = '.';
    memset(p + 2, '0', (size_t)(-x - 1));
    put_digits(f, n, p + 1 - x);
    return (size_t)(n + 1 - x);
}

/* The positive finite double of these bits as f 10^e, f's trailing zeros
 * taken off. */
static void decimal_of(uint64_t bits, uint64_t *f, int *e)
{
    uint64_t t = bits & ((UINT64_C(1) << (PRECISION - 1)) - 1);
    int bq = (int)(bits >> (PRECISION - 1) & BIASED_EXP_MAX), mq = -Q_MIN + 1 - bq;
    if (bq == 0) {
        shortest(Q_MIN, t, f, e);
    } else if (mq > 0 && mq < PRECISION && ((C_MIN | t) >> mq) << mq == (C_MIN | t)) {
        /* an integer below 2^53: itself is the shortest */
        *f = (C_MIN | t) >> mq;
        *e = 0;
    } else {
        shortest(-mq, C_MIN | t, f, e);
    }
    while (*f % 10 == 0) *f /= 10, ++*e;
}

size_t mr__dtoa(double v, char *out)
{
    uint64_t bits, f;
    size_t at;
    int e, n, x;
    memcpy(&bits, &v, sizeof bits);
    at = bits >> 63;
    out[0] = '-';
    bits &= ~(UINT64_C(1) << 63);
    if (bits >> (PRECISION - 1) == BIASED_EXP_MAX) { /* infinity or NaN (any sign, any payload) */
        if (bits != (uint64_t)BIASED_EXP_MAX << (PRECISION - 1)) {
            memcpy(out, "nan", 4);
            return 3;
        }
        memcpy(out + at, "inf", 4);
        return at + 3;
    }
    if (bits == 0) {
        memcpy(out + at, "0", 2);
        return at + 1;
    }
    decimal_of(bits, &f, &e);
    n = count_digits(f);
    x = e + n - 1;
    if (x > SCI_LOW && x < SCI_HIGH) at += put_plain(out + at, f, n, e, x);
    else at += put_scientific(out + at, f, n, x);
    out[at] = '\0';
    return at;
}
