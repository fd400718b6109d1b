/* check_io.c - every failing read, write, sync, close or rename ends cleanly.
 *
 * Built against a library compiled with MR_IO_FAILURE_TESTS (make
 * io-fault-check, under ASan, whose leak checker runs when this process
 * exits).  For n = 0, 1, 2, ... the n-th I/O call of a whole fit and its
 * JSON output fails; the run must then end with MR_ERR_IO and a message,
 * the JSON path must hold its earlier content or a whole new file (a
 * failed sync of the directory comes after the rename), and no temporary
 * file may be left.  The one exception is the cache, which only saves
 * time: a failing call on its file may instead give the fit without it,
 * flagged by the "no cache" warning, and then the same bits.  Then the n-th read or write comes up short instead,
 * as the kernel may do: the results must be the same bits as a run without
 * any.  The same for the HTML page of a fit.  A failed write to the cache
 * file is the one failure a fit goes on from: it gives the cache up, says
 * so in a warning, and must give the same bits.  Source of truth: the API
 * contract in millrace.h ("Output files", mr_fitter_run) and README (the
 * cache falls back to rereading). */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <dirent.h>
#include <fcntl.h>
#include <jansson.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "common/sysio.h"
#include "millrace.h"
#include "check_common.h"

#define MAX_COEF 64

static const char *const falls_model[] = {"outcome admissions", "family poisson", "exposure person_years",
                                          "factor age_band ref=40-44", "factor sex", "numeric year",
                                          "interact age_band sex", NULL};

typedef struct scenario {
    const char *path; /* "-": samples/falls.csv as standard input */
    int no_cache, no_collapse;
    int checkpoint; /* 1: a checkpoint written after every pass (none there before) */
} scenario;

static char dir[64], json_path[128];

static void put_old_output(void)
{
    FILE *fp = fopen(json_path, "w");
    ck_assert_ptr_nonnull(fp);
    fputs("old\n", fp);
    ck_assert_int_eq(fclose(fp), 0);
}

/* The earlier content, or a whole JSON fit: never anything in between. */
static void assert_output_whole(long n)
{
    json_error_t e;
    json_t *j = json_load_file(json_path, 0, &e);
    if (j == NULL) {
        char buf[8] = {0};
        FILE *fp = fopen(json_path, "r");
        ck_assert_ptr_nonnull(fp);
        ck_assert_uint_le(fread(buf, 1, sizeof buf - 1, fp), 4);
        fclose(fp);
        ck_assert_msg(strcmp(buf, "old\n") == 0, "call %ld: the output is neither old nor whole", n);
    } else {
        ck_assert_str_eq(json_string_value(json_object_get(j, "format")), "millrace-fit");
        json_decref(j);
    }
}

static void assert_no_temporary(long n)
{
    DIR *d = opendir(dir);
    struct dirent *e;
    ck_assert_ptr_nonnull(d);
    while ((e = readdir(d)) != NULL)
        ck_assert_msg(strstr(e->d_name, ".tmp-") == NULL, "call %ld: %s left behind", n, e->d_name);
    closedir(d);
}

static void use_sample_as_stdin(void)
{
    int fd = open("samples/falls.csv", O_RDONLY);
    ck_assert_int_ge(fd, 0);
    ck_assert_int_eq(dup2(fd, STDIN_FILENO), STDIN_FILENO);
    close(fd);
}

/* Whether the fit went on without its cache (a warning says so). */
static int fell_back_to_rereading(const mr_fit *fit)
{
    size_t i;
    for (i = 0; i < mr_fit_nwarnings(fit); i++)
        if (strncmp(mr_fit_warning(fit, i), "no cache", 8) == 0) return 1;
    return 0;
}

/* One fit and its JSON with the plan (n, mode) armed; the status of the
 * first step that failed, and the coefficients when none did. */
static mr_status fit_and_write(const scenario *sc, long n, int mode, double *coef, char *msg, size_t cap,
                               int *fell_back)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    mr_status st = MR_OK;
    size_t i;
    ck_assert_ptr_nonnull(f);
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    mr_fitter_set_int(f, MR_OPT_THREADS, 2);
    mr_fitter_set_int(f, MR_OPT_BUFFER_SIZE, 16384); /* several reads a pass */
    mr_fitter_set_int(f, MR_OPT_NO_CACHE, sc->no_cache);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, sc->no_collapse);
    if (strcmp(sc->path, "-") == 0) use_sample_as_stdin();
    if (sc->checkpoint) {
        char ckpt[160];
        snprintf(ckpt, sizeof ckpt, "%s/fit.ckpt", dir);
        unlink(ckpt);
        ck_assert_int_eq(mr_fitter_set_checkpoint(f, ckpt), MR_OK);
    }
    mr__io_fail_after(n, mode);
    st = mr_fitter_run(f, sc->path, &fit);
    if (st != MR_OK) snprintf(msg, cap, "%s", mr_fitter_errmsg(f));
    if (st == MR_OK) {
        for (i = 0; i < mr_fit_ncoef(fit) && i < MAX_COEF; i++) coef[i] = mr_fit_coef(fit, i);
        *fell_back = fell_back_to_rereading(fit);
        st = mr_fit_write_json(fit, json_path, msg, cap);
    }
    mr_fit_free(fit);
    mr_fitter_free(f);
    return st;
}

/* Returns 1 once n is past the last I/O call of the run. */
static int run_failing_at(const scenario *sc, long n, int mode, const double *want)
{
    double coef[MAX_COEF];
    char msg[1024] = "";
    mr_status st;
    int happened, fell_back = 0;
    size_t i;
    memset(coef, 0, sizeof coef);
    put_old_output();
    st = fit_and_write(sc, n, mode, coef, msg, sizeof msg, &fell_back);
    happened = mr__io_failures_left() < 0;
    mr__io_fail_after(-1, MR__IO_FAIL);
    assert_no_temporary(n);
    assert_output_whole(n);
    /* a checkpoint's lock notes its holder in its file and closes it at the
     * end, both calls whose failure costs nothing (common/outlock.c): then
     * the fit succeeds, and must give the same bits */
    if (mode == MR__IO_FAIL && happened && !(st == MR_OK && (fell_back || sc->checkpoint))) {
        ck_assert_msg(st == MR_ERR_IO, "%s, call %ld failing: status %d (%s)", sc->path, n, (int)st, msg);
        ck_assert_msg(msg[0] != '\0', "call %ld: no message", n);
        return 0;
    }
    ck_assert_msg(st == MR_OK, "%s, call %ld %s: status %d (%s)", sc->path, n,
                  !happened ? "untouched" : mode == MR__IO_FAIL ? "failing (cache given up)" : "short", (int)st, msg);
    for (i = 0; i < MAX_COEF && happened; i++)
        ck_assert_msg(same_bits(coef[i], want[i]), "call %ld: coefficient %zu differs", n, i);
    return !happened;
}

static void every_call(const scenario *sc)
{
    double want[MAX_COEF];
    char msg[1024];
    long n;
    int mode, fell_back = 0;
    memset(want, 0, sizeof want);
    ck_assert_int_eq(fit_and_write(sc, -1, MR__IO_FAIL, want, msg, sizeof msg, &fell_back), MR_OK);
    for (mode = MR__IO_FAIL; mode <= MR__IO_SHORT; mode++) {
        for (n = 0; n < 100000; n++)
            if (run_failing_at(sc, n, mode, want)) break;
        ck_assert_msg(n > 0 && n < 100000, "%s: %ld calls", sc->path, n);
        printf("%s%s: %ld calls %s in turn\n", sc->path, sc->no_cache ? " (no cache)" : "", n,
               mode == MR__IO_FAIL ? "failed" : "made short");
    }
}

static const scenario cached = {"samples/falls.csv", 0, 1, 0};
static const scenario uncached = {"samples/falls.csv", 1, 1, 0};
static const scenario compressed = {"samples/falls.csv.zst", 0, 0, 0};
static const scenario standard_input = {"-", 0, 1, 0};
static const scenario checkpointed = {"samples/falls.csv", 0, 1, 1};
/* samples/falls.csv through the gzip tool (made in main), every pass
 * decompressing it again */
static char gzip_path[128];
static const scenario gzipped_rereads = {gzip_path, 1, 1, 0};

/* ---- the HTML page: the same rules for another output ---- */

static char page_path[128];

static char *file_bytes(const char *path, long *len)
{
    FILE *fp = fopen(path, "rb");
    char *buf;
    ck_assert_ptr_nonnull(fp);
    ck_assert_int_eq(fseek(fp, 0, SEEK_END), 0);
    *len = ftell(fp);
    rewind(fp);
    buf = malloc((size_t)*len + 1);
    ck_assert_ptr_nonnull(buf);
    ck_assert_int_eq((long)fread(buf, 1, (size_t)*len, fp), *len);
    fclose(fp);
    buf[*len] = '\0';
    return buf;
}

/* The page of `fit` over an old file, with the plan (n, mode) armed;
 * returns 1 once n is past the last I/O call. */
static int page_failing_at(const mr_fit *fit, long n, int mode, const char *want, long want_len)
{
    const char *settings[] = {"at year=2020"};
    char msg[1024] = "", *got;
    long len;
    int happened;
    mr_status st;
    FILE *fp = fopen(page_path, "w");
    ck_assert_ptr_nonnull(fp);
    fputs("old\n", fp);
    ck_assert_int_eq(fclose(fp), 0);
    mr__io_fail_after(n, mode);
    st = mr_fits_write_html(&fit, NULL, 1, settings, 1, page_path, msg, sizeof msg);
    happened = mr__io_failures_left() < 0;
    mr__io_fail_after(-1, MR__IO_FAIL);
    assert_no_temporary(n);
    got = file_bytes(page_path, &len);
    ck_assert_msg(strcmp(got, "old\n") == 0 || (len == want_len && memcmp(got, want, (size_t)len) == 0),
                  "page, call %ld: neither the old file nor the whole page", n);
    free(got);
    if (mode == MR__IO_FAIL && happened) {
        ck_assert_msg(st == MR_ERR_IO && msg[0] != '\0', "page, call %ld failing: status %d (%s)", n, (int)st, msg);
        return 0;
    }
    ck_assert_msg(st == MR_OK && len == want_len, "page, call %ld %s: status %d (%s)", n,
                  happened ? "short" : "untouched", (int)st, msg);
    return !happened;
}

START_TEST(test_html_page)
{
    const char *settings[] = {"at year=2020"};
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    char msg[1024], *want;
    long n, want_len;
    int mode;
    size_t i;
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv.zst", &fit), MR_OK);
    mr_fitter_free(f);
    ck_assert_int_eq(mr_fits_write_html((const mr_fit *const *)&fit, NULL, 1, settings, 1, page_path, msg, sizeof msg),
                     MR_OK);
    want = file_bytes(page_path, &want_len);
    for (mode = MR__IO_FAIL; mode <= MR__IO_SHORT; mode++) {
        for (n = 0; n < 100000; n++)
            if (page_failing_at(fit, n, mode, want, want_len)) break;
        ck_assert_msg(n > 0 && n < 100000, "page: %ld calls", n);
        printf("the HTML page: %ld calls %s in turn\n", n, mode == MR__IO_FAIL ? "failed" : "made short");
    }
    free(want);
    mr_fit_free(fit);
    unlink(page_path);
}
END_TEST

START_TEST(test_cached_rows) { every_call(&cached); }
END_TEST
START_TEST(test_rereads) { every_call(&uncached); }
END_TEST
START_TEST(test_compressed_patterns) { every_call(&compressed); }
END_TEST
START_TEST(test_standard_input) { every_call(&standard_input); }
END_TEST
START_TEST(test_checkpoints) { every_call(&checkpointed); }
END_TEST
START_TEST(test_gzip_rereads) { every_call(&gzipped_rereads); }
END_TEST

/* A drift's CSV and a run-log line with the n-th I/O call failing (or
 * short): MR_ERR_IO with a message, or success, and no temporary file
 * left (millrace.h: "Output files", mr_run_log_append: a short append is
 * MR_ERR_IO). */
static int drift_outputs_failing_at(const mr_fit *fit, long n, int mode)
{
    char msg[512] = "", csv[160], log[160];
    const char *argv[] = {"millrace"};
    mr_run_record rec = {"falls.csv", 0, NULL, fit, 1, argv};
    mr_drift *d = NULL;
    mr_status a, b;
    int happened;
    snprintf(csv, sizeof csv, "%s/drift.csv", dir);
    snprintf(log, sizeof log, "%s/runs.log", dir);
    unlink(log);
    ck_assert_int_eq(mr_drift_compare(fit, fit, 3, &d, msg, sizeof msg), MR_OK);
    mr__io_fail_after(n, mode);
    a = mr_drift_write_csv(d, csv, NULL, 0, msg, sizeof msg);
    ck_assert_msg(a == MR_OK || (a == MR_ERR_IO && msg[0]), "call %ld: CSV status %d (%s)", n, (int)a, msg);
    b = mr_run_log_append(log, &rec, NULL, 0, msg, sizeof msg);
    ck_assert_msg(b == MR_OK || (b == MR_ERR_IO && msg[0]), "call %ld: run log status %d (%s)", n, (int)b, msg);
    happened = mr__io_failures_left() < 0;
    mr__io_fail_after(-1, MR__IO_FAIL);
    mr_drift_free(d);
    assert_no_temporary(n);
    if (!happened) ck_assert(a == MR_OK && b == MR_OK);
    return !happened;
}

START_TEST(test_drift_and_run_log)
{
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    long n;
    int mode, i;
    for (i = 0; falls_model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, falls_model[i], "test"), MR_OK);
    ck_assert_int_eq(mr_fitter_run(f, "samples/falls.csv", &fit), MR_OK);
    mr_fitter_free(f);
    for (mode = MR__IO_FAIL; mode <= MR__IO_SHORT; mode++) {
        for (n = 0; n < 1000; n++)
            if (drift_outputs_failing_at(fit, n, mode)) break;
        ck_assert_msg(n > 0 && n < 1000, "drift outputs: %ld calls", n);
    }
    mr_fit_free(fit);
    {
        char p[160];
        snprintf(p, sizeof p, "%s/drift.csv", dir);
        unlink(p);
        snprintf(p, sizeof p, "%s/runs.log", dir);
        unlink(p);
    }
}
END_TEST

int main(void)
{
    Suite *s = suite_create("io");
    TCase *tc = tcase_create("failures");
    snprintf(dir, sizeof dir, "/tmp/millrace-io-XXXXXX");
    if (mkdtemp(dir) == NULL) return EXIT_FAILURE;
    snprintf(json_path, sizeof json_path, "%s/fit.json", dir);
    snprintf(page_path, sizeof page_path, "%s/page.html", dir);
    snprintf(gzip_path, sizeof gzip_path, "%s/falls.csv.gz", dir);
    {
        char cmd[256];
        snprintf(cmd, sizeof cmd, "gzip -n -c < samples/falls.csv > '%s'", gzip_path);
        if (system(cmd) != 0) return EXIT_FAILURE;
    }
    tcase_set_timeout(tc, 600);
    tcase_add_test(tc, test_cached_rows);
    tcase_add_test(tc, test_rereads);
    tcase_add_test(tc, test_compressed_patterns);
    tcase_add_test(tc, test_standard_input);
    tcase_add_test(tc, test_checkpoints);
    tcase_add_test(tc, test_drift_and_run_log);
    tcase_add_test(tc, test_html_page);
    tcase_add_test(tc, test_gzip_rereads);
    suite_add_tcase(s, tc);
    {
        int rc = mr_check_run(s, 1); /* no fork: the leak checker sees the whole run */
        unlink(json_path);
        unlink(gzip_path);
        rmdir(dir);
        return rc;
    }
}
