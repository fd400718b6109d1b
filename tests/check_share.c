/* check_share.c - a fit shared by several ranks (mr_share, millrace.h)
 * gives every rank the very bits of one process's fit; an error on one
 * rank ends every rank with the same status and message; what a share
 * cannot take is refused on every rank.  The ranks here are threads of
 * one process exchanging through memory: the library sees only the
 * gather callback, as under MPI (tests/cli/mpi.sh runs the processes).
 *
 * Source of truth: an unshared fit of the same rows (the same bits) and
 * the API contract in millrace.h (mr_share, mr_fitter_set_share). */
#define _POSIX_C_SOURCE 200809L
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

/* 40 blocks of 16384 rows: three groups of 16 blocks, the last short. */
enum { ROWS = 40 * 16384 - 100, MAX_RANKS = 4 };

static char data_path[64], checkpoint_path[64];

static void write_rows(void)
{
    uint64_t rng = 11;
    FILE *f;
    long i;
    snprintf(data_path, sizeof data_path, "/tmp/mr_share_%d.csv", (int)getpid());
    f = fopen(data_path, "w");
    ck_assert_ptr_nonnull(f);
    /* person: runs of 5 rows (grouped), across blocks, groups and ranks */
    fputs("count,group,dose,years,person\n", f);
    for (i = 0; i < ROWS; i++) {
        double u = (double)(next_random(&rng) >> 11) / 9007199254740992.0;
        fprintf(f, "%d,%c,%.4f,%.2f,p%ld\n", (int)(u * 7) % 5, "abcd"[i % 4], u * 3 + (double)(i % 7),
                1 + (double)(i % 9) / 4, i / 5);
    }
    ck_assert_int_eq(fclose(f), 0);
}

/* ---- ranks as threads ---------------------------------------------------- */

typedef struct hub {
    pthread_mutex_t mu;
    pthread_cond_t cv;
    int n, arrived, left;
    unsigned gen;
    void *buf[MAX_RANKS];
    size_t len[MAX_RANKS];
} hub;

typedef struct rank_run {
    hub *h;
    int rank, kind, checkpoint;
    const char *path;
    mr_status st;
    char msg[1024];
    mr_fit *fit;
    int ended_alike; /* the share ended (a failure) or closed with MR_OK */
} rank_run;

/* An allgather through memory: each round waits for the last one to be
 * read by everyone, then for every rank's bytes. */
static int gather(void *user, const void *mine, size_t len, void **all, size_t *lens)
{
    rank_run *r = user;
    hub *h = r->h;
    size_t total = 0, at = 0;
    unsigned gen;
    int k;
    pthread_mutex_lock(&h->mu);
    while (h->left > 0) pthread_cond_wait(&h->cv, &h->mu);
    h->buf[r->rank] = malloc(len + 1);
    memcpy(h->buf[r->rank], mine, len);
    h->len[r->rank] = len;
    gen = h->gen;
    if (++h->arrived == h->n) {
        h->arrived = 0;
        h->left = h->n;
        h->gen++;
        pthread_cond_broadcast(&h->cv);
    }
    while (h->gen == gen) pthread_cond_wait(&h->cv, &h->mu);
    for (k = 0; k < h->n; k++) total += h->len[k];
    *all = malloc(total + 1);
    for (k = 0; k < h->n; k++) {
        memcpy((char *)*all + at, h->buf[k], h->len[k]);
        lens[k] = h->len[k];
        at += h->len[k];
    }
    if (--h->left == 0) {
        for (k = 0; k < h->n; k++) free(h->buf[k]);
        pthread_cond_broadcast(&h->cv);
    }
    pthread_mutex_unlock(&h->mu);
    return 0;
}

/* kind: PLAIN (IRLS passes over the file), COLLAPSED (a model whose rows
 * collapse into patterns: no dose), ROBUST (PLAIN with HC1 standard
 * errors), CLUSTERED (PLAIN with HC1 standard errors by person, the file
 * grouped by it), UNGROUPED (by group, which comes back every 4 rows) */
enum { PLAIN, COLLAPSED, ROBUST, CLUSTERED, UNGROUPED }; /* a fit's kind */

static mr_fitter *new_fitter(int kind)
{
    int collapse = kind == COLLAPSED;
    static const char *const model[] = {"outcome count", "family poisson", "factor group", "exposure years",
                                        "numeric dose", NULL};
    mr_fitter *f = mr_fitter_new();
    int i;
    ck_assert_ptr_nonnull(f);
    for (i = 0; model[i] && (!collapse || i < 4); i++) ck_assert_int_eq(mr_fitter_model_line(f, model[i], "test"), MR_OK);
    mr_fitter_set_int(f, MR_OPT_THREADS, 2);
    mr_fitter_set_int(f, MR_OPT_NO_COLLAPSE, !collapse);
    if (kind >= ROBUST) ck_assert_int_eq(mr_fitter_set_robust(f, MR_ROBUST_HC1), MR_OK);
    if (kind >= CLUSTERED) ck_assert_int_eq(mr_fitter_set_cluster(f, kind == CLUSTERED ? "person" : "group", 0), MR_OK);
    return f;
}

static void *rank_main(void *arg)
{
    rank_run *r = arg;
    mr_share *share = NULL;
    mr_fitter *f = new_fitter(r->kind);
    if (mr_share_new(r->rank, r->h->n, gather, r, &share) != MR_OK) return NULL;
    mr_fitter_set_share(f, share);
    if (r->checkpoint) {
        mr_fitter_set_checkpoint(f, checkpoint_path);
        mr_fitter_set_int(f, MR_OPT_KEEP_CHECKPOINT, 1);
    }
    r->st = mr_fitter_run(f, r->path, &r->fit);
    snprintf(r->msg, sizeof r->msg, "%s", mr_fitter_errmsg(f));
    /* every rank ends alike: the share has ended, or closes now (no
     * ck_assert off the test's own thread) */
    if (r->st != MR_OK) r->ended_alike = mr_share_ended(share);
    else r->ended_alike = mr_share_close(share, MR_OK, NULL, NULL, 0) == MR_OK;
    mr_fitter_free(f);
    mr_share_free(share);
    return NULL;
}

static void run_ranks(int n, int kind, int checkpoint, const char *path, rank_run *runs)
{
    pthread_t t[MAX_RANKS];
    hub h;
    int k;
    memset(&h, 0, sizeof h);
    pthread_mutex_init(&h.mu, NULL);
    pthread_cond_init(&h.cv, NULL);
    h.n = n;
    for (k = 0; k < n; k++) {
        memset(&runs[k], 0, sizeof runs[k]);
        runs[k].h = &h;
        runs[k].rank = k;
        runs[k].kind = kind;
        runs[k].checkpoint = checkpoint;
        runs[k].path = path;
        ck_assert_int_eq(pthread_create(&t[k], NULL, rank_main, &runs[k]), 0);
    }
    for (k = 0; k < n; k++) pthread_join(t[k], NULL);
    pthread_mutex_destroy(&h.mu);
    pthread_cond_destroy(&h.cv);
}

static mr_fit *plain_fit(int kind)
{
    mr_fitter *f = new_fitter(kind);
    mr_fit *fit = NULL;
    ck_assert_int_eq(mr_fitter_run(f, data_path, &fit), MR_OK);
    mr_fitter_free(f);
    return fit;
}

static void same_robust(const mr_fit *a, const mr_fit *b)
{
    size_t i, j, p = mr_fit_ncoef(a);
    ck_assert_int_eq(mr_fit_robust(a), mr_fit_robust(b));
    for (i = 0; i < p; i++) {
        ck_assert_uint_eq(mr_fit_clusters(a), mr_fit_clusters(b));
        ck_assert(memcmp(&(double){mr_fit_robust_std_error(a, i)}, &(double){mr_fit_robust_std_error(b, i)},
                         sizeof(double)) == 0);
        for (j = 0; j < p; j++)
            ck_assert(memcmp(&(double){mr_fit_robust_covariance(a, i, j)},
                             &(double){mr_fit_robust_covariance(b, i, j)}, sizeof(double)) == 0);
    }
}

static void check_shared(int kind)
{
    static const int counts[] = {3, 1, 2, 4};
    rank_run runs[MAX_RANKS];
    mr_fit *ref;
    size_t c, ncounts = sizeof counts / sizeof *counts;
    int k;
    /* MR_TEST_QUICK=1 (sanitizer runs): 3 ranks alone, each with a share
     * of its own and one group cut short */
    if (getenv("MR_TEST_QUICK") != NULL) ncounts = 1;
    write_rows();
    ref = plain_fit(kind);
    /* IRLS passes over the file, or one read */
    ck_assert(kind == COLLAPSED ? mr_fit_stat(ref, MR_STAT_PASSES) == 1 : mr_fit_stat(ref, MR_STAT_PASSES) >= 3);
    for (c = 0; c < ncounts; c++) {
        run_ranks(counts[c], kind, 0, data_path, runs);
        for (k = 0; k < counts[c]; k++) {
            ck_assert_msg(runs[k].st == MR_OK, "rank %d of %d: %s", k, counts[c], runs[k].msg);
            ck_assert(runs[k].ended_alike);
            mr_check_same_fit(ref, runs[k].fit);
            same_robust(ref, runs[k].fit);
            mr_fit_free(runs[k].fit);
        }
    }
    mr_fit_free(ref);
    unlink(data_path);
}

START_TEST(shared_fit_is_the_same_bits)
{
    check_shared(PLAIN); /* IRLS passes over the file, split by groups */
}
END_TEST

START_TEST(collapsed_shared_fit_is_the_same_bits)
{
    check_shared(COLLAPSED); /* one read; IRLS on the patterns on every rank */
}
END_TEST

START_TEST(robust_shared_fit_is_the_same_bits)
{
    check_shared(ROBUST); /* the meat pass split as the IRLS passes are */
}
END_TEST

/* Every one of n ranks ended with status st and one message saying what. */
static void every_rank_ended_with(const rank_run *runs, int n, mr_status st, const char *what)
{
    int k;
    for (k = 0; k < n; k++) {
        ck_assert_int_eq(runs[k].st, st);
        ck_assert(runs[k].ended_alike);
        ck_assert_ptr_null(runs[k].fit);
        ck_assert_str_eq(runs[k].msg, runs[0].msg);
    }
    ck_assert_ptr_nonnull(strstr(runs[0].msg, what));
}

START_TEST(cluster_robust_shared_fit_is_the_same_bits)
{
    check_shared(CLUSTERED); /* every rank's blocks of runs added in block order */
}
END_TEST

/* A file not grouped by the cluster column: one process falls back on a
 * table of every cluster; a share, which holds none, ends every rank
 * with one message saying to group the file. */
START_TEST(a_share_needs_the_file_grouped_by_cluster)
{
    rank_run runs[MAX_RANKS];
    mr_fit *ref;
    write_rows();
    ref = plain_fit(UNGROUPED);
    ck_assert_uint_eq(mr_fit_clusters(ref), 4);
    mr_fit_free(ref);
    run_ranks(3, UNGROUPED, 0, data_path, runs);
    every_rank_ended_with(runs, 3, MR_ERR_CLUSTERS, "grouped by the cluster column");
    unlink(data_path);
}
END_TEST

/* Rank 1 fails its second pass: every rank ends with its error. */
START_TEST(an_error_on_one_rank_ends_every_rank)
{
    rank_run runs[MAX_RANKS];
    write_rows();
    setenv("MILLRACE_TEST_SHARE_ERROR", "1:2", 1);
    run_ranks(3, PLAIN, 0, data_path, runs);
    unsetenv("MILLRACE_TEST_SHARE_ERROR");
    every_rank_ended_with(runs, 3, MR_ERR_FORMAT, "rank 1 met a malformed row in pass 2");
    unlink(data_path);
}
END_TEST

/* Rank 0 alone keeps the checkpoint (kept here once the fit is done);
 * a run that takes it up starts every rank from it, and reads no data:
 * the bits of one process either way. */
START_TEST(a_shared_fit_keeps_and_resumes_a_checkpoint)
{
    rank_run runs[MAX_RANKS];
    mr_fit *ref;
    int k, round;
    write_rows();
    snprintf(checkpoint_path, sizeof checkpoint_path, "/tmp/mr_share_%d.state", (int)getpid());
    unlink(checkpoint_path);
    ref = plain_fit(ROBUST);
    for (round = 0; round < 2; round++) {
        run_ranks(3, ROBUST, 1, data_path, runs);
        ck_assert(access(checkpoint_path, F_OK) == 0);
        for (k = 0; k < 3; k++) {
            ck_assert_msg(runs[k].st == MR_OK, "round %d rank %d: %s", round, k, runs[k].msg);
            mr_check_same_fit(ref, runs[k].fit);
            same_robust(ref, runs[k].fit);
            /* the second round reads no data: all its passes are those it took up */
            ck_assert_int_eq((int)mr_fit_stat(runs[k].fit, MR_STAT_PASSES), (int)mr_fit_stat(ref, MR_STAT_PASSES));
            if (round == 1 && k == 0)
                ck_assert_int_eq(mr_fit_resumed_after_pass(runs[k].fit), (int)mr_fit_stat(ref, MR_STAT_PASSES));
            mr_fit_free(runs[k].fit);
        }
    }
    mr_fit_free(ref);
    unlink(checkpoint_path);
    unlink(data_path);
}
END_TEST

START_TEST(what_a_share_cannot_take_is_refused_everywhere)
{
    rank_run runs[MAX_RANKS];
    int k;
    write_rows();
    run_ranks(3, PLAIN, 0, "-", runs);
    for (k = 0; k < 3; k++) ck_assert_int_eq(runs[k].st, MR_ERR_USAGE);
    unlink(data_path);
}
END_TEST

START_TEST(share_arguments)
{
    mr_share *s = NULL;
    ck_assert_int_eq(mr_share_new(2, 2, gather, NULL, &s), MR_ERR_USAGE);
    ck_assert_int_eq(mr_share_new(0, 0, gather, NULL, &s), MR_ERR_USAGE);
    ck_assert_int_eq(mr_share_new(0, 1, NULL, NULL, &s), MR_ERR_USAGE);
    ck_assert_ptr_null(s);
    ck_assert_int_eq(mr_share_new(0, 1, gather, NULL, &s), MR_OK);
    ck_assert_int_eq(mr_share_rank(s), 0);
    ck_assert_int_eq(mr_share_nranks(s), 1);
    ck_assert(!mr_share_ended(s));
    mr_share_free(s);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("share");
    TCase *tc = tcase_create("share");
    tcase_set_timeout(tc, 600);
    tcase_add_test(tc, share_arguments);
    tcase_add_test(tc, shared_fit_is_the_same_bits);
    tcase_add_test(tc, collapsed_shared_fit_is_the_same_bits);
    tcase_add_test(tc, robust_shared_fit_is_the_same_bits);
    tcase_add_test(tc, cluster_robust_shared_fit_is_the_same_bits);
    tcase_add_test(tc, a_share_needs_the_file_grouped_by_cluster);
    tcase_add_test(tc, an_error_on_one_rank_ends_every_rank);
    tcase_add_test(tc, a_shared_fit_keeps_and_resumes_a_checkpoint);
    tcase_add_test(tc, what_a_share_cannot_take_is_refused_everywhere);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
