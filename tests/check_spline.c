/* check_spline.c - the natural cubic spline basis (model/term_spline.c),
 * the exact quantiles its knots come from (common/valuecount.c), the
 * model line and its errors, and a spline in the design.
 *
 * Run with --print-basis KNOTS BOUNDARY it prints the basis at the x
 * values on standard input instead (tests/ref/spline_reference.py
 * compares them with R's splines::ns computed there and then). */
#include <math.h>
#include <stdio.h>

#include "check_common.h"
#include "common/alloc.h"
#include "common/valuecount.h"
#include "model/design.h"
#include "model/spec.h"
#include "model/term_spline.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

static void clear(mr__error *err) { mr__error_clear(err); }

static void make(mr__spline *sp, const double *knots, size_t nknots, double lo, double hi)
{
    const double boundary[2] = {lo, hi};
    mr__error err;
    clear(&err);
    ck_assert_msg(mr__spline_make(sp, knots, nknots, boundary, "x", &err) == MR_OK, "%s", err.msg);
}

/* Reference: R 4.2.2 (Debian r-base-core), splines::ns(x, knots = c(30, 45,
 * 60), Boundary.knots = c(15, 85)), printed with sprintf("%.17g"); the
 * first and last rows lie outside the boundary knots (straight lines). */
static const struct {
    double x, basis[4];
} NS_30_45_60[] = {
    {-5, {0, 0.39374961547907883, -1.0237490002456051, 0.62999938476652606}},
    {15, {0, 0, 0, 0}},
    {15.5, {6.1728395061728391e-06, -0.0098400945572040162, 0.025584245848730442, -0.015744151291526422}},
    {22.25, {0.018818672839506171, -0.13161946781959288, 0.34221061633094152, -0.21059114851134858}},
    {30, {0.16666666666666669, -0.19687480773953947, 0.51187450012280256, -0.31499969238326309}},
    {37.700000000000003, {0.49155343209876551, -0.12237166176836159, 0.3661253428199624, -0.225307903273823}},
    {45, {0.69696969696969702, 0.073931403773360355, 0.16232380473471761, -0.099891572144441582}},
    {52.100000000000001, {0.57930468799102131, 0.34104101287423794, 0.11993667157748648, -0.06462997738101732}},
    {60, {0.28409090909090912, 0.55496828752642713, 0.193446088794926, -0.03250528541226215}},
    {71, {0.049890909090909097, 0.43895588442565192, 0.29923833685694151, 0.21191486962649755}},
    {84.998999999999995, {1.8181818182078625e-14, -0.15498992248065263, 0.40309379844961013, 0.75189612403102446}},
    {85, {0, -0.15503875968992248, 0.40310077519379844, 0.75193798449612403}},
    {99, {0, -0.83875968992248062, 0.50077519379844959, 1.337984496124031}},
};

static void expect_close(double got, double want, const char *what, double x, size_t c)
{
    ck_assert_msg(fabs(got - want) <= 1e-12, "%s at x = %.17g, column %zu: %.17g, R %.17g", what, x, c + 1, got, want);
}

START_TEST(basis_matches_r_ns)
{
    const double knots[] = {30, 45, 60};
    mr__spline sp;
    double col[N_OF(NS_30_45_60)], x[N_OF(NS_30_45_60)];
    size_t i, c;
    make(&sp, knots, 3, 15, 85);
    ck_assert_uint_eq(sp.ncols, 4);
    for (i = 0; i < N_OF(NS_30_45_60); i++) x[i] = NS_30_45_60[i].x;
    for (c = 0; c < 4; c++) {
        mr__spline_column(&sp, c, x, N_OF(x), col);
        for (i = 0; i < N_OF(NS_30_45_60); i++) {
            expect_close(mr__spline_value(&sp, c, x[i]), NS_30_45_60[i].basis[c], "value", x[i], c);
            ck_assert(same_bits(col[i], mr__spline_value(&sp, c, x[i])));
        }
    }
}
END_TEST

/* Reference: R 4.2.2, splines::ns(c(0, 1, 2.5, 4), Boundary.knots = c(1, 3)):
 * no interior knot, one column, a straight line. */
START_TEST(one_column_without_interior_knots)
{
    static const double x[] = {0, 1, 2.5, 4}, r[] = {-0.40089186286863665, 0, 0.60133779430295486, 1.2026755886059097};
    mr__spline sp;
    size_t i;
    make(&sp, NULL, 0, 1, 3);
    ck_assert_uint_eq(sp.ncols, 1);
    for (i = 0; i < N_OF(x); i++) expect_close(mr__spline_value(&sp, 0, x[i]), r[i], "value", x[i], 0);
}
END_TEST

/* A natural spline is linear beyond the boundary knots and has second
 * derivative 0 at them (analytic): the one-sided slopes at the boundary
 * agree with those just outside. */
START_TEST(linear_beyond_the_boundary)
{
    const double knots[] = {2, 3.5, 7};
    mr__spline sp;
    size_t c;
    make(&sp, knots, 3, 0, 10);
    for (c = 0; c < sp.ncols; c++) {
        double h = 1e-4, at = mr__spline_value(&sp, c, 10), in = mr__spline_value(&sp, c, 10 - h);
        double out = mr__spline_value(&sp, c, 10 + h), out2 = mr__spline_value(&sp, c, 10 + 2 * h);
        ck_assert_msg(fabs((out2 - out) - (out - at)) < 1e-12, "column %zu not linear outside", c);
        ck_assert_msg(fabs((at - in) / h - (out - at) / h) < 1e-6, "column %zu: slope jumps at the boundary", c);
    }
}
END_TEST

static void counts_of(mr__value_counts *c, const double *x, size_t n)
{
    double *scratch = malloc((n ? n : 1) * sizeof *scratch);
    ck_assert_ptr_nonnull(scratch);
    mr__counts_init(c);
    ck_assert_int_eq(mr__counts_of(c, x, n, scratch), MR_OK);
    free(scratch);
}

/* Reference: R 4.2.2, quantile(y, c(1, 2, 3, 4) / 5, type = 7) and
 * quantile(y[y >= 2 & y <= 8], c(1, 2) / 3). */
static const double DIGITS[] = {3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5, 8, 9, 7, 9, 3,
                                2, 3, 8, 4, 6, 2, 6, 4, 3, 3, 8, 3, 2, 7, 9, 5};

START_TEST(quantiles_match_r_type_7)
{
    static const double want[] = {3, 3.4000000000000004, 5, 7.8000000000000007};
    mr__value_counts a, b, all;
    int k;
    counts_of(&a, DIGITS, 13);
    counts_of(&b, DIGITS + 13, N_OF(DIGITS) - 13);
    mr__counts_init(&all);
    mr__counts_merge(&all, &a);
    mr__counts_merge(&all, &b);
    mr__counts_finish(&all);
    ck_assert_uint_eq(all.total, N_OF(DIGITS));
    ck_assert(all.min == 1 && all.max == 9);
    for (k = 1; k <= 4; k++) ck_assert(same_bits(mr__counts_quantile(&all, -INFINITY, INFINITY, k * (1.0 / 5)), want[k - 1]));
    ck_assert(same_bits(mr__counts_quantile(&all, 2, 8, 1.0 / 3), 3));
    ck_assert(same_bits(mr__counts_quantile(&all, 2, 8, 2 * (1.0 / 3)), 5));
    mr__counts_release(&a);
    mr__counts_release(&b);
    mr__counts_release(&all);
}
END_TEST

/* The merged table depends on the values alone, not on how blocks split
 * them or the order they come in; -0 counts as +0. */
START_TEST(merge_is_order_free)
{
    mr__value_counts parts[4], one, two;
    size_t cut[] = {0, 5, 11, 20, N_OF(DIGITS)}, i;
    for (i = 0; i < 4; i++) counts_of(&parts[i], DIGITS + cut[i], cut[i + 1] - cut[i]);
    mr__counts_init(&one);
    mr__counts_init(&two);
    for (i = 0; i < 4; i++) mr__counts_merge(&one, &parts[i]);
    for (i = 4; i-- > 0;) mr__counts_merge(&two, &parts[i]);
    mr__counts_finish(&one);
    mr__counts_finish(&two);
    ck_assert_uint_eq(one.n, two.n);
    ck_assert_uint_eq(one.n, 9);
    ck_assert(memcmp(one.value, two.value, one.n * sizeof *one.value) == 0);
    ck_assert(memcmp(one.count, two.count, one.n * sizeof *one.count) == 0);
    for (i = 0; i < 4; i++) mr__counts_release(&parts[i]);
    mr__counts_release(&one);
    mr__counts_release(&two);
}
END_TEST

/* Many blocks, many values (the hash table grows several times): the
 * finished total is the count of one sort of all of them. */
START_TEST(total_equals_one_sort)
{
    enum { BLOCKS = 12, ROWS = 16384 };
    double *all = malloc(BLOCKS * ROWS * sizeof *all);
    mr__value_counts block, total, direct;
    uint64_t state = 42;
    size_t b, i;
    ck_assert_ptr_nonnull(all);
    for (i = 0; i < BLOCKS * ROWS; i++) all[i] = (double)(next_random(&state) % 90000) / 4 - 1000;
    all[7] = -0.0;
    all[8] = 0.0;
    mr__counts_init(&total);
    for (b = 0; b < BLOCKS; b++) {
        counts_of(&block, all + b * ROWS, ROWS);
        mr__counts_merge(&total, &block);
        mr__counts_release(&block);
    }
    mr__counts_finish(&total);
    counts_of(&direct, all, BLOCKS * ROWS);
    ck_assert(!total.over && !total.failed);
    ck_assert_uint_eq(total.n, direct.n);
    ck_assert(memcmp(total.value, direct.value, total.n * sizeof *total.value) == 0);
    ck_assert(memcmp(total.count, direct.count, total.n * sizeof *total.count) == 0);
    ck_assert(same_bits(mr__counts_quantile(&total, -INFINITY, INFINITY, 0.3),
                        mr__counts_quantile(&direct, -INFINITY, INFINITY, 0.3)));
    mr__counts_release(&total);
    mr__counts_release(&direct);
    free(all);
}
END_TEST

START_TEST(too_many_distinct_values_drop_the_table)
{
    mr__value_counts block, all;
    double *x = malloc(16384 * sizeof *x);
    size_t b, i;
    ck_assert_ptr_nonnull(x);
    mr__counts_init(&all);
    for (b = 0; b * 16384 <= MR__COUNT_MAX_DISTINCT; b++) {
        for (i = 0; i < 16384; i++) x[i] = (double)(b * 16384 + i);
        counts_of(&block, x, 16384);
        mr__counts_merge(&all, &block);
        mr__counts_release(&block);
    }
    ck_assert(all.over);
    ck_assert_ptr_null(all.value);
    ck_assert_ptr_null(all.slot);
    ck_assert(all.min == 0 && all.max == (double)(b * 16384 - 1));
    mr__counts_release(&all);
    free(x);
}
END_TEST

static mr_status one_line(const char *line, mr__error *err)
{
    mr__spec s;
    mr_status st;
    mr__spec_init(&s);
    clear(err);
    st = mr__spec_line(&s, line, "m:1", err);
    mr__spec_release(&s);
    return st;
}

START_TEST(model_line_errors)
{
    static const struct {
        const char *line, *says;
    } bad[] = {
        {"spline age df=0", "df= takes a whole number from 1"},
        {"spline age df=-2", "df= takes a whole number from 1"},
        {"spline age df=2.5", "df= takes a whole number from 1"},
        {"spline age knots=45,30", "strictly increasing"},
        {"spline age knots=30,30", "strictly increasing"},
        {"spline age knots=30,90 boundary=15,85", "not inside the boundary knots"},
        {"spline age knots=15,40 boundary=15,85", "not inside the boundary knots"},
        {"spline age boundary=85,15 df=3", "strictly increasing"},
        {"spline age boundary=15 df=3", "two numbers"},
        {"spline age df=3 knots=40", "not both"},
        {"spline age boundary=1,5", "not neither"},
        {"spline age knots=4,x", "numbers separated by commas"},
        {"spline age", "takes a column name"},
        {"spline age wiggle=3", "got 'wiggle=3'"},
    };
    mr__error err;
    size_t i;
    for (i = 0; i < N_OF(bad); i++) {
        ck_assert_msg(one_line(bad[i].line, &err) == MR_ERR_USAGE, "%s accepted", bad[i].line);
        ck_assert_msg(strstr(err.msg, bad[i].says) != NULL && strstr(err.msg, "m:1") != NULL, "%s: %s", bad[i].line,
                      err.msg);
    }
    ck_assert_int_eq(one_line("spline age df=4", &err), MR_OK);
    ck_assert_int_eq(one_line("spline age knots=30,45.5,60 boundary=15,85", &err), MR_OK);
}
END_TEST

START_TEST(knots_from_data_errors)
{
    static const double few[] = {1, 2, 2, 3, 3, 3};
    mr__value_counts c;
    mr__spline_spec spec;
    mr__spline sp;
    mr__error err;
    counts_of(&c, few, N_OF(few));
    memset(&spec, 0, sizeof spec);
    spec.df = 3; /* needs 4 distinct values */
    clear(&err);
    ck_assert_int_eq(mr__spline_settle(&sp, "age", &spec, &c, &err), MR_ERR_USAGE);
    ck_assert_msg(strstr(err.msg, "needs at least 4 distinct values") != NULL, "%s", err.msg);
    spec.df = 2; /* the median is 2.5: fine */
    clear(&err);
    ck_assert_msg(mr__spline_settle(&sp, "age", &spec, &c, &err) == MR_OK, "%s", err.msg);
    ck_assert(sp.nknots == 1 && sp.knots[0] == 2.5 && sp.boundary[0] == 1 && sp.boundary[1] == 3);
    {
        double k[] = {5};
        spec.df = 0;
        spec.knots = k;
        spec.nknots = 1; /* beyond the data's maximum, the boundary */
        clear(&err);
        ck_assert_int_eq(mr__spline_settle(&sp, "age", &spec, &c, &err), MR_ERR_USAGE);
        ck_assert_msg(strstr(err.msg, "not inside the boundary knots") != NULL, "%s", err.msg);
    }
    mr__counts_release(&c);
}
END_TEST

/* A spline times a factor: one term per basis column, named by column,
 * each the factor's columns times basis column j (design.h). */
START_TEST(spline_in_the_design)
{
    static const char *const lines[] = {"outcome y", "spline age knots=40 boundary=20,80", "factor sex",
                                        "interact age sex"};
    static const char *const header[] = {"y", "age", "sex"};
    static const char *const levels[] = {"F", "M"};
    static const char *const want[] = {"intercept", "age[spline 1/2]", "age[spline 2/2]", "sex=M",
                                       "age[spline 1/2] & sex=M", "age[spline 2/2] & sex=M"};
    const mr__factor fac = {"sex", (const char **)levels, 2, 0};
    const double mean[] = {50}, spread[] = {10}, age[] = {25, 60, 90};
    const int32_t sex[] = {1, 0, 1};
    mr__spec s;
    mr__binding b;
    mr__design d;
    mr__error err;
    double Z[3 * 6];
    size_t i, j;
    char **h = mr__calloc(3, sizeof *h);
    mr__spec_init(&s);
    clear(&err);
    for (i = 0; i < N_OF(lines); i++) ck_assert_int_eq(mr__spec_line(&s, lines[i], "m", &err), MR_OK);
    ck_assert_int_eq(mr__spec_validate(&s, &err), MR_OK);
    for (i = 0; i < 3; i++) h[i] = mr__strdup(header[i]);
    ck_assert_int_eq(mr__bind(&b, &s, h, 3, "t.csv", &err), MR_OK);
    ck_assert_msg(mr__design_build(&d, &s, &b, &fac, mean, spread, NULL, &err) == MR_OK, "%s", err.msg);
    ck_assert_uint_eq(d.p, N_OF(want));
    for (j = 0; j < d.p; j++) ck_assert_str_eq(d.name[j], want[j]);
    mr__design_fill(&d, age, sex, 3, 3, Z, 3);
    for (i = 0; i < 3; i++)
        for (j = 0; j < 2; j++) {
            double v = mr__spline_value(d.spline[0], j, age[i]);
            ck_assert(same_bits(Z[(1 + j) * 3 + i], v));
            ck_assert(same_bits(Z[(4 + j) * 3 + i], sex[i] ? v : 0.0));
        }
    for (j = 0; j < d.p * d.p; j++) ck_assert(d.A[j] == (j % (d.p + 1) == 0 ? 1.0 : 0.0)); /* nothing centred */
    mr__design_release(&d);
    mr__binding_release(&b);
    mr__spec_release(&s);
}
END_TEST

START_TEST(two_splines_in_one_interaction_refused)
{
    static const char *const lines[] = {"outcome y", "spline a df=2", "spline b df=2", "interact a b"};
    mr__spec s;
    mr__error err;
    size_t i;
    mr__spec_init(&s);
    clear(&err);
    for (i = 0; i < N_OF(lines); i++) ck_assert_int_eq(mr__spec_line(&s, lines[i], "m", &err), MR_OK);
    ck_assert_int_eq(mr__spec_validate(&s, &err), MR_ERR_USAGE);
    ck_assert_msg(strstr(err.msg, "two splines") != NULL, "%s", err.msg);
    mr__spec_release(&s);
}
END_TEST

/* "1,2,3" -> numbers; returns how many. */
static size_t numbers(const char *text, double *out, size_t max)
{
    size_t n = 0;
    char *end;
    while (*text && n < max) {
        out[n++] = strtod(text, &end);
        text = *end == ',' ? end + 1 : end;
        if (end == text && *end != ',') break;
    }
    return n;
}

static int print_basis(const char *knot_list, const char *boundary_list)
{
    double knots[MR__SPLINE_MAX_KNOTS], boundary[2], x;
    size_t nknots = *knot_list ? numbers(knot_list, knots, MR__SPLINE_MAX_KNOTS) : 0, c;
    mr__spline sp;
    mr__error err;
    clear(&err);
    if (numbers(boundary_list, boundary, 2) != 2 || mr__spline_make(&sp, knots, nknots, boundary, "x", &err) != MR_OK) {
        fprintf(stderr, "check_spline: bad knots: %s\n", err.msg);
        return 2;
    }
    while (scanf("%lf", &x) == 1)
        for (c = 0; c < sp.ncols; c++) printf("%.17g%c", mr__spline_value(&sp, c, x), c + 1 < sp.ncols ? ' ' : '\n');
    return 0;
}

static Suite *spline_suite(void)
{
    Suite *s = suite_create("spline");
    TCase *basis = tcase_create("basis");
    tcase_add_test(basis, basis_matches_r_ns);
    tcase_add_test(basis, one_column_without_interior_knots);
    tcase_add_test(basis, linear_beyond_the_boundary);
    suite_add_tcase(s, basis);
    TCase *counts = tcase_create("quantiles");
    tcase_add_test(counts, quantiles_match_r_type_7);
    tcase_add_test(counts, merge_is_order_free);
    tcase_add_test(counts, total_equals_one_sort);
    tcase_add_test(counts, too_many_distinct_values_drop_the_table);
    suite_add_tcase(s, counts);
    TCase *model = tcase_create("model");
    tcase_add_test(model, model_line_errors);
    tcase_add_test(model, knots_from_data_errors);
    tcase_add_test(model, spline_in_the_design);
    tcase_add_test(model, two_splines_in_one_interaction_refused);
    suite_add_tcase(s, model);
    return s;
}

int main(int argc, char **argv)
{
    if (argc == 4 && strcmp(argv[1], "--print-basis") == 0) return print_basis(argv[2], argv[3]);
    return mr_check_run(spline_suite(), 0);
}
