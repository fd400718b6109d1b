/* check_score.c - the scorer through the public API (millrace.h,
 * "Scoring"): the same bytes for any thread count and for a scorer run
 * twice, the policy for a row the fit cannot score, option checks, the
 * group table.  The numbers themselves: tests/ref/score_samples.py
 * (statsmodels). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

static mr_fit *falls_fit(void)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    ck_assert_ptr_nonnull(f);
    ck_assert_int_eq(mr_fitter_model_file(f, "samples/falls.model"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv.zst", &fit), MR_OK);
    mr_fitter_free(f);
    return fit;
}

static char *slurp(const char *path, size_t *n)
{
    FILE *fp = fopen(path, "rb");
    char *b;
    long len;
    ck_assert_ptr_nonnull(fp);
    fseek(fp, 0, SEEK_END);
    len = ftell(fp);
    rewind(fp);
    b = malloc((size_t)len + 1);
    ck_assert_ptr_nonnull(b);
    ck_assert_uint_eq(fread(b, 1, (size_t)len, fp), (size_t)len);
    fclose(fp);
    *n = (size_t)len;
    return b;
}

static void temp_path(char *out, size_t cap, const char *name)
{
    snprintf(out, cap, "/tmp/check_score_%ld_%s", (long)getpid(), name);
}

START_TEST(same_bytes_for_threads_and_reruns)
{
    mr_fit *fit = falls_fit();
    mr_scorer *s = mr_scorer_new(fit);
    char a[128], b[128];
    size_t na, nb;
    char *x, *y;
    temp_path(a, sizeof a, "1.csv");
    temp_path(b, sizeof b, "3.csv");
    ck_assert_int_eq(mr_scorer_keep(s, "region"), MR_OK);
    ck_assert_int_eq(mr_scorer_set_threads(s, 1), MR_OK);
    ck_assert_int_eq(mr_scorer_run(s, "samples/falls.csv.zst", a), MR_OK);
    ck_assert_uint_eq(mr_scorer_count(s, MR_SCORE_ROWS), 2880);
    ck_assert_uint_eq(mr_scorer_count(s, MR_SCORE_SCORED), 2880);
    ck_assert_int_eq(mr_scorer_set_threads(s, 3), MR_OK);
    ck_assert_int_eq(mr_scorer_run(s, "samples/falls.csv", b), MR_OK);
    x = slurp(a, &na);
    y = slurp(b, &nb);
    ck_assert_uint_eq(na, nb);
    ck_assert(memcmp(x, y, na) == 0);
    {
        const char *head = "region,eta,se_eta,mean,mean_low,mean_high,resid_response,resid_pearson,resid_deviance\n";
        ck_assert(strncmp(x, head, strlen(head)) == 0);
    }
    free(x);
    free(y);
    unlink(a);
    unlink(b);
    mr_scorer_free(s);
    mr_fit_free(fit);
}
END_TEST

START_TEST(unscorable_rows_by_policy)
{
    mr_fit *fit = falls_fit();
    mr_scorer *s = mr_scorer_new(fit);
    char data[128], out[128];
    FILE *fp;
    temp_path(data, sizeof data, "new.csv");
    temp_path(out, sizeof out, "out.csv");
    fp = fopen(data, "w");
    ck_assert_ptr_nonnull(fp);
    fputs("age_band,sex,region,year,person_years\n00-04,F,Eastmoor,2015,10\n00-04,X,Eastmoor,2015,10\n"
          "00-04,F,Eastmoor,NA,10\n",
          fp);
    fclose(fp);
    ck_assert_int_eq(mr_scorer_run(s, data, out), MR_ERR_DOMAIN);
    ck_assert_ptr_nonnull(strstr(mr_scorer_errmsg(s), ":3:2: column 'sex': a level the fit never saw (value 'X')"));
    ck_assert_int_eq(access(out, F_OK), -1);
    ck_assert_int_eq(mr_scorer_set_unseen(s, MR_UNSEEN_BLANK), MR_OK);
    ck_assert_int_eq(mr_scorer_run(s, data, out), MR_OK);
    ck_assert_uint_eq(mr_scorer_count(s, MR_SCORE_ROWS), 3);
    ck_assert_uint_eq(mr_scorer_count(s, MR_SCORE_SCORED), 1);
    ck_assert_uint_eq(mr_scorer_count(s, MR_SCORE_UNSEEN), 1);
    ck_assert_uint_eq(mr_scorer_count(s, MR_SCORE_MISSING), 1);
    unlink(data);
    unlink(out);
    mr_scorer_free(s);
    mr_fit_free(fit);
}
END_TEST

START_TEST(options_checked)
{
    mr_fit *fit = falls_fit();
    mr_scorer *s = mr_scorer_new(fit);
    ck_assert_int_eq(mr_scorer_set_level(s, 1.0), MR_ERR_USAGE);
    ck_assert_int_eq(mr_scorer_set_level(s, 0.0), MR_ERR_USAGE);
    ck_assert_int_eq(mr_scorer_set_unseen(s, (mr_unseen)7), MR_ERR_USAGE);
    ck_assert_int_eq(mr_scorer_set_threads(s, -1), MR_ERR_USAGE);
    ck_assert_int_eq(mr_scorer_column(s, "mean"), MR_OK);
    ck_assert_int_eq(mr_scorer_column(s, "Mean"), MR_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(mr_scorer_errmsg(s), "no column 'Mean'"));
    ck_assert_ptr_null(mr_scorer_groups_report(s, MR_GROUPS_CSV)); /* no groups asked for */
    ck_assert_int_eq(mr_scorer_run(s, "samples/falls.csv", "samples/falls.csv"), MR_ERR_USAGE);
    mr_scorer_free(s);
    mr_scorer_free(NULL);
    mr_fit_free(fit);
}
END_TEST

START_TEST(groups_table)
{
    mr_fit *fit = falls_fit();
    mr_scorer *s = mr_scorer_new(fit);
    char out[128], *csv, *line;
    size_t lines = 0;
    temp_path(out, sizeof out, "g.csv");
    ck_assert_int_eq(mr_scorer_group_by(s, "region"), MR_OK);
    ck_assert_int_eq(mr_scorer_run(s, "samples/falls.csv.zst", out), MR_OK);
    csv = mr_scorer_groups_report(s, MR_GROUPS_CSV);
    ck_assert_ptr_nonnull(csv);
    {
        const char *head = "region,rows,exposure,observed,expected,o_e,o_e_low,o_e_high\n";
        ck_assert(strncmp(csv, head, strlen(head)) == 0);
    }
    for (line = csv; (line = strchr(line, '\n')) != NULL; line++) lines++;
    ck_assert_uint_eq(lines, 9); /* the header and 8 regions */
    ck_assert_ptr_nonnull(strstr(csv, "\nBrindlemarch,360,"));
    mr_free(csv);
    unlink(out);
    mr_scorer_free(s);
    mr_fit_free(fit);
}
END_TEST

static Suite *score_suite(void)
{
    Suite *s = suite_create("score");
    TCase *t = tcase_create("scorer");
    tcase_set_timeout(t, 60);
    tcase_add_test(t, same_bytes_for_threads_and_reruns);
    tcase_add_test(t, unscorable_rows_by_policy);
    tcase_add_test(t, options_checked);
    tcase_add_test(t, groups_table);
    suite_add_tcase(s, t);
    return s;
}

int main(void) { return mr_check_run(score_suite(), 0); }
