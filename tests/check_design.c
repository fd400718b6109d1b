/* check_design.c - tests of src/model/design.c, with the model built by the
 * real pieces before it (spec.c, columns.c).
 *
 * Sources of truth, named beside each check:
 *   - treatment coding as written out by hand: a factor with levels
 *     a < b < c and reference b has indicator columns for a and c; an
 *     interaction column is the product of its parts' columns; the raw
 *     design X below is typed in from that rule, not computed by the
 *     library;
 *   - the identity stated in src/model/design.h: every internal column is
 *     a linear combination of raw columns, Z = X A;
 *   - the model language in include/millrace.h (directives, ref=LEVEL,
 *     MR_ERR_USAGE, the origin in messages) and the coefficient names it
 *     documents ("sex=M", "age_band=45-49 & sex=M").
 */
#include <check.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "model/columns.h"
#include "model/design.h"
#include "common/levels.h"
#include "model/spec.h"
#include "check_common.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))

static void clear(mr__error *err)
{
    err->status = MR_OK;
    err->msg[0] = '\0';
}

static void spec_lines(mr__spec *s, const char *const *lines, size_t n)
{
    mr__error err;
    size_t i;
    clear(&err);
    mr__spec_init(s);
    for (i = 0; i < n; i++)
        ck_assert_msg(mr__spec_line(s, lines[i], "test.model", &err) == MR_OK, "%s: %s", lines[i], err.msg);
    ck_assert_msg(mr__spec_validate(s, &err) == MR_OK, "%s", err.msg);
}

/* mr__bind takes the header, which it frees with the library's allocator. */
static void bind_header(mr__binding *b, const mr__spec *s, const char *const *names, size_t n)
{
    char **h = mr__calloc(n, sizeof *h);
    mr__error err;
    size_t i;
    ck_assert_ptr_nonnull(h);
    for (i = 0; i < n; i++) {
        h[i] = mr__strdup(names[i]);
        ck_assert_ptr_nonnull(h[i]);
    }
    clear(&err);
    ck_assert_msg(mr__bind(b, s, h, n, "t.csv", &err) == MR_OK, "%s", err.msg);
}

static void expect_names(const mr__design *d, const char *const *want, size_t n)
{
    size_t j;
    ck_assert_uint_eq(d->p, n);
    for (j = 0; j < n; j++) ck_assert_str_eq(d->name[j], want[j]);
}

/* Z from the library, for rows given variable-major with a row stride
 * larger than n and a leading dimension larger than n, so that a mix-up
 * of the two shows. */
#define STRIDE 11
#define LDZ 9

/* Source of truth: design.h, Z = X A with A column-major p x p
 * (A[j * p + k] is raw column k's share of internal column j). */
static void expect_z_equals_x_a(const mr__design *d, const double *num, const int32_t *lev, size_t n,
                                const double *X /* n x p, row-major, typed by hand */)
{
    size_t p = d->p, i, j, k;
    double *Z = calloc(LDZ * p, sizeof *Z);
    ck_assert_ptr_nonnull(Z);
    for (i = 0; i < LDZ * p; i++) Z[i] = NAN; /* rows beyond n must stay untouched */
    mr__design_fill(d, num, lev, STRIDE, n, Z, LDZ);
    for (i = 0; i < n; i++)
        for (j = 0; j < p; j++) {
            long double xa = 0;
            for (k = 0; k < p; k++) xa += (long double)X[i * p + k] * d->A[j * p + k];
            ck_assert_msg(fabsl(Z[j * LDZ + i] - xa) <= 1e-12 * (1 + fabsl(xa)),
                          "row %zu column %zu (%s): Z = %.17g, (X A) = %.17Lg", i, j, d->name[j], Z[j * LDZ + i], xa);
        }
    for (j = 0; j < p; j++)
        for (i = n; i < LDZ; i++) ck_assert_msg(isnan(Z[j * LDZ + i]), "Z[%zu, %zu] written beyond n rows", i, j);
    free(Z);
}

/* ------------------------------------------------------------------ */
/* outcome y, factor g ref=b, numeric x, interact g x                   */

static const char *const LEVELS_ABC[] = {"a", "b", "c"};

/* Hand-made rows: (g, x); level ids follow the sorted order a=0 b=1 c=2. */
static const int32_t G_OF_ROW[] = {0, 1, 2, 0, 1, 2, 2};
static const double X_OF_ROW[] = {1.0, -2.0, 3.5, 0.0, 10.0, -1.25, 1e3};
#define NROWS N_OF(G_OF_ROW)

static void rows_g_x(double *num, int32_t *lev)
{
    size_t i;
    for (i = 0; i < NROWS; i++) {
        lev[i] = G_OF_ROW[i];
        num[i] = X_OF_ROW[i];
    }
}

static void build(mr__design *d, mr__spec *s, mr__binding *b, const char *const *lines, size_t nlines,
                  const char *const *header, size_t nheader, const mr__factor *fac, const double *mean,
                  const double *spread)
{
    mr__error err;
    spec_lines(s, lines, nlines);
    bind_header(b, s, header, nheader);
    clear(&err);
    ck_assert_msg(mr__design_build(d, s, b, fac, mean, spread, NULL, &err) == MR_OK, "%s", err.msg);
}

static void release(mr__design *d, mr__spec *s, mr__binding *b)
{
    mr__design_release(d);
    mr__binding_release(b);
    mr__spec_release(s);
}

START_TEST(test_factor_numeric_interaction)
{
    static const char *const lines[] = {"outcome y", "factor g ref=b", "numeric x", "interact g x"};
    static const char *const header[] = {"y", "g", "x"};
    /* Source of truth: treatment coding (reference b has no column) and the
     * names documented in millrace.h. */
    static const char *const names[] = {"intercept", "g=a", "g=c", "x", "g=a & x", "g=c & x"};
    const mr__factor fac = {"g", (const char **)LEVELS_ABC, 3, 1};
    const double mean[] = {2.5}, spread[] = {1.7};
    double num[STRIDE], X[NROWS * 6];
    int32_t lev[STRIDE];
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), &fac, mean, spread);
    expect_names(&d, names, N_OF(names));
    rows_g_x(num, lev);
    /* Raw design by hand: 1, [g=a], [g=c], x, [g=a] x, [g=c] x. */
    for (i = 0; i < NROWS; i++) {
        double ga = G_OF_ROW[i] == 0, gc = G_OF_ROW[i] == 2, x = X_OF_ROW[i];
        double row[6] = {1, ga, gc, x, ga * x, gc * x};
        memcpy(X + i * 6, row, sizeof row);
    }
    expect_z_equals_x_a(&d, num, lev, NROWS, X);
    release(&d, &s, &b);
}
END_TEST

/* Source of truth: design.h states that the accumulation layout (dense
 * columns plus one (column, value) pair per sparse term and row) holds the
 * same matrix as mr__design_fill; a two-level factor, alone or times a
 * numeric, is one of the dense columns, a three-level one stays sparse. */
START_TEST(test_split_layout_is_the_same_matrix)
{
    static const char *const lines[] = {"outcome y", "factor g ref=b", "factor h ref=n", "numeric x",
                                        "interact h x"};
    static const char *const header[] = {"y", "g", "h", "x"};
    static const char *const LEVELS_MN[] = {"m", "n"};
    static const int32_t H_OF_ROW[] = {1, 0, 0, 1, 0, 1, 1};
    const mr__factor fac[2] = {{"g", (const char **)LEVELS_ABC, 3, 1}, {"h", (const char **)LEVELS_MN, 2, 1}};
    const double mean[] = {2.5}, spread[] = {1.7};
    double num[STRIDE], Z[NROWS * 6], D[NROWS * 6], val[NROWS * 2];
    int32_t lev[2 * STRIDE], col[NROWS * 2];
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i, j, t;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), fac, mean, spread);
    ck_assert_uint_eq(d.p, 6); /* intercept, g=a, g=c, h=m, x, h=m & x */
    ck_assert_uint_eq(d.nsparse, 1);
    ck_assert_uint_eq(d.ndense, 4);
    rows_g_x(num, lev);
    for (i = 0; i < NROWS; i++) lev[STRIDE + i] = H_OF_ROW[i];
    mr__design_fill(&d, num, lev, STRIDE, NROWS, Z, NROWS);
    mr__design_fill_split(&d, num, lev, STRIDE, NROWS, D, col, val);
    for (i = 0; i < NROWS; i++) {
        double row[6] = {0};
        for (j = 0; j < d.ndense; j++) row[d.dense_col[j]] = D[j * NROWS + i];
        for (t = 0; t < d.nsparse; t++)
            if (col[t * NROWS + i] >= 0) row[col[t * NROWS + i]] = val[t * NROWS + i];
        for (j = 0; j < d.p; j++)
            ck_assert_msg(row[j] == Z[j * NROWS + i], "row %zu column %s: split %.17g, full %.17g", i, d.name[j],
                          row[j], Z[j * NROWS + i]);
    }
    release(&d, &s, &b);
}
END_TEST

/* Source of truth: an analytic identity of treatment coding -- the
 * columns of one factor term are indicators of disjoint sets of rows, so
 * their products vanish in every row.  The design's runs must cover every
 * other entry of the upper triangle (checked on the full design's X'X
 * here) and leave out exactly those, and the packed index must number
 * them in run order. */
START_TEST(test_runs_cover_every_non_zero_cross_product)
{
    static const char *const lines[] = {"outcome y", "factor g ref=b", "factor k ref=a", "numeric x",
                                        "interact g x"};
    static const char *const header[] = {"y", "g", "k", "x"};
    static const int32_t K_OF_ROW[] = {0, 1, 2, 2, 1, 0, 2};
    const mr__factor fac[2] = {{"g", (const char **)LEVELS_ABC, 3, 1}, {"k", (const char **)LEVELS_ABC, 3, 0}};
    const double mean[] = {2.5}, spread[] = {1.7};
    double num[STRIDE], Z[NROWS * 8];
    int32_t lev[2 * STRIDE];
    unsigned char in_run[8 * 8] = {0};
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i, a, c, r, k;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), fac, mean, spread);
    /* intercept, g=a, g=c, k=b, k=c, x, g=a & x, g=c & x */
    ck_assert_uint_eq(d.p, 8);
    ck_assert_uint_eq(d.nsparse, 3);
    rows_g_x(num, lev);
    for (i = 0; i < NROWS; i++) lev[STRIDE + i] = K_OF_ROW[i];
    mr__design_fill(&d, num, lev, STRIDE, NROWS, Z, NROWS);
    /* and a block's packed sums hold those entries in run order */
    for (r = 0, i = 0; r < d.nruns; r++) {
        ck_assert_uint_eq(d.run_off[r], i);
        for (k = 0; k < d.run_len[r]; k++, i++) {
            size_t full = d.run_at[r] + k;
            in_run[full] = 1;
            ck_assert_uint_eq(mr__design_packed_index(&d, full % d.p, full / d.p), d.run_off[r] + k);
        }
    }
    ck_assert_uint_eq(d.nnz, i);
    for (c = 0; c < d.p; c++)
        for (a = 0; a < d.p; a++) {
            double zz = 0;
            int same_term = (a >= 1 && a <= 2 && c >= 1 && c <= 2) || (a >= 3 && a <= 4 && c >= 3 && c <= 4) ||
                            (a >= 6 && c >= 6);
            for (i = 0; i < NROWS; i++) zz += Z[a * NROWS + i] * Z[c * NROWS + i];
            if (a > c) {
                ck_assert_msg(!in_run[c * d.p + a], "run below the diagonal at %zu, %zu", a, c);
                continue;
            }
            ck_assert_msg(in_run[c * d.p + a] == !(same_term && a != c), "%s x %s: in a run %d", d.name[a],
                          d.name[c], in_run[c * d.p + a]);
            if (!in_run[c * d.p + a])
                ck_assert_msg(zz == 0.0, "%s x %s = %g outside the runs", d.name[a], d.name[c], zz);
        }
    release(&d, &s, &b);
}
END_TEST

START_TEST(test_internal_columns_centred_and_scaled)
{
    /* Source of truth: design.h ("every numeric enters as (x - centre) /
     * scale", centred here since the intercept and g come earlier): with
     * mean 2.5 and spread 1.7, column x is (x - 2.5) / 1.7 and g=c & x is
     * [g=c] (x - 2.5) / 1.7; indicator columns are 0/1. */
    static const char *const lines[] = {"outcome y", "factor g ref=b", "numeric x", "interact g x"};
    static const char *const header[] = {"y", "g", "x"};
    const mr__factor fac = {"g", (const char **)LEVELS_ABC, 3, 1};
    const double mean[] = {2.5}, spread[] = {1.7};
    double num[STRIDE], Z[LDZ * 6];
    int32_t lev[STRIDE];
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), &fac, mean, spread);
    rows_g_x(num, lev);
    mr__design_fill(&d, num, lev, STRIDE, NROWS, Z, LDZ);
    for (i = 0; i < NROWS; i++) {
        double ga = G_OF_ROW[i] == 0, gc = G_OF_ROW[i] == 2, xs = (X_OF_ROW[i] - 2.5) / 1.7;
        double want[6] = {1, ga, gc, xs, ga * xs, gc * xs};
        size_t j;
        for (j = 0; j < 6; j++)
            ck_assert_msg(fabs(Z[j * LDZ + i] - want[j]) <= 1e-14 * (1 + fabs(want[j])), "row %zu column %zu: %.17g vs %.17g",
                          i, j, Z[j * LDZ + i], want[j]);
    }
    release(&d, &s, &b);
}
END_TEST

START_TEST(test_no_intercept_first_factor_full)
{
    /* Source of truth: design.h (without an intercept the first factor
     * takes every level, so each level has its own baseline; ref= then
     * plays no part for it) and treatment coding for the interaction. */
    static const char *const lines[] = {"outcome y", "intercept no", "factor g ref=b", "numeric x", "interact g x"};
    static const char *const header[] = {"y", "g", "x"};
    static const char *const names[] = {"g=a", "g=b", "g=c", "x", "g=a & x", "g=c & x"};
    const mr__factor fac = {"g", (const char **)LEVELS_ABC, 3, 1};
    const double mean[] = {2.5}, spread[] = {1.7};
    double num[STRIDE], X[NROWS * 6];
    int32_t lev[STRIDE];
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), &fac, mean, spread);
    ck_assert_int_eq(d.intercept, 0);
    expect_names(&d, names, N_OF(names));
    rows_g_x(num, lev);
    for (i = 0; i < NROWS; i++) {
        double ga = G_OF_ROW[i] == 0, gb = G_OF_ROW[i] == 1, gc = G_OF_ROW[i] == 2, x = X_OF_ROW[i];
        double row[6] = {ga, gb, gc, x, ga * x, gc * x};
        memcpy(X + i * 6, row, sizeof row);
    }
    expect_z_equals_x_a(&d, num, lev, NROWS, X);
    release(&d, &s, &b);
}
END_TEST

START_TEST(test_numeric_products_and_three_way)
{
    /* Source of truth: design.h (Z = X A), with X typed in by hand from the
     * product rule; the expansion of (x - mx)(w - mw) needs the intercept,
     * x and w, which all come earlier.  Factor g has the default reference
     * (the first level, a). */
    static const char *const lines[] = {"outcome y", "factor g",     "numeric x",      "numeric w",
                                        "interact x w", "interact g x", "interact g x w"};
    static const char *const header[] = {"w", "x", "y", "g"};
    static const char *const names[] = {"intercept", "g=b",     "g=c",         "x",          "w",
                                        "x & w",       "g=b & x", "g=c & x", "g=b & x & w", "g=c & x & w"};
    static const double W_OF_ROW[] = {0.5, 2.0, -3.0, 4.0, 1.5, 0.0, -7.0};
    const mr__factor fac = {"g", (const char **)LEVELS_ABC, 3, 0};
    const double mean[] = {2.5, -0.75}, spread[] = {1.7, 3.1};
    double num[2 * STRIDE], X[NROWS * 10];
    int32_t lev[STRIDE];
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), &fac, mean, spread);
    expect_names(&d, names, N_OF(names));
    rows_g_x(num, lev);
    for (i = 0; i < NROWS; i++) num[STRIDE + i] = W_OF_ROW[i]; /* numeric variable 1 is w */
    for (i = 0; i < NROWS; i++) {
        double gb = G_OF_ROW[i] == 1, gc = G_OF_ROW[i] == 2, x = X_OF_ROW[i], w = W_OF_ROW[i];
        double row[10] = {1, gb, gc, x, w, x * w, gb * x, gc * x, gb * x * w, gc * x * w};
        memcpy(X + i * 10, row, sizeof row);
    }
    expect_z_equals_x_a(&d, num, lev, NROWS, X);
    {
        /* Source of truth: the algebra (x - mx)(w - mw) / (sx sw) =
         * (xw - mw x - mx w + mx mw) / (sx sw), and design.h: g x w is
         * only scaled, as g & w is not in the model. */
        const double mx = 2.5, mw = -0.75, sxw = 1.7 * 3.1;
        const size_t p = d.p, xw = 5, gbxw = 8, gbx = 6;
        size_t k;
        ck_assert_double_eq_tol(d.A[xw * p + 0], mx * mw / sxw, 1e-15);
        ck_assert_double_eq_tol(d.A[xw * p + 3], -mw / sxw, 1e-15);
        ck_assert_double_eq_tol(d.A[xw * p + 4], -mx / sxw, 1e-15);
        ck_assert_double_eq_tol(d.A[xw * p + 5], 1 / sxw, 1e-15);
        ck_assert_double_eq_tol(d.A[gbx * p + 1], -mx / 1.7, 1e-15);
        ck_assert_double_eq_tol(d.A[gbx * p + gbx], 1 / 1.7, 1e-15);
        for (k = 0; k < p; k++) ck_assert_double_eq_tol(d.A[gbxw * p + k], k == gbxw ? 1 / sxw : 0.0, 1e-15);
    }
    release(&d, &s, &b);
}
END_TEST

START_TEST(test_zero_spread_left_raw)
{
    /* Source of truth: design.h ("a zero or non-finite spread leaves that
     * numeric raw"): A is the identity and Z equals X exactly. */
    static const char *const lines[] = {"outcome y", "numeric x"};
    static const char *const header[] = {"y", "x"};
    const double mean[] = {4.0}, spread[] = {0.0};
    double num[STRIDE], X[NROWS * 2], Z[LDZ * 2];
    int32_t lev[STRIDE];
    mr__spec s;
    mr__binding b;
    mr__design d;
    size_t i;
    build(&d, &s, &b, lines, N_OF(lines), header, N_OF(header), NULL, mean, spread);
    ck_assert_uint_eq(d.p, 2);
    rows_g_x(num, lev);
    for (i = 0; i < NROWS; i++) {
        X[i * 2] = 1;
        X[i * 2 + 1] = X_OF_ROW[i];
    }
    ck_assert(d.A[0] == 1 && d.A[1] == 0 && d.A[2] == 0 && d.A[3] == 1);
    mr__design_fill(&d, num, lev, STRIDE, NROWS, Z, LDZ);
    for (i = 0; i < NROWS; i++) ck_assert(Z[i] == 1.0 && Z[LDZ + i] == X_OF_ROW[i]);
    expect_z_equals_x_a(&d, num, lev, NROWS, X);
    release(&d, &s, &b);
}
END_TEST

/* ------------------------------------------------------------------ */
/* The model language                                                   */

START_TEST(test_spec_lines_parsed)
{
    /* Source of truth: millrace.h (the directives and factor COL
     * [ref=LEVEL]; '#' starts a comment; blank lines are ignored). */
    static const char *const lines[] = {"outcome y", "factor g ref=b  # the usual group", "", "   ", "# only a comment",
                                        "numeric x", "interact g x"};
    mr__spec s;
    spec_lines(&s, lines, N_OF(lines));
    ck_assert_str_eq(s.outcome, "y");
    ck_assert_uint_eq(s.ncov, 2);
    ck_assert_str_eq(s.cov[0].name, "g");
    ck_assert_int_eq(s.cov[0].role, MR__ROLE_FACTOR);
    ck_assert_str_eq(s.cov[0].ref, "b");
    ck_assert_str_eq(s.cov[1].name, "x");
    ck_assert_int_eq(s.cov[1].role, MR__ROLE_NUMERIC);
    ck_assert_uint_eq(s.ninter, 1);
    ck_assert_int_eq(s.inter[0].n, 2);
    ck_assert_str_eq(s.inter[0].name[0], "g");
    ck_assert_str_eq(s.inter[0].name[1], "x");
    ck_assert_int_eq(s.intercept, 1);
    /* no family line: gaussian, as fitted with no parameter */
    mr__family fam = mr__spec_family(&s);
    ck_assert_ptr_eq(fam.ops, mr__family_ops_of(MR_GAUSSIAN));
    ck_assert(isnan(fam.param));
    mr__spec_release(&s);
}
END_TEST

static void expect_usage_error(const char *line, const char *origin, const char *also)
{
    mr__spec s;
    mr__error err;
    mr_status st;
    clear(&err);
    mr__spec_init(&s);
    st = mr__spec_line(&s, line, origin, &err);
    ck_assert_msg(st == MR_ERR_USAGE, "'%s': status %d", line, st);
    ck_assert_int_eq(err.status, MR_ERR_USAGE);
    ck_assert_msg(strstr(err.msg, origin ? origin : "model") == err.msg, "'%s': message '%s' does not start with the origin",
                  line, err.msg);
    if (also) ck_assert_msg(strstr(err.msg, also) != NULL, "'%s': message '%s' does not name '%s'", line, err.msg, also);
    mr__spec_release(&s);
}

START_TEST(test_spec_line_errors)
{
    /* Source of truth: millrace.h (model lines return MR_OK or
     * MR_ERR_USAGE; `origin` names the line in error messages; a NULL
     * origin is allowed). */
    expect_usage_error("colour g", "falls.model:3", "colour");
    expect_usage_error("factor g reference=b", "falls.model:4", "reference=b");
    expect_usage_error("factor g ref", "--factor", "ref");
    expect_usage_error("factor g ref=b extra", "falls.model:5", NULL);
    expect_usage_error("factor", "falls.model:6", NULL);
    expect_usage_error("numeric", "falls.model:7", NULL);
    expect_usage_error("interact g", "falls.model:8", NULL);
    expect_usage_error("intercept maybe", "falls.model:9", "maybe");
    expect_usage_error("outcome \"y", "falls.model:10", NULL);
    expect_usage_error("colour g", NULL, "colour");
    /* The family line: none of the families has a parameter, so words
     * after the name are refused as they always were. */
    expect_usage_error("family poisson theta=2", "falls.model:11", "'family' takes 1 value, got 2");
    expect_usage_error("family nosuch extra", "falls.model:12", "'family' takes 1 value, got 2");
    expect_usage_error("family nosuch", "falls.model:13", "unknown family 'nosuch'");
    expect_usage_error("family", "falls.model:14", "'family' takes 1 value, got 0");
}
END_TEST

static Suite *design_suite(void)
{
    Suite *s = suite_create("design");
    TCase *design = tcase_create("design");
    TCase *spec = tcase_create("spec");
    tcase_add_test(design, test_factor_numeric_interaction);
    tcase_add_test(design, test_split_layout_is_the_same_matrix);
    tcase_add_test(design, test_runs_cover_every_non_zero_cross_product);
    tcase_add_test(design, test_internal_columns_centred_and_scaled);
    tcase_add_test(design, test_no_intercept_first_factor_full);
    tcase_add_test(design, test_numeric_products_and_three_way);
    tcase_add_test(design, test_zero_spread_left_raw);
    suite_add_tcase(s, design);
    tcase_add_test(spec, test_spec_lines_parsed);
    tcase_add_test(spec, test_spec_line_errors);
    suite_add_tcase(s, spec);
    return s;
}

int main(void) { return mr_check_run(design_suite(), 0); }
