/* check_dtoa.c - tests of src/common/dtoa.c, the shortest decimal of a double.
 *
 * Oracles: glibc strtod, correctly rounding, reads every text back to the
 * same bits (round trip); CPython's repr (tests/dtoa_repr.py, run with
 * /usr/bin/python3) gives the expected digits: the shortest that round
 * trip, the closest to the exact value among them.  Random doubles come from
 * the fixed-seed splitmix64 of check_common.h, so a failure reproduces.  A
 * Check test process never calls setlocale: strtod reads '.' as the point.
 */
#define _POSIX_C_SOURCE 200809L /* popen */

#include <check.h>
#include <float.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/dtoa.h"
#include "check_common.h"

static double of_bits(uint64_t b)
{
    double v;
    memcpy(&v, &b, sizeof v);
    return v;
}

static uint64_t bits_of(double v)
{
    uint64_t b;
    memcpy(&b, &v, sizeof b);
    return b;
}

/* The text reads back to v's bits, its length as returned, its NUL. */
static void round_trip(double v)
{
    char t[MR__DTOA_SIZE];
    size_t n = mr__dtoa(v, t);
    double back = strtod(t, NULL);
    ck_assert_msg(n == strlen(t) && n < MR__DTOA_SIZE, "length of %s", t);
    ck_assert_msg(same_bits(back, v), "%016llx written %s read %016llx", (unsigned long long)bits_of(v), t,
                  (unsigned long long)bits_of(back));
}

static void check_text(double v, const char *want)
{
    char t[MR__DTOA_SIZE];
    mr__dtoa(v, t);
    ck_assert_msg(strcmp(t, want) == 0, "%016llx: %s, not %s", (unsigned long long)bits_of(v), t, want);
}

/* Any 64 bits (NaN and infinities skipped): 10^6 a run. */
START_TEST(random_bits_round_trip)
{
    uint64_t state = 15;
    long i, done = 0;
    for (i = 0; done < 1000000; i++) {
        double v = of_bits(next_random(&state));
        if (!isfinite(v)) continue;
        round_trip(v);
        done++;
    }
}
END_TEST

/* Edges: the smallest and largest doubles, the normal/subnormal border,
 * every power of two and of ten with its neighbours, integers to 2^53. */
START_TEST(edges_round_trip)
{
    static const double fixed[] = {DBL_MIN, DBL_MAX, DBL_TRUE_MIN, 5e-324, 1e-323, 0.1, 1.0 / 3, 2.0 / 3,
                                   9007199254740992.0, 9007199254740993.0, 4503599627370497.0, 1e23, 5e22,
                                   0.30000000000000004, 2.2250738585072009e-308, 1.7976931348623155e308};
    uint64_t state = 16;
    size_t i;
    int e, d;
    for (i = 0; i < sizeof fixed / sizeof fixed[0]; i++) round_trip(fixed[i]), round_trip(-fixed[i]);
    for (e = -1074; e < 1024; e++) {
        uint64_t b = bits_of(ldexp(1, e));
        for (d = -2; d <= 2; d++)
            if (b + (uint64_t)d > 0 && isfinite(of_bits(b + (uint64_t)d))) round_trip(of_bits(b + (uint64_t)d));
    }
    for (e = -323; e <= 308; e++) {
        char p[16];
        uint64_t b;
        snprintf(p, sizeof p, "1e%d", e);
        b = bits_of(strtod(p, NULL));
        for (d = -2; d <= 2; d++) round_trip(of_bits(b + (uint64_t)d));
    }
    for (i = 1; i < (1u << 20); i++) round_trip((double)i);
    for (i = 0; i < 200000; i++) round_trip((double)(next_random(&state) >> (11 + next_random(&state) % 53)));
    for (i = 0; i < 200000; i++) round_trip(of_bits(next_random(&state) >> (12 + next_random(&state) % 52)));
}
END_TEST

/* The layout: dtoa.h's rule, written out by hand. */
START_TEST(layout)
{
    check_text(0.0, "0");
    check_text(-0.0, "-0");
    check_text(1.0, "1");
    check_text(-2.5, "-2.5");
    check_text(0.1, "0.1");
    check_text(1.0 / 3, "0.3333333333333333");
    check_text(100.0, "100");
    check_text(1234.5, "1234.5");
    check_text(0.0001, "0.0001");
    check_text(0.00012, "0.00012");
    check_text(1e-5, "1e-05");
    check_text(1.25e-5, "1.25e-05");
    check_text(1e16, "10000000000000000");
    check_text(12345678901234567.0, "12345678901234568");
    check_text(1e17, "1e+17");
    check_text(1e23, "1e+23");
    check_text(5e-324, "5e-324");
    check_text(DBL_MIN, "2.2250738585072014e-308");
    check_text(-DBL_MAX, "-1.7976931348623157e+308");
    check_text(9007199254740992.0, "9007199254740992");
    check_text(0.30000000000000004, "0.30000000000000004"); /* 17 digits needed */
}
END_TEST

/* Never written by the callers, but defined. */
START_TEST(not_finite)
{
    check_text(INFINITY, "inf");
    check_text(-INFINITY, "-inf");
    check_text(NAN, "nan");
    check_text(-NAN, "nan");
    check_text(of_bits(UINT64_C(0x7ff0000000000001)), "nan");
}
END_TEST

/* The digits CPython's repr gives (tests/dtoa_repr.py), over 8000 doubles
 * of every kind. */
START_TEST(python_repr)
{
    FILE *p = popen("/usr/bin/python3 tests/dtoa_repr.py 8000", "r");
    char line[128], want[64];
    unsigned long long b;
    long n = 0;
    ck_assert_msg(p != NULL, "cannot run /usr/bin/python3 tests/dtoa_repr.py");
    while (fgets(line, sizeof line, p)) {
        ck_assert_msg(sscanf(line, "%llx %63s", &b, want) == 2, "bad line %s", line);
        check_text(of_bits((uint64_t)b), want);
        n++;
    }
    ck_assert_int_eq(pclose(p), 0);
    ck_assert_msg(n > 7000, "only %ld cases from tests/dtoa_repr.py", n);
}
END_TEST

static Suite *dtoa_suite(void)
{
    Suite *s = suite_create("dtoa");
    TCase *tc = tcase_create("core");
    tcase_set_timeout(tc, 300);
    tcase_add_test(tc, random_bits_round_trip);
    tcase_add_test(tc, edges_round_trip);
    tcase_add_test(tc, layout);
    tcase_add_test(tc, not_finite);
    tcase_add_test(tc, python_repr);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(dtoa_suite(), 0); }
