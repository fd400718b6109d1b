/* check_store.c - tests for src/accum/store.c: the cache file's packed
 * blocks give back every value bit for bit, and the quick decimal parser
 * of src/input/numparse.h agrees with glibc strtod.
 *
 * Oracles: bitwise equality with the values written (an identity), and
 * glibc strtod in the "C" locale (a Check test never calls setlocale). */
#define _POSIX_C_SOURCE 200809L

#include <check.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "accum/store.h"
#include "input/numparse.h"
#include "check_common.h"

/* A binding with an outcome, an offset, `nnum` numerics and two factors:
 * all the packer looks at. */
static mr__binding test_binding(size_t nnum)
{
    mr__binding b;
    memset(&b, 0, sizeof b);
    b.ncol = 1 + 1 + nnum + 2;
    b.nnum = nnum;
    b.nfac = 2;
    b.has_offset = 1;
    return b;
}

/* Column k of the numerics gets values of kind k. */
static double value_of_kind(size_t kind, size_t i, uint64_t *rng)
{
    uint64_t u = next_random(rng);
    switch (kind) {
    case 0: return (double)(u % 6);                                  /* counts: 1 byte */
    case 1: return 2000.0 + (double)(u % 25);                        /* years: 2 bytes */
    case 2: return (double)(int)(u % 900 + 100) / 10;                /* one decimal */
    case 3: return (double)((int64_t)(u % 2000001) - 1000000) / 1000; /* three decimals, signed */
    case 4: return i % 3 == 0 ? -0.0 : 1.0;                          /* -0.0 must stay -0.0 */
    case 5: return (double)(u >> 11) * 0x1p-53 * 7.0;                /* no short form */
    case 6: return i % 2 ? 3e9 : 1.0;                                /* beyond 32-bit integers */
    default: return (double)(u % 1000) / 10 + 1e-12;                 /* near, not equal, a decimal */
    }
}

START_TEST(test_packed_blocks_round_trip)
{
    enum { NNUM = 8 };
    mr__binding b = test_binding(NNUM);
    mr__block in, out;
    mr__error err;
    uint64_t rng = 42;
    size_t i, k, n = MR__BLOCK_ROWS - 7, bytes, raw;
    char *buf = malloc(mr__store_pack_bound(&b));
    mr__store s;
    mr__store_init_memory(&s);
    ck_assert_ptr_nonnull(buf);
    ck_assert_int_eq(mr__block_init(&in, &b, &err), MR_OK);
    ck_assert_int_eq(mr__block_init(&out, &b, &err), MR_OK);
    in.n = (uint32_t)n;
    in.worker = 1;
    for (i = 0; i < n; i++) {
        in.y[i] = (double)(next_random(&rng) % 4);
        in.off[i] = log(0.5 + (double)(next_random(&rng) % 100) / 37);
        for (k = 0; k < NNUM; k++) in.num[k * MR__BLOCK_ROWS + i] = value_of_kind(k, i, &rng);
        in.lev[i] = (int32_t)(next_random(&rng) % 300);   /* 2 bytes */
        in.lev[MR__BLOCK_ROWS + i] = i == 5 ? 70000 : 3;  /* 4 bytes */
    }
    bytes = mr__store_pack(&in, &b, buf);
    raw = n * mr__store_row_bytes(&b);
    ck_assert_uint_le(bytes, mr__store_pack_bound(&b));
    ck_assert_msg(bytes < raw, "packed %zu bytes, raw %zu", bytes, raw);
    mr__store_unpack(&s, buf, 9, &b, &out);
    ck_assert_uint_eq(out.n, n);
    ck_assert_int_eq(out.worker, 1);
    ck_assert_uint_eq(out.index, 9);
    for (i = 0; i < n; i++) {
        ck_assert_msg(same_bits(in.y[i], out.y[i]), "y row %zu", i);
        ck_assert_msg(same_bits(in.off[i], out.off[i]), "offset row %zu", i);
        for (k = 0; k < NNUM; k++)
            ck_assert_msg(same_bits(in.num[k * MR__BLOCK_ROWS + i], out.num[k * MR__BLOCK_ROWS + i]),
                          "numeric %zu row %zu: %.17g became %.17g", k, i, in.num[k * MR__BLOCK_ROWS + i],
                          out.num[k * MR__BLOCK_ROWS + i]);
        ck_assert_int_eq(in.lev[i], out.lev[i]);
        ck_assert_int_eq(in.lev[MR__BLOCK_ROWS + i], out.lev[MR__BLOCK_ROWS + i]);
    }
    mr__block_release(&in);
    mr__block_release(&out);
    free(buf);
}
END_TEST

/* A field the quick parser takes must be one strtod reads whole, with the
 * same bits; the fields come from the characters numbers are made of. */
START_TEST(test_quick_decimals_match_strtod)
{
    static const char alphabet[] = "0123456789012345678901234567890123456789..--,e x";
    uint64_t rng = 7;
    long i, taken = 0;
    for (i = 0; i < 2000000; i++) {
        char z[24], *end;
        size_t len = (size_t)(next_random(&rng) % 20), k;
        const char *stop;
        double got = 0, want;
        for (k = 0; k < len; k++) z[k] = alphabet[next_random(&rng) % (sizeof alphabet - 1)];
        z[len] = '\0';
        stop = mr__parse_short_decimal(z, z + len, ',', &got);
        if (stop == NULL) continue;
        taken++;
        ck_assert_msg(stop == z + len || *stop == ',', "\"%s\": stopped inside the field", z);
        want = strtod(z, &end);
        ck_assert_msg(end == stop, "\"%s\": strtod reads %d characters, the quick parser %d", z, (int)(end - z),
                      (int)(stop - z));
        ck_assert_msg(same_bits(got, want), "\"%s\": %.17g, strtod %.17g", z, got, want);
    }
    ck_assert_msg(taken > 100000, "only %ld fields taken", taken);
}
END_TEST

/* The cache file stops at its budget (half the free space when the fit
 * began): a zstd input can expand far beyond the size estimate, and the
 * cache must not fill the disk before a write fails (run.c then goes on
 * without it).  Source of truth: store.h's contract for mr__store_append. */
START_TEST(test_file_store_keeps_to_budget)
{
    char bytes[64] = {0};
    mr__store s;
    mr__error err;
    mr__error_clear(&err);
    ck_assert_int_eq(mr__store_init_file(&s, "/tmp", &err), MR_OK);
    s.budget = 100;
    ck_assert_int_eq(mr__store_append(&s, bytes, sizeof bytes, &err), MR_OK);
    ck_assert_int_eq(mr__store_append(&s, bytes, sizeof bytes, &err), MR_ERR_IO);
    ck_assert_msg(strstr(err.msg, "free space") != NULL, "%s", err.msg);
    ck_assert_uint_eq(s.n, 1);
    mr__store_release(&s);
}
END_TEST

static Suite *store_suite(void)
{
    Suite *s = suite_create("store");
    TCase *tc = tcase_create("packed");
    tcase_add_test(tc, test_packed_blocks_round_trip);
    tcase_add_test(tc, test_quick_decimals_match_strtod);
    tcase_add_test(tc, test_file_store_keeps_to_budget);
    tcase_set_timeout(tc, 120);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(store_suite(), 0); }
