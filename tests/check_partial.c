/* check_partial.c - tests of src/accum/partial.c: a pass's totals as bytes
 * and back, and the order in which partial totals are added.
 *
 * Sources of truth: the encoding's own contract in partial.h (byte layout,
 * little-endian, IEEE bits kept); identity of bits (same_bits) between
 * totals added directly and totals that went through bytes; the group
 * order of additions stated in partial.h, computed here by plain loops. */
#include <check.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "accum/partial.h"
#include "check_common.h"

enum { P = 5, NBLOCKS = 53 };

static double random_value(uint64_t *state)
{
    uint64_t r = next_random(state);
    /* wide magnitudes, both signs: additions that round */
    return ldexp((double)(r >> 11) * 0x1p-53, (int)(r % 61) - 30) * ((r >> 7) & 1 ? -1 : 1);
}

static void random_totals(mr__block_sums *s, uint64_t *state)
{
    size_t i, j;
    for (j = 0; j < P; j++)
        for (i = 0; i <= j; i++) s->xtwx[j * P + i] = random_value(state);
    for (j = 0; j < P; j++) s->xtwz[j] = random_value(state);
    s->dev = random_value(state);
    s->pearson = random_value(state);
    s->null_dev = random_value(state);
    s->null_sw = random_value(state);
    s->null_swz = random_value(state);
    s->invalid = next_random(state) % 100;
    s->boundary = next_random(state);
    for (j = 0; j < MR__PARAM_SUMS; j++) s->fam[j] = random_value(state);
}

static void fresh(mr__block_sums *s)
{
    ck_assert_int_eq(mr__sums_init(s, P, NULL), MR_OK);
}

static void assert_same(const mr__block_sums *a, const mr__block_sums *b)
{
    size_t i, j;
    for (j = 0; j < P; j++)
        for (i = 0; i <= j; i++) ck_assert(same_bits(a->xtwx[j * P + i], b->xtwx[j * P + i]));
    for (j = 0; j < P; j++) ck_assert(same_bits(a->xtwz[j], b->xtwz[j]));
    ck_assert(same_bits(a->dev, b->dev));
    ck_assert(same_bits(a->pearson, b->pearson));
    ck_assert(same_bits(a->null_dev, b->null_dev));
    ck_assert(same_bits(a->null_sw, b->null_sw));
    ck_assert(same_bits(a->null_swz, b->null_swz));
    ck_assert_uint_eq(a->invalid, b->invalid);
    ck_assert_uint_eq(a->boundary, b->boundary);
    for (j = 0; j < MR__PARAM_SUMS; j++) ck_assert(same_bits(a->fam[j], b->fam[j]));
}

START_TEST(round_trip_keeps_every_bit)
{
    mr__block_sums a, b;
    mr__partial_range in = {17, 4}, out;
    unsigned char *buf = malloc(mr__partial_size(P));
    uint64_t state = 11;
    double nan_payload;
    uint64_t bits = UINT64_C(0x7FF8000000000123);
    memcpy(&nan_payload, &bits, sizeof bits);
    fresh(&a);
    fresh(&b);
    random_totals(&a, &state);
    a.xtwx[0] = -0.0;
    a.xtwx[P + 1] = nan_payload;
    a.xtwz[2] = 0x1p-1074; /* the smallest subnormal */
    a.dev = INFINITY;
    mr__partial_encode(&a, P, in, buf);
    ck_assert_int_eq(mr__partial_decode(buf, mr__partial_size(P), P, &b, &out, NULL), MR_OK);
    assert_same(&a, &b);
    ck_assert_uint_eq(out.first_block, 17);
    ck_assert_uint_eq(out.nblocks, 4);
    mr__sums_release(&a);
    mr__sums_release(&b);
    free(buf);
}
END_TEST

/* The layout is fixed whatever the host: the header and the first double
 * written byte by byte as partial.h states. */
START_TEST(layout_is_little_endian)
{
    mr__block_sums a;
    unsigned char buf[256];
    mr__partial_range r = {0x0102, 3};
    ck_assert_int_eq(mr__sums_init(&a, 1, NULL), MR_OK);
    a.xtwx[0] = 1.0; /* 0x3FF0000000000000 */
    ck_assert_uint_le(mr__partial_size(1), sizeof buf);
    ck_assert_uint_eq(mr__partial_size(1), 32 + 8 * 14);
    mr__partial_encode(&a, 1, r, buf);
    ck_assert(memcmp(buf, "MRPS\2\0\0\0\1\0\0\0\0\0\0\0\2\1\0\0\0\0\0\0\3\0\0\0\0\0\0\0", 32) == 0);
    ck_assert(memcmp(buf + 32, "\0\0\0\0\0\0\xF0\x3F", 8) == 0);
    mr__sums_release(&a);
}
END_TEST

START_TEST(wrong_bytes_are_refused)
{
    mr__block_sums a;
    mr__partial_range r = {0, 1};
    mr__error err;
    size_t n = mr__partial_size(P);
    unsigned char *buf = malloc(n);
    fresh(&a);
    mr__partial_encode(&a, P, r, buf);
    ck_assert_int_eq(mr__partial_decode(buf, n - 1, P, &a, &r, &err), MR_ERR_IO);
    ck_assert_int_eq(mr__partial_decode(buf, n, P - 1, &a, &r, &err), MR_ERR_IO);
    buf[4] = 3; /* a version this build does not know */
    ck_assert_int_eq(mr__partial_decode(buf, n, P, &a, &r, &err), MR_ERR_IO);
    buf[4] = 1;
    buf[0] = 'X';
    ck_assert_int_eq(mr__partial_decode(buf, n, P, &a, &r, &err), MR_ERR_IO);
    mr__sums_release(&a);
    free(buf);
}
END_TEST

/* Reduces blocks [from, to) by the group order: each group's blocks into
 * a zeroed group total, group totals in order into out (zeroed first). */
static void reduce_groups(mr__block_sums *block, size_t from, size_t to, mr__block_sums *out)
{
    mr__block_sums group;
    size_t b;
    fresh(&group);
    mr__sums_zero_totals(out, P);
    for (b = from; b < to; b++) {
        mr__sums_add_totals(&group, &block[b], P);
        if (mr__group_closes(b, b + 1 == to)) {
            mr__sums_add_totals(out, &group, P);
            mr__sums_zero_totals(&group, P);
        }
    }
    mr__sums_release(&group);
}

/* Three "processes" own whole groups each; each sends its groups' totals
 * as bytes, and the root adds them in group order: the same bits as one
 * process reducing every block. */
START_TEST(partials_through_bytes_add_to_the_same_bits)
{
    mr__block_sums block[NBLOCKS], whole, root, part, back;
    size_t cut[] = {0, MR__GROUP_BLOCKS, 3 * MR__GROUP_BLOCKS, NBLOCKS}, k, g;
    unsigned char *buf = malloc(mr__partial_size(P));
    uint64_t state = 5;
    ck_assert_uint_gt(NBLOCKS, 3 * MR__GROUP_BLOCKS);
    for (k = 0; k < NBLOCKS; k++) {
        fresh(&block[k]);
        random_totals(&block[k], &state);
    }
    fresh(&whole);
    fresh(&root);
    fresh(&part);
    fresh(&back);
    reduce_groups(block, 0, NBLOCKS, &whole);
    for (k = 0; k + 1 < sizeof cut / sizeof *cut; k++) {
        /* a process with several groups sends one total per group */
        for (g = cut[k]; g < cut[k + 1]; g += MR__GROUP_BLOCKS) {
            size_t end = g + MR__GROUP_BLOCKS < cut[k + 1] ? g + MR__GROUP_BLOCKS : cut[k + 1];
            mr__partial_range r = {g, end - g}, got;
            reduce_groups(block, g, end, &part);
            mr__partial_encode(&part, P, r, buf);
            ck_assert_int_eq(mr__partial_decode(buf, mr__partial_size(P), P, &back, &got, NULL), MR_OK);
            ck_assert_uint_eq(got.first_block, g);
            mr__sums_add_totals(&root, &back, P);
        }
    }
    assert_same(&whole, &root);
    for (k = 0; k < NBLOCKS; k++) mr__sums_release(&block[k]);
    mr__sums_release(&whole);
    mr__sums_release(&root);
    mr__sums_release(&part);
    mr__sums_release(&back);
    free(buf);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("partial");
    TCase *tc = tcase_create("partial");
    tcase_add_test(tc, round_trip_keeps_every_bit);
    tcase_add_test(tc, layout_is_little_endian);
    tcase_add_test(tc, wrong_bytes_are_refused);
    tcase_add_test(tc, partials_through_bytes_add_to_the_same_bits);
    suite_add_tcase(s, tc);
    return mr_check_run(s, 0);
}
