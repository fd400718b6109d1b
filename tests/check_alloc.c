/* check_alloc.c - every allocation failure ends in a clean error.
 *
 * Built against a library compiled with MR_ALLOC_FAILURE_TESTS (make
 * alloc-check, under ASan, whose leak checker runs when this process
 * exits).  For n = 0, 1, 2, ... the n-th allocation of a whole fit fails;
 * the fit must then return MR_ERR_NO_MEMORY (or succeed, where the failed
 * allocation only cost an optional speed-up such as the warm start), never
 * crash, never leak.  The same for the JSON and the HTML page of a fit,
 * and for several models compared in one shared first pass.  Source of truth: the API contract in millrace.h. */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <stdio.h>
#include <stdlib.h>
#include <sys/stat.h>
#include <unistd.h>

#include "common/alloc.h"
#include "input/source.h"
#include "millrace.h"
#include "check_common.h"

long mr__alloc_failures_left(void);

static const char *const falls_model[] = {"outcome admissions", "family poisson", "exposure person_years",
                                          "factor age_band ref=40-44", "factor sex", "numeric year",
                                          "interact age_band sex", NULL};
static const char *const spline_model[] = {"outcome admissions", "family poisson", "exposure person_years",
                                           "factor sex", "spline year df=3", "interact year sex", NULL};
static char json_path[64], checkpoint_path[80], checkpoint_saved[80];
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
    {
        static const char *const argv[] = {"millrace", "fit", "data.csv"};
        st = mr_fitter_set_command_line(f, 3, argv); /* the audit trail's copy */
        if (st != MR_OK) {
            mr_fitter_free(f);
            ck_assert_int_eq(st, MR_ERR_NO_MEMORY);
            return 0;
        }
    }
    if (extra == 1 || extra == 4 || extra == 5) mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, 1);
    if (extra == 4 || extra == 5) { /* 4: checkpoints written from the start; 5: one taken up */
        unlink(checkpoint_path);
        if (extra == 5) ck_assert_int_eq(link(checkpoint_saved, checkpoint_path), 0);
        if ((st = mr_fitter_set_checkpoint(f, checkpoint_path)) != MR_OK) {
            mr_fitter_free(f);
            ck_assert_int_eq(st, MR_ERR_NO_MEMORY);
            return 0;
        }
    }
    if (extra == 2) mr_fitter_set_int(f, MR_OPT_IN_MEMORY, 1);
    if (extra == 3 && (st = mr_fitter_set_start(f, previous_fit, "previous.json")) != MR_OK) {
        mr_fitter_free(f);
        ck_assert_int_eq(st, MR_ERR_NO_MEMORY);
        return 0;
    }
    /* cluster-robust standard errors: falls is not grouped by region, so
     * the streamed meat pass gives way to the table's */
    if (extra == 6 && (st = mr_fitter_set_cluster(f, "region", 0)) != MR_OK) {
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

/* The falls sample's fit, with every allocation allowed. */
static mr_fit *falls_fit(void)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    int i;
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv.zst", &fit), MR_OK);
    mr_fitter_free(f);
    return fit;
}

START_TEST(test_json_write_and_read)
{
    char dir[] = "/tmp/check_alloc-XXXXXX", a[64], b[64], msg[256];
    mr_fit *fit;
    long n;
    ck_assert_ptr_nonnull(mkdtemp(dir));
    snprintf(a, sizeof a, "%s/a.json", dir);
    snprintf(b, sizeof b, "%s/b.json", dir);
    fit = falls_fit();
    ck_assert_int_eq(mr_fit_write_json(fit, b, msg, sizeof msg), MR_OK);
    for (n = 0; n < 200000; n++)
        if (json_failing_at(n, fit, a, b)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n < 200000, "writing and reading never finished");
    mr_fit_free(fit);
    ck_assert_int_eq(unlink(a) | unlink(b) | rmdir(dir), 0);
}
END_TEST

/* A drift of two fits (its comparison, text, JSON and CSV) and a run-log
 * line with the n-th allocation failing: MR_ERR_NO_MEMORY (NULL text) or
 * success.  Returns 1 once everything got through. */
static int drift_failing_at(long n, const mr_fit *fit, const char *dir)
{
    char msg[256], path[96];
    const char *argv[] = {"millrace", "fit"};
    mr_run_record rec = {"data.csv", 0, NULL, fit, 2, argv};
    mr_drift *d = NULL;
    char *text;
    mr_status st;
    int done = 1;
    mr__alloc_fail_after(n);
    st = mr_drift_compare(fit, fit, 3.0, &d, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: compare %d (%s)", n, (int)st, msg);
    if (st != MR_OK) {
        ck_assert_ptr_null(d);
        return 0;
    }
    text = mr_drift_report(d, 0);
    done &= text != NULL;
    mr_free(text);
    snprintf(path, sizeof path, "%s/d.json", dir);
    st = mr_drift_write_json(d, path, NULL, 0, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: drift JSON %d (%s)", n, (int)st, msg);
    done &= st == MR_OK;
    snprintf(path, sizeof path, "%s/d.csv", dir);
    st = mr_drift_write_csv(d, path, NULL, 0, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: drift CSV %d (%s)", n, (int)st, msg);
    done &= st == MR_OK;
    mr_drift_free(d);
    snprintf(path, sizeof path, "%s/runs.log", dir);
    st = mr_run_log_append(path, &rec, NULL, 0, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: run log %d (%s)", n, (int)st, msg);
    done &= st == MR_OK;
    return done && mr__alloc_failures_left() >= 0;
}

START_TEST(test_drift_and_run_log)
{
    char dir[] = "/tmp/check_alloc-XXXXXX", cmd[96];
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    long n;
    int i;
    ck_assert_ptr_nonnull(mkdtemp(dir));
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv.zst", &fit), MR_OK);
    mr_fitter_free(f);
    for (n = 0; n < 200000; n++)
        if (drift_failing_at(n, fit, dir)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n < 200000, "drift never finished");
    mr_fit_free(fit);
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    ck_assert_int_eq(system(cmd), 0);
}
END_TEST

/* The HTML page of two fits (the comparison too) with the n-th allocation
 * failing: MR_ERR_NO_MEMORY and no page, or the page.  Returns 1 once
 * it got through. */
static int html_failing_at(long n, const mr_fit *fit, const char *page)
{
    const mr_fit *fits[2] = {fit, fit};
    const char *settings[] = {"at year=2020", "digits 5"};
    char msg[256];
    mr_status st;
    unlink(page); /* an attempt that failed leaves none */
    mr__alloc_fail_after(n);
    st = mr_fits_write_html(fits, NULL, 2, settings, 2, page, msg, sizeof msg);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: page status %d (%s)", n, (int)st, msg);
    if (st != MR_OK) ck_assert_int_ne(access(page, F_OK), 0);
    return st == MR_OK && mr__alloc_failures_left() >= 0;
}

START_TEST(test_html_page)
{
    char dir[] = "/tmp/check_alloc-XXXXXX", page[64];
    mr_fit *fit;
    long n;
    ck_assert_ptr_nonnull(mkdtemp(dir));
    snprintf(page, sizeof page, "%s/page.html", dir);
    fit = falls_fit();
    for (n = 0; n < 200000; n++)
        if (html_failing_at(n, fit, page)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n < 200000, "the page was never written");
    mr_fit_free(fit);
    ck_assert_int_eq(unlink(page) | rmdir(dir), 0);
}
END_TEST

/* gzip input read through the source with the n-th allocation failing
 * (the source's, the decoder's, and zlib's, which are ours too): all of
 * the text or MR_ERR_NO_MEMORY.  Returns 1 once n is past the last. */
static int gzip_read_failing_at(long n, const char *path, size_t text_bytes)
{
    mr__source *s = NULL;
    mr__error err;
    char buf[4096];
    size_t got = 0, total = 0;
    mr_status st;
    mr__error_clear(&err);
    mr__alloc_fail_after(n);
    st = mr__source_open(&s, path, path, 1024, -1, &err);
    while (st == MR_OK && (st = mr__source_read(s, buf, sizeof buf, &got, &err)) == MR_OK && got > 0) total += got;
    mr__source_close(s);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: status %d (%s)", n, (int)st, err.msg);
    if (st != MR_OK) return 0;
    ck_assert_uint_eq(total, text_bytes);
    return mr__alloc_failures_left() >= 0;
}

START_TEST(test_gzip_source)
{
    char dir[] = "/tmp/check_alloc-XXXXXX", gz[96], cmd[256];
    struct stat st;
    long n;
    ck_assert_ptr_nonnull(mkdtemp(dir));
    snprintf(gz, sizeof gz, "%s/falls.csv.gz", dir);
    snprintf(cmd, sizeof cmd, "gzip -n -c < samples/falls.csv > '%s'", gz);
    ck_assert_int_eq(system(cmd), 0);
    ck_assert_int_eq(stat("samples/falls.csv", &st), 0);
    for (n = 0; n < 1000; n++)
        if (gzip_read_failing_at(n, gz, (size_t)st.st_size)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n > 2 && n < 1000, "%ld allocations", n);
    ck_assert_int_eq(unlink(gz) | rmdir(dir), 0);
}
END_TEST

/* A survey with the n-th allocation failing: MR_ERR_NO_MEMORY or
 * success, its report and JSON likewise; a cap of 50 makes the id
 * column's table be dropped on the way.  Returns 1 once all got through. */
static int survey_failing_at(long n)
{
    mr_survey *s;
    mr_status st;
    char *text;
    mr__alloc_fail_after(n);
    if ((s = mr_survey_new()) == NULL) return 0;
    ck_assert_int_eq(mr_survey_set_distinct_cap(s, 50), MR_OK);
    ck_assert_int_eq(mr_survey_set_threads(s, 1), MR_OK); /* allocations in one order */
    st = mr_survey_run(s, "samples/screening.csv");
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: status %d (%s)", n, (int)st,
                  mr_survey_errmsg(s));
    text = st == MR_OK ? mr_survey_report(s) : NULL;
    if (st == MR_OK) st = mr_survey_write_json(s, json_path);
    ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: JSON status %d", n, (int)st);
    mr_survey_free(s);
    mr_free(text);
    return st == MR_OK && text != NULL && mr__alloc_failures_left() >= 0;
}

START_TEST(test_survey)
{
    long n;
    for (n = 0; n < 200000; n++)
        if (survey_failing_at(n)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n > 2 && n < 200000, "%ld allocations", n);
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
/* Checkpoints (mr_fitter_set_checkpoint): written after every pass, and
 * one left by a fit stopped at its third pass taken up. */
static int stop_at_third(const mr_progress *p, void *user)
{
    (void)user;
    return p->pass == 3;
}

START_TEST(test_checkpoints)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    int i;
    every_allocation("samples/falls.csv", falls_model, 4);
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    mr_fitter_set_int(f, MR_OPT_THREADS, 2);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, 1);
    ck_assert_int_eq(mr_fitter_set_checkpoint(f, checkpoint_saved), MR_OK);
    mr_fitter_set_progress_stop(f, stop_at_third, NULL);
    unlink(checkpoint_saved);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv", &fit), MR_ERR_STOPPED);
    mr_fitter_free(f);
    every_allocation("samples/falls.csv", falls_model, 5);
    /* a checkpoint left after the last pass (MR_OPT_KEEP_CHECKPOINT): taken
     * up, its finished parts read, no pass made */
    f = mr_fitter_new();
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, 1);
    mr_fitter_set_int(f, MR_OPT_KEEP_CHECKPOINT, 1);
    ck_assert_int_eq(mr_fitter_set_checkpoint(f, checkpoint_saved), MR_OK);
    unlink(checkpoint_saved);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv", &fit), MR_OK);
    mr_fit_free(fit);
    mr_fitter_free(f);
    every_allocation("samples/falls.csv", falls_model, 5);
    unlink(checkpoint_path);
    unlink(checkpoint_saved);
}
END_TEST

START_TEST(test_falls_robust_clusters) { every_allocation("samples/falls.csv", falls_model, 6); }
END_TEST
/* a spline's counted values (per block and merged) and its basis */
START_TEST(test_spline_rows_cached) { every_allocation("samples/falls.csv", spline_model, 1); }
END_TEST

/* Several models in one shared first pass (a fan-out of first-pass jobs),
 * a drop-one refit among them, their comparison as text and JSON, with the
 * n-th allocation failing: MR_ERR_NO_MEMORY or success, no leak.  Returns
 * 1 once everything got through. */
static int comparison_failing_at(long n)
{
    static const char *const small[] = {"outcome attended", "family binomial", "numeric age", NULL};
    mr_fitter *f[2] = {NULL, NULL};
    mr_comparison *c;
    char msg[256], *text;
    mr_status st = MR_OK;
    int i, k, done = 0;
    mr__alloc_fail_after(n);
    c = mr_comparison_new();
    for (k = 0; k < 2 && c != NULL && st == MR_OK; k++) {
        const char *const *model = k == 0 ? screening_model : small;
        if ((f[k] = mr_fitter_new()) == NULL) break;
        mr_fitter_set_int(f[k], MR_OPT_THREADS, 2);
        for (i = 0; model[i] && st == MR_OK; i++) st = mr_fitter_model_line(f[k], model[i], "test");
        if (st == MR_OK) st = mr_comparison_add(c, f[k], k == 0 ? "full" : "small");
    }
    if (c != NULL && k == 2 && st == MR_OK) {
        mr_comparison_drop_one(c, 0);
        st = mr_comparison_run(c, "samples/screening.csv");
        ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: status %d (%s)", n, (int)st,
                      mr_comparison_errmsg(c));
        if (st == MR_OK) {
            text = mr_comparison_report(c, 0);
            st = mr_comparison_write_json(c, json_path, NULL, 0, msg, sizeof msg);
            ck_assert_msg(st == MR_OK || st == MR_ERR_NO_MEMORY, "allocation %ld: JSON %d (%s)", n, (int)st, msg);
            done = text != NULL && st == MR_OK;
            mr_free(text);
        }
    }
    mr_comparison_free(c);
    mr_fitter_free(f[0]);
    mr_fitter_free(f[1]);
    return done && mr__alloc_failures_left() >= 0;
}

START_TEST(test_comparison)
{
    long n;
    for (n = 0; n < 400000; n++)
        if (comparison_failing_at(n)) break;
    mr__alloc_fail_after(-1);
    ck_assert_msg(n < 400000, "the comparison never finished");
}
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
    snprintf(checkpoint_path, sizeof checkpoint_path, "%s.ckpt", json_path);
    snprintf(checkpoint_saved, sizeof checkpoint_saved, "%s.saved", json_path);
    tcase_set_timeout(tc, 600);
    tcase_add_test(tc, test_falls_collapsed);
    tcase_add_test(tc, test_falls_rows_cached);
    tcase_add_test(tc, test_screening_in_memory);
    tcase_add_test(tc, test_spline_rows_cached);
    tcase_add_test(tc, test_falls_from_a_previous_fit);
    tcase_add_test(tc, test_json_write_and_read);
    tcase_add_test(tc, test_drift_and_run_log);
    tcase_add_test(tc, test_html_page);
    tcase_add_test(tc, test_gzip_source);
    tcase_add_test(tc, test_checkpoints);
    tcase_add_test(tc, test_falls_robust_clusters);
    tcase_add_test(tc, test_survey);
    suite_add_tcase(s, tc);
    tc = tcase_create("comparison");
    tcase_set_timeout(tc, 600);
    tcase_add_test(tc, test_comparison);
    suite_add_tcase(s, tc);
    rc = mr_check_run(s, 1); /* no fork: the leak checker sees the whole run */
    unlink(json_path);
    return rc;
}
