/* check_common.h - what every Check suite here shares: running a suite to
 * an exit status, a seeded random stream, bitwise equality of doubles. */
#ifndef MR_CHECK_COMMON_H
#define MR_CHECK_COMMON_H

#include <check.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "millrace.h"

/* Runs the suite; nofork keeps every test in this process (for the leak
 * checker).  EXIT_SUCCESS when no test failed. */
static inline int mr_check_run(Suite *s, int nofork)
{
    SRunner *sr = srunner_create(s);
    int failed;
    if (nofork) srunner_set_fork_status(sr, CK_NOFORK);
    srunner_run_all(sr, CK_NORMAL);
    failed = srunner_ntests_failed(sr);
    srunner_free(sr);
    return failed == 0 ? EXIT_SUCCESS : EXIT_FAILURE;
}

/* splitmix64: a fixed seed, so that a failure reproduces. */
static inline uint64_t next_random(uint64_t *state)
{
    uint64_t z = (*state += UINT64_C(0x9E3779B97F4A7C15));
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    return z ^ (z >> 31);
}

static inline int same_bits(double a, double b) { return memcmp(&a, &b, sizeof a) == 0; }

/* Two fits of the same rows, to the bit: coefficients, variances, the fit
 * statistics and the pass count (a resumed or a shared fit against one
 * that ran through in one process). */
static inline void mr_check_same_fit(const mr_fit *a, const mr_fit *b)
{
    size_t j;
    ck_assert_uint_eq(mr_fit_ncoef(a), mr_fit_ncoef(b));
    for (j = 0; j < mr_fit_ncoef(a); j++) {
        ck_assert(same_bits(mr_fit_coef(a, j), mr_fit_coef(b, j)));
        ck_assert(same_bits(mr_fit_covariance(a, j, j), mr_fit_covariance(b, j, j)));
    }
    ck_assert(same_bits(mr_fit_stat(a, MR_STAT_DEVIANCE), mr_fit_stat(b, MR_STAT_DEVIANCE)));
    ck_assert(same_bits(mr_fit_stat(a, MR_STAT_NULL_DEVIANCE), mr_fit_stat(b, MR_STAT_NULL_DEVIANCE)));
    ck_assert(same_bits(mr_fit_stat(a, MR_STAT_PEARSON_CHI2), mr_fit_stat(b, MR_STAT_PEARSON_CHI2)));
    ck_assert(same_bits(mr_fit_stat(a, MR_STAT_PASSES), mr_fit_stat(b, MR_STAT_PASSES)));
}

#endif
