/* check_exact_interval.c - tests of src/output/exact_interval.c.
 *
 * The chi-square quantile settles the bisection's far midpoints without
 * reading the tail (a checked window around the root): its result must be
 * the very bits of the same bisection reading the tail at every midpoint
 * (written out here as the reference).  Garwood's bounds against
 * scipy.stats 1.10.1 (Debian python3-scipy) chi2.ppf(0.025, 2 o) / 2 and
 * chi2.ppf(0.975, 2 o + 2) / 2, and chi2.ppf(0.95, 2) / 2 for o = 0,
 * generated once with /usr/bin/python3 and pasted with %.17g.
 */
#include <check.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "check_common.h"
#include "common/probability.h"
#include "output/exact_interval.h"

/* The bisection reading every midpoint. */
static double quantile_every_midpoint(double p, double df)
{
    double lo = 0, hi = df + 10, q = 1 - p;
    int i;
    while (mr__chisq_sf(hi, df) > q && hi < 1e300) hi *= 2;
    for (i = 0; i < 2000; i++) {
        double mid = lo + (hi - lo) / 2;
        if (mid <= lo || mid >= hi) break;
        if (mr__chisq_sf(mid, df) > q) lo = mid;
        else hi = mid;
    }
    return lo + (hi - lo) / 2;
}


static void same_bits_at(double df)
{
    static const double ps[] = {0.025, 0.975, 0.05, 0.95, 0.005, 0.995, 0.5, 1e-6, 1 - 1e-6};
    size_t k;
    for (k = 0; k < sizeof ps / sizeof ps[0]; k++) {
        double got = mr__chisq_quantile(ps[k], df), want = quantile_every_midpoint(ps[k], df);
        ck_assert_msg(same_bits(got, want), "p %g df %.17g: %.17g, reading every midpoint %.17g", ps[k], df, got,
                      want);
    }
}

START_TEST(chisq_quantile_same_bits)
{
    static const double small[] = {0.013, 0.1, 0.37, 0.77};
    double o;
    size_t k;
    for (k = 0; k < sizeof small / sizeof small[0]; k++) same_bits_at(2 * small[k]); /* weighted totals */
    /* whole counts (2 o and 2 o + 2 df) and halves, then larger totals */
    for (o = 0.5; o < 2600; o = o < 120 ? o + 0.5 : o * 1.09 + 0.37) same_bits_at(2 * o);
}
END_TEST

START_TEST(garwood_scipy)
{
    static const double rows[][3] = {
        {1, 0.025317807984289876, 5.571643390938898},    {7, 2.8143630515198654, 14.422675361702376},
        {42, 30.269905732477699, 56.771798778490648},    {150, 126.95616130124488, 176.01716609707449},
        {257, 226.53699297392549, 290.41787424745661},   {1000, 938.97301840769524, 1063.9521360163019},
    };
    double lo, hi;
    size_t i;
    for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        mr__garwood_interval(rows[i][0], 0.95, &lo, &hi);
        ck_assert_msg(fabs(lo - rows[i][1]) <= 1e-12 * rows[i][1], "o %g low %.17g", rows[i][0], lo);
        ck_assert_msg(fabs(hi - rows[i][2]) <= 1e-12 * rows[i][2], "o %g high %.17g", rows[i][0], hi);
    }
    mr__garwood_interval(0, 0.95, &lo, &hi);
    ck_assert(lo == 0);
    ck_assert(fabs(hi - 2.9957322735539895) <= 1e-12 * 2.9957322735539895);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("exact_interval");
    TCase *tc = tcase_create("chisq");
    tcase_set_timeout(tc, 120);
    tcase_add_test(tc, chisq_quantile_same_bits);
    tcase_add_test(tc, garwood_scipy);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
