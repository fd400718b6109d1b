/* design.h - from model terms to the columns of the design matrix.
 *
 * Columns: "intercept" (MR__INTERCEPT_NAME), then each declared covariate in order (a numeric
 * is one column, a factor one column per non-reference level: treatment
 * coding), then each interaction (the product of its parts' columns).
 *
 * Internally every numeric enters as (x - centre) / scale.  A raw calendar
 * year makes X'WX so ill-conditioned (about 1e11 here) that Cholesky would
 * lose five digits; centred and scaled it is about 1e4.  The map back to
 * the coefficients of the raw columns is exact algebra: each internal
 * column is a linear combination of raw columns, z = X A, so
 * beta_raw = A beta_internal and cov_raw = A cov A'.  A term is centred
 * only when every lower-order column that its expansion needs is in the
 * model and comes earlier (else it is only scaled), so both sets of columns
 * span the same space column by column and aliasing is unaffected. */
#ifndef MR_DESIGN_H
#define MR_DESIGN_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"
#include "model/columns.h"
#include "model/spec.h"
#include "model/term_spline.h"

/* The intercept's coefficient name (format version 2 of the JSON wrote
 * "(intercept)"; its reader maps that to this). */
#define MR__INTERCEPT_NAME "intercept"

#define MR__MAX_COLUMNS 4000
/* Dense columns: the intercept, terms without a factor and, while there
 * is room, one-factor terms of one column (see mr__design). */
#define MR__MAX_DENSE 64

typedef struct mr__factor {
    const char *name;
    const char **level; /* sorted; strings owned by the level set */
    size_t nlevels;
    int32_t ref;
} mr__factor;

typedef struct mr__term {
    int nfac, nnum;
    int fac[MR__MAX_INTERACT]; /* factor variable indices, in the term's order */
    int num[MR__MAX_INTERACT]; /* numeric variable indices */
    /* A numeric part that is a spline's column (model/term_spline.h)
     * enters as that basis column, neither centred nor scaled; NULL: as
     * itself. */
    const mr__spline *spline[MR__MAX_INTERACT];
    size_t spline_col[MR__MAX_INTERACT];
    size_t group; /* the model term it is part of: covariate i, or interaction ncov + i */
    int full;                  /* every level gets a column (no intercept) */
    size_t col0, ncols;
    size_t stride[MR__MAX_INTERACT];
    int centred;
    double centre[MR__MAX_INTERACT], scale[MR__MAX_INTERACT], inv_scale[MR__MAX_INTERACT];
    int32_t *colmap; /* one-factor terms: level -> design column, -1 for none */
    int dense;       /* carried as dense columns (see mr__design) */
} mr__term;

typedef struct mr__design {
    size_t p;
    char **name;
    int intercept;
    mr__term *term;
    size_t nterms;
    const mr__factor *fac;
    size_t nfac, nnum;
    mr__spline **spline; /* nnum entries: a spline column's basis, NULL for a plain numeric */
    double *A; /* p x p, column-major: raw column k's share of internal column j */
    /* The accumulation layout.  Terms without a factor are dense (every row
     * has a value in their column); a term with a factor puts at most one
     * non-zero in a row, so it is carried as (column, value) per row and
     * costs the same whatever its number of levels.  A one-factor term of
     * one column (a two-level factor, alone or times numerics) is dense
     * while the dense columns have room: a row then takes no branch on
     * whether it sits at the reference level, which for two levels is a
     * coin toss, and dsyrk does the products.  Every dense term is one
     * column. */
    size_t ndense, nsparse;
    size_t *dense_col;   /* ndense design columns */
    size_t *sparse_term; /* nsparse term indices */
    /* Where X'WX can be non-zero: two columns of one sparse term never
     * meet in a row, so that block of the upper triangle is zero off its
     * diagonal (for a 1000-level factor, all but a thousandth of the
     * matrix).  Column b holds rows [0, col_lo[b]) and, for a sparse
     * column, its diagonal; a block's sums keep just these, nnz of them,
     * column after column from col_base[b] (mr__design_packed_index).
     * The same entries as runs of the column-major p x p array: run r is
     * run_len[r] entries from run_at[r] there, from run_off[r] packed. */
    size_t *col_base, *col_lo;
    size_t *run_at, *run_len, *run_off;
    size_t nruns, nnz;
    /* The factor declared `many` (spec.h), which has no columns here: its
     * levels other than the reference are eliminated by their Schur
     * complement (solve/absorb.h) and numbered 0 .. nabsorb - 1 in level
     * order, absorb_index[level] (-1 for the reference).  absorb_var is
     * its factor variable, absorb_group its covariate in the spec; -1 and
     * 0 levels when the model has none.  Coefficient vectors of such a
     * model hold the p columns' coefficients, then the nabsorb levels'. */
    int absorb_var;
    long absorb_group;
    size_t nabsorb;
    int32_t *absorb_index;
} mr__design;

/* Coefficients a fit of the design carries: the columns', then the
 * eliminated factor's levels'. */
static inline size_t mr__design_ncoef(const mr__design *d) { return d->p + d->nabsorb; }

/* The level of row i's eliminated factor in the absorbed numbering (-1:
 * the reference level), from a block's variable-major levels. */
static inline int32_t mr__design_absorb_row(const mr__design *d, const int32_t *lev, size_t stride_rows, size_t i)
{
    return d->absorb_index[lev[(size_t)d->absorb_var * stride_rows + i]];
}

/* Where entry (a, b) of the upper triangle, a <= b, non-zero in some row,
 * sits in a block's packed sums. */
static inline size_t mr__design_packed_index(const mr__design *d, size_t a, size_t b)
{
    return d->col_base[b] + (a < d->col_lo[b] ? a : d->col_lo[b]);
}

/* Code of a level within a term: its column offset, or -1 for the
 * reference level (which has no column). */
static inline int32_t mr__design_level_code(const mr__term *t, const mr__factor *f, int32_t lev)
{
    if (t->full) return lev;
    if (lev == f->ref) return -1;
    return lev < f->ref ? lev : lev - 1;
}

/* The factor level of each factor in column j of term t. */
static inline void mr__design_column_levels(const mr__design *d, const mr__term *t, size_t j, int32_t *code)
{
    int k;
    size_t r = j - t->col0;
    (void)d;
    for (k = 0; k < t->nfac; k++) {
        code[k] = (int32_t)(r / t->stride[k]);
        r %= t->stride[k];
    }
}

/* Builds the design.  `mean` and `spread` (nnum each) come from the first
 * pass; a zero or non-finite spread leaves that numeric raw.  `counts`
 * (nnum tables, NULL when the first pass counted none or ran out of
 * memory) gives the splines their knots (a spline's table is finished
 * here: common/valuecount.h).  A spline covariate or an
 * interaction with one is as many terms as the spline has columns, one
 * after the other (the basis column slowest), all of the same group. */
mr_status mr__design_build(mr__design *d, const mr__spec *s, const mr__binding *b, const mr__factor *fac,
                           const double *mean, const double *spread, mr__value_counts *counts,
                           mr__error *err);
void mr__design_release(mr__design *d);

/* Part of the build (design_names.c): every column's name in d->name,
 * refused when two columns would share one. */
mr_status mr__design_name_columns(mr__design *d, const mr__spec *s, const mr__binding *b, mr__error *err);

/* Fills the n x p internal design block Z (column-major, leading
 * dimension ldz >= n) from a block's variable-major values. */
void mr__design_fill(const mr__design *d, const double *num, const int32_t *lev, size_t stride_rows, size_t n,
                     double *Z, size_t ldz);

/* The same rows in the accumulation layout: D is n x ndense (column-major,
 * leading dimension n); for sparse term s and row i, col[s * n + i] is the
 * design column (-1 when the row has none, e.g. at a reference level) and
 * val[s * n + i] its value (0 where the column is -1, so sums need no
 * branch). */
void mr__design_fill_split(const mr__design *d, const double *num, const int32_t *lev, size_t stride_rows,
                           size_t n, double *D, int32_t *col, double *val);

#endif
