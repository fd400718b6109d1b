/* check_reread.c - later passes over a plain file read its blocks by the
 * first pass's map (src/input/blockmap.h), each worker on its own.  A file
 * changed under the fit must still end it with an error, never with
 * numbers from a mixture of two files, even where the change keeps the
 * file's size and its modification time is put back.
 *
 * Source of truth: the API contract in millrace.h (MR_ERR_IO for a file
 * that changed during the fit) and the file's own rows, which this test
 * writes. */
#define _POSIX_C_SOURCE 200809L
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "millrace.h"
#include "input/source.h"
#include "check_common.h"

enum { ROWS = 40000 }; /* three blocks of rows (src/input/chunk.h) */

typedef struct {
    char path[64];
    long join_at;       /* >= 0: the byte that becomes `put` once pass 1 ends */
    char put;           /* ',' (joins two rows) unless a test says otherwise */
    long cut_to;        /* >= 0: the length the file is cut to then */
    int collapse;       /* 1: let the rows collapse (a fit that reads the file once) */
    int done;
} tamper;

/* Counts per row vary with the row number only, so any row order would do;
 * what matters is that the file has ROWS rows of fixed width. */
static void write_rows(const char *path, long blank_lines)
{
    FILE *f = fopen(path, "w");
    long i;
    ck_assert_ptr_nonnull(f);
    fputs("count,group,years\n", f);
    for (i = 0; i < ROWS; i++) {
        if (i == 100)
            while (blank_lines-- > 0) fputc('\n', f);
        fprintf(f, "%ld,%c,%ld.5\n", i % 7, "abc"[i % 3], 1 + i % 4);
    }
    ck_assert_int_eq(fclose(f), 0);
}

/* Changes the file once the first pass is over, then puts its times back. */
static void on_progress(const mr_progress *p, void *user)
{
    tamper *t = user;
    struct stat st;
    int fd;
    if (t->done || p->pass != 1 || p->rows_done != ROWS) return;
    t->done = 1;
    fd = open(t->path, O_WRONLY);
    if (fd < 0 || fstat(fd, &st) != 0) return;
    if (t->join_at >= 0) (void)!pwrite(fd, &t->put, 1, t->join_at);
    if (t->cut_to >= 0) (void)!ftruncate(fd, t->cut_to);
    if (t->join_at >= 0) {
        struct timespec times[2] = {st.st_atim, st.st_mtim};
        (void)futimens(fd, times);
    }
    close(fd);
}

static mr_status fit_tampered(tamper *t, int threads, char *msg, size_t cap)
{
    static const char *const model[] = {"outcome count", "family poisson", "factor group", "exposure years", NULL};
    mr_fitter *f = mr_fitter_new();
    mr_fit *fit = NULL;
    mr_status st;
    int i;
    ck_assert_ptr_nonnull(f);
    for (i = 0; model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, model[i], "test"), MR_OK);
    mr_fitter_set_int(f, MR_OPT_THREADS, threads);
    mr_fitter_set_int(f, MR_OPT_NO_CACHE, 1);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, !t->collapse);
    mr_fitter_set_progress(f, on_progress, t);
    st = mr_fitter_run(f, t->path, &fit);
    snprintf(msg, cap, "%s", st == MR_OK ? "" : mr_fitter_errmsg(f));
    if (st == MR_OK) ck_assert_int_eq(mr_fit_status(fit), MR_OK);
    mr_fit_free(fit);
    mr_fitter_free(f);
    return st;
}

static void make_file_blank(tamper *t, long blank_lines)
{
    strcpy(t->path, "/tmp/millrace-reread-XXXXXX");
    ck_assert_int_ge(mkstemp(t->path), 0);
    write_rows(t->path, blank_lines);
    t->put = ',';
    t->join_at = t->cut_to = -1;
    t->done = t->collapse = 0;
}

static void make_file(tamper *t) { make_file_blank(t, 0); }

/* Where line `line` (1 = the header) of the file starts. */
static long line_start(const char *path, long line)
{
    FILE *f = fopen(path, "r");
    long at = 0, n = 1;
    int c;
    ck_assert_ptr_nonnull(f);
    while (n < line && (c = fgetc(f)) != EOF) {
        at++;
        if (c == '\n') n++;
    }
    fclose(f);
    return at;
}

START_TEST(test_unchanged_file_fits)
{
    tamper t;
    char msg[512];
    make_file(&t);
    ck_assert_int_eq(fit_tampered(&t, 1 + _i, msg, sizeof msg), MR_OK);
    ck_assert_int_eq(t.done, 1);
    unlink(t.path);
}
END_TEST

START_TEST(test_rows_joined_same_size_and_time)
{
    /* The newline ending the 20000th data row (in the second block) becomes
     * a comma: same size, same time, one row fewer in that block. */
    tamper t;
    char msg[512];
    FILE *f;
    long i, at = 0, line = 0;
    make_file(&t);
    f = fopen(t.path, "r");
    ck_assert_ptr_nonnull(f);
    while ((i = fgetc(f)) != EOF) {
        if (i == '\n' && ++line == 1 + 20000) break;
        at++;
    }
    fclose(f);
    t.join_at = at;
    ck_assert_int_eq(fit_tampered(&t, 1 + _i, msg, sizeof msg), MR_ERR_IO);
    ck_assert_msg(strstr(msg, "changed") != NULL, "%s", msg);
    unlink(t.path);
}
END_TEST

/* The file is cut to 1000 bytes as the first pass ends.  With collapse, the
 * rows collapse into covariate patterns and the file is read once: it
 * must not be fitted as if it were whole either. */
static void check_cut_short(int collapse, int threads)
{
    tamper t;
    char msg[512];
    make_file(&t);
    t.collapse = collapse;
    t.cut_to = 1000;
    ck_assert_int_eq(fit_tampered(&t, threads, msg, sizeof msg), MR_ERR_IO);
    ck_assert_msg(strstr(msg, "changed") != NULL, "%s", msg);
    unlink(t.path);
}

START_TEST(test_file_cut_short) { check_cut_short(0, 1 + _i); }
END_TEST

START_TEST(test_one_read_fit_cut_short) { check_cut_short(1, 1 + _i); }
END_TEST

START_TEST(test_one_read_fit_unchanged)
{
    tamper t;
    char msg[512];
    make_file(&t);
    t.collapse = 1;
    ck_assert_int_eq(fit_tampered(&t, 1 + _i, msg, sizeof msg), MR_OK);
    unlink(t.path);
}
END_TEST

/* A file cut while it is read ends early: the bytes read fall short of its
 * size at open (reads of 16 bytes, so the cut lands mid-file), even when
 * its size and time are put back before the read is checked. */
START_TEST(test_source_ends_early)
{
    tamper t;
    mr__source *src;
    mr__error err;
    struct stat st;
    struct timespec times[2];
    char buf[64];
    size_t got, total = 0;
    int fd;
    make_file(&t);
    mr__error_clear(&err);
    ck_assert_int_eq(mr__source_open(&src, t.path, t.path, 16, -1, &err), MR_OK);
    ck_assert_int_eq(mr__source_read(src, buf, sizeof buf, &got, &err), MR_OK);
    fd = open(t.path, O_WRONLY);
    ck_assert_int_ge(fd, 0);
    ck_assert_int_eq(fstat(fd, &st), 0);
    ck_assert_int_eq(ftruncate(fd, 200), 0);
    do {
        ck_assert_int_eq(mr__source_read(src, buf, sizeof buf, &got, &err), MR_OK);
        total += got;
    } while (got > 0);
    ck_assert_uint_lt(total, 200);
    ck_assert_int_eq(ftruncate(fd, st.st_size), 0);
    times[0] = st.st_atim;
    times[1] = st.st_mtim;
    ck_assert_int_eq(futimens(fd, times), 0);
    close(fd);
    ck_assert_int_eq(mr__source_check_unchanged(src, 1, &err), MR_ERR_IO);
    ck_assert_msg(strstr(err.msg, "changed") != NULL, "%s", err.msg);
    mr__source_close(src);
    unlink(t.path);
}
END_TEST

/* A count in the second block goes up by one between passes: the rows
 * cut as before (same size, same time, same line ends), only a number
 * differs.  The later passes' checksums must see it: by the block map
 * (each block's rows against the first pass's), and streamed (the whole
 * file's, as when a block is mostly blank lines). */
static void check_digit_changed(long blank_lines, int threads)
{
    tamper t;
    char msg[512];
    FILE *f;
    make_file_blank(&t, blank_lines);
    t.join_at = line_start(t.path, 1 + blank_lines + 20000 + 1);
    f = fopen(t.path, "r");
    ck_assert_ptr_nonnull(f);
    ck_assert_int_eq(fseek(f, t.join_at, SEEK_SET), 0);
    t.put = (char)(fgetc(f) + 1); /* counts are 0..6 */
    fclose(f);
    ck_assert_int_eq(fit_tampered(&t, threads, msg, sizeof msg), MR_ERR_IO);
    ck_assert_msg(strstr(msg, "changed") != NULL, "%s", msg);
    unlink(t.path);
}

START_TEST(test_digit_changed_by_map) { check_digit_changed(0, 1 + _i); }
END_TEST

START_TEST(test_digit_changed_streamed) { check_digit_changed(3 << 20, 1 + _i); }
END_TEST

START_TEST(test_blank_run_unchanged_streamed)
{
    tamper t;
    char msg[512];
    make_file_blank(&t, 3 << 20);
    ck_assert_int_eq(fit_tampered(&t, 1 + _i, msg, sizeof msg), MR_OK);
    unlink(t.path);
}
END_TEST

static Suite *reread_suite(void)
{
    Suite *s = suite_create("reread");
    TCase *tc = tcase_create("by map");
    tcase_add_loop_test(tc, test_unchanged_file_fits, 0, 2); /* 1 and 2 workers */
    tcase_add_loop_test(tc, test_rows_joined_same_size_and_time, 0, 2);
    tcase_add_loop_test(tc, test_file_cut_short, 0, 2);
    tcase_add_loop_test(tc, test_one_read_fit_cut_short, 0, 2);
    tcase_add_loop_test(tc, test_one_read_fit_unchanged, 0, 2);
    tcase_add_test(tc, test_source_ends_early);
    tcase_add_loop_test(tc, test_digit_changed_by_map, 0, 2);
    tcase_add_loop_test(tc, test_digit_changed_streamed, 0, 2);
    tcase_add_loop_test(tc, test_blank_run_unchanged_streamed, 0, 2);
    tcase_set_timeout(tc, 120);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(reread_suite(), 0); }
