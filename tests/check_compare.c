/* check_compare.c - mr_comparison through millrace.h: each model's fit is
 * the fit mr_fitter_run makes of it alone (bit for bit: the oracle is the
 * library's own single-model run, which tests/ref holds to R and
 * statsmodels); a nested pair's test is the deviance drop on the
 * difference in residual df, with the chi-square tail exp(-w / 2) for
 * df 2 (closed form); drop-one keeps a factor of an interaction, and a
 * reduced model with nothing left is a note; the calls' contracts
 * (labels, out-of-range indices, before a run, a column the file lacks
 * named with its model; the BLAS thread count set back). */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

static int fake_blas_threads = 5;
int openblas_get_num_threads(void);
void openblas_set_num_threads(int n);
int openblas_get_num_threads(void) { return fake_blas_threads; }
void openblas_set_num_threads(int n) { fake_blas_threads = n; }

enum { ROWS = 40000 }; /* three blocks of rows */

static char data_path[64];

/* y: counts; g: two groups; h: three; x numeric with a missing cell every
 * 97th row, so a model with x uses fewer rows. */
static void write_data(void)
{
    FILE *f;
    long i;
    snprintf(data_path, sizeof data_path, "/tmp/check_compare_%ld.csv", (long)getpid());
    f = fopen(data_path, "w");
    ck_assert_ptr_nonnull(f);
    fputs("y,g,h,x\n", f);
    for (i = 0; i < ROWS; i++) {
        if (i % 97 == 5) fprintf(f, "%ld,%c,%c,NA\n", (i * 7) % 5, "ab"[i % 2], "uvw"[i * i % 7 % 3]);
        else fprintf(f, "%ld,%c,%c,%g\n", (i * 7) % 5 + (i % 2), "ab"[i % 2], "uvw"[i * i % 7 % 3], (i % 10) / 10.0);
    }
    ck_assert_int_eq(fclose(f), 0);
}

static void remove_data(void) { unlink(data_path); }

static mr_fitter *fitter(const char *const *lines, int threads)
{
    mr_fitter *f = mr_fitter_new();
    ck_assert_ptr_nonnull(f);
    for (; *lines; lines++) ck_assert_int_eq(mr_fitter_model_line(f, *lines, "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_set_int(f, MR_OPT_THREADS, threads), MR_OK);
    return f;
}

static const char *const SMALL[] = {"outcome y", "family poisson", "factor g", NULL};
static const char *const LARGE[] = {"outcome y", "family poisson", "factor g", "factor h", NULL};
static const char *const INTER[] = {"outcome y", "family poisson", "factor g", "factor h", "interact g h", NULL};
static const char *const WITH_X[] = {"outcome y", "family poisson", "factor g", "numeric x", NULL};

static void fit_same_bits(const mr_fit *a, const mr_fit *b)
{
    size_t j;
    ck_assert_uint_eq(mr_fit_ncoef(a), mr_fit_ncoef(b));
    for (j = 0; j < mr_fit_ncoef(a); j++) {
        double x = mr_fit_coef(a, j), y = mr_fit_coef(b, j), sx = mr_fit_std_error(a, j), sy = mr_fit_std_error(b, j);
        ck_assert(memcmp(&x, &y, sizeof x) == 0 && memcmp(&sx, &sy, sizeof sx) == 0);
    }
    ck_assert(mr_fit_stat(a, MR_STAT_DEVIANCE) == mr_fit_stat(b, MR_STAT_DEVIANCE));
    ck_assert(mr_fit_stat(a, MR_STAT_PEARSON_CHI2) == mr_fit_stat(b, MR_STAT_PEARSON_CHI2));
}

START_TEST(each_fit_as_alone)
{
    const char *const *models[] = {SMALL, LARGE, INTER, WITH_X};
    const char *labels[] = {"small", "large", "inter", "with_x"};
    mr_fitter *f[4];
    mr_comparison *c = mr_comparison_new();
    size_t i;
    int threads = _i + 1;
    ck_assert_ptr_nonnull(c);
    for (i = 0; i < 4; i++) {
        f[i] = fitter(models[i], threads);
        ck_assert_int_eq(mr_comparison_add(c, f[i], labels[i]), MR_OK);
    }
    ck_assert_int_eq(mr_comparison_drop_one(c, 2), MR_OK);
    ck_assert_int_eq(mr_comparison_run(c, data_path), MR_OK);
    ck_assert_int_eq(fake_blas_threads, 5);
    for (i = 0; i < 4; i++) {
        mr_fit *alone = NULL;
        ck_assert_int_eq(mr_fitter_run(f[i], data_path, &alone), MR_OK);
        fit_same_bits(mr_comparison_fit(c, i), alone);
        mr_fit_free(alone);
    }
    mr_comparison_free(c);
    for (i = 0; i < 4; i++) mr_fitter_free(f[i]);
}
END_TEST

static int find_test(const mr_comparison *c, mr_test_kind kind, size_t smaller, size_t larger, const char *term,
                     mr_model_test *t)
{
    size_t k;
    for (k = 0; mr_comparison_test(c, k, t); k++)
        if (t->kind == kind && t->larger == larger &&
            (kind == MR_TEST_NESTED ? t->smaller == smaller : strcmp(t->term, term) == 0))
            return 1;
    return 0;
}

START_TEST(tests_between_models)
{
    mr_fitter *f[4] = {fitter(SMALL, 1), fitter(LARGE, 1), fitter(INTER, 1), fitter(WITH_X, 1)};
    mr_comparison *c = mr_comparison_new();
    const mr_fit *small, *large;
    mr_model_test t;
    double w;
    size_t i, k, ndrop = 0;
    ck_assert_int_eq(mr_comparison_add(c, f[0], "small"), MR_OK);
    ck_assert_int_eq(mr_comparison_add(c, f[1], "large"), MR_OK);
    ck_assert_int_eq(mr_comparison_add(c, f[2], "inter"), MR_OK);
    ck_assert_int_eq(mr_comparison_add(c, f[3], "with_x"), MR_OK);
    ck_assert_int_eq(mr_comparison_drop_one(c, 2), MR_OK);
    ck_assert_int_eq(mr_comparison_run(c, data_path), MR_OK);
    small = mr_comparison_fit(c, 0);
    large = mr_comparison_fit(c, 1);
    ck_assert(find_test(c, MR_TEST_NESTED, 0, 1, NULL, &t));
    ck_assert(t.df == 2);
    w = mr_fit_stat(small, MR_STAT_DEVIANCE) - mr_fit_stat(large, MR_STAT_DEVIANCE);
    ck_assert(t.deviance_change == w && t.chi2 == w);
    ck_assert(fabs(t.chi2_p - exp(-w / 2)) <= 1e-12 * exp(-w / 2) + 1e-300);
    ck_assert(isnan(t.f) && isnan(t.f_p) && *t.note == '\0');
    ck_assert(find_test(c, MR_TEST_NESTED, 0, 2, NULL, &t) && find_test(c, MR_TEST_NESTED, 1, 2, NULL, &t));
    /* with_x used fewer rows: listed, not tested */
    ck_assert(find_test(c, MR_TEST_NESTED, 0, 3, NULL, &t));
    ck_assert(isnan(t.chi2) && strstr(t.note, "different rows") != NULL);
    ck_assert(!find_test(c, MR_TEST_NESTED, 3, 0, NULL, &t) && !find_test(c, MR_TEST_NESTED, 1, 0, NULL, &t));
    /* drop-one of inter: only the interaction may go */
    for (k = 0; mr_comparison_test(c, k, &t); k++) ndrop += t.kind == MR_TEST_DROP_ONE;
    ck_assert_uint_eq(ndrop, 1);
    ck_assert(find_test(c, MR_TEST_DROP_ONE, 0, 2, "g & h", &t));
    ck_assert(t.reduced_deviance == mr_fit_stat(large, MR_STAT_DEVIANCE) && t.reduced_aic == mr_fit_stat(large, MR_STAT_AIC));
    ck_assert(!mr_comparison_test(c, k, &t));
    mr_comparison_free(c);
    for (i = 0; i < 4; i++) mr_fitter_free(f[i]);
}
END_TEST

START_TEST(contracts)
{
    static const char *const NO_INTERCEPT[] = {"outcome y", "family poisson", "intercept no", "numeric x", NULL};
    static const char *const MISSING[] = {"outcome y", "family poisson", "numeric income", NULL};
    mr_fitter *a = fitter(NO_INTERCEPT, 1), *b = fitter(MISSING, 1);
    mr_comparison *c = mr_comparison_new();
    mr_model_test t;
    char *text;
    ck_assert_str_eq(mr_comparison_errmsg(c), "");
    ck_assert_int_eq(mr_comparison_run(c, data_path), MR_ERR_USAGE);
    ck_assert_int_eq(mr_comparison_add(c, a, ""), MR_ERR_USAGE);
    ck_assert_int_eq(mr_comparison_add(c, a, "a"), MR_OK);
    ck_assert_int_eq(mr_comparison_add(c, b, "a"), MR_ERR_USAGE);
    ck_assert_int_eq(mr_comparison_drop_one(c, 1), MR_ERR_USAGE);
    ck_assert_ptr_null(mr_comparison_fit(c, 0));
    ck_assert_ptr_null(mr_comparison_report(c, 0));
    ck_assert_ptr_null(mr_comparison_label(c, 1));
    ck_assert_int_eq(mr_comparison_drop_one(c, 0), MR_OK);
    /* without x, a model with no intercept has nothing to fit: a note */
    ck_assert_int_eq(mr_comparison_run(c, data_path), MR_OK);
    ck_assert(mr_comparison_test(c, 0, &t) && t.kind == MR_TEST_DROP_ONE && strcmp(t.term, "x") == 0);
    ck_assert(isnan(t.chi2) && strstr(t.note, "not fitted") != NULL);
    text = mr_comparison_report(c, 0);
    ck_assert_ptr_nonnull(text);
    ck_assert(strstr(text, "not fitted") != NULL);
    mr_free(text);
    ck_assert_int_eq(mr_comparison_add(c, b, "b"), MR_OK);
    ck_assert_int_eq(mr_comparison_run(c, data_path), MR_ERR_USAGE);
    ck_assert(strstr(mr_comparison_errmsg(c), "model b:") != NULL && strstr(mr_comparison_errmsg(c), "income"));
    ck_assert_ptr_null(mr_comparison_fit(c, 0));
    ck_assert_uint_eq(mr_comparison_ntests(c), 0);
    ck_assert_int_eq(fake_blas_threads, 5);
    mr_comparison_free(c);
    mr_comparison_free(NULL);
    mr_fitter_free(a);
    mr_fitter_free(b);
}
END_TEST

static Suite *compare_suite(void)
{
    Suite *s = suite_create("compare");
    TCase *t = tcase_create("several models");
    tcase_set_timeout(t, 120);
    tcase_add_unchecked_fixture(t, write_data, remove_data);
    tcase_add_loop_test(t, each_fit_as_alone, 0, 2);
    tcase_add_test(t, tests_between_models);
    tcase_add_test(t, contracts);
    suite_add_tcase(s, t);
    return s;
}

int main(void) { return mr_check_run(compare_suite(), 0); }
