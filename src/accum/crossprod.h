/* crossprod.h - the dense columns' products of one block, in an order fixed
 * by this file alone.
 *
 * Why not BLAS: dsyrk and dgemv choose their kernel (and so the order of
 * every sum) by the CPU they find and the OpenBLAS build that is loaded,
 * and Debian's serial OpenBLAS is not safe to call from two threads at
 * once (its buffer allocator has no lock: concurrent dsyrk calls returned
 * wrong sums).  These loops run in the workers; BLAS and LAPACK are only
 * called from the thread that runs the fit, one call at a time.  For the
 * tall, narrow blocks of a pass (16384 rows, up to 65 columns) they are
 * also faster than dsyrk, whose set-up dominates at a few columns.
 *
 * The order: entry (a, b) of D'D is summed in four lanes, lane k taking
 * rows i = k (mod 4) in increasing order, and the lanes are added as
 * (l0 + l1) + (l2 + l3).  Every code path (AVX2 or portable) does exactly
 * these IEEE operations, so all give the same bits; tests/check_crossprod.c
 * holds them to a plain loop written from this paragraph. */
#ifndef MR_CROSSPROD_H
#define MR_CROSSPROD_H

#include <stddef.h>

/* Columns at most, and doubles of scratch mr__crossprod_upper needs. */
#define MR__CROSSPROD_MAX_COLS 72
#define MR__CROSSPROD_SCRATCH(m) ((size_t)(m) * ((size_t)(m) + 1) / 2 * 4)

/* G = D'D for the n x m column-major D (leading dimension ld >= n), upper
 * triangle only: G[b * m + a] for a <= b; the rest of G is not touched.
 * `lanes` is caller scratch of MR__CROSSPROD_SCRATCH(m) doubles, 32-byte
 * aligned.  m <= MR__CROSSPROD_MAX_COLS. */
void mr__crossprod_upper(const double *D, size_t ld, size_t n, size_t m, double *G, double *lanes);

/* y[i] += D[i, j] b[j] for j = 0, 1, ..., m - 1 in turn, each row i < n. */
void mr__matvec_add(const double *D, size_t ld, size_t n, size_t m, const double *b, double *y);

/* 1 when mr__crossprod_upper takes its AVX2 path on this CPU.  Built with
 * -DMR_CROSSPROD_PORTABLE it never does (the tests build both). */
int mr__crossprod_wide(void);

#endif
