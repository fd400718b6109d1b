/* crossprod.c - see crossprod.h for why these loops exist and the order
 * they sum in.
 *
 * A lane vector holds the four lanes of one entry.  The kernels work on
 * 512-row tiles (a multiple of 4, so a row keeps its lane) so that the
 * columns a tile reads stay in L1 while every pair of columns is formed:
 * four columns against two at a time, eight entries per sweep.  On x86-64
 * the kernels are compiled twice, for AVX2 and for the baseline, and the
 * loader picks one (GNU ifunc); both do the same element-wise IEEE
 * operations, and contraction into fused multiply-adds is off (-std=c11,
 * -ffp-contract=off), so both give the same bits. */
#include <string.h>

#include "accum/crossprod.h"

#define TILE_ROWS 512

/* Macros, not functions: a 32-byte vector passed by value would take a
 * different calling convention in the two compilations. */
#if defined(__GNUC__)
typedef double lanes4 __attribute__((vector_size(32)));
#define MADD(acc, x, y) ((acc) = (acc) + (x) * (y))
#else
typedef struct lanes4 {
    double v[4];
} lanes4;
static lanes4 madd(lanes4 acc, lanes4 x, lanes4 y)
{
    for (int k = 0; k < 4; k++) acc.v[k] = acc.v[k] + x.v[k] * y.v[k];
    return acc;
}
#define MADD(acc, x, y) ((acc) = madd((acc), (x), (y)))
#endif
#define LOAD(v, p) memcpy(&(v), (p), sizeof(lanes4))
#define STORE(p, v) memcpy((p), &(v), sizeof(lanes4))

/* Not under ThreadSanitizer: the loader runs the clones' resolver before
 * the sanitizer's runtime is up, and the process dies at start. */
#if defined(__GNUC__) && defined(__x86_64__) && !defined(MR_CROSSPROD_PORTABLE) && !defined(__SANITIZE_THREAD__)
#define KERNEL __attribute__((target_clones("avx2", "default")))
#define WIDE_PATH 1
#else
#define KERNEL
#define WIDE_PATH 0
#endif

/* Where the lanes of entry (a, b), a <= b, sit in the scratch. */
static size_t packed(size_t a, size_t b) { return (b * (b + 1) / 2 + a) * 4; }

/* Entries (a..a+3, b0) and (a..a+3, b1) over rows [i0, i1). */
KERNEL static void four_by_two(const double *x, size_t ld, const double *y0, const double *y1, double *acc0,
                               double *acc1, size_t i0, size_t i1)
{
    lanes4 p0, p1, p2, p3, q0, q1, q2, q3, u, v, x0, x1, x2, x3;
    size_t i;
    LOAD(p0, acc0), LOAD(p1, acc0 + 4), LOAD(p2, acc0 + 8), LOAD(p3, acc0 + 12);
    LOAD(q0, acc1), LOAD(q1, acc1 + 4), LOAD(q2, acc1 + 8), LOAD(q3, acc1 + 12);
    for (i = i0; i < i1; i += 4) {
        LOAD(u, y0 + i), LOAD(v, y1 + i);
        LOAD(x0, x + i), LOAD(x1, x + ld + i), LOAD(x2, x + 2 * ld + i), LOAD(x3, x + 3 * ld + i);
        MADD(p0, x0, u), MADD(p1, x1, u), MADD(p2, x2, u), MADD(p3, x3, u);
        MADD(q0, x0, v), MADD(q1, x1, v), MADD(q2, x2, v), MADD(q3, x3, v);
    }
    STORE(acc0, p0), STORE(acc0 + 4, p1), STORE(acc0 + 8, p2), STORE(acc0 + 12, p3);
    STORE(acc1, q0), STORE(acc1 + 4, q1), STORE(acc1 + 8, q2), STORE(acc1 + 12, q3);
}

/* Entries (a, b0) and (a, b1) over rows [i0, i1). */
KERNEL static void one_by_two(const double *x, const double *y0, const double *y1, double *acc0, double *acc1,
                              size_t i0, size_t i1)
{
    lanes4 p, q, x0, u, v;
    size_t i;
    LOAD(p, acc0), LOAD(q, acc1);
    for (i = i0; i < i1; i += 4) {
        LOAD(x0, x + i), LOAD(u, y0 + i), LOAD(v, y1 + i);
        MADD(p, x0, u), MADD(q, x0, v);
    }
    STORE(acc0, p), STORE(acc1, q);
}

/* One tile: columns b and b + 1 against every column up to them.  An odd
 * last column pairs with itself into `spare` lanes that are thrown away. */
static void tile(const double *D, size_t ld, size_t m, double *lanes, size_t i0, size_t i1)
{
    double spare[16];
    size_t a, b;
    for (b = 0; b < m; b += 2) {
        const double *y0 = D + b * ld;
        int pair = b + 1 < m;
        const double *y1 = pair ? y0 + ld : y0;
        for (a = 0; a + 3 <= b; a += 4)
            four_by_two(D + a * ld, ld, y0, y1, lanes + packed(a, b), pair ? lanes + packed(a, b + 1) : spare, i0,
                        i1);
        for (; a <= b; a++)
            one_by_two(D + a * ld, y0, y1, lanes + packed(a, b), pair ? lanes + packed(a, b + 1) : spare, i0, i1);
        if (pair) one_by_two(y1, y1, y1, spare, lanes + packed(b + 1, b + 1), i0, i1);
    }
}

void mr__crossprod_upper(const double *D, size_t ld, size_t n, size_t m, double *G, double *lanes)
{
    const size_t whole = n / 4 * 4;
    size_t i0, a, b, i;
    memset(lanes, 0, MR__CROSSPROD_SCRATCH(m) * sizeof *lanes);
    for (i0 = 0; i0 < whole; i0 += TILE_ROWS) tile(D, ld, m, lanes, i0, i0 + TILE_ROWS < whole ? i0 + TILE_ROWS : whole);
    for (b = 0; b < m; b++)
        for (a = 0; a <= b; a++) {
            double *s = lanes + packed(a, b);
            for (i = whole; i < n; i++) s[i - whole] = s[i - whole] + D[a * ld + i] * D[b * ld + i];
            G[b * m + a] = (s[0] + s[1]) + (s[2] + s[3]);
        }
}

int mr__crossprod_wide(void)
{
#if WIDE_PATH
    __builtin_cpu_init();
    return __builtin_cpu_supports("avx2") != 0;
#else
    return 0;
#endif
}

/* Element-wise over rows, so any vector width gives these bits. */
void mr__matvec_add(const double *D, size_t ld, size_t n, size_t m, const double *b, double *y)
{
    size_t i, j;
    for (j = 0; j < m; j++) {
        const double *col = D + j * ld, bj = b[j];
        for (i = 0; i < n; i++) y[i] += col[i] * bj;
    }
}
