/* check_many.c - a fit with a factor declared `many`, through the public
 * API (mr_fit_many_factor, mr_fit_many_nlevels, mr_fit_many_level).
 *
 * Source of truth: the algebraic identity that block elimination is exact:
 * the same model with the factor as ordinary columns (mr_fit_coef by the
 * name "area=LEVEL") gives the same estimates and standard errors, to
 * 1e-10 relative.  Data: a small gaussian file written here from the
 * fixed-seed splitmix64 of check_common.h. */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

static double unit(uint64_t *st) { return (double)(next_random(st) >> 11) * 0x1p-53; }

static void write_data(const char *path)
{
    FILE *f = fopen(path, "w");
    uint64_t st = 9;
    int i;
    ck_assert_ptr_nonnull(f);
    fprintf(f, "y,area,x\n");
    for (i = 0; i < 3000; i++) {
        int a = i < 40 ? i : (int)(next_random(&st) % 40);
        double x = unit(&st) * 4 - 2, y = 1 + 0.1 * a + 0.5 * x + unit(&st);
        fprintf(f, "%.6f,a%02d,%.6f\n", y, a, x);
    }
    fclose(f);
}

static mr_fit *fit_with(const char *path, const char *factor_line)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *out = NULL;
    ck_assert_ptr_nonnull(f);
    ck_assert_int_eq(mr_fitter_model_line(f, "outcome y", NULL), MR_OK);
    ck_assert_int_eq(mr_fitter_model_line(f, "numeric x", NULL), MR_OK);
    ck_assert_int_eq(mr_fitter_model_line(f, factor_line, NULL), MR_OK);
    ck_assert_msg(mr_fitter_run(f, path, &out) == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_free(f);
    return out;
}

static size_t find(const mr_fit *fit, const char *name)
{
    size_t j;
    for (j = 0; j < mr_fit_ncoef(fit); j++)
        if (strcmp(mr_fit_coef_name(fit, j), name) == 0) return j;
    ck_abort_msg("no coefficient %s", name);
    return 0;
}

START_TEST(test_many_levels_as_dense_columns)
{
    char path[] = "/tmp/mr-check-many-XXXXXX";
    int fd = mkstemp(path);
    mr_fit *many, *dense;
    size_t k, j;
    ck_assert_int_ge(fd, 0);
    close(fd);
    write_data(path);
    many = fit_with(path, "factor area many");
    dense = fit_with(path, "factor area");
    unlink(path);
    ck_assert_str_eq(mr_fit_many_factor(many), "area");
    ck_assert_ptr_null(mr_fit_many_factor(dense));
    ck_assert_uint_eq(mr_fit_many_nlevels(many), 39);
    ck_assert_uint_eq(mr_fit_ncoef(many), 2);
    ck_assert_ptr_null(mr_fit_many_level(many, 39, NULL, NULL, NULL));
    for (k = 0; k < 39; k++) {
        double est, se, info;
        char name[64];
        const char *lev = mr_fit_many_level(many, k, &est, &se, &info);
        ck_assert_ptr_nonnull(lev);
        snprintf(name, sizeof name, "area=%s", lev);
        j = find(dense, name);
        ck_assert_msg(fabs(est - mr_fit_coef(dense, j)) <= 1e-10 * fabs(mr_fit_coef(dense, j)), "%s", name);
        ck_assert_msg(fabs(se - mr_fit_std_error(dense, j)) <= 1e-10 * mr_fit_std_error(dense, j), "%s", name);
        ck_assert(info > 0);
    }
    for (j = 0; j < 2; j++) {
        size_t d = find(dense, mr_fit_coef_name(many, j));
        ck_assert(fabs(mr_fit_coef(many, j) - mr_fit_coef(dense, d)) <= 1e-10 * fabs(mr_fit_coef(dense, d)));
        ck_assert(fabs(mr_fit_std_error(many, j) - mr_fit_std_error(dense, d)) <= 1e-10 * mr_fit_std_error(dense, d));
    }
    mr_fit_free(many);
    mr_fit_free(dense);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("many");
    TCase *tc = tcase_create("api");
    tcase_set_timeout(tc, 60);
    tcase_add_test(tc, test_many_levels_as_dense_columns);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
