#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "solve/absorb.h"
#include "solve/normal_eq.h"

void mr__absorb_solution_release(mr__absorb_solution *sol)
{
    mr__free(sol->beta_lev);
    mr__free(sol->var_lev);
    mr__free(sol->empty);
    mr__free(sol->beta_rest);
    mr__free(sol->aliased);
    mr__free(sol->cov_rest);
    memset(sol, 0, sizeof *sol);
}

static const double *row_of(const mr__absorb_sums *s, size_t l) { return s->lev + l * MR__ABSORB_WIDTH(s->pr); }

static int level_empty(const double *row) { return !(row[0] > 0) || !isfinite(row[0]); }

/* A level's row meets few of the other columns (its own rows' factor
 * levels and numerics): its nonzero columns, in order, into nz.  Terms
 * with a zero factor add or subtract a zero, which leaves every sum as it
 * was (no sum here is -0: each starts at +0 or at a sum of products made
 * from +0, and -0 comes only from -0 + -0 or -0 - +0), so the loops below
 * go over nz alone and give the bits of the loops over all pr. */
static size_t nonzero_columns(const double *c, size_t pr, size_t *nz)
{
    size_t i, n = 0;
    for (i = 0; i < pr; i++)
        if (c[i] != 0) nz[n++] = i;
    return n;
}

/* S's row 0 and the right-hand side's entry 0 from the reference level's
 * own sums (absorb.h, "Precision"); S's upper triangle is read, so row 0
 * is entry 0 of each column. */
static void reference_row(const mr__absorb_sums *s, double *S, double *rhs)
{
    size_t j;
    for (j = 0; j < s->pr; j++) S[j * s->pr] = s->ref[2 + j];
    rhs[0] = s->ref[1];
}

/* S = A - sum_l c_l c_l' / d_l and its right-hand side, levels added in
 * order (the same bits whatever produced the sums); g and nz, room for
 * pr each, take a level's c / d at its nonzero columns, g compact (g[a]
 * is column nz[a]'s), as form and levels_from_rest take them too. */
static void schur(const mr__absorb_sums *s, double *S, double *rhs, double *g, size_t *nz)
{
    size_t pr = s->pr, l, a, b;
    if (pr == 0) return; /* the levels alone: A and b_R may be NULL */
    memcpy(S, s->A, pr * pr * sizeof *S);
    memcpy(rhs, s->bR, pr * sizeof *rhs);
    for (l = 0; l < s->nlev; l++) {
        const double *row = row_of(s, l), *c = row + 2;
        size_t n;
        if (level_empty(row)) continue;
        n = nonzero_columns(c, pr, nz);
        for (a = 0; a < n; a++) g[a] = c[nz[a]] / row[0];
        for (b = 0; b < n; b++) {
            size_t j = nz[b];
            double *col = S + j * pr, cj = c[j];
            for (a = 0; a <= b; a++) col[nz[a]] -= g[a] * cj;
            rhs[j] -= g[b] * row[1];
        }
    }
    if (s->ref != NULL) reference_row(s, S, rhs);
}

/* g' M g for M pr x pr full (zero where aliased), g nonzero at nz[0..n)
 * only and held compact: g[a] is its entry nz[a]. */
static double form(const double *M, size_t pr, const double *g, const size_t *nz, size_t n)
{
    size_t a, b;
    double sum = 0;
    for (b = 0; b < n; b++) {
        const double *col = M + nz[b] * pr;
        double mg = 0;
        for (a = 0; a < n; a++) mg += col[nz[a]] * g[a];
        sum += g[b] * mg;
    }
    return sum;
}

static void levels_from_rest(const mr__absorb_sums *s, mr__absorb_solution *sol, double *g, size_t *nz,
                             int want_cov)
{
    size_t pr = s->pr, l, a, n;
    for (l = 0; l < s->nlev; l++) {
        const double *row = row_of(s, l), *c = row + 2;
        double b;
        sol->empty[l] = level_empty(row);
        if (sol->empty[l]) {
            sol->nempty++;
            sol->beta_lev[l] = 0;
            if (want_cov) sol->var_lev[l] = NAN;
            continue;
        }
        b = row[1] / row[0];
        n = nonzero_columns(c, pr, nz);
        for (a = 0; a < n; a++) {
            g[a] = c[nz[a]] / row[0];
            b -= g[a] * sol->beta_rest[nz[a]];
        }
        sol->beta_lev[l] = b;
        if (want_cov == MR__ABSORB_COV) sol->var_lev[l] = 1.0 / row[0] + form(sol->cov_rest, pr, g, nz, n);
        else if (want_cov == MR__ABSORB_COV_OWN) sol->var_lev[l] = 1.0 / row[0];
    }
}

static mr_status solution_alloc(mr__absorb_solution *sol, size_t nlev, size_t pr, int want_cov, mr__error *err)
{
    memset(sol, 0, sizeof *sol);
    sol->nlev = nlev;
    sol->pr = pr;
    sol->beta_lev = mr__malloc_array(nlev + 1, sizeof *sol->beta_lev);
    sol->empty = mr__malloc_array(nlev + 1, sizeof *sol->empty);
    sol->beta_rest = mr__malloc_array(pr + 1, sizeof *sol->beta_rest);
    sol->aliased = mr__malloc_array(pr + 1, sizeof *sol->aliased);
    if (want_cov) {
        sol->var_lev = mr__malloc_array(nlev + 1, sizeof *sol->var_lev);
        sol->cov_rest = mr__malloc_array(pr * pr + 1, sizeof *sol->cov_rest);
    }
    if (!sol->beta_lev || !sol->empty || !sol->beta_rest || !sol->aliased ||
        (want_cov && (!sol->var_lev || !sol->cov_rest)))
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

mr_status mr__absorb_solve(const mr__absorb_sums *s, int want_cov, mr__absorb_solution *sol, mr__error *err)
{
    size_t pr = s->pr, j;
    double *S = NULL, *rhs = NULL, *g = NULL, *ref = NULL;
    size_t *nz = NULL;
    mr_status st = solution_alloc(sol, s->nlev, pr, want_cov, err);
    if (st != MR_OK) return st;
    S = mr__malloc_array(pr * pr + 1, sizeof *S);
    rhs = mr__malloc_array(pr + 1, sizeof *rhs);
    g = mr__malloc_array(pr + 1, sizeof *g);
    ref = mr__malloc_array(pr + 1, sizeof *ref);
    nz = mr__malloc_array(pr + 1, sizeof *nz);
    if (!S || !rhs || !g || !ref || !nz) {
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        goto done;
    }
    schur(s, S, rhs, g, nz);
    for (j = 0; j < pr; j++) ref[j] = s->A[j * pr + j];
    st = mr__solve_normal_ref(S, rhs, pr, ref, sol->beta_rest, sol->aliased, &sol->rank,
                              want_cov ? sol->cov_rest : NULL, err);
    if (st == MR_OK) levels_from_rest(s, sol, g, nz, want_cov);
done:
    mr__free(S);
    mr__free(rhs);
    mr__free(g);
    mr__free(ref);
    mr__free(nz);
    return st;
}

/* d'Hd by blocks, d laid out as the rest's pr, then the levels':
 * sum_l d_l delta_l^2 + 2 delta_R' (sum_l c_l delta_l) + delta_R' A delta_R,
 * O(L p_r + p_r^2) with no L x L matrix. */
double mr__absorb_quadratic(const mr__absorb_sums *s, const double *d)
{
    size_t pr = s->pr, l, i, j;
    double total = 0, cross = 0;
    for (l = 0; l < s->nlev; l++) {
        const double *row = row_of(s, l);
        double dl = d[pr + l], u = 0;
        if (dl == 0) continue;
        for (j = 0; j < pr; j++) u += row[2 + j] * d[j];
        total += row[0] * dl * dl;
        cross += u * dl;
    }
    for (i = 0; i < pr; i++) {
        double u = 0;
        if (d[i] == 0) continue;
        for (j = 0; j < pr; j++) u += s->A[i <= j ? j * pr + i : i * pr + j] * d[j];
        total += d[i] * u;
    }
    return total + 2 * cross;
}

mr_status mr__absorb_step(const mr__absorb_sums *s, double *next, int *aliased, double *var, size_t *rank,
                          mr__error *err)
{
    mr__absorb_solution sol;
    size_t pr = s->pr, j, l;
    mr_status st = mr__absorb_solve(s, var != NULL ? MR__ABSORB_COV_OWN : MR__ABSORB_NO_COV, &sol, err);
    if (st == MR_OK) {
        memcpy(next, sol.beta_rest, pr * sizeof *next);
        memcpy(next + pr, sol.beta_lev, s->nlev * sizeof *next);
        for (j = 0; j < pr; j++) aliased[j] = sol.aliased[j];
        for (l = 0; l < s->nlev; l++) aliased[pr + l] = sol.empty[l];
        *rank = sol.rank + (s->nlev - sol.nempty);
        for (j = 0; var != NULL && j < pr; j++) var[j] = sol.cov_rest[j * pr + j];
        for (l = 0; var != NULL && l < s->nlev; l++) var[pr + l] = sol.empty[l] ? 0 : sol.var_lev[l];
    }
    mr__absorb_solution_release(&sol);
    return st;
}
