/* check_numparse.c - tests for src/input/numparse.c.
 *
 * Oracle: glibc strtod.  A Check test process never calls setlocale, so
 * strtod runs in the "C" locale, the locale mr__parse_double promises to
 * match bit for bit.  Random strings come from a fixed-seed splitmix64 so a
 * failure reproduces; set MR_TEST_QUICK=1 for a short run (ASan, valgrind).
 */
#define _POSIX_C_SOURCE 200809L /* regex.h */

#include <check.h>
#include <errno.h>
#include <float.h>
#include <math.h>
#include <regex.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "input/numparse.h"
#include "check_common.h"

/* ------------------------------------------------------------------ */
/* Deterministic randomness                                            */

typedef struct {
    uint64_t state;
} rng;

static uint64_t rng_next(rng *r) /* splitmix64 */
{
    uint64_t z = (r->state += UINT64_C(0x9E3779B97F4A7C15));
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    return z ^ (z >> 31);
}

static uint64_t rng_below(rng *r, uint64_t n)
{
    return rng_next(r) % n;
}

static long rng_between(rng *r, long lo, long hi)
{
    return lo + (long)rng_below(r, (uint64_t)(hi - lo + 1));
}

static long iterations(long full)
{
    const char *quick = getenv("MR_TEST_QUICK");
    if (quick && strcmp(quick, "1") == 0)
        return full / 20 > 100 ? full / 20 : 100;
    return full;
}

/* ------------------------------------------------------------------ */
/* Field builder                                                       */

#define FIELD_MAX 2048

typedef struct {
    char s[FIELD_MAX];
    size_t len;
} field;

static void put_char(field *f, char c)
{
    if (f->len + 1 < FIELD_MAX)
        f->s[f->len++] = c;
    f->s[f->len] = '\0';
}

static void put_str(field *f, const char *z)
{
    while (*z)
        put_char(f, *z++);
}

static void put_digits(field *f, rng *r, long n, int first_nonzero)
{
    for (long i = 0; i < n; i++) {
        int lo = (i == 0 && first_nonzero) ? 1 : 0;
        put_char(f, (char)('0' + rng_between(r, lo, 9)));
    }
}

static void put_sign(field *f, rng *r)
{
    uint64_t k = rng_below(r, 8);
    if (k < 3)
        put_char(f, '-');
    else if (k == 3)
        put_char(f, '+');
}

static void put_exponent(field *f, rng *r, long lo, long hi)
{
    char tmp[32];
    long e = rng_between(r, lo, hi);
    const char *marker = rng_below(r, 2) ? "e" : "E";
    const char *plus = (e >= 0 && rng_below(r, 3) == 0) ? "+" : "";
    snprintf(tmp, sizeof tmp, "%s%s%ld", marker, plus, e);
    put_str(f, tmp);
}

/* n mantissa digits with a '.' at a random place (or none). */
static void put_mantissa(field *f, rng *r, long n, int first_nonzero)
{
    long dot = rng_between(r, -1, n); /* -1: no dot */
    for (long i = 0; i < n; i++) {
        if (i == dot)
            put_char(f, '.');
        put_digits(f, r, 1, first_nonzero && i == 0);
    }
    if (dot == n)
        put_char(f, '.');
}

static void put_blanks(field *f, rng *r)
{
    long n = rng_between(r, 1, 3);
    for (long i = 0; i < n; i++)
        put_char(f, rng_below(r, 2) ? ' ' : '\t');
}

/* ------------------------------------------------------------------ */
/* Comparison against glibc strtod                                     */

typedef struct {
    long checked;
    long mismatches;
    char first_bad[256];
} tally;

/* What glibc strtod says about a field that is valid by our grammar:
 * 1 and *v when finite, 0 on overflow (the contract rejects those),
 * -1 if strtod did not read the whole field (a bug in a generator). */
static int strtod_expectation(const char *z, double *v)
{
    char *end;
    errno = 0;
    double x = strtod(z, &end); /* oracle: glibc strtod, C locale */
    while (*end == ' ' || *end == '\t')
        end++;
    if (end == z || *end != '\0')
        return -1;
    if (isinf(x))
        return 0;
    *v = x;
    return 1;
}

static void record_bad(tally *t, const char *why, const char *z)
{
    if (t->mismatches++ == 0)
        snprintf(t->first_bad, sizeof t->first_bad, "%s: \"%.200s\"", why, z);
}

static void compare_field(mr__numparser *np, const field *f, tally *t)
{
    /* Trailing garbage beyond len proves the parser honours the length. */
    char padded[FIELD_MAX + 8];
    memcpy(padded, f->s, f->len);
    memcpy(padded + f->len, "7e7x", 4);

    double want = 0.0, got = -12345.0;
    int expected = strtod_expectation(f->s, &want);
    int accepted = mr__parse_double(np, padded, f->len, &got);
    t->checked++;
    if (expected < 0)
        record_bad(t, "generator made a field strtod rejects", f->s);
    else if (accepted != expected)
        record_bad(t, accepted ? "accepted an overflow" : "rejected", f->s);
    else if (accepted && memcmp(&want, &got, sizeof want) != 0)
        record_bad(t, "bits differ from strtod", f->s);
}

static void finish(const tally *t)
{
    ck_assert_msg(t->mismatches == 0, "%ld of %ld fields wrong; first %s",
                  t->mismatches, t->checked, t->first_bad);
}

typedef void (*generator)(field *f, rng *r);

static void run_generator(generator gen, uint64_t seed, long full_count)
{
    mr__numparser *np = mr__numparser_new();
    ck_assert_ptr_nonnull(np);
    rng r = {seed};
    tally t = {0, 0, ""};
    long n = iterations(full_count);
    for (long i = 0; i < n; i++) {
        field f = {"", 0};
        int blanks = rng_below(&r, 16) == 0;
        if (blanks)
            put_blanks(&f, &r);
        gen(&f, &r);
        if (blanks)
            put_blanks(&f, &r);
        compare_field(np, &f, &t);
    }
    mr__numparser_free(np);
    finish(&t);
}

/* ------------------------------------------------------------------ */
/* Generators                                                          */

static void gen_short_integer(field *f, rng *r)
{
    put_sign(f, r);
    put_digits(f, r, rng_between(r, 1, 6), 0);
}

static void gen_decimal(field *f, rng *r)
{
    put_sign(f, r);
    put_mantissa(f, r, rng_between(r, 1, 19), 0);
    if (rng_below(r, 3) == 0)
        put_exponent(f, r, -30, 30);
}

static void gen_long_mantissa(field *f, rng *r)
{
    put_sign(f, r);
    put_mantissa(f, r, rng_between(r, 20, 40), rng_below(r, 2));
    if (rng_below(r, 2))
        put_exponent(f, r, -350, 350);
}

static void gen_wide_exponent(field *f, rng *r)
{
    put_sign(f, r);
    put_mantissa(f, r, rng_between(r, 1, 19), 1);
    put_exponent(f, r, -350, 350);
}

static void gen_padded_zeros(field *f, rng *r)
{
    put_sign(f, r);
    for (long k = rng_between(r, 1, 30); k > 0; k--)
        put_char(f, '0');
    if (rng_below(r, 2)) {
        put_char(f, '.');
        for (long k = rng_between(r, 0, 30); k > 0; k--)
            put_char(f, '0');
    }
    put_digits(f, r, rng_between(r, 1, 19), 1);
    if (rng_below(r, 2) && !strchr(f->s, '.'))
        put_char(f, '.');
    for (long k = rng_between(r, 0, 30); k > 0; k--)
        put_char(f, '0');
    if (rng_below(r, 2))
        put_exponent(f, r, -340, 340);
}

static double random_finite_double(rng *r)
{
    for (;;) {
        uint64_t bits = rng_next(r);
        double x;
        memcpy(&x, &bits, sizeof x);
        if (isfinite(x))
            return x;
    }
}

/* Shortest round-trip and nearby precisions of arbitrary doubles: the
 * strings land on or next to representable values and rounding ties. */
static void put_printed(field *f, rng *r, double x)
{
    char tmp[128];
    switch (rng_below(r, 5)) {
    case 0: snprintf(tmp, sizeof tmp, "%.17g", x); break;
    case 1: snprintf(tmp, sizeof tmp, "%.16g", x); break;
    case 2: snprintf(tmp, sizeof tmp, "%.15g", x); break;
    case 3: snprintf(tmp, sizeof tmp, "%.*e", (int)rng_between(r, 0, 25), x); break;
    default: snprintf(tmp, sizeof tmp, "%.*g", (int)rng_between(r, 1, 30), x); break;
    }
    put_str(f, tmp);
}

static void gen_printed_double(field *f, rng *r)
{
    put_printed(f, r, random_finite_double(r));
}

static void gen_subnormal(field *f, rng *r)
{
    if (rng_below(r, 2)) {
        uint64_t bits = rng_next(r) & ((UINT64_C(1) << 52) - 1); /* exponent 0 */
        bits |= rng_next(r) & (UINT64_C(1) << 63);
        double x;
        memcpy(&x, &bits, sizeof x);
        put_printed(f, r, x);
    } else {
        put_sign(f, r);
        put_mantissa(f, r, rng_between(r, 1, 25), 1);
        put_exponent(f, r, -345, -300);
    }
}

/* The exact decimal expansion of a long double (glibc printf prints it
 * exactly) split into mantissa and exponent, trailing zeros removed. */
typedef struct {
    char mantissa[1200];
    char exponent[16];
} expansion;

static void exact_expansion(long double x, expansion *out)
{
    char tmp[1200];
    snprintf(tmp, sizeof tmp, "%.900Le", x);
    char *e = strchr(tmp, 'e');
    snprintf(out->exponent, sizeof out->exponent, "%s", e);
    char *last = e - 1;
    while (*last == '0')
        last--;
    if (*last == '.')
        last--;
    last[1] = '\0';
    snprintf(out->mantissa, sizeof out->mantissa, "%s", tmp);
}

/* A midpoint between neighbouring doubles, exactly, or nudged a little to
 * either side: the cases where a fast path is most likely to round wrong. */
static void put_near_midpoint(field *f, rng *r, long double mid)
{
    expansion x;
    exact_expansion(mid, &x);
    switch (rng_below(r, 4)) {
    case 0: /* the tie itself: ties go to even */
        put_str(f, x.mantissa);
        break;
    case 1: /* just above the tie, sometimes beyond 800 digits */
        put_str(f, x.mantissa);
        if (!strchr(x.mantissa, '.'))
            put_char(f, '.');
        for (long k = rng_between(r, 0, 400); k > 0; k--)
            put_char(f, '0');
        put_char(f, '1');
        break;
    case 2: /* just below the tie: its expansion cut short */
        x.mantissa[rng_between(r, 17, 45)] = '\0';
        put_str(f, x.mantissa);
        break;
    default: { /* rounded to 17..40 digits: either side */
        char tmp[128];
        snprintf(tmp, sizeof tmp, "%.*Le", (int)rng_between(r, 16, 39), mid);
        put_str(f, tmp);
        return;
    }
    }
    put_str(f, x.exponent);
}

static void gen_near_halfway(field *f, rng *r)
{
    double x = fabs(random_finite_double(r));
    if (rng_below(r, 8) == 0) /* short mantissas: ties that fit 19 digits */
        x = (double)(rng_next(r) >> rng_between(r, 10, 40)) * ldexp(1.0, (int)rng_between(r, -60, 60));
    if (x == DBL_MAX)
        x = 1.0;
    double next = nextafter(x, INFINITY);
    long double mid = ((long double)x + (long double)next) / 2; /* exact in 64 bits */
    if (rng_below(r, 2))
        put_char(f, '-');
    put_near_midpoint(f, r, mid);
}

static void gen_dbl_max(field *f, rng *r)
{
    put_sign(f, r);
    switch (rng_below(r, 4)) {
    case 0: { /* DBL_MAX and its lower neighbours */
        double x = DBL_MAX;
        for (long k = rng_between(r, 0, 5); k > 0; k--)
            x = nextafter(x, 0.0);
        put_printed(f, r, x);
        break;
    }
    case 1: /* around the overflow threshold DBL_MAX + ulp/2 */
        put_near_midpoint(f, r, (long double)DBL_MAX + ldexpl(1.0L, 970));
        break;
    case 2: /* random digits after the leading digits of DBL_MAX */
        put_str(f, "1.79769313486231");
        put_digits(f, r, rng_between(r, 0, 25), 0);
        put_str(f, "e308");
        break;
    default: { /* the same as an integer mantissa with a scaled exponent */
        char tmp[16];
        long extra = rng_between(r, 0, 5);
        put_str(f, "179769313486231");
        put_digits(f, r, extra, 0);
        snprintf(tmp, sizeof tmp, "e%ld", 294 - extra);
        put_str(f, tmp);
        break;
    }
    }
}

/* ------------------------------------------------------------------ */
/* Random tests (2.6 million fields in total when not quick)           */

START_TEST(test_short_integers) { run_generator(gen_short_integer, 1, 200000); }
END_TEST

START_TEST(test_decimals_1_to_19_digits) { run_generator(gen_decimal, 2, 500000); }
END_TEST

START_TEST(test_mantissas_20_to_40_digits) { run_generator(gen_long_mantissa, 3, 300000); }
END_TEST

START_TEST(test_exponents_minus_350_to_350) { run_generator(gen_wide_exponent, 4, 400000); }
END_TEST

START_TEST(test_leading_and_trailing_zeros) { run_generator(gen_padded_zeros, 5, 300000); }
END_TEST

START_TEST(test_printed_doubles) { run_generator(gen_printed_double, 6, 500000); }
END_TEST

START_TEST(test_halfway_cases) { run_generator(gen_near_halfway, 7, 150000); }
END_TEST

START_TEST(test_subnormals) { run_generator(gen_subnormal, 8, 200000); }
END_TEST

START_TEST(test_dbl_max_neighbourhood) { run_generator(gen_dbl_max, 9, 50000); }
END_TEST

/* Random byte soup from the characters numbers are made of, plus a few
 * that are not.  Which fields are accepted is decided by POSIX regexec on
 * the grammar of numparse.h, the value (and overflow) by glibc strtod. */
START_TEST(test_random_syntax)
{
    static const char grammar[] =
        "^[ \t]*[+-]?([0-9]+(\\.[0-9]*)?|\\.[0-9]+)([eE][+-]?[0-9]+)?[ \t]*$";
    static const char alphabet[] = "0123456789012345..eE+-+- \t\t\nxXinfa,:/";
    regex_t re;
    ck_assert_int_eq(regcomp(&re, grammar, REG_EXTENDED | REG_NOSUB), 0);
    mr__numparser *np = mr__numparser_new();
    rng r = {10};
    long bad = 0, accepted_count = 0, n = iterations(300000);
    char first_bad[128] = "";
    for (long i = 0; i < n; i++) {
        char z[24];
        size_t len = (size_t)rng_between(&r, 0, 12);
        for (size_t k = 0; k < len; k++)
            z[k] = alphabet[rng_below(&r, sizeof alphabet - 1)];
        z[len] = '\0';
        double want = 0.0, got = 0.0;
        int expected = regexec(&re, z, 0, NULL, 0) == 0 && isfinite(want = strtod(z, NULL));
        int accepted = mr__parse_double(np, z, len, &got);
        accepted_count += accepted;
        if (accepted != expected || (accepted && memcmp(&got, &want, sizeof got) != 0))
            if (bad++ == 0)
                snprintf(first_bad, sizeof first_bad, "\"%s\" gave %d, want %d", z, accepted,
                         expected);
    }
    mr__numparser_free(np);
    regfree(&re);
    ck_assert_msg(bad == 0, "%ld of %ld wrong; first %s", bad, n, first_bad);
    ck_assert_msg(accepted_count > n / 50, "too few valid fields (%ld) to mean much",
                  accepted_count);
}
END_TEST

/* Every power of ten the power table covers, and beyond it, with the
 * mantissas at the edges of the exact and 19-digit ranges. */
START_TEST(test_every_exponent_sweep)
{
    static const char *const mantissas[] = {
        "1", "9", "12345", "9007199254740992", "9007199254740993",
        "18446744073709551615", "9999999999999999999", "4.9406564584124654",
        "2.2250738585072011", "1.7976931348623157",
    };
    mr__numparser *np = mr__numparser_new();
    tally t = {0, 0, ""};
    for (size_t m = 0; m < sizeof mantissas / sizeof *mantissas; m++)
        for (int e = -360; e <= 360; e++) {
            field f = {"", 0};
            char tmp[32];
            put_str(&f, mantissas[m]);
            snprintf(tmp, sizeof tmp, "e%d", e);
            put_str(&f, tmp);
            compare_field(np, &f, &t);
        }
    mr__numparser_free(np);
    finish(&t);
}
END_TEST

/* ------------------------------------------------------------------ */
/* Fixed cases                                                         */

/* Failure messages show at most this much of a field: Check cannot carry
 * a message of many kilobytes back from the forked test. */
static int shown(size_t len)
{
    return len < 80 ? (int)len : 80;
}

/* The parser sees a heap copy of exactly len bytes, so a sanitizer or
 * valgrind run catches any read past the field. */
static int parse_exact_copy(mr__numparser *np, const char *s, size_t len, double *out)
{
    char *copy = malloc(len ? len : 1);
    ck_assert_ptr_nonnull(copy);
    if (len)
        memcpy(copy, s, len);
    int ok = mr__parse_double(np, len ? copy : s, len, out);
    free(copy);
    return ok;
}

static void expect_value(mr__numparser *np, const char *s, size_t len, double want)
{
    double got = 0.5;
    ck_assert_msg(parse_exact_copy(np, s, len, &got) == 1, "rejected \"%.*s\"", shown(len), s);
    ck_assert_msg(memcmp(&got, &want, sizeof got) == 0, "\"%.*s\" gave %.17g, want %.17g",
                  shown(len), s, got, want);
}

static void expect_reject(mr__numparser *np, const char *s, size_t len)
{
    double got = 0.5;
    ck_assert_msg(parse_exact_copy(np, s, len, &got) == 0, "accepted \"%.*s\"", shown(len), s);
    ck_assert_msg(got == 0.5, "output touched on rejecting \"%.*s\"", shown(len), s);
}

START_TEST(test_zeros_and_signs)
{
    mr__numparser *np = mr__numparser_new();
    /* Expected bits: glibc strtod of the same strings. */
    static const char *const cases[] = {
        "-0", "0.0e0", "+0", "-0.0", "0", "000", ".0", "0.", "-.0e5",
        "0e-999999", "-0e+99999999999999999999999999", "0.000000000000000000000000000000",
        "+1", "-1", "1.", ".5", "-.5e1", "5E-1", "1e+0", "1e-0",
    };
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++)
        expect_value(np, cases[i], strlen(cases[i]), strtod(cases[i], NULL));
    double neg_zero = 0.5;
    ck_assert(mr__parse_double(np, "-0", 2, &neg_zero) == 1);
    ck_assert(neg_zero == 0.0 && signbit(neg_zero)); /* IEEE 754: -0 keeps its sign */
    mr__numparser_free(np);
}
END_TEST

START_TEST(test_rejected_fields)
{
    /* Rejections required by the grammar in numparse.h; strtod accepts
     * several of these (hex, inf, nan, prefixes), which is why they are listed. */
    static const char *const cases[] = {
        "", " ", "\t", " \t ", "abc", "1.2.3", "1e", "1e+", "1e-", "--1", "+-1",
        "-+1", "0x10", "0X1p3", "inf", "-inf", "nan", "NAN", "Infinity", "1,5",
        "1 2", ".", "-", "+", "-.", "e5", ".e5", "1e5.0", "1e5e5", "1.5x",
        "x1.5", "1e400", "-1e400", "1.7976931348623159e308", "1e99999999999999999999",
        "1\n", "\n1", "\r1", "1\r", "1_000", "\xd9\xa1" /* ARABIC-INDIC DIGIT ONE */, "1e 5", "- 1",
        /* '/' and ':' flank the ASCII digits; runs of 8+ bytes reach the
         * block-of-eight digit reader */
        "1234567:", "1234567/", ":2345678", "/2345678", "12345678:2345678",
        "0.12345678/2345678", "1234567\x80" "12345678", "12345678\xff" "2345678",
    };
    mr__numparser *np = mr__numparser_new();
    for (size_t i = 0; i < sizeof cases / sizeof *cases; i++)
        expect_reject(np, cases[i], strlen(cases[i]));
    expect_reject(np, "1\0", 2);  /* an embedded NUL is not a blank */
    expect_reject(np, "\0" "1", 2);
    expect_reject(np, NULL, 0);
    mr__numparser_free(np);
}
END_TEST

/* Expected values in these two tests are exact binary fractions, so the
 * correctly rounded double is the decimal itself (analytic). */
START_TEST(test_blanks_around_value)
{
    mr__numparser *np = mr__numparser_new();
    expect_value(np, " 12 ", 4, 12.0);
    expect_value(np, "\t3.5", 4, 3.5);
    expect_value(np, "  -0.25\t\t", 9, -0.25);
    expect_value(np, "\t 1e3 \t", 7, 1000.0);
    mr__numparser_free(np);
}
END_TEST

START_TEST(test_length_bounds_the_field)
{
    mr__numparser *np = mr__numparser_new();
    expect_value(np, "123456", 3, 123.0);
    expect_value(np, "2.5e10", 3, 2.5);
    expect_value(np, "1e+5", 1, 1.0);
    expect_reject(np, "1e+5", 2); /* "1e" */
    expect_reject(np, "1e+5", 3); /* "1e+" */
    expect_value(np, "-7,8", 2, -7.0);
    mr__numparser_free(np);
}
END_TEST

/* Fields far longer than any stack buffer: the answers are glibc strtod's,
 * which reads every digit. */
START_TEST(test_very_long_fields)
{
    enum { N = 20000 };
    char *s = malloc(N + 64);
    ck_assert_ptr_nonnull(s);
    mr__numparser *np = mr__numparser_new();

    /* 2^53 + 1 is a tie between 2^53 and 2^53 + 2 (goes to even, 2^53);
     * any nonzero digit far down the tail must break the tie upwards. */
    strcpy(s, "9007199254740993.");
    size_t n = strlen(s);
    memset(s + n, '0', N);
    s[n + N] = '\0';
    expect_value(np, s, strlen(s), strtod(s, NULL));
    ck_assert(strtod(s, NULL) == 9007199254740992.0); /* analytic: tie to even */
    s[n + N - 1] = '1';
    expect_value(np, s, strlen(s), strtod(s, NULL));
    ck_assert(strtod(s, NULL) == 9007199254740994.0); /* analytic: above the tie */

    /* Long runs of leading zeros balanced by the exponent. */
    strcpy(s, "0.");
    memset(s + 2, '0', N);
    strcpy(s + 2 + N, "15e20001");
    expect_value(np, s, strlen(s), strtod(s, NULL));
    ck_assert(strtod(s, NULL) == 1.5); /* analytic: 15 * 10^(20001 - 20002) */

    /* A long integer part balanced by a negative exponent. */
    s[0] = '3';
    memset(s + 1, '7', N);
    strcpy(s + 1 + N, "e-20000");
    expect_value(np, s, strlen(s), strtod(s, NULL));

    /* Huge mantissa that overflows; and one that underflows to zero. */
    memset(s, '9', N);
    s[N] = '\0';
    expect_reject(np, s, N);
    strcpy(s + N, "e-30000");
    expect_value(np, s, strlen(s), strtod(s, NULL));

    mr__numparser_free(np);
    free(s);
}
END_TEST

START_TEST(test_free_null)
{
    mr__numparser_free(NULL);
}
END_TEST

static Suite *numparse_suite(void)
{
    Suite *s = suite_create("numparse");

    TCase *fixed = tcase_create("fixed");
    tcase_add_test(fixed, test_zeros_and_signs);
    tcase_add_test(fixed, test_rejected_fields);
    tcase_add_test(fixed, test_blanks_around_value);
    tcase_add_test(fixed, test_length_bounds_the_field);
    tcase_add_test(fixed, test_very_long_fields);
    tcase_add_test(fixed, test_free_null);
    tcase_set_timeout(fixed, 60);
    suite_add_tcase(s, fixed);

    TCase *random = tcase_create("against_strtod");
    tcase_add_test(random, test_random_syntax);
    tcase_add_test(random, test_every_exponent_sweep);
    tcase_add_test(random, test_short_integers);
    tcase_add_test(random, test_decimals_1_to_19_digits);
    tcase_add_test(random, test_mantissas_20_to_40_digits);
    tcase_add_test(random, test_exponents_minus_350_to_350);
    tcase_add_test(random, test_leading_and_trailing_zeros);
    tcase_add_test(random, test_printed_doubles);
    tcase_add_test(random, test_halfway_cases);
    tcase_add_test(random, test_subnormals);
    tcase_add_test(random, test_dbl_max_neighbourhood);
    tcase_set_timeout(random, 300); /* sanitizer and valgrind builds are slow */
    suite_add_tcase(s, random);
    return s;
}

int main(void) { return mr_check_run(numparse_suite(), 0); }
