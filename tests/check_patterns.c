/* check_patterns.c - tests for src/accum/patterns.c: merging the blocks of
 * two workers into distinct covariate patterns gives what grouping the
 * rows one by one gives.
 *
 * Oracle: a plain grouping written here (a linear-probing table over the
 * key values themselves), which by definition numbers patterns in order of
 * first appearance and adds each row's sums in row order.  The library's
 * table must match it bit for bit, whichever index it uses: the key
 * columns here gain values block after block, so the direct index is laid
 * out again several times and, once the value counts need more than
 * MR__DENSE_MAX_BITS bits, hands over to the hash table. */
#define _POSIX_C_SOURCE 200809L

#include <check.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "accum/patterns.h"
#include "input/chunk.h"
#include "check_common.h"

enum { NKEY = 4, NWORKERS = 2, NBLOCKS = 24, ROWS_PER_BLOCK = 3000, REF_CAP = 1 << 18 };

/* The plain grouping: key values (not ids) -> pattern number. */
typedef struct reference {
    uint64_t key[REF_CAP];
    int32_t pattern[REF_CAP];
    uint64_t key_of[REF_CAP / 2];
    double sums[REF_CAP / 2][MR__PATTERN_SUMS];
    size_t n;
} reference;

static void reference_add(reference *r, uint64_t key, const double *sums)
{
    size_t i = (size_t)((key * UINT64_C(0x9E3779B97F4A7C15)) >> 46) & (REF_CAP - 1), j;
    while (r->pattern[i] >= 0 && r->key[i] != key) i = (i + 1) & (REF_CAP - 1);
    if (r->pattern[i] < 0) {
        ck_assert_uint_lt(r->n, REF_CAP / 2);
        r->key[i] = key;
        r->pattern[i] = (int32_t)r->n;
        r->key_of[r->n] = key;
        memset(r->sums[r->n], 0, sizeof r->sums[0]);
        r->n++;
    }
    for (j = 0; j < MR__PATTERN_SUMS; j++) r->sums[r->pattern[i]][j] += sums[j];
}

/* Key column k's value in block b is below limit(k, b): the ranges widen
 * as the blocks go, more for later columns.  `wide` makes them reach 2^7
 * values each (28 bits of direct index: the hash table takes over). */
static unsigned value_limit(size_t k, size_t b, int wide)
{
    unsigned top = wide ? 128 : 16, lim = (unsigned)(2 + (b + 1) * (k + 1) * (wide ? 2 : 1));
    return lim < top ? lim : top;
}

static void run_merge(int wide)
{
    static reference ref;
    mr__levelset sets[NWORKERS][NKEY];
    const mr__levelset *set_ptr[NWORKERS][NKEY];
    mr__pattern_rows rows;
    mr__pattern_merge m;
    uint64_t rng = wide ? 99 : 5;
    size_t w, k, b, i;
    memset(ref.pattern, 0xff, sizeof ref.pattern);
    ref.n = 0;
    for (w = 0; w < NWORKERS; w++)
        for (k = 0; k < NKEY; k++) {
            mr__levelset_init(&sets[w][k]);
            set_ptr[w][k] = &sets[w][k];
        }
    ck_assert_int_eq(mr__pattern_rows_init(&rows, NKEY), 0);
    ck_assert_int_eq(mr__pattern_merge_init(&m, NKEY, NWORKERS), 0);
    for (b = 0; b < NBLOCKS; b++) {
        /* blocks go to the workers unevenly, as they would under load */
        w = (b % 3 == 2) ? 1 : 0;
        mr__pattern_rows_begin(&rows, set_ptr[w]);
        for (i = 0; i < ROWS_PER_BLOCK; i++) {
            uint64_t key = 0;
            double *sums = rows.sums + rows.n * MR__PATTERN_SUMS;
            for (k = 0; k < NKEY; k++) {
                unsigned v = (unsigned)(next_random(&rng) % value_limit(k, b, wide));
                char text[16];
                int32_t id;
                int len = snprintf(text, sizeof text, "v%u", v);
                ck_assert_int_eq(mr__levelset_add(&sets[w][k], text, (size_t)len, &id), 0);
                rows.ids[rows.n * NKEY + k] = (uint32_t)id;
                key |= (uint64_t)v << (8 * k);
            }
            for (k = 0; k < MR__PATTERN_SUMS; k++) sums[k] = (double)(next_random(&rng) >> 11) * 0x1p-53 * (double)(k + 1);
            reference_add(&ref, key, sums);
            rows.n++;
        }
        ck_assert_int_eq(mr__pattern_rows_end(&rows, set_ptr[w]), 0);
        ck_assert_int_eq(mr__pattern_merge_add(&m, (int32_t)w, &rows), 0);
    }
    ck_assert_int_eq(m.hashed, wide);
    ck_assert_uint_eq(m.table.n, ref.n);
    for (i = 0; i < ref.n; i++) {
        double got[MR__PATTERN_SUMS];
        mr__pattern_sums(&m.table, i, got);
        for (k = 0; k < NKEY; k++) {
            const mr__level_name *v = &m.values[k].name[mr__pattern_id(&m.table, i, k)];
            char want[16];
            int len = snprintf(want, sizeof want, "v%u", (unsigned)((ref.key_of[i] >> (8 * k)) & 0xff));
            ck_assert_msg(v->len == (uint32_t)len && memcmp(v->str, want, v->len) == 0,
                          "pattern %zu, key column %zu: '%.*s', expected '%s'", i, k, (int)v->len, v->str, want);
        }
        for (k = 0; k < MR__PATTERN_SUMS; k++)
            ck_assert_msg(same_bits(got[k], ref.sums[i][k]), "pattern %zu sum %zu: %.17g, expected %.17g", i, k,
                          got[k], ref.sums[i][k]);
    }
    mr__pattern_merge_release(&m);
    mr__pattern_rows_release(&rows);
    for (w = 0; w < NWORKERS; w++)
        for (k = 0; k < NKEY; k++) mr__levelset_release(&sets[w][k]);
}

START_TEST(test_direct_index_matches_grouping) { run_merge(0); }
END_TEST

START_TEST(test_hash_handover_matches_grouping) { run_merge(1); }
END_TEST

static Suite *patterns_suite(void)
{
    Suite *s = suite_create("patterns");
    TCase *tc = tcase_create("merge");
    tcase_add_test(tc, test_direct_index_matches_grouping);
    tcase_add_test(tc, test_hash_handover_matches_grouping);
    tcase_set_timeout(tc, 120);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(patterns_suite(), 0); }
