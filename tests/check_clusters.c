/* check_clusters.c - tests for src/accum/clusters.c, the clusters' part of
 * the sandwich's meat (sum over clusters of s s').
 *
 * Oracles:
 *  - exact arithmetic: rows' scores are small integers, so every sum is an
 *    integer below 2^53 and any order of addition gives the true value,
 *    computed here directly from each cluster's rows;
 *  - the streamed and the table paths must both give it, for blocks cut
 *    anywhere (clusters straddling one or several blocks, blocks of one
 *    run), and the streamed path must notice a cluster that comes back;
 *  - past the memory limit: MR_ERR_CLUSTERS and a message saying to group
 *    the file (the table) or to allow more memory (the set). */
#include <check.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "accum/clusters.h"
#include "check_common.h"

#define P 3
#define ROWS 200

/* Row i's cluster and score (small integers). */
static void rows(int grouped, uint64_t *key, double *score)
{
    size_t i;
    for (i = 0; i < ROWS; i++) {
        uint64_t g = grouped ? i / 7 : (i * 37) % 29;
        key[2 * i] = 1000 + g;
        key[2 * i + 1] = 77 * g;
        score[i * P] = (double)(i % 5) - 2;
        score[i * P + 1] = (double)(i % 3);
        score[i * P + 2] = (double)((i * 7) % 4) - 1;
    }
}

/* The true meat: each cluster's sum, then s s'. */
static void oracle(const uint64_t *key, const double *score, double *M)
{
    size_t i, j, a, b;
    memset(M, 0, P * P * sizeof *M);
    for (i = 0; i < ROWS; i++) {
        double s[P] = {0};
        int first = 1;
        for (j = 0; j < i; j++)
            if (key[2 * j] == key[2 * i]) first = 0;
        if (!first) continue;
        for (j = i; j < ROWS; j++)
            if (key[2 * j] == key[2 * i])
                for (a = 0; a < P; a++) s[a] += score[j * P + a];
        for (b = 0; b < P; b++)
            for (a = 0; a <= b; a++) M[b * P + a] += s[a] * s[b];
    }
}

/* Rows i0 .. i1 as one block's runs, the way job_meat.c hands them on. */
static size_t block_runs(const uint64_t *key, const double *score, size_t i0, size_t i1, int table, uint64_t *rk,
                         double *vec, double *inner, size_t *nz)
{
    size_t i, n = 0, a;
    double v[P];
    memset(inner, 0, P * P * sizeof *inner);
    for (i = i0; i < i1; i++) {
        if (i == i0 || key[2 * i] != key[2 * (i - 1)]) {
            rk[2 * n] = key[2 * i];
            rk[2 * n + 1] = key[2 * i + 1];
            memset(table ? vec + n * P : v, 0, P * sizeof(double));
            n++;
        }
        for (a = 0; a < P; a++) (table ? vec + (n - 1) * P : v)[a] += score[i * P + a];
        if (!table && (i + 1 == i1 || key[2 * (i + 1)] != key[2 * i])) {
            /* the run ends: first, last, or one between */
            int last = i + 1 == i1;
            if (n == 1) memcpy(vec, v, sizeof v);
            else if (last) memcpy(vec + P, v, sizeof v);
            else mr__add_outer(inner, P, v, nz);
        }
    }
    return n;
}

static mr_status run(const uint64_t *key, const double *score, size_t block, int table, size_t limit, double *M,
                     int *not_grouped, uint64_t *count, mr__error *err)
{
    mr__clusters c;
    uint64_t rk[2 * ROWS];
    double vec[ROWS * P], inner[P * P];
    size_t nz[P], i0;
    mr_status st;
    memset(M, 0, P * P * sizeof *M);
    *not_grouped = 0;
    ck_assert_int_eq(mr__clusters_init(&c, P, table, limit, M, "data.csv", err), MR_OK);
    for (i0 = 0, st = MR_OK; st == MR_OK && i0 < ROWS; i0 += block) {
        size_t i1 = i0 + block < ROWS ? i0 + block : ROWS;
        size_t n = block_runs(key, score, i0, i1, table, rk, vec, inner, nz);
        st = table ? mr__clusters_add_table(&c, n, rk, vec, err)
                   : mr__clusters_add_streamed(&c, n, rk, vec, inner, not_grouped, err);
    }
    if (st == MR_OK) st = mr__clusters_finish(&c, err);
    *count = c.n;
    mr__clusters_release(&c);
    return st;
}

START_TEST(grouped_any_blocks)
{
    uint64_t key[2 * ROWS], count;
    double score[ROWS * P], want[P * P], got[P * P];
    size_t block;
    int table, ng;
    mr__error err;
    rows(1, key, score);
    oracle(key, score, want);
    for (table = 0; table <= 1; table++)
        for (block = 1; block <= 40; block++) {
            ck_assert_int_eq(run(key, score, block, table, 1 << 20, got, &ng, &count, &err), MR_OK);
            ck_assert_mem_eq(got, want, sizeof want);
            ck_assert_uint_eq(count, (ROWS + 6) / 7);
        }
}
END_TEST

START_TEST(not_grouped)
{
    uint64_t key[2 * ROWS], count;
    double score[ROWS * P], want[P * P], got[P * P];
    int ng;
    mr__error err;
    rows(0, key, score);
    oracle(key, score, want);
    ck_assert_int_eq(run(key, score, 16, 0, 1 << 20, got, &ng, &count, &err), MR_ERR_CLUSTERS);
    ck_assert_int_eq(ng, 1);
    ck_assert_int_eq(run(key, score, 16, 1, 1 << 20, got, &ng, &count, &err), MR_OK);
    ck_assert_mem_eq(got, want, sizeof want);
    ck_assert_uint_eq(count, 29);
}
END_TEST

START_TEST(memory_limit)
{
    uint64_t key[2 * ROWS], count;
    double score[ROWS * P], got[P * P];
    int ng;
    mr__error err;
    rows(0, key, score);
    /* the table's index alone takes 32 KiB */
    ck_assert_int_eq(run(key, score, 16, 1, 1000, got, &ng, &count, &err), MR_ERR_CLUSTERS);
    ck_assert_ptr_nonnull(strstr(err.msg, "data.csv: "));
    ck_assert_ptr_nonnull(strstr(err.msg, "group the file by the cluster column"));
    rows(1, key, score);
    ck_assert_int_eq(run(key, score, 16, 0, 1000, got, &ng, &count, &err), MR_ERR_CLUSTERS);
    ck_assert_ptr_nonnull(strstr(err.msg, "allow more memory"));
    ck_assert_int_eq(ng, 0);
}
END_TEST

static Suite *clusters_suite(void)
{
    Suite *s = suite_create("clusters");
    TCase *tc = tcase_create("core");
    tcase_add_test(tc, grouped_any_blocks);
    tcase_add_test(tc, not_grouped);
    tcase_add_test(tc, memory_limit);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(clusters_suite(), 0); }
