/* check_api.c - public calls of millrace.h: the Wald p-values and interval
 * bounds of a fit, stopping a run from the progress callback, and the
 * OpenBLAS thread count set back when a run ends.
 *
 * Oracles: P(|Z| > z) = erfc(z / sqrt 2) (glibc erfc); the normal
 * quantiles 1.959963984540054 (0.975) and 1.6448536269514722 (0.95) from
 * scipy.stats.norm.ppf (Debian python3-scipy); the maximum-likelihood
 * intercept of a poisson model with nothing else, log(mean y); and the
 * API contract in millrace.h for the rest; for the term tests, z^2 and
 * the coefficient's own p-value, the closed-form inverse of a 2 x 2
 * covariance and the chi-square(2) tail exp(-w / 2). */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

/* ---- OpenBLAS's thread count, as the library sees it --------------------
 * These definitions take the place of OpenBLAS's own for the library linked
 * into this program, so that the count a run sets and sets back can be
 * seen even with the serial build, whose count is always 1. */
static int fake_blas_threads = 5, blas_threads_seen = -1;
int openblas_get_num_threads(void);
void openblas_set_num_threads(int n);
int openblas_get_num_threads(void) { return fake_blas_threads; }
void openblas_set_num_threads(int n) { fake_blas_threads = n; }

enum { ROWS = 3000 };

static char data_path[64];

/* y: counts that vary with the row number; g: two groups; x and x2 = 2 x,
 * so that x2 is aliased; h: three groups. */
static void write_data(void)
{
    FILE *f;
    long i;
    snprintf(data_path, sizeof data_path, "/tmp/check_api_%ld.csv", (long)getpid());
    f = fopen(data_path, "w");
    ck_assert_ptr_nonnull(f);
    fputs("y,g,x,x2,h\n", f);
    for (i = 0; i < ROWS; i++) {
        double x = (double)(i % 10) / 10;
        fprintf(f, "%ld,%c,%g,%g,%c\n", (i * 7) % 5 + (i % 2), "ab"[i % 2], x, 2 * x, "uvw"[i * i % 7 % 3]);
    }
    ck_assert_int_eq(fclose(f), 0);
}

static void remove_data(void) { unlink(data_path); }

static mr_fitter *poisson_fitter(const char *const *terms)
{
    mr_fitter *f = mr_fitter_new();
    ck_assert_ptr_nonnull(f);
    ck_assert_int_eq(mr_fitter_model_line(f, "outcome y", "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_model_line(f, "family poisson", "test"), MR_OK);
    for (; terms && *terms; terms++) ck_assert_int_eq(mr_fitter_model_line(f, *terms, "test"), MR_OK);
    return f;
}

static int close_rel(double got, double want, double tol) { return fabs(got - want) <= tol * fabs(want); }

/* Each coefficient's p-value and bounds follow from its estimate and
 * standard error with the normal distribution (poisson: dispersion 1). */
static void check_wald(const mr_fit *fit, double q)
{
    size_t j;
    for (j = 0; j < mr_fit_ncoef(fit); j++) {
        double b = mr_fit_coef(fit, j), se = mr_fit_std_error(fit, j);
        if (mr_fit_coef_aliased(fit, j)) {
            ck_assert(isnan(mr_fit_p_value(fit, j)));
            ck_assert(isnan(mr_fit_conf_low(fit, j)) && isnan(mr_fit_conf_high(fit, j)));
            continue;
        }
        ck_assert_msg(close_rel(mr_fit_p_value(fit, j), erfc(fabs(b / se) / sqrt(2.0)), 1e-12), "p of %s: %.17g",
                      mr_fit_coef_name(fit, j), mr_fit_p_value(fit, j));
        ck_assert_msg(close_rel(mr_fit_conf_low(fit, j), b - q * se, 1e-14), "low of %s", mr_fit_coef_name(fit, j));
        ck_assert_msg(close_rel(mr_fit_conf_high(fit, j), b + q * se, 1e-14), "high of %s", mr_fit_coef_name(fit, j));
    }
    ck_assert(isnan(mr_fit_p_value(fit, j)));
    ck_assert(isnan(mr_fit_conf_low(fit, j)) && isnan(mr_fit_conf_high(fit, j)));
}

START_TEST(p_values_and_intervals)
{
    static const char *const terms[] = {"factor g", "numeric x", "numeric x2", NULL};
    mr_fitter *f = poisson_fitter(terms);
    mr_fit *fit = NULL;
    size_t j, aliased = 0;
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert(mr_fit_stat(fit, MR_STAT_LEVEL) == 0.95);
    check_wald(fit, 1.959963984540054);
    for (j = 0; j < mr_fit_ncoef(fit); j++) aliased += mr_fit_coef_aliased(fit, j) != 0;
    ck_assert_uint_eq(aliased, 1);
    mr_fit_free(fit);

    ck_assert_int_eq(mr_fitter_set_real(f, MR_OPT_LEVEL, 0.90), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert(mr_fit_stat(fit, MR_STAT_LEVEL) == 0.90);
    check_wald(fit, 1.6448536269514722);
    mr_fit_free(fit);
    mr_fitter_free(f);
}
END_TEST

/* A start from the fit of the same data: the same maximum (IRLS reaches it
 * from anywhere; the analytic fact the test leans on), every coefficient
 * but the aliased one carried, and no more passes than the cold start.
 * A fit of other terms is refused before the data is read. */
START_TEST(start_from_a_previous_fit)
{
    static const char *const terms[] = {"factor g", "numeric x", "numeric x2", NULL};
    static const char *const fewer[] = {"factor g", "numeric x", NULL};
    mr_fitter *f = poisson_fitter(terms), *other = poisson_fitter(fewer);
    mr_fit *cold = NULL, *warm = NULL;
    size_t j;
    ck_assert_int_eq(mr_fitter_run(f, data_path, &cold), MR_OK);
    ck_assert(isnan(mr_fit_stat(cold, MR_STAT_START_CARRIED)));
    ck_assert_int_eq(mr_fitter_set_start(f, cold, "cold.json"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, data_path, &warm), MR_OK);
    ck_assert(mr_fit_stat(warm, MR_STAT_START_CARRIED) == (double)mr_fit_ncoef(cold) - 1);
    ck_assert(mr_fit_stat(warm, MR_STAT_PASSES) <= mr_fit_stat(cold, MR_STAT_PASSES));
    for (j = 0; j < mr_fit_ncoef(cold); j++)
        if (!mr_fit_coef_aliased(cold, j))
            ck_assert_msg(fabs(mr_fit_coef(warm, j) - mr_fit_coef(cold, j)) <= 1e-10 * mr_fit_std_error(cold, j),
                          "%s", mr_fit_coef_name(cold, j));
    mr_fit_free(warm);
    ck_assert_int_eq(mr_fitter_set_start(other, cold, "cold.json"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(other, data_path, &warm), MR_ERR_USAGE);
    ck_assert_ptr_null(warm);
    ck_assert_ptr_nonnull(strstr(mr_fitter_errmsg(other), "cold.json is a fit of another model"));
    ck_assert_int_eq(mr_fitter_set_start(f, NULL, NULL), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, data_path, &warm), MR_OK);
    ck_assert(isnan(mr_fit_stat(warm, MR_STAT_START_CARRIED)));
    mr_fit_free(warm);
    mr_fit_free(cold);
    mr_fitter_free(f);
    mr_fitter_free(other);
}
END_TEST

START_TEST(intercept_alone_is_log_mean)
{
    mr_fitter *f = poisson_fitter(NULL);
    mr_fit *fit = NULL;
    double sum = 0;
    long i;
    for (i = 0; i < ROWS; i++) sum += (double)((i * 7) % 5 + (i % 2));
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert_uint_eq(mr_fit_ncoef(fit), 1);
    ck_assert(close_rel(mr_fit_coef(fit, 0), log(sum / ROWS), 1e-9));
    /* the standard error comes from the weights of the last IRLS step, one
     * step behind the estimate (as in R's glm): about 1e-7 here */
    ck_assert_msg(close_rel(mr_fit_std_error(fit, 0), 1 / sqrt(sum), 1e-6), "se %.17g, want %.17g", mr_fit_std_error(fit, 0), 1 / sqrt(sum));
    check_wald(fit, 1.959963984540054);
    mr_fit_free(fit);
    mr_fitter_free(f);
}
END_TEST

/* A refused line changes nothing (millrace.h, mr_fitter_model_line): a
 * family line whose last word is bad, after a word that asked for a
 * profile, must not leave the profile asked for the family before it
 * (found by the model fuzz target: the run failed inside on no grid). */
START_TEST(refused_family_line_changes_nothing)
{
    mr_fitter *f = poisson_fitter(NULL);
    mr_fit *fit = NULL;
    ck_assert_int_eq(mr_fitter_model_line(f, "family tweedie power=profile power=nine", "test"), MR_ERR_USAGE);
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert(close_rel(mr_fit_stat(fit, MR_STAT_DISPERSION), 1.0, 0));
    mr_fit_free(fit);
    mr_fitter_free(f);
}
END_TEST

/* One term's test through the API against the contract in millrace.h. */
static void expect_term(const mr_fit *fit, size_t t, const char *name, size_t ncoef, double want_stat,
                        double want_df, double want_p)
{
    double stat = 0, df = -1, p = 0;
    int is_f = -1, has = mr_fit_term_test(fit, t, &stat, &df, &p, &is_f);
    size_t first = 99;
    ck_assert_str_eq(mr_fit_term_name(fit, t), name);
    ck_assert_uint_eq(mr_fit_term_coefs(fit, t, &first), ncoef);
    ck_assert_int_eq(is_f, mr_fit_stat(fit, MR_STAT_DISPERSION) != 1.0);
    ck_assert_msg(df == want_df, "%s: df %g", name, df);
    ck_assert_int_eq(has, !isnan(want_stat));
    if (isnan(want_stat)) {
        ck_assert(isnan(stat) && isnan(p));
        return;
    }
    ck_assert_msg(close_rel(stat, want_stat, 1e-13), "%s: statistic %.17g, want %.17g", name, stat, want_stat);
    ck_assert_msg(close_rel(p, want_p, 1e-12), "%s: p %.17g, want %.17g", name, p, want_p);
}

/* Sources of truth: a one-coefficient term's statistic is its z^2 (t^2)
 * and its p-value the coefficient's; for two coefficients b' V^-1 b with
 * the closed-form inverse of a 2 x 2 V, and P(chi2_2 > w) = exp(-w / 2);
 * an aliased term has df 0 and no test (millrace.h). */
static void check_term_tests(const mr_fit *fit)
{
    size_t first = 0, j;
    double z, b0, b1, v00, v01, v11, w;
    ck_assert_uint_eq(mr_fit_nterms(fit), 4);
    ck_assert_uint_eq(mr_fit_term_coefs(fit, 0, &first), 1);
    z = mr_fit_coef(fit, first) / mr_fit_std_error(fit, first);
    expect_term(fit, 0, "g", 1, z * z, 1, mr_fit_p_value(fit, first));
    ck_assert_str_eq(mr_fit_coef_name(fit, first), "g=b");
    mr_fit_term_coefs(fit, 2, &first);
    ck_assert(mr_fit_coef_aliased(fit, first));
    expect_term(fit, 2, "x2", 1, NAN, 0, NAN);
    mr_fit_term_coefs(fit, 3, &j);
    ck_assert_str_eq(mr_fit_coef_name(fit, j), "h=v");
    b0 = mr_fit_coef(fit, j), b1 = mr_fit_coef(fit, j + 1);
    v00 = mr_fit_covariance(fit, j, j), v01 = mr_fit_covariance(fit, j, j + 1), v11 = mr_fit_covariance(fit, j + 1, j + 1);
    w = (b0 * b0 * v11 - 2 * b0 * b1 * v01 + b1 * b1 * v00) / (v00 * v11 - v01 * v01);
    if (mr_fit_stat(fit, MR_STAT_DISPERSION) == 1.0) expect_term(fit, 3, "h", 2, w, 2, exp(-w / 2));
    else ck_assert(mr_fit_term_test(fit, 3, &z, NULL, NULL, NULL) && close_rel(z, w / 2, 1e-13));
    /* out of range */
    ck_assert_ptr_null(mr_fit_term_name(fit, 4));
    ck_assert_uint_eq(mr_fit_term_coefs(fit, 4, &first), 0);
    ck_assert_uint_eq(first, 0);
    ck_assert_int_eq(mr_fit_term_test(fit, 4, &z, &w, NULL, NULL), 0);
    ck_assert(isnan(z) && w == 0);
}

START_TEST(term_tests)
{
    static const char *const terms[] = {"factor g", "numeric x", "numeric x2", "factor h", NULL};
    mr_fitter *f = poisson_fitter(terms);
    mr_fit *fit = NULL;
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    check_term_tests(fit);
    mr_fit_free(fit);
    ck_assert_int_eq(mr_fitter_model_line(f, "dispersion estimate", "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    check_term_tests(fit);
    mr_fit_free(fit);
    mr_fitter_free(f);
}
END_TEST

typedef struct {
    int stop_in_pass; /* the first call in this pass returns 1 */
    int calls, last_pass;
} stopper;

static int stop_at(const mr_progress *p, void *user)
{
    stopper *s = user;
    s->calls++;
    s->last_pass = p->pass;
    blas_threads_seen = fake_blas_threads;
    return p->pass >= s->stop_in_pass;
}

static void stop_in(int pass, int no_cache, int threads)
{
    static const char *const terms[] = {"factor g", "numeric x", NULL};
    mr_fitter *f = poisson_fitter(terms);
    mr_fit *fit = (mr_fit *)&fit; /* not NULL: the run must clear it */
    stopper s = {pass, 0, 0};
    mr_fitter_set_int(f, MR_OPT_NO_CACHE, no_cache);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, 1);
    mr_fitter_set_int(f, MR_OPT_THREADS, threads);
    mr_fitter_set_progress_stop(f, stop_at, &s);
    fake_blas_threads = 5;
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_ERR_STOPPED);
    ck_assert_ptr_null(fit);
    ck_assert_int_eq(s.last_pass, pass);
    ck_assert_msg(strstr(mr_fitter_errmsg(f), "stopped") != NULL, "%s", mr_fitter_errmsg(f));
    ck_assert_int_eq(blas_threads_seen, 1);
    ck_assert_int_eq(fake_blas_threads, 5);
    ck_assert_str_eq(mr_strerror(MR_ERR_STOPPED), "stopped by the progress callback");

    /* the fitter runs again; the plain callback replaces the stopping one */
    mr_fitter_set_progress(f, NULL, NULL);
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert_int_eq(mr_fit_status(fit), MR_OK);
    mr_fit_free(fit);
    mr_fitter_free(f);
}

START_TEST(progress_callback_stops_the_run)
{
    stop_in(1, 0, 1);
    stop_in(1, 1, 2);
    stop_in(2, 0, 2);
    stop_in(2, 1, 1);
    stop_in(3, 1, 2);
}
END_TEST

START_TEST(blas_threads_set_back)
{
    static const char *const terms[] = {"factor g", NULL};
    mr_fitter *f = poisson_fitter(terms);
    mr_fit *fit = NULL;
    stopper never = {1000, 0, 0};
    mr_fitter_set_progress_stop(f, stop_at, &never);
    fake_blas_threads = 3;
    blas_threads_seen = -1;
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert_int_eq(blas_threads_seen, 1);
    ck_assert_int_eq(fake_blas_threads, 3);
    mr_fit_free(fit);
    /* a failed run sets it back too */
    fake_blas_threads = 7;
    ck_assert_int_eq(mr_fitter_model_line(f, "numeric no_such_column", "test"), MR_OK);
    ck_assert_int_ne(mr_fitter_run(f, data_path, &fit), MR_OK);
    ck_assert_int_eq(fake_blas_threads, 7);
    mr_fitter_free(f);
}
END_TEST

static Suite *api_suite(void)
{
    Suite *s = suite_create("api");
    TCase *t = tcase_create("public calls");
    tcase_set_timeout(t, 60);
    /* in this process, once: the file goes even when a test fails */
    tcase_add_unchecked_fixture(t, write_data, remove_data);
    tcase_add_test(t, p_values_and_intervals);
    tcase_add_test(t, intercept_alone_is_log_mean);
    tcase_add_test(t, refused_family_line_changes_nothing);
    tcase_add_test(t, term_tests);
    tcase_add_test(t, start_from_a_previous_fit);
    tcase_add_test(t, progress_callback_stops_the_run);
    tcase_add_test(t, blas_threads_set_back);
    suite_add_tcase(s, t);
    return s;
}

int main(void) { return mr_check_run(api_suite(), 0); }
