/* check_calibration.c - tests of src/accum/calibration.c: the bins of the
 * fitted mean and the ten groups.
 *
 * Sources of truth: order (a larger mean never falls in an earlier bin:
 * checked on sorted random doubles of both signs, wide magnitudes, and on
 * means in (0, 1)); the grid's stated width (two means in one bin differ
 * by less than 2^-4 relative); plain sums and counts computed here by
 * loops (exact: integer-valued doubles); the grouping rule of
 * calibration.h, replayed here on the bins' row counts. */
#include <check.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "accum/calibration.h"
#include "check_common.h"

enum { N = 20000 };

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

START_TEST(bins_follow_the_order_of_the_means)
{
    static double mu[N];
    uint64_t state = 17;
    size_t i;
    int unit;
    for (unit = 0; unit <= 1; unit++) {
        for (i = 0; i < N; i++) {
            double r = (double)(next_random(&state) >> 11) * 0x1p-53;
            mu[i] = unit ? r : ldexp(r + 0.5, (int)(next_random(&state) % 200) - 100) * (i % 3 ? 1 : -1);
            if (unit && mu[i] == 0) mu[i] = 0.5;
        }
        qsort(mu, N, sizeof *mu, by_value);
        for (i = 1; i < N; i++) {
            uint32_t a = mr__calib_bin(mu[i - 1], unit), b = mr__calib_bin(mu[i], unit);
            ck_assert_uint_le(a, b);
            ck_assert_uint_lt(b, MR__CALIB_BINS);
            /* inside the grid's range, one bin spans less than 2^-4 relative */
            if (a == b && !unit && fabs(mu[i]) > 0x1p-63 && fabs(mu[i]) < 0x1p63)
                ck_assert(fabs(mu[i] - mu[i - 1]) <= 0x1p-4 * fabs(mu[i]));
        }
    }
    ck_assert_uint_eq(mr__calib_bin(0.0, 0), MR__CALIB_HALF);
    ck_assert_uint_lt(mr__calib_bin(0.49, 1), mr__calib_bin(0.51, 1));
}
END_TEST

/* Blocks added into a total: the same sums as the rows at once, and the
 * groups as the rule says. */
START_TEST(groups_cut_at_the_tenths)
{
    static double y[N], mu[N], prior[N];
    mr__calib whole, block, sum;
    mr__calib_group g[MR__CALIB_GROUPS];
    mr__error err;
    uint64_t state = 5, rows = 0;
    double obs = 0, expd = 0;
    size_t i, n, k;
    ck_assert(mr__calib_init(&whole, &err) == MR_OK);
    ck_assert(mr__calib_init(&block, &err) == MR_OK);
    ck_assert(mr__calib_init(&sum, &err) == MR_OK);
    for (i = 0; i < N; i++) {
        mu[i] = (double)(1 + next_random(&state) % 300);
        y[i] = (double)(next_random(&state) % 400);
        prior[i] = (double)(next_random(&state) % 3); /* a third of weight 0: left out */
        if (prior[i] > 0) rows++, obs += prior[i] * y[i], expd += prior[i] * mu[i];
    }
    mr__calib_rows(&whole, y, mu, NULL, prior, NULL, NULL, N, 0);
    for (i = 0; i < N; i += 1000) {
        mr__calib_zero(&block);
        mr__calib_rows(&block, y + i, mu + i, NULL, prior + i, NULL, NULL, 1000, 0);
        mr__calib_add(&sum, &block);
    }
    n = mr__calib_groups(&whole, g);
    ck_assert_uint_ge(n, 2);
    ck_assert_uint_le(n, MR__CALIB_GROUPS);
    {
        uint64_t r = 0, seen = 0;
        double o = 0, e = 0;
        for (k = 0; k < n; k++) {
            r += g[k].rows, o += g[k].observed, e += g[k].expected;
            if (k) ck_assert(g[k - 1].mean_high < g[k].mean_low);
            seen += g[k].rows;
            /* each group but the last ends at or past the next tenth */
            if (k + 1 < n) ck_assert_uint_ge(seen * MR__CALIB_GROUPS, (k + 1) * rows);
        }
        ck_assert_uint_eq(r, rows);
        ck_assert(o == obs && e == expd); /* integers below 2^53: exact in any order */
    }
    {
        mr__calib_group h[MR__CALIB_GROUPS];
        ck_assert_uint_eq(mr__calib_groups(&sum, h), n);
        ck_assert(memcmp(g, h, sizeof g) == 0);
    }
    mr__calib_release(&whole);
    mr__calib_release(&block);
    mr__calib_release(&sum);
}
END_TEST

START_TEST(few_means_give_few_groups)
{
    double y[6] = {1, 0, 2, 3, 0, 1}, mu[6] = {0.5, 0.5, 2, 2, 2, 0.5};
    mr__calib c;
    mr__calib_group g[MR__CALIB_GROUPS];
    mr__error err;
    ck_assert(mr__calib_init(&c, &err) == MR_OK);
    ck_assert_uint_eq(mr__calib_groups(&c, g), 0);
    mr__calib_rows(&c, y, mu, NULL, NULL, NULL, NULL, 6, 0);
    ck_assert_uint_eq(mr__calib_groups(&c, g), 2);
    ck_assert_uint_eq(g[0].rows, 3);
    ck_assert(g[0].observed == 2 && g[0].expected == 1.5 && g[0].mean_low == 0.5 && g[0].mean_high == 0.5);
    ck_assert(g[1].observed == 5 && g[1].expected == 6);
    mr__calib_release(&c);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("calibration");
    TCase *tc = tcase_create("calibration");
    tcase_add_test(tc, bins_follow_the_order_of_the_means);
    tcase_add_test(tc, groups_cut_at_the_tenths);
    tcase_add_test(tc, few_means_give_few_groups);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
