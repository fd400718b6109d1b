/* check_checkpoint.c - a fit stopped after some pass and run again with
 * the same checkpoint goes on from it to the very bits of a fit that ran
 * through; the first pass's result goes to bytes and back bit for bit; a
 * checkpoint cut short, damaged or made for another model is never used.
 *
 * Source of truth: the rows this test writes (row counts, levels, blocks
 * of 16384 rows: src/input/chunk.h), an uninterrupted fit of the same
 * rows (the same bits), and the API contract in millrace.h
 * (mr_fitter_set_checkpoint). */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "accum/first_bytes.h"
#include "common/bytebuf.h"
#include "fit/fit.h"
#include "fit/fitter.h"
#include "check_common.h"

enum { ROWS = 70000 }; /* five blocks of rows */

static char data_path[64], ckpt_path[64];

/* Counts that depend on a factor, two more factors and a continuous
 * numeric, over exposure: a poisson fit of several passes. */
static void write_rows_zero(int zero_zone)
{
    uint64_t rng = 7;
    FILE *f;
    long i;
    snprintf(data_path, sizeof data_path, "/tmp/mr_ckpt_%d.csv", (int)getpid());
    snprintf(ckpt_path, sizeof ckpt_path, "/tmp/mr_ckpt_%d.state", (int)getpid());
    f = fopen(data_path, "w");
    ck_assert_ptr_nonnull(f);
    fputs("count,group,zone,dose,years,band\n", f);
    for (i = 0; i < ROWS; i++) {
        double u = (double)(next_random(&rng) >> 11) / 9007199254740992.0;
        int count = zero_zone == 1 && i % 11 == 10 ? 0 : (int)(u * 6) % 5;
        /* zero_zone 2: the cell group b, zone z3, band 1 of three factors */
        if (zero_zone == 2 && i % 165 == 91) count = 0;
        fprintf(f, "%d,%c,z%ld,%.4f,%.2f,%ld\n", count, "abcde"[i % 5], i % 11, u * 3 + (double)(i % 7),
                1 + (double)(i % 9) / 4, i % 3);
    }
    ck_assert_int_eq(fclose(f), 0);
}

static void write_rows(void) { write_rows_zero(0); }

typedef struct run_opts {
    int threads, collapse, stop_at_pass, keep;
    double tolerance;
    mr_robust robust;
    const char *cluster;
    int triple; /* band a factor, group x zone x band with its lower terms */
    int *progress_calls; /* NULL, or counts the progress calls of passes */
} run_opts;

static int stop_at(const mr_progress *p, void *user)
{
    const run_opts *o = user;
    if (o->progress_calls) ++*o->progress_calls;
    return o->stop_at_pass > 0 && p->pass == o->stop_at_pass;
}

static mr_fitter *new_fitter(const run_opts *o, const char *checkpoint)
{
    static const char *const model[] = {"outcome count", "family poisson", "factor group", "factor zone",
                                        "numeric dose", "exposure years", NULL};
    mr_fitter *f = mr_fitter_new();
    int i;
    ck_assert_ptr_nonnull(f);
    static const char *const triple[] = {"factor band", "interact group zone", "interact group band",
                                         "interact zone band", "interact group zone band", NULL};
    for (i = 0; model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, model[i], "test"), MR_OK);
    for (i = 0; o->triple && triple[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, triple[i], "test"), MR_OK);
    mr_fitter_set_int(f, MR_OPT_THREADS, o->threads);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, !o->collapse);
    if (o->tolerance > 0) mr_fitter_set_real(f, MR_OPT_TOLERANCE, o->tolerance);
    if (checkpoint) ck_assert_int_eq(mr_fitter_set_checkpoint(f, checkpoint), MR_OK);
    ck_assert_int_eq(mr_fitter_set_robust(f, o->robust), MR_OK);
    if (o->cluster) ck_assert_int_eq(mr_fitter_set_cluster(f, o->cluster, 0), MR_OK);
    mr_fitter_set_progress_stop(f, stop_at, (void *)o);
    ck_assert_int_eq(mr_fitter_set_int(f, MR_OPT_KEEP_CHECKPOINT, o->keep), MR_OK);
    return f;
}

/* A fit; its note copied to `note` (may be NULL). */
static mr_status fit(const run_opts *o, const char *checkpoint, mr_fit **out, char *note, size_t cap)
{
    mr_fitter *f = new_fitter(o, checkpoint);
    mr_status st = mr_fitter_run(f, data_path, out);
    if (note) snprintf(note, cap, "%s", mr_fitter_checkpoint_note(f));
    mr_fitter_free(f);
    return st;
}

static unsigned char *read_file(const char *path, size_t *len)
{
    FILE *f = fopen(path, "rb");
    unsigned char *buf;
    long n;
    ck_assert_ptr_nonnull(f);
    fseek(f, 0, SEEK_END);
    n = ftell(f);
    fseek(f, 0, SEEK_SET);
    buf = malloc((size_t)n + 1);
    ck_assert_ptr_nonnull(buf);
    ck_assert_uint_eq(fread(buf, 1, (size_t)n, f), (size_t)n);
    fclose(f);
    *len = (size_t)n;
    return buf;
}

static void write_file(const char *path, const unsigned char *p, size_t n)
{
    FILE *f = fopen(path, "wb");
    ck_assert_ptr_nonnull(f);
    ck_assert_uint_eq(fwrite(p, 1, n, f), n);
    ck_assert_int_eq(fclose(f), 0);
}

/* The first pass's bytes inside a checkpoint (the layout in
 * src/fit/checkpoint.c). */
static const unsigned char *first_part(const unsigned char *ck, size_t len, uint64_t *n)
{
    mr__byteread r;
    uint64_t k, passes;
    mr__byteread_init(&r, ck + 16, len - 16);
    mr__byteread_text(&r, &k); /* input name */
    mr__byteread_u64(&r);      /* size, time */
    mr__byteread_u64(&r);
    mr__byteread_text(&r, &k); /* model and options */
    mr__byteread_text(&r, &k); /* header */
    passes = mr__byteread_u64(&r);
    mr__byteread_take(&r, passes * 8 + 4 * 8);
    ck_assert(!r.bad);
    return mr__byteread_text(&r, n);
}

/* Decoded and encoded again: the same bytes. */
static void assert_round_trip(const unsigned char *part, uint64_t n, mr__pass_result *res)
{
    mr__byteread r;
    mr__bytebuf b;
    size_t ncol, nnum, nfac;
    mr__error err;
    memset(&b, 0, sizeof b);
    mr__byteread_init(&r, part, (size_t)n);
    ck_assert_int_eq(mr__first_decode(&r, res, &ncol, &nnum, &nfac, &err), MR_OK);
    ck_assert(r.at == r.end);
    ck_assert_uint_eq(ncol, 5);
    ck_assert_uint_eq(nfac, 2);
    mr__first_encode(res, ncol, nnum, nfac, &b);
    ck_assert(!b.failed);
    ck_assert_uint_eq(b.len, n);
    ck_assert(memcmp(b.data, part, (size_t)n) == 0);
    mr__bytebuf_release(&b);
}

/* Stopped at pass 4 after three finished passes, then run again on other
 * threads: taken up after pass 3, to the bits of a fit that ran through;
 * the checkpoint's first-pass result reads back to the same bytes. */
START_TEST(stopped_fit_goes_on_to_the_same_bits)
{
    run_opts plain = {2, 0, 0, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL}, stopping = {2, 0, 4, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL},
             again = {1, 0, 0, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL};
    mr_fit *ref = NULL, *got = NULL;
    mr__pass_result res;
    unsigned char *ck;
    const unsigned char *part;
    uint64_t n;
    size_t len, w, levels = 0;
    char note[2048];
    write_rows();
    unlink(ckpt_path);
    ck_assert_int_eq(fit(&plain, NULL, &ref, NULL, 0), MR_OK);
    ck_assert_int_ge((int)mr_fit_stat(ref, MR_STAT_PASSES), 5);
    ck_assert_int_eq(mr_fit_resumed_after_pass(ref), 0);
    ck_assert_int_eq(fit(&stopping, ckpt_path, &got, note, sizeof note), MR_ERR_STOPPED);
    ck_assert_str_eq(note, "");
    ck = read_file(ckpt_path, &len);
    part = first_part(ck, len, &n);
    ck_assert_ptr_nonnull(part);
    assert_round_trip(part, n, &res);
    ck_assert_uint_eq(res.scan.nread, ROWS);
    ck_assert_uint_eq(res.map.n, (ROWS + 16383) / 16384);
    for (w = 0; w < res.nworkers; w++) levels += res.worker_levels[w][0].n;
    ck_assert_uint_ge(levels, 5); /* group: a..e, each met by some worker */
    mr__pass_result_release(&res, 2);
    free(ck);
    ck_assert_int_eq(fit(&again, ckpt_path, &got, note, sizeof note), MR_OK);
    ck_assert_int_eq(mr_fit_resumed_after_pass(got), 3);
    ck_assert_ptr_nonnull(strstr(note, "resumed after pass 3"));
    mr_check_same_fit(ref, got);
    ck_assert_int_ne(access(ckpt_path, F_OK), 0); /* removed once the fit succeeded */
    mr_fit_free(ref);
    mr_fit_free(got);
    unlink(data_path);
}
END_TEST

/* A zone without events (its coefficient runs off: a warning and the
 * coefficient marked) and cluster-robust standard errors by zone: stopped
 * at pass 4 and run again on one thread, the fit has the bits of one that
 * ran through, its warnings, marks, robust standard errors and numeric
 * summaries included (the first pass's outcome counts per level and the
 * numerics' least and greatest values come from the checkpoint). */
START_TEST(zero_level_and_robust_go_on_to_the_same_bits)
{
    run_opts plain = {2, 0, 0, 0, 0, MR_ROBUST_HC1, "zone", 0, NULL}, stopping = plain, again = plain;
    mr_fit *ref = NULL, *got = NULL;
    size_t j, zero_warnings = 0;
    char note[2048];
    stopping.stop_at_pass = 4;
    again.threads = 1;
    write_rows_zero(1);
    unlink(ckpt_path);
    ck_assert_int_eq(fit(&plain, NULL, &ref, NULL, 0), MR_OK);
    ck_assert_int_ge((int)mr_fit_stat(ref, MR_STAT_PASSES), 6);
    ck_assert_int_eq(fit(&stopping, ckpt_path, &got, NULL, 0), MR_ERR_STOPPED);
    ck_assert_int_eq(fit(&again, ckpt_path, &got, note, sizeof note), MR_OK);
    ck_assert_int_eq(mr_fit_resumed_after_pass(got), 3);
    mr_check_same_fit(ref, got);
    ck_assert_int_eq(mr_fit_robust(got), MR_ROBUST_HC1);
    ck_assert_uint_eq(mr_fit_clusters(got), 11);
    for (j = 0; j < mr_fit_ncoef(ref); j++) {
        ck_assert(same_bits(mr_fit_robust_std_error(ref, j), mr_fit_robust_std_error(got, j)));
        ck_assert_int_eq(mr_fit_coef_not_estimable(ref, j), mr_fit_coef_not_estimable(got, j));
    }
    ck_assert_uint_eq(mr_fit_nwarnings(ref), mr_fit_nwarnings(got));
    for (j = 0; j < mr_fit_nwarnings(ref); j++) {
        ck_assert_str_eq(mr_fit_warning(ref, j), mr_fit_warning(got, j));
        zero_warnings += strstr(mr_fit_warning(ref, j), "zone=z10") != NULL;
    }
    ck_assert_uint_ge(zero_warnings, 1); /* the zone without events is named */
    ck_assert_uint_eq(ref->nnumerics, 1);
    ck_assert_uint_eq(got->nnumerics, 1);
    ck_assert(same_bits(ref->numeric[0].min, got->numeric[0].min));
    ck_assert(same_bits(ref->numeric[0].max, got->numeric[0].max));
    ck_assert(same_bits(ref->numeric[0].mean, got->numeric[0].mean));
    ck_assert(ref->numeric[0].min < ref->numeric[0].max);
    mr_fit_free(ref);
    mr_fit_free(got);
    unlink(data_path);
}
END_TEST

/* An empty cell of three factors: its counts by cell come from the
 * checkpoint, so a resumed fit names it and marks the same coefficients. */
START_TEST(zero_triple_cell_goes_on_to_the_same_flags)
{
    run_opts plain = {2, 0, 0, 0, 0, MR_ROBUST_NONE, NULL, 1, NULL}, stopping = plain, again = plain;
    mr_fit *ref = NULL, *got = NULL;
    size_t j, named = 0;
    stopping.stop_at_pass = 3;
    again.threads = 1;
    write_rows_zero(2);
    unlink(ckpt_path);
    ck_assert_int_eq(fit(&plain, NULL, &ref, NULL, 0), MR_OK);
    ck_assert_int_eq(fit(&stopping, ckpt_path, &got, NULL, 0), MR_ERR_STOPPED);
    ck_assert_int_eq(fit(&again, ckpt_path, &got, NULL, 0), MR_OK);
    ck_assert_int_eq(mr_fit_resumed_after_pass(got), 2);
    mr_check_same_fit(ref, got);
    for (j = 0; j < mr_fit_ncoef(ref); j++)
        ck_assert_int_eq(mr_fit_coef_not_estimable(ref, j), mr_fit_coef_not_estimable(got, j));
    ck_assert_uint_eq(mr_fit_nwarnings(ref), mr_fit_nwarnings(got));
    for (j = 0; j < mr_fit_nwarnings(ref); j++) {
        ck_assert_str_eq(mr_fit_warning(ref, j), mr_fit_warning(got, j));
        named += strstr(mr_fit_warning(ref, j), "group=b & zone=z3 & band=1 (") != NULL;
    }
    ck_assert_uint_eq(named, 1);
    mr_fit_free(ref);
    mr_fit_free(got);
    unlink(data_path);
}
END_TEST

/* A checkpoint changed in any way is not used: the fit starts afresh and
 * still gives the bits of a fit that ran through. */
static void assert_refused(const unsigned char *p, size_t n, const run_opts *o, const mr_fit *ref, const char *why)
{
    mr_fit *got = NULL;
    char note[2048];
    write_file(ckpt_path, p, n);
    ck_assert_int_eq(fit(o, ckpt_path, &got, note, sizeof note), MR_OK);
    ck_assert_int_eq(mr_fit_resumed_after_pass(got), 0);
    ck_assert_msg(strstr(note, why) != NULL, "note '%s' lacks '%s'", note, why);
    ck_assert_ptr_nonnull(strstr(note, "starts afresh"));
    mr_check_same_fit(ref, got);
    mr_fit_free(got);
}

START_TEST(changed_checkpoints_are_not_used)
{
    run_opts plain = {2, 0, 0, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL}, stopping = {2, 0, 3, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL},
             other = {2, 0, 0, 0, 1e-12, MR_ROBUST_NONE, NULL, 0, NULL};
    mr_fit *ref = NULL, *ref_other = NULL, *got = NULL;
    unsigned char *ck;
    size_t len;
    write_rows();
    unlink(ckpt_path);
    ck_assert_int_eq(fit(&plain, NULL, &ref, NULL, 0), MR_OK);
    ck_assert_int_eq(fit(&other, NULL, &ref_other, NULL, 0), MR_OK);
    ck_assert_int_eq(fit(&stopping, ckpt_path, &got, NULL, 0), MR_ERR_STOPPED);
    ck = read_file(ckpt_path, &len);
    assert_refused(ck, len - 1, &plain, ref, "cut short");
    assert_refused(ck, len / 2, &plain, ref, "cut short");
    assert_refused(ck, 10, &plain, ref, "not a checkpoint");
    ck[len / 2] ^= 0x10;
    assert_refused(ck, len, &plain, ref, "checksum");
    ck[len / 2] ^= 0x10;
    assert_refused(ck, len, &other, ref_other, "another model or other options");
    free(ck);
    mr_fit_free(ref);
    mr_fit_free(ref_other);
    unlink(data_path);
    unlink(ckpt_path);
}
END_TEST

/* A collapsed fit writes one checkpoint, after its one read: its patterns
 * read back to the same bytes, and the fit goes on from it to the same
 * bits. */
START_TEST(collapsed_patterns_round_trip)
{
    static const char *const model[] = {"outcome count", "family poisson", "factor group", "factor zone", NULL};
    mr_fitter *f;
    mr_fit *ref = NULL, *got = NULL;
    mr__pass_result res;
    unsigned char *ck;
    const unsigned char *part;
    mr__bytebuf b;
    mr__byteread r;
    size_t len, ncol, nnum, nfac;
    uint64_t n;
    mr__error err;
    int i, round;
    write_rows();
    unlink(ckpt_path);
    for (round = 0; round < 2; round++) {
        f = mr_fitter_new();
        for (i = 0; model[i]; i++) ck_assert_int_eq(mr_fitter_model_line(f, model[i], "test"), MR_OK);
        ck_assert_int_eq(mr_fitter_set_checkpoint(f, ckpt_path), MR_OK);
        f->checkpoint_keep = round == 0;
        ck_assert_int_eq(mr_fitter_run(f, data_path, round == 0 ? &ref : &got), MR_OK);
        mr_fitter_free(f);
        if (round == 1) break;
        ck = read_file(ckpt_path, &len);
        part = first_part(ck, len, &n);
        memset(&b, 0, sizeof b);
        mr__byteread_init(&r, part, (size_t)n);
        ck_assert_int_eq(mr__first_decode(&r, &res, &ncol, &nnum, &nfac, &err), MR_OK);
        ck_assert_int_eq(res.collapsed, 1);
        ck_assert_uint_eq(res.patterns.table.n, 5 * 11); /* every group and zone met together */
        mr__first_encode(&res, ncol, nnum, nfac, &b);
        ck_assert_uint_eq(b.len, n);
        ck_assert(memcmp(b.data, part, (size_t)n) == 0);
        mr__bytebuf_release(&b);
        mr__pass_result_release(&res, nfac);
        free(ck);
    }
    ck_assert_int_eq(mr_fit_resumed_after_pass(got), 1);
    mr_check_same_fit(ref, got);
    mr_fit_free(ref);
    mr_fit_free(got);
    unlink(data_path);
}
END_TEST

/* The first pass's bytes cut anywhere are refused, and with bytes changed
 * at random they are refused or read (a count changed within its range
 * reads as another result), never read out of bounds (ASan: make
 * asan-check). */
START_TEST(damaged_first_pass_bytes)
{
    run_opts stopping = {2, 0, 3, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL};
    mr_fit *got = NULL;
    unsigned char *ck, *copy;
    const unsigned char *part;
    uint64_t n, cut, rng = 99;
    size_t len, ncol, nnum, nfac;
    mr__pass_result res;
    mr__byteread r;
    mr__error err;
    int i;
    write_rows();
    unlink(ckpt_path);
    ck_assert_int_eq(fit(&stopping, ckpt_path, &got, NULL, 0), MR_ERR_STOPPED);
    ck = read_file(ckpt_path, &len);
    part = first_part(ck, len, &n);
    copy = malloc((size_t)n);
    ck_assert_ptr_nonnull(copy);
    for (cut = 0; cut < n; cut += cut < 64 ? 1 : 1 + cut / 16) {
        memcpy(copy, part, (size_t)cut);
        mr__byteread_init(&r, copy, (size_t)cut);
        ck_assert_int_eq(mr__first_decode(&r, &res, &ncol, &nnum, &nfac, &err), MR_ERR_IO);
    }
    for (i = 0; i < 300; i++) {
        mr_status st;
        memcpy(copy, part, (size_t)n);
        copy[next_random(&rng) % n] ^= (unsigned char)(1u << (next_random(&rng) % 8));
        mr__byteread_init(&r, copy, (size_t)n);
        st = mr__first_decode(&r, &res, &ncol, &nnum, &nfac, &err);
        ck_assert(st == MR_OK || st == MR_ERR_IO);
        if (st == MR_OK) mr__pass_result_release(&res, nfac);
    }
    free(copy);
    free(ck);
    unlink(ckpt_path);
    unlink(data_path);
}
END_TEST

/* A run that keeps its checkpoint (MR_OPT_KEEP_CHECKPOINT) leaves the
 * finished state: run again, as a process killed before writing its
 * outputs would be, it reads no data (no pass reports progress) and makes
 * the fit that ran through, to the bit, robust standard errors by clusters
 * included (stage 2); mr_fitter_checkpoint_remove then removes the file,
 * and again when there is none. */
START_TEST(finished_checkpoint_reads_no_data)
{
    run_opts keep = {2, 0, 0, 1, 0, MR_ROBUST_NONE, NULL, 0, NULL}, again;
    mr_fit *ref = NULL, *got = NULL;
    mr_fitter *f;
    int robust, calls, first_calls;
    size_t j;
    char note[2048];
    write_rows();
    for (robust = 0; robust < 2; robust++) {
        keep.robust = robust ? MR_ROBUST_HC1 : MR_ROBUST_NONE;
        keep.cluster = robust ? "zone" : NULL;
        again = keep;
        again.threads = 1;
        again.progress_calls = &calls;
        calls = first_calls = 0;
        keep.progress_calls = &first_calls;
        unlink(ckpt_path);
        ck_assert_int_eq(fit(&keep, ckpt_path, &ref, NULL, 0), MR_OK);
        ck_assert_int_gt(first_calls, 0); /* passes report progress */
        ck_assert_int_eq(access(ckpt_path, F_OK), 0);
        ck_assert_int_eq(fit(&again, ckpt_path, &got, note, sizeof note), MR_OK);
        ck_assert_int_eq(calls, 0);
        ck_assert_int_eq(mr_fit_resumed_after_pass(got), (int)mr_fit_stat(ref, MR_STAT_PASSES));
        ck_assert_ptr_nonnull(strstr(note, "resumed after pass"));
        mr_check_same_fit(ref, got);
        for (j = 0; robust && j < mr_fit_ncoef(ref); j++)
            ck_assert(same_bits(mr_fit_robust_std_error(ref, j), mr_fit_robust_std_error(got, j)));
        ck_assert_uint_eq(mr_fit_clusters(ref), mr_fit_clusters(got));
        mr_fit_free(ref);
        mr_fit_free(got);
        f = new_fitter(&keep, ckpt_path);
        ck_assert_int_eq(mr_fitter_checkpoint_remove(f), MR_OK);
        ck_assert_int_ne(access(ckpt_path, F_OK), 0);
        ck_assert_int_eq(mr_fitter_checkpoint_remove(f), MR_OK);
        mr_fitter_free(f);
    }
    unlink(data_path);
}
END_TEST

/* Standard input cannot be read again: a checkpoint with it is refused. */
START_TEST(standard_input_is_refused)
{
    run_opts plain = {1, 0, 0, 0, 0, MR_ROBUST_NONE, NULL, 0, NULL};
    mr_fitter *f = new_fitter(&plain, "/tmp/mr_ckpt_stdin.state");
    mr_fit *out = NULL;
    ck_assert_int_eq(mr_fitter_run(f, "-", &out), MR_ERR_USAGE);
    ck_assert_ptr_nonnull(strstr(mr_fitter_errmsg(f), "read only once"));
    mr_fitter_free(f);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("checkpoint");
    TCase *tc = tcase_create("checkpoint");
    tcase_set_timeout(tc, 300);
    tcase_add_test(tc, stopped_fit_goes_on_to_the_same_bits);
    tcase_add_test(tc, zero_level_and_robust_go_on_to_the_same_bits);
    tcase_add_test(tc, zero_triple_cell_goes_on_to_the_same_flags);
    tcase_add_test(tc, changed_checkpoints_are_not_used);
    tcase_add_test(tc, collapsed_patterns_round_trip);
    tcase_add_test(tc, damaged_first_pass_bytes);
    tcase_add_test(tc, standard_input_is_refused);
    tcase_add_test(tc, finished_checkpoint_reads_no_data);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
