/* check_json.c - the fit's JSON: text that is not UTF-8, text cut to a
 * length, and (below) reading a fit back.
 *
 * Sources of truth, named beside each check:
 *   - RFC 3629 (UTF-8): well-formed sequences, overlong forms, surrogates
 *     and the U+10FFFF limit, with byte sequences typed in from its table;
 *   - the escape README ("JSON output") and src/output/json_text.h
 *     document: a stray byte is \xHH, a backslash is doubled;
 *   - the contract of mr_fit_read_json in include/millrace.h: a fit
 *     written, read and written again is the same bytes, and reads back
 *     the same numbers (bit for bit, NaN for null) and the same report;
 *     a damaged file is MR_ERR_FORMAT with a message, never a crash.
 */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/error.h"
#include "common/utf8.h"
#include "output/json_text.h"
#include "millrace.h"
#include "check_common.h"

/* RFC 3629, section 4: lengths of well-formed characters and of bytes that
 * begin none. */
START_TEST(char_lengths)
{
    ck_assert_uint_eq(mr__utf8_char_len("a", 1), 1);
    ck_assert_uint_eq(mr__utf8_char_len("\xc3\xa9", 2), 2);         /* U+00E9 */
    ck_assert_uint_eq(mr__utf8_char_len("\xe2\x82\xac", 3), 3);     /* U+20AC */
    ck_assert_uint_eq(mr__utf8_char_len("\xf0\x9f\x98\x80", 4), 4); /* U+1F600 */
    ck_assert_uint_eq(mr__utf8_char_len("\xe9", 1), 0);             /* Latin-1 e-acute */
    ck_assert_uint_eq(mr__utf8_char_len("\xe9t\xe9", 3), 0);
    ck_assert_uint_eq(mr__utf8_char_len("\xc0\xaf", 2), 0);         /* overlong '/' */
    ck_assert_uint_eq(mr__utf8_char_len("\xe0\x80\xaf", 3), 0);     /* overlong '/' */
    ck_assert_uint_eq(mr__utf8_char_len("\xed\xa0\x80", 3), 0);     /* surrogate D800 */
    ck_assert_uint_eq(mr__utf8_char_len("\xf4\x90\x80\x80", 4), 0); /* above U+10FFFF */
    ck_assert_uint_eq(mr__utf8_char_len("\xe2\x82", 2), 0);         /* cut short */
    ck_assert_uint_eq(mr__utf8_char_len("\x80", 1), 0);             /* lone continuation */
}
END_TEST

/* A cut never ends inside a well-formed character; stray bytes are kept. */
START_TEST(cuts)
{
    const char *euros = "a\xe2\x82\xac\xe2\x82\xac"; /* a + two U+20AC */
    ck_assert_uint_eq(mr__utf8_cut(euros, 7), 7);
    ck_assert_uint_eq(mr__utf8_cut(euros, 6), 4);
    ck_assert_uint_eq(mr__utf8_cut(euros, 5), 4);
    ck_assert_uint_eq(mr__utf8_cut(euros, 4), 4);
    ck_assert_uint_eq(mr__utf8_cut(euros, 3), 1);
    ck_assert_uint_eq(mr__utf8_cut(euros, 2), 1);
    ck_assert_uint_eq(mr__utf8_cut(euros, 1), 1);
    ck_assert_uint_eq(mr__utf8_cut(euros, 0), 0);
    ck_assert_uint_eq(mr__utf8_cut("\xf0\x9f\x98\x80", 3), 0);
    ck_assert_uint_eq(mr__utf8_cut("\xf0\x9f\x98\x80", 4), 4);
    ck_assert_uint_eq(mr__utf8_cut("x\xe0\x80", 3), 3); /* no character begins at E0 80 */
    ck_assert_uint_eq(mr__utf8_cut("ab\x80\x80\x80", 5), 5);
}
END_TEST

/* snprintf then the mend, out of the compiler's sight (it warns of a cut
 * it can foresee, and a cut is the point here). */
static __attribute__((noinline)) void print_cut(char *buf, size_t cap, const char *text)
{
    mr__utf8_mend_cut(buf, cap, snprintf(buf, cap, "%s", text));
}

START_TEST(mended_messages)
{
    char buf[8];
    mr__error err;
    char big[3000];
    size_t i;
    /* "ab" + U+20AC U+20AC: 8 bytes into 8 leaves "ab" + one euro */
    print_cut(buf, sizeof buf, "ab\xe2\x82\xac\xe2\x82\xac");
    ck_assert_str_eq(buf, "ab\xe2\x82\xac");
    /* not cut: a trailing stray byte stays */
    print_cut(buf, sizeof buf, "ab\xe2");
    ck_assert_str_eq(buf, "ab\xe2");
    for (i = 0; i + 2 < sizeof big; i += 2) memcpy(big + i, "\xc3\xa9", 2);
    big[i] = '\0';
    mr__fail(&err, MR_ERR_FORMAT, "%s", big); /* 1023 bytes would end inside a character */
    ck_assert_uint_eq(strlen(err.msg), MR__MSG_CAP - 2);
    ck_assert_uint_eq(mr__utf8_cut(err.msg, strlen(err.msg)), strlen(err.msg));
}
END_TEST

START_TEST(quoted_cells)
{
    char out[16], cell[40];
    size_t i;
    cell[0] = 'a';
    for (i = 1; i + 3 <= sizeof cell - 1; i += 3) memcpy(cell + i, "\xe2\x82\xac", 3);
    /* 12 bytes fit: 'a' + three euros is 10, the fourth would split */
    mr__quote_value(out, sizeof out, cell, i);
    ck_assert_str_eq(out, "a\xe2\x82\xac\xe2\x82\xac\xe2\x82\xac...");
    /* control bytes are written as \xNN (mr__escape_text) */
    mr__quote_value(out, sizeof out, "short\x01", 6);
    ck_assert_str_eq(out, "short\\x01");
}
END_TEST

static char *unescaped(const char *s, mr_status want)
{
    char *out = NULL;
    ck_assert_int_eq(mr__json_unescape(s, strlen(s), &out), want);
    return out;
}

/* The escape of json_text.h: stray bytes as \xHH, backslashes doubled,
 * well-formed text as it is; and back. */
START_TEST(escape_round_trip)
{
    char all[256], *e, *back;
    int c;
    e = mr__json_escape("r\xe9gion \\ \xc3\xa9t\xc3\xa9 \xe2\x82");
    ck_assert_str_eq(e, "r\\xE9gion \\\\ \xc3\xa9t\xc3\xa9 \\xE2\\x82");
    back = unescaped(e, MR_OK);
    ck_assert_str_eq(back, "r\xe9gion \\ \xc3\xa9t\xc3\xa9 \xe2\x82");
    mr__free(e);
    mr__free(back);
    /* every byte value, in one string */
    for (c = 1; c < 256; c++) all[c - 1] = (char)c;
    all[255] = '\0';
    e = mr__json_escape(all);
    back = unescaped(e, MR_OK);
    ck_assert_str_eq(back, all);
    mr__free(e);
    mr__free(back);
    ck_assert_ptr_null(unescaped("a\\n", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\x4", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\xZZ", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\x00", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\", MR_ERR_FORMAT));
}
END_TEST


/* ---- reading a fit back ------------------------------------------------ */

static char dir[64];

static const char *in_dir(const char *name)
{
    static char path[4][256];
    static int k;
    k = (k + 1) % 4;
    snprintf(path[k], sizeof path[k], "%s/%s", dir, name);
    return path[k];
}

static void setup_dir(void)
{
    snprintf(dir, sizeof dir, "/tmp/check_json-XXXXXX");
    ck_assert_ptr_nonnull(mkdtemp(dir));
}

static void teardown_dir(void)
{
    char cmd[128];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    ck_assert_int_eq(system(cmd), 0);
}

static char *slurp(const char *path)
{
    FILE *fp = fopen(path, "rb");
    long n;
    char *text;
    ck_assert_ptr_nonnull(fp);
    fseek(fp, 0, SEEK_END);
    n = ftell(fp);
    rewind(fp);
    text = malloc((size_t)n + 1);
    ck_assert_ptr_nonnull(text);
    ck_assert_uint_eq(fread(text, 1, (size_t)n, fp), (size_t)n);
    text[n] = '\0';
    fclose(fp);
    return text;
}

static void spit(const char *path, const char *text, size_t n)
{
    FILE *fp = fopen(path, "wb");
    ck_assert_ptr_nonnull(fp);
    ck_assert_uint_eq(fwrite(text, 1, n, fp), n);
    ck_assert_int_eq(fclose(fp), 0);
}

static mr_fit *fit_with(const char *model_file, const char *const *lines, size_t nlines, const char *data,
                        int skip_bad)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    size_t i;
    ck_assert_ptr_nonnull(f);
    if (model_file) ck_assert_msg(mr_fitter_model_file(f, model_file) == MR_OK, "%s", mr_fitter_errmsg(f));
    for (i = 0; i < nlines; i++)
        ck_assert_msg(mr_fitter_model_line(f, lines[i], "--test") == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_set_int(f, MR_OPT_THREADS, 2);
    mr_fitter_set_int(f, MR_OPT_SKIP_BAD_ROWS, skip_bad);
    ck_assert_msg(mr_fitter_run(f, data, &fit) == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_free(f);
    return fit;
}

static void same_fit(const mr_fit *a, const mr_fit *b)
{
    size_t i, j, p = mr_fit_ncoef(a);
    char *ra = mr_fit_report(a, 0), *rb = mr_fit_report(b, 17);
    ck_assert_uint_eq(mr_fit_ncoef(b), p);
    ck_assert_int_eq(mr_fit_status(a), mr_fit_status(b));
    for (j = 0; j < p; j++) {
        ck_assert_str_eq(mr_fit_coef_name(a, j), mr_fit_coef_name(b, j));
        ck_assert(same_bits(mr_fit_coef(a, j), mr_fit_coef(b, j)) || (isnan(mr_fit_coef(a, j)) && isnan(mr_fit_coef(b, j))));
        for (i = 0; i < p; i++) {
            double x = mr_fit_covariance(a, i, j), y = mr_fit_covariance(b, i, j);
            ck_assert(same_bits(x, y) || (isnan(x) && isnan(y)));
        }
    }
    for (i = 0; i <= MR_STAT_FAMILY_PARAMETER_SE; i++) {
        if (i == MR_STAT_START_CARRIED) continue;
        double x = mr_fit_stat(a, (mr_stat)i), y = mr_fit_stat(b, (mr_stat)i);
        ck_assert(same_bits(x, y) || (isnan(x) && isnan(y)));
    }
    ck_assert_int_eq(mr_fit_calibration_groups(a), mr_fit_calibration_groups(b));
    ck_assert_int_gt(mr_fit_calibration_groups(a), 0);
    ck_assert_str_eq(mr_fit_calibration_basis(a), mr_fit_calibration_basis(b));
    for (i = 0; i < (size_t)mr_fit_calibration_groups(a); i++) {
        mr_calibration_group ga, gb;
        ck_assert(mr_fit_calibration_group(a, i, &ga) == MR_OK && mr_fit_calibration_group(b, i, &gb) == MR_OK);
        ck_assert(ga.rows == gb.rows && same_bits(ga.weight, gb.weight) && same_bits(ga.observed, gb.observed) &&
                  same_bits(ga.expected, gb.expected) && same_bits(ga.mean_low, gb.mean_low) &&
                  same_bits(ga.mean_high, gb.mean_high));
    }
    ck_assert(mr_fit_calibration_group(a, (size_t)mr_fit_calibration_groups(a), &(mr_calibration_group){0}) ==
              MR_ERR_USAGE);
    ck_assert_uint_eq(mr_fit_nwarnings(a), mr_fit_nwarnings(b));
    for (i = 0; i < mr_fit_nwarnings(a); i++) ck_assert_str_eq(mr_fit_warning(a, i), mr_fit_warning(b, i));
    mr_free(rb);
    rb = mr_fit_report(b, 0);
    ck_assert_str_eq(ra, rb);
    mr_free(ra);
    mr_free(rb);
}

/* write -> read -> write: the same bytes, the same fit. */
static void round_trip(mr_fit *fit, const char *name)
{
    char msg[512], *first, *second;
    mr_fit *back = NULL;
    const char *a = in_dir("a.json"), *b = in_dir("b.json");
    ck_assert_msg(mr_fit_write_json(fit, a, msg, sizeof msg) == MR_OK, "%s: %s", name, msg);
    ck_assert_msg(mr_fit_read_json(a, &back, msg, sizeof msg) == MR_OK, "%s: %s", name, msg);
    ck_assert_msg(mr_fit_write_json(back, b, msg, sizeof msg) == MR_OK, "%s: %s", name, msg);
    first = slurp(a);
    second = slurp(b);
    ck_assert_msg(strcmp(first, second) == 0, "%s: the fit read back writes other bytes", name);
    same_fit(fit, back);
    free(first);
    free(second);
    mr_fit_free(back);
    mr_fit_free(fit);
}

START_TEST(round_trip_falls)
{
    static const char *const more[] = {"factor region ref=Eastmoor"}; /* a command-line override */
    round_trip(fit_with("samples/falls.model", more, 1, "samples/falls.csv.zst", 0), "falls");
}
END_TEST

START_TEST(round_trip_screening)
{
    round_trip(fit_with("samples/screening.model", NULL, 0, "samples/screening.csv.zst", 0), "screening.zst");
    round_trip(fit_with("samples/screening.model", NULL, 0, "samples/screening.csv", 0), "screening.csv");
}
END_TEST

/* Aliased columns (b = 2 a), warnings, skipped bad rows, missing cells,
 * Latin-1 and backslashed text, no intercept (full coding), an
 * interaction of a factor and a numeric. */
START_TEST(round_trip_awkward)
{
    static const char *const lines[] = {"outcome y",       "family poisson",    "numeric a", "numeric b",
                                        "factor r\xe9gion", "interact r\xe9gion a", "intercept no", "  # a comment"};
    const char *data = in_dir("awkward\\.csv");
    const char *csv = "y,a,b,r\xe9gion\n1,1,2,Nord\n2,2,4,\xc9st\n3,3,6,Sud\n5,4,8,\xc9st\n4,5,10,Nord\n"
                      "7,6,12,Sud\n2,x,4,Nord\n6,7,14,\n3,2,4,Nord\n";
    spit(data, csv, strlen(csv));
    round_trip(fit_with(NULL, lines, sizeof lines / sizeof lines[0], data, 1), "awkward");
}
END_TEST

/* A set of files (mr_fitter_run_set): input.set, each file's identity,
 * written, read back and written again; a single input writes none. */
START_TEST(round_trip_set)
{
    static const char *const lines[] = {"outcome y", "family poisson", "numeric a"};
    const char *set[2];
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    size_t i;
    char *text;
    set[0] = in_dir("set1.csv");
    set[1] = in_dir("set2.csv");
    spit(set[0], "y,a\n1,1\n2,2\n3,3\n", 16);
    spit(set[1], "y,a\n5,4\n4,5\n", 12);
    ck_assert_ptr_nonnull(f);
    for (i = 0; i < 3; i++) ck_assert_msg(mr_fitter_model_line(f, lines[i], "--test") == MR_OK, "%s", mr_fitter_errmsg(f));
    ck_assert_msg(mr_fitter_run_set(f, set, 2, &fit) == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_free(f);
    ck_assert_msg(mr_fit_write_json(fit, in_dir("set.json"), NULL, 0) == MR_OK, "write");
    text = slurp(in_dir("set.json"));
    ck_assert_msg(strstr(text, "\"set\": {") != NULL && strstr(text, "set2.csv\"") != NULL, "%s", text);
    free(text);
    round_trip(fit, "set");
}
END_TEST

/* Splines: quantile knots of the calendar year times a factor, and given
 * knots with boundary knots inside the data (straight-line ends). */
START_TEST(round_trip_spline)
{
    static const char *const by_df[] = {"spline year df=3", "interact year sex"};
    static const char *const by_knots[] = {"spline year knots=2017.5,2019 boundary=2016,2021"};
    round_trip(fit_with("samples/falls.model", by_df, 2, "samples/falls.csv.zst", 0), "spline df");
    round_trip(fit_with("samples/falls.model", by_knots, 1, "samples/falls.csv.zst", 0), "spline knots");
}
END_TEST

/* Robust standard errors by cluster (the robust object): written, read
 * back with the same bits (type, cluster, clusters, factor, standard
 * errors, covariance) and written again; a fit without them has none. */
START_TEST(round_trip_robust)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL, *back = NULL;
    char msg[512];
    const char *a = in_dir("robust.json");
    size_t i, j, p;
    ck_assert_int_eq(mr_fitter_model_file(f, "samples/falls.model"), MR_OK);
    ck_assert_int_eq(mr_fitter_set_cluster(f, "region", 0), MR_OK);
    ck_assert_int_eq(mr_fitter_set_robust(f, MR_ROBUST_HC1), MR_OK);
    ck_assert_msg(mr_fitter_run(f, "samples/falls.csv", &fit) == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_free(f);
    ck_assert_int_eq(mr_fit_write_json(fit, a, msg, sizeof msg), MR_OK);
    ck_assert_msg(mr_fit_read_json(a, &back, msg, sizeof msg) == MR_OK, "%s", msg);
    ck_assert_int_eq(mr_fit_robust(back), MR_ROBUST_HC1);
    ck_assert_str_eq(mr_fit_cluster(back), "region");
    ck_assert_uint_eq(mr_fit_clusters(back), 8);
    ck_assert(same_bits(mr_fit_robust_adjustment(fit), mr_fit_robust_adjustment(back)));
    p = mr_fit_ncoef(fit);
    for (i = 0; i < p; i++) {
        ck_assert(same_bits(mr_fit_robust_std_error(fit, i), mr_fit_robust_std_error(back, i)));
        for (j = 0; j < p; j++)
            ck_assert(same_bits(mr_fit_robust_covariance(fit, i, j), mr_fit_robust_covariance(back, i, j)));
    }
    ck_assert(isnan(mr_fit_robust_std_error(fit, p)));
    mr_fit_free(back);
    round_trip(fit, "robust");
    fit = fit_with("samples/falls.model", NULL, 0, "samples/falls.csv.zst", 0);
    ck_assert_int_eq(mr_fit_robust(fit), MR_ROBUST_NONE);
    ck_assert_ptr_null(mr_fit_cluster(fit));
    ck_assert(isnan(mr_fit_robust_std_error(fit, 0)));
    mr_fit_free(fit);
}
END_TEST

/* A family with a parameter of its own: the parameter is written, read
 * back and written again. */
START_TEST(round_trip_family_parameter)
{
    static const char *const lines[] = {"outcome y", "family negative-binomial theta=2.5", "factor g", "numeric x"};
    const char *data = in_dir("nb.csv");
    const char *csv = "y,g,x\n0,a,1\n3,b,2\n1,a,3\n7,b,1\n2,c,2\n0,c,5\n4,a,4\n9,b,3\n1,c,1\n";
    const char *lines2[] = {"outcome y", NULL, "factor g", "numeric x"};
    char msg[512], *text;
    mr_fit *fit;
    spit(data, csv, strlen(csv));
    fit = fit_with(NULL, lines, sizeof lines / sizeof lines[0], data, 0);
    ck_assert(mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER) == 2.5);
    ck_assert_msg(mr_fit_write_json(fit, in_dir("good.json"), msg, sizeof msg) == MR_OK, "%s", msg);
    text = slurp(in_dir("good.json"));
    ck_assert_ptr_nonnull(strstr(text, "\"family_parameter\": {"));
    ck_assert_ptr_nonnull(strstr(text, "\"name\": \"theta\",\n   \"value\": 2.5\n"));
    free(text);
    round_trip(fit, "negative binomial");
    lines2[1] = "family tweedie power=1.25"; /* its log-likelihood by the series */
    fit = fit_with(NULL, lines2, sizeof lines2 / sizeof lines2[0], in_dir("nb.csv"), 0);
    ck_assert(isfinite(mr_fit_stat(fit, MR_STAT_LOG_LIKELIHOOD)) && mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER) == 1.25);
    ck_assert(isnan(mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER_SE)));
    round_trip(fit, "tweedie");
    lines2[1] = "family tweedie power=profile"; /* the power by profile likelihood, the profile kept */
    fit = fit_with(NULL, lines2, sizeof lines2 / sizeof lines2[0], in_dir("nb.csv"), 0);
    ck_assert(mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER) > 1 && mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER) < 2);
    ck_assert_msg(mr_fit_write_json(fit, in_dir("good.json"), msg, sizeof msg) == MR_OK, "%s", msg);
    text = slurp(in_dir("good.json"));
    ck_assert_ptr_nonnull(strstr(text, "\"profile\": {\n    \"points\": [\n"));
    free(text);
    round_trip(fit, "tweedie, power by profile likelihood");
    lines2[1] = "family negative-binomial"; /* theta estimated, with its standard error */
    csv = "y,g,x\n0,a,1\n13,b,2\n1,a,3\n0,b,1\n2,c,2\n0,c,5\n24,a,4\n9,b,3\n1,c,1\n0,a,2\n6,b,4\n0,c,3\n";
    spit(in_dir("nb2.csv"), csv, strlen(csv)); /* overdispersed: theta's maximum is finite */
    fit = fit_with(NULL, lines2, sizeof lines2 / sizeof lines2[0], in_dir("nb2.csv"), 0);
    ck_assert(mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER) > 0 && mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER_SE) > 0);
    ck_assert_msg(mr_fit_write_json(fit, in_dir("good.json"), msg, sizeof msg) == MR_OK, "%s", msg);
    text = slurp(in_dir("good.json"));
    ck_assert_ptr_nonnull(strstr(text, "\"estimated\": {\n    \"standard_error\": "));
    free(text);
    round_trip(fit, "negative binomial, theta estimated");
}
END_TEST

static mr_fit *saved_falls(void)
{
    char msg[512];
    mr_fit *fit = fit_with("samples/falls.model", NULL, 0, "samples/falls.csv.zst", 0);
    ck_assert_msg(mr_fit_write_json(fit, in_dir("good.json"), msg, sizeof msg) == MR_OK, "%s", msg);
    return fit;
}

/* The good file with its first `old` replaced by `new` (or cut at `cut`
 * bytes when old is NULL) must fail with `want` and a message holding
 * `says`. */
static void damaged(const char *old, const char *new, size_t cut, mr_status want, const char *says)
{
    char msg[512], *text = slurp(in_dir("good.json")), *at;
    mr_fit *fit = (mr_fit *)1;
    const char *bad = in_dir("bad.json");
    if (old == NULL) {
        spit(bad, text, cut);
    } else {
        size_t n = strlen(text), lo, ln = strlen(old), lnew = strlen(new);
        char *edited = malloc(n + lnew + 1);
        ck_assert_ptr_nonnull(at = strstr(text, old));
        lo = (size_t)(at - text);
        memcpy(edited, text, lo);
        memcpy(edited + lo, new, lnew);
        memcpy(edited + lo + lnew, at + ln, n - lo - ln + 1);
        spit(bad, edited, strlen(edited));
        free(edited);
    }
    free(text);
    ck_assert_int_eq(mr_fit_read_json(bad, &fit, msg, sizeof msg), want);
    ck_assert_ptr_null(fit);
    ck_assert_msg(strstr(msg, says) != NULL, "message '%s' lacks '%s'", msg, says);
}

/* A spline's knots read back as mr__spline_make takes them, or refused. */
START_TEST(damaged_spline)
{
    static const char *const by_knots[] = {"spline year knots=2017.5,2019 boundary=2016,2021"};
    char msg[256];
    mr_fit *fit = fit_with("samples/falls.model", by_knots, 1, "samples/falls.csv.zst", 0);
    ck_assert_msg(mr_fit_write_json(fit, in_dir("good.json"), msg, sizeof msg) == MR_OK, "%s", msg);
    mr_fit_free(fit);
    damaged("2017.5", "2019.5", 0, MR_ERR_FORMAT, "'model.terms[3].spline' needs two boundary knots and increasing");
    damaged("2016.0", "2026.0", 0, MR_ERR_FORMAT, "'model.terms[3].spline' needs two boundary knots");
    damaged("2016.0,", "", 0, MR_ERR_FORMAT, "'model.terms[3].spline' needs two boundary knots");
}
END_TEST

START_TEST(damaged_files)
{
    char msg[256];
    mr_fit *fit = saved_falls(), *none = NULL;
    mr_fit_free(fit);
    damaged(NULL, NULL, 2000, MR_ERR_FORMAT, "bad.json:");      /* truncated: jansson's line and column */
    damaged(NULL, NULL, 0, MR_ERR_FORMAT, "bad.json:");
    damaged("\"millrace-fit\"", "\"other-fit\"", 0, MR_ERR_FORMAT, "not a fit written by millrace");
    damaged("\"format_version\": 3", "\"format_version\": 4", 0, MR_ERR_FORMAT, "format_version");
    damaged("\"format_version\": 3", "\"format_version\": 1", 0, MR_ERR_FORMAT, "format_version is not 2 to 3");
    damaged("\"format_version\": 3", "\"format_version\": \"3\"", 0, MR_ERR_FORMAT, "format_version");
    damaged("\"outcome\": \"admissions\",", "", 0, MR_ERR_FORMAT, "'model.outcome' is missing");
    damaged("\"iterations\": ", "\"iterations\": \"x\", \"was\": ", 0, MR_ERR_FORMAT,
            "'convergence.iterations' should be a whole number");
    damaged("\"name\": \"intercept\"", "\"name\": 1", 0, MR_ERR_FORMAT, "'coefficients[0].name' should be a string");
    damaged("\"name\": \"intercept\"", "\"name\": \"a\\\\q\"", 0, MR_ERR_FORMAT, "'coefficients[0].name' holds");
    damaged("\"family\": \"poisson\"", "\"family\": \"lognormal\"", 0, MR_ERR_FORMAT, "'model.family'");
    damaged("\"link\": ", "\"family_parameter\": {\"name\": \"theta\", \"value\": 2}, \"link\": ", 0, MR_ERR_FORMAT,
            "'model.family_parameter' is given for a family without one");
    damaged("\"family\": \"poisson\"", "\"family\": \"negative-binomial\"", 0, MR_ERR_FORMAT,
            "'model.family_parameter' is missing");
    damaged("\"covariance\": [", "\"covariance\": [[1],", 0, MR_ERR_FORMAT, "'covariance'");
    damaged("\"first_coefficient\": 1,", "\"first_coefficient\": 1000,", 0, MR_ERR_FORMAT, "model.terms[0]");
    damaged("\"type\": \"factor\"", "\"type\": \"numeric\"", 0, MR_ERR_FORMAT, "model.terms[0].columns[0].type");
    damaged("\"checksum\": \"fnv1a64w:", "\"checksum\": \"fnv1a64w:zz", 0, MR_ERR_FORMAT, "'input.checksum'");
    damaged("{", "[1, 2], {", 0, MR_ERR_FORMAT, "bad.json:");
    damaged("\"rows\": {", "\"rows\": {\"read\": 1, ", 0, MR_ERR_FORMAT, "bad.json:"); /* a key twice */
    ck_assert_int_eq(mr_fit_read_json(in_dir("absent.json"), &none, msg, sizeof msg), MR_ERR_IO);
    ck_assert_ptr_null(none);
    ck_assert_msg(strstr(msg, "absent.json") != NULL, "%s", msg);
    ck_assert_int_eq(mr_fit_read_json(in_dir("absent.json"), &none, NULL, 0), MR_ERR_IO);
}
END_TEST

/* The audit trail ("run": command line, start, end, host) written and read
 * back; a fit written before it existed (no "run") still reads, and
 * writes the same bytes again (include/millrace.h, mr_fit_read_json). */
START_TEST(audit_trail)
{
    static const char *const argv[] = {"millrace", "fit", "--json", "r\xe9sultat.json", "falls.csv"};
    char msg[512], *text, *start, *end, *again;
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL, *back = NULL;
    ck_assert_int_eq(mr_fitter_model_file(f, "samples/falls.model"), MR_OK);
    ck_assert_int_eq(mr_fitter_set_command_line(f, 5, argv), MR_OK);
    ck_assert_msg(mr_fitter_run(f, "samples/falls.csv", &fit) == MR_OK, "%s", mr_fitter_errmsg(f));
    mr_fitter_free(f);
    ck_assert_int_eq(mr_fit_write_json(fit, in_dir("run.json"), msg, sizeof msg), MR_OK);
    text = slurp(in_dir("run.json"));
    ck_assert_msg(strstr(text, "\"command_line\": [\n   \"millrace\",\n   \"fit\"") != NULL, "%.400s", text);
    ck_assert_msg(strstr(text, "\"r\\\\xE9sultat.json\"") != NULL, "%.600s", text); /* escaped as all text */
    ck_assert_msg(strstr(text, "\"started\": \"20") != NULL && strstr(text, "\"host\": \"") != NULL, "%.600s", text);
    round_trip(fit, "audit trail");
    /* the same file as an older writer left it: no "run" */
    start = strstr(text, " \"run\": {");
    end = strstr(start, "\n },\n") + strlen("\n },\n");
    memmove(start, end, strlen(end) + 1);
    spit(in_dir("old.json"), text, strlen(text));
    ck_assert_msg(mr_fit_read_json(in_dir("old.json"), &back, msg, sizeof msg) == MR_OK, "%s", msg);
    ck_assert_int_eq(mr_fit_write_json(back, in_dir("old2.json"), msg, sizeof msg), MR_OK);
    again = slurp(in_dir("old2.json"));
    ck_assert_str_eq(text, again);
    free(text);
    free(again);
    mr_fit_free(back);
}
END_TEST

/* A fit the format 2 writer saved (tests/cli/fit_format2.json, kept as it
 * was written: std_error, df_residual, df_null, "(intercept)") reads as the
 * fit a run of its model gives now, under the new names, and is written
 * back as format 3.  It was written under the relative deviance rule, which
 * stopped short of where today's step rule does: its estimates are within
 * 1e-6 of their standard errors of today's, its standard errors and
 * statistics within 1e-6 relative (the old rule's distance; the counts of
 * iterations and passes and the stopping value are the rules' own). */
static int close_to(double x, double y, double scale)
{
    return (isnan(x) && isnan(y)) || fabs(x - y) <= 1e-6 * scale;
}
START_TEST(format_2_read)
{
    static const char *const lines[] = {"outcome admissions", "family poisson", "exposure person_years",
                                        "factor sex", "factor region", "numeric year"};
    char msg[512], *text;
    size_t i, j;
    mr_fit *now = fit_with(NULL, lines, 6, "samples/falls.csv", 0), *old = NULL;
    text = slurp("tests/cli/fit_format2.json");
    ck_assert(strstr(text, "\"format_version\": 2") && strstr(text, "\"(intercept)\"") && strstr(text, "\"std_error\""));
    free(text);
    ck_assert_msg(mr_fit_read_json("tests/cli/fit_format2.json", &old, msg, sizeof msg) == MR_OK, "%s", msg);
    ck_assert_uint_eq(mr_fit_ncoef(old), mr_fit_ncoef(now));
    ck_assert_str_eq(mr_fit_coef_name(old, 0), "intercept");
    for (j = 0; j < mr_fit_ncoef(now); j++) {
        ck_assert_str_eq(mr_fit_coef_name(old, j), mr_fit_coef_name(now, j));
        ck_assert(close_to(mr_fit_coef(old, j), mr_fit_coef(now, j), mr_fit_std_error(now, j)));
        ck_assert(close_to(mr_fit_std_error(old, j), mr_fit_std_error(now, j), mr_fit_std_error(now, j)));
    }
    for (i = 0; i <= MR_STAT_FAMILY_PARAMETER; i++) {
        double x = mr_fit_stat(old, (mr_stat)i), y = mr_fit_stat(now, (mr_stat)i);
        if (i == MR_STAT_SECONDS || i == MR_STAT_ITERATIONS || i == MR_STAT_PASSES || i == MR_STAT_RELATIVE_CHANGE)
            continue;
        ck_assert_msg(close_to(x, y, fabs(y)), "statistic %zu: %.17g, %.17g", i, x, y);
    }
    ck_assert_int_eq(mr_fit_write_json(old, in_dir("upgraded.json"), msg, sizeof msg), MR_OK);
    text = slurp(in_dir("upgraded.json"));
    ck_assert(strstr(text, "\"format_version\": 3") && strstr(text, "\"name\": \"intercept\""));
    ck_assert(strstr(text, "\"standard_error\": ") && strstr(text, "\"residual_df\": ") && strstr(text, "\"null_df\": "));
    ck_assert(!strstr(text, "std_error") && !strstr(text, "df_residual") && !strstr(text, "(intercept)"));
    free(text);
    mr_fit_free(old);
    mr_fit_free(now);
    /* a column called intercept beside "(intercept)": refused, not two coefficients of one name */
    text = slurp("tests/cli/fit_format2.json");
    {
        char *at = strstr(strstr(text, "\"coefficients\": ["), "\"name\": \"year\"");
        char *edited = malloc(strlen(text) + 16);
        ck_assert_ptr_nonnull(at);
        sprintf(edited, "%.*s\"name\": \"intercept\"%s", (int)(at - text), text, at + strlen("\"name\": \"year\""));
        spit(in_dir("clash.json"), edited, strlen(edited));
        free(edited);
    }
    free(text);
    ck_assert_int_eq(mr_fit_read_json(in_dir("clash.json"), &old, msg, sizeof msg), MR_ERR_FORMAT);
    ck_assert_msg(strstr(msg, "both '(intercept)' and a coefficient named 'intercept'") != NULL, "%s", msg);
}
END_TEST

static Suite *json_suite(void)
{
    Suite *s = suite_create("json");
    TCase *t = tcase_create("text");
    tcase_add_test(t, char_lengths);
    tcase_add_test(t, cuts);
    tcase_add_test(t, mended_messages);
    tcase_add_test(t, quoted_cells);
    tcase_add_test(t, escape_round_trip);
    suite_add_tcase(s, t);
    t = tcase_create("read");
    tcase_add_checked_fixture(t, setup_dir, teardown_dir);
    tcase_set_timeout(t, 120);
    tcase_add_test(t, round_trip_falls);
    tcase_add_test(t, round_trip_screening);
    tcase_add_test(t, round_trip_awkward);
    tcase_add_test(t, round_trip_set);
    tcase_add_test(t, round_trip_spline);
    tcase_add_test(t, round_trip_family_parameter);
    tcase_add_test(t, round_trip_robust);
    tcase_add_test(t, damaged_files);
    tcase_add_test(t, audit_trail);
    tcase_add_test(t, damaged_spline);
    tcase_add_test(t, format_2_read);
    suite_add_tcase(s, t);
    return s;
}

int main(void) { return mr_check_run(json_suite(), 1); }
