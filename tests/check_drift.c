/* check_drift.c - mr_drift_compare and its accessors: two fits of one
 * model compared, fits of different models refused.
 *
 * Oracle: an analytic identity of the poisson log-linear model with an
 * exposure and an intercept.  Doubling every count doubles every fitted
 * mean (mu' = 2 mu solves X'(2y - mu') = 0), so the intercept moves by
 * exactly log 2 and every other coefficient stays; X'WX doubles with W =
 * mu, so each SE shrinks by sqrt 2 and the larger SE is the old one.  The
 * rest is the contract in millrace.h. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

static char once_path[64], twice_path[64];

static void write_data(const char *path, int times)
{
    uint64_t state = 42;
    FILE *f = fopen(path, "w");
    int i;
    ck_assert_ptr_nonnull(f);
    fprintf(f, "g,x,t,y\n");
    for (i = 0; i < 3000; i++) {
        int y = (int)(next_random(&state) % 9);
        fprintf(f, "%c,%d,%d.5,%d\n", "abc"[i % 3], i % 17, 1 + i % 4, times * y);
    }
    ck_assert_int_eq(fclose(f), 0);
}

static mr_fit *fit_of(const char *path, const char *extra)
{
    static const char *const lines[] = {"outcome y", "family poisson", "exposure t", "factor g", "numeric x"};
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    size_t i;
    for (i = 0; i < sizeof lines / sizeof lines[0]; i++) ck_assert_int_eq(mr_fitter_model_line(f, lines[i], NULL), MR_OK);
    if (extra) ck_assert_int_eq(mr_fitter_model_line(f, extra, NULL), MR_OK);
    mr_fitter_set_int(f, MR_OPT_THREADS, 2);
    ck_assert_msg(mr_fitter_run(f, path, &fit) == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_free(f);
    return fit;
}

static void setup(void)
{
    snprintf(once_path, sizeof once_path, "/tmp/check_drift_%ld_1.csv", (long)getpid());
    snprintf(twice_path, sizeof twice_path, "/tmp/check_drift_%ld_2.csv", (long)getpid());
    write_data(once_path, 1);
    write_data(twice_path, 2);
}

static void teardown(void)
{
    unlink(once_path);
    unlink(twice_path);
}

START_TEST(counts_doubled)
{
    mr_fit *a = fit_of(once_path, NULL), *b = fit_of(twice_path, NULL);
    mr_drift *d = NULL;
    char msg[256];
    size_t i;
    ck_assert_int_eq(mr_drift_compare(a, b, 3.0, &d, msg, sizeof msg), MR_OK);
    ck_assert_uint_eq(mr_drift_ncoef(d), mr_fit_ncoef(a));
    for (i = 0; i < mr_drift_ncoef(d); i++) {
        double change = mr_drift_coef_change(d, i);
        ck_assert_str_eq(mr_drift_coef_name(d, i), mr_fit_coef_name(a, i));
        /* the larger SE is the old fit's: sqrt 2 times the new one's */
        ck_assert_double_eq_tol(mr_fit_std_error(a, i) / mr_fit_std_error(b, i), sqrt(2.0), 1e-8);
        ck_assert_double_eq_tol(mr_drift_coef_z(d, i), change / mr_fit_std_error(a, i), 1e-12);
        if (i == 0) {
            ck_assert_str_eq(mr_drift_coef_name(d, 0), "intercept");
            ck_assert_double_eq_tol(change, log(2.0), 1e-9);
            ck_assert(mr_drift_coef_flagged(d, 0)); /* log 2 is many SEs here */
        } else {
            ck_assert_double_eq_tol(change, 0, 1e-9);
            ck_assert(!mr_drift_coef_flagged(d, i));
        }
    }
    ck_assert_uint_eq(mr_drift_nflagged(d), 1);
    ck_assert_ptr_null(mr_drift_coef_name(d, 99));
    ck_assert(isnan(mr_drift_coef_change(d, 99)) && isnan(mr_drift_coef_z(d, 99)));
    ck_assert_int_eq(mr_drift_coef_flagged(d, 99), 0);
    mr_drift_free(d);
    ck_assert_int_eq(mr_drift_compare(a, a, 3.0, &d, msg, sizeof msg), MR_OK);
    ck_assert_uint_eq(mr_drift_nflagged(d), 0);
    mr_drift_free(d);
    mr_fit_free(a);
    mr_fit_free(b);
}
END_TEST

/* expect_refused(extra line, words the message must hold) */
static void expect_refused(const mr_fit *a, const char *extra, const char *says)
{
    mr_fit *b = fit_of(once_path, extra);
    mr_drift *d = (mr_drift *)1;
    char msg[256];
    ck_assert_int_eq(mr_drift_compare(a, b, 3.0, &d, msg, sizeof msg), MR_ERR_USAGE);
    ck_assert_ptr_null(d);
    ck_assert_msg(strstr(msg, says) != NULL, "%s", msg);
    mr_fit_free(b);
}

START_TEST(different_models)
{
    mr_fit *a = fit_of(once_path, NULL);
    mr_drift *d = (mr_drift *)1;
    expect_refused(a, "dispersion estimate", "dispersion 'fixed' in the old, 'estimate' in the new");
    expect_refused(a, "factor g ref=b", "reference level of g 'a' in the old, 'b' in the new");
    expect_refused(a, "interact g x", "term '(none)' in the old, 'g & x' in the new");
    expect_refused(a, "intercept no", "intercept 'yes' in the old, 'no' in the new");
    ck_assert_int_eq(mr_drift_compare(a, a, 0, &d, NULL, 0), MR_ERR_USAGE);
    ck_assert_int_eq(mr_drift_compare(a, a, NAN, &d, NULL, 0), MR_ERR_USAGE);
    ck_assert_ptr_null(d);
    mr_fit_free(a);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("drift");
    TCase *t = tcase_create("compare");
    tcase_add_checked_fixture(t, setup, teardown);
    tcase_set_timeout(t, 120);
    tcase_add_test(t, counts_doubled);
    tcase_add_test(t, different_models);
    suite_add_tcase(s, t);
    return mr_check_run(s, 1);
}
