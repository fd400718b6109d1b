/* scan.h - what the first pass learns about the data, before any fitting:
 * row counts, missing cells per column, the spread of each numeric (for
 * internal centring), the pieces of the null model's starting value, and
 * the part of the log-likelihood that depends on the data alone (so that
 * the log-likelihood of any fit is that constant minus deviance / 2, with
 * no per-row special functions in later passes; each row's term is the
 * family's loglik_row, family/family.h). */
#ifndef MR_SCAN_H
#define MR_SCAN_H

#include <stdint.h>
#include "accum/decode.h"

typedef struct mr__scan_sums {
    uint64_t nread, nused, incomplete, nbad, npos;
    uint64_t *missing; /* per bound column */
    double *sx, *sxx;  /* per numeric */
    double sw, swy, swe, swoff, llc;
    uint32_t nbad_shown;
    mr__bad_row bad[MR__BAD_SHOWN];
} mr__scan_sums;

mr_status mr__scan_init(mr__scan_sums *s, size_t ncol, size_t nnum, mr__error *err);
void mr__scan_release(mr__scan_sums *s);
void mr__scan_reset(mr__scan_sums *s, size_t ncol, size_t nnum);

/* The block's sums (s is reset first). */
void mr__scan_block(const mr__block *blk, size_t ncol, size_t nnum, mr__scan_sums *s);
/* into += from, in the caller's (block) order. */
void mr__scan_add(mr__scan_sums *into, const mr__scan_sums *from, size_t ncol, size_t nnum);

#endif
