/* check_crossprod.c - tests for src/accum/crossprod.c, the dense cross
 * products of a block.
 *
 * Oracles:
 *  - exact arithmetic: with small integer entries every partial sum is an
 *    integer below 2^53, so any order of addition gives the true sum, which
 *    is computed here in 64-bit integers;
 *  - the order crossprod.h documents (four lanes by row mod 4, then
 *    (l0 + l1) + (l2 + l3)), written as a plain loop: the kernels must match
 *    it bit for bit on random doubles, for every column count, for row
 *    counts that are and are not multiples of 4 or of a tile, and with a
 *    leading dimension larger than the row count.
 * The Makefile builds this file twice: against the library (the AVX2 path
 * where the CPU has it) and with -DMR_CROSSPROD_PORTABLE (the baseline
 * path), so both paths are held to the same bits. */
#include <check.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "accum/crossprod.h"
#include "check_common.h"

#define MAXN 16389

static double *doubles(size_t n)
{
    double *p = aligned_alloc(64, (n * sizeof(double) + 63) / 64 * 64);
    ck_assert_ptr_nonnull(p);
    return p;
}

static double lane_order_dot(const double *x, const double *y, size_t n)
{
    double l[4] = {0, 0, 0, 0};
    size_t i;
    for (i = 0; i < n; i++) l[i % 4] = l[i % 4] + x[i] * y[i];
    return (l[0] + l[1]) + (l[2] + l[3]);
}

static double random_double(uint64_t *state)
{
    /* a spread of magnitudes and signs, so that the order shows in the bits */
    double u = (double)(next_random(state) >> 11) / 9007199254740992.0;
    int e = (int)(next_random(state) % 20) - 10;
    return (u - 0.5) * (double)(1 << 10) * (e >= 0 ? (double)(1 << e) : 1.0 / (double)(1 << -e));
}

START_TEST(test_integer_entries_give_exact_sums)
{
    const size_t n = 16384 + 3, m = 65, ld = n + 5;
    double *D = doubles(ld * m), *G = doubles(m * m), *lanes = doubles(MR__CROSSPROD_SCRATCH(m));
    size_t a, b, i;
    for (a = 0; a < m; a++)
        for (i = 0; i < n; i++) D[a * ld + i] = (double)((int)((i * 7 + a * 3) % 13) - 6);
    mr__crossprod_upper(D, ld, n, m, G, lanes);
    for (b = 0; b < m; b++)
        for (a = 0; a <= b; a++) {
            int64_t want = 0;
            for (i = 0; i < n; i++) want += (int64_t)D[a * ld + i] * (int64_t)D[b * ld + i];
            ck_assert_msg(G[b * m + a] == (double)want, "G(%zu,%zu) = %.17g, exact %lld", a, b, G[b * m + a],
                          (long long)want);
        }
    free(D), free(G), free(lanes);
}
END_TEST

START_TEST(test_lane_order_on_random_doubles)
{
    static const size_t rows[] = {0, 1, 3, 4, 5, 511, 512, 513, 1027, 16384, 16389};
    uint64_t state = 20261203;
    size_t ri, m, a, b, i;
    double *D = doubles((MAXN + 7) * MR__CROSSPROD_MAX_COLS), *G = doubles(MR__CROSSPROD_MAX_COLS * MR__CROSSPROD_MAX_COLS);
    double *lanes = doubles(MR__CROSSPROD_SCRATCH(MR__CROSSPROD_MAX_COLS));
    for (ri = 0; ri < sizeof rows / sizeof rows[0]; ri++)
        for (m = 1; m <= MR__CROSSPROD_MAX_COLS; m += (m < 10 ? 1 : 7)) {
            const size_t n = rows[ri], ld = n + (m % 3) * 4;
            for (i = 0; i < ld * m; i++) D[i] = random_double(&state);
            for (i = 0; i < m * m; i++) G[i] = -1.0; /* the lower triangle must stay as it was */
            mr__crossprod_upper(D, ld, n, m, G, lanes);
            for (b = 0; b < m; b++)
                for (a = 0; a < m; a++) {
                    double want = a <= b ? lane_order_dot(D + a * ld, D + b * ld, n) : -1.0;
                    ck_assert_msg(same_bits(G[b * m + a], want), "n %zu m %zu: G(%zu,%zu) = %.17g, expected %.17g", n,
                                  m, a, b, G[b * m + a], want);
                }
        }
    free(D), free(G), free(lanes);
}
END_TEST

START_TEST(test_matvec_adds_columns_in_turn)
{
    const size_t n = 1029, m = 9, ld = 1031;
    uint64_t state = 7;
    double *D = doubles(ld * m), *y = doubles(n), *want = doubles(n), b[9];
    size_t i, j;
    for (i = 0; i < ld * m; i++) D[i] = random_double(&state);
    for (j = 0; j < m; j++) b[j] = random_double(&state);
    for (i = 0; i < n; i++) y[i] = want[i] = random_double(&state);
    for (i = 0; i < n; i++)
        for (j = 0; j < m; j++) want[i] += D[j * ld + i] * b[j];
    mr__matvec_add(D, ld, n, m, b, y);
    for (i = 0; i < n; i++) ck_assert_msg(same_bits(y[i], want[i]), "row %zu: %.17g, expected %.17g", i, y[i], want[i]);
    free(D), free(y), free(want);
}
END_TEST

static Suite *crossprod_suite(void)
{
    Suite *s = suite_create(mr__crossprod_wide() ? "crossprod (AVX2 path)" : "crossprod (portable path)");
    TCase *tc = tcase_create("dense");
    tcase_add_test(tc, test_integer_entries_give_exact_sums);
    tcase_add_test(tc, test_lane_order_on_random_doubles);
    tcase_add_test(tc, test_matvec_adds_columns_in_turn);
    tcase_set_timeout(tc, 120);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(crossprod_suite(), 0); }
