/* check_alloc.c - every allocation failure ends in a clean error.
 *
 * Built against a library compiled with MR_ALLOC_FAILURE_TESTS (make
 * alloc-check, under ASan, whose leak checker runs when this process
 * exits).  For n = 0, 1, 2, ... the n-th allocation of a whole fit fails;
 * the fit must then return MR_ERR_NO_MEMORY (or succeed, where the failed
 * allocation only cost an optional speed-up such as the warm start), never
 * crash, never leak.  Source of truth: the API contract in millrace.h. */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

#include "common/alloc.h"
#include "millrace.h"
#include "check_common.h"

long mr__alloc_failures_left(void);

static const char *const falls_model[] = {"outcome admissions", "family poisson", "exposure person_years",
                                          "factor age_band ref=40-44", "factor sex", "numeric year",
                                          "interact age_band sex", NULL};
static char json_path[64];
/* a start (mr_fitter_set_start) with another reference for age_band:
 * its main effect moved, its interaction with sex at 0 */
static mr_fit *previous_fit;

static const char *const screening_model[] = {"outcome attended", "family binomial", "numeric age", "factor sex",
                                              "numeric bmi", NULL};

/* One fit with the n-th allocation failing; returns 1 once n is past the
 * last allocation the fit makes. */
static int fit_failing_at(long n, const char *path, const char *const *model, int extra)
{
    mr_fitter *f;
    mr_fit *fit = NULL;
    mr_status st;
    int i;
    mr__alloc_fail_after(n);
    f = mr_fitter_new();
    if (f == NULL) return 0;
    for (i = 0; model[i]; i++) {
        st = mr_fitter_model_line(f, model[i], "test");
        if (st != MR_OK) {
            mr_fitter_free(f);
            ck_assert_int_eq(st, MR_ERR_NO_MEMORY);
            return 0;
        }
    }
    mr_fitter_set_int(f, MR_OPT_THREADS, 2);
    if (extra == 1) mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, 1);
    if (extra == 2) mr_fitter_set_int(f, MR_OPT_IN_MEMORY, 1);
    if (extra == 3 && (st = mr_fitter_set_start(f, previous_fit, "previous.json")) != MR_OK) {
        mr_fitter_free(f);
        ck_assert_int_eq(st, MR_ERR_NO_MEMORY);
        return 0;
    }
    st = mr_fitter_run(f, path, &fit);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: status %d (%s)", n, (int)st,
                  mr_fitter_errmsg(f));
    if (st == MR_OK) {
        char *report = mr_fit_report(fit, 6), msg[256];
        /* the JSON's own allocations (its writer's and the output file's) */
        mr_status js = mr_fit_write_json(fit, json_path, msg, sizeof msg);
        ck_assert_msg(js == MR_OK || js == MR_ERR_NO_MEMORY, "allocation %ld: JSON status %d (%s)", n, (int)js, msg);
        mr_free(report);
        mr_fit_free(fit);
    } else {
        ck_assert_ptr_null(fit);
    }
    mr_fitter_free(f);
    return st == MR_OK && mr__alloc_failures_left() >= 0;
}

static void every_allocation(const char *path, const char *const *model, int extra)
{
    long n;
    for (n = 0; n < 200000; n++)
        if (fit_failing_at(n, path, model, extra)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n < 200000, "the fit never finished");
}

/* Writing a fit as JSON and reading it back with the n-th allocation
 * failing: MR_ERR_NO_MEMORY or success, never a half-read fit.  Returns 1
 * once both got through. */
static int json_failing_at(long n, const mr_fit *fit, const char *a, const char *b)
{
    char msg[256];
    mr_fit *back = (mr_fit *)1;
    mr_status st;
    mr__alloc_fail_after(n);
    st = mr_fit_write_json(fit, a, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: write status %d (%s)", n, (int)st, msg);
    if (st != MR_OK) return 0;
    st = mr_fit_read_json(b, &back, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: read status %d (%s)", n, (int)st, msg);
    if (st != MR_OK) {
        ck_assert_ptr_null(back);
        return 0;
    }
    mr_fit_free(back);
    return mr__alloc_failures_left() >= 0;
}

START_TEST(test_json_write_and_read)
{
    char dir[] = "/tmp/check_alloc-XXXXXX", a[64], b[64], msg[256];
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    long n;
    int i;
    ck_assert_ptr_nonnull(mkdtemp(dir));
    snprintf(a, sizeof a, "%s/a.json", dir);
    snprintf(b, sizeof b, "%s/b.json", dir);
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv.zst", &fit), MR_OK);
    mr_fitter_free(f);
    ck_assert_int_eq(mr_fit_write_json(fit, b, msg, sizeof msg), MR_OK);
    for (n = 0; n < 200000; n++)
        if (json_failing_at(n, fit, a, b)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n < 200000, "writing and reading never finished");
    mr_fit_free(fit);
    ck_assert_int_eq(unlink(a) | unlink(b) | rmdir(dir), 0);
}
END_TEST

START_TEST(test_falls_collapsed) { every_allocation("samples/falls.csv.zst", falls_model, 0); }
END_TEST
START_TEST(test_falls_rows_cached) { every_allocation("samples/falls.csv", falls_model, 1); }
END_TEST
START_TEST(test_falls_from_a_previous_fit)
{
    mr_fitter *f = mr_fitter_new();
    int i;
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_model_line(f, "factor age_band", "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv", &previous_fit), MR_OK);
    mr_fitter_free(f);
    every_allocation("samples/falls.csv", falls_model, 3);
    mr_fit_free(previous_fit);
}
END_TEST
START_TEST(test_screening_in_memory) { every_allocation("samples/screening.csv", screening_model, 2); }
END_TEST

int main(void)
{
    Suite *s = suite_create("alloc");
    TCase *tc = tcase_create("failures");
    int fd, rc;
    snprintf(json_path, sizeof json_path, "/tmp/millrace-alloc-XXXXXX");
    fd = mkstemp(json_path); /* written over by each fit that succeeds */
    if (fd < 0) return EXIT_FAILURE;
    close(fd);
    tcase_set_timeout(tc, 600);
    tcase_add_test(tc, test_falls_collapsed);
    tcase_add_test(tc, test_falls_rows_cached);
    tcase_add_test(tc, test_screening_in_memory);
    tcase_add_test(tc, test_falls_from_a_previous_fit);
    tcase_add_test(tc, test_json_write_and_read);
    suite_add_tcase(s, tc);
    rc = mr_check_run(s, 1); /* no fork: the leak checker sees the whole run */
    unlink(json_path);
    return rc;
}
