#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "common/threads.h"
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

size_t mr__absorb_parts(size_t nlev, size_t pr)
{
    size_t by_levels = (nlev + MR__ABSORB_PART_LEVELS - 1) / MR__ABSORB_PART_LEVELS;
    size_t by_memory = MR__ABSORB_PART_BYTES / (pr * pr * sizeof(double) + 1);
    size_t n = by_levels < by_memory ? by_levels : by_memory;
    return n > 0 ? n : 1;
}

/* Levels [l0, l1)'s terms of S, summed in order into P (pr x pr, upper)
 * and rhs, which start at +0: S -= c c' / d over a level's nonzero
 * columns as g = c / d held compact (g[a] is column nz[a]'s); g and nz
 * are scratch of pr. */
static void level_terms(const mr__absorb_sums *s, size_t l0, size_t l1, double *P, double *rhs, double *g,
                        size_t *nz)
{
    size_t pr = s->pr, l, a, b;
    memset(P, 0, pr * pr * sizeof *P);
    memset(rhs, 0, pr * sizeof *rhs);
    for (l = l0; l < l1; l++) {
        const double *row = row_of(s, l), *c = row + 2;
        size_t n;
        if (level_empty(row)) continue;
        n = nonzero_columns(c, pr, nz);
        for (a = 0; a < n; a++) g[a] = c[nz[a]] / row[0];
        for (b = 0; b < n; b++) {
            size_t j = nz[b];
            double *col = P + j * pr, cj = c[j];
            for (a = 0; a <= b; a++) col[nz[a]] += g[a] * cj;
            rhs[j] += g[b] * row[1];
        }
    }
}

/* The parts of S's level terms, shared out among threads: part k is
 * thread k mod T's. */
typedef struct schur_work {
    const mr__absorb_sums *s;
    size_t nparts, nthreads, first; /* this thread's first part */
    double *P, *rhs;                /* nparts of pr x pr, and of pr */
    double *g;                      /* scratch: pr */
    size_t *nz;                     /* scratch: pr */
} schur_work;

static void *schur_parts(void *arg)
{
    schur_work *w = arg;
    const mr__absorb_sums *s = w->s;
    size_t k, pr = s->pr;
    for (k = w->first; k < w->nparts; k += w->nthreads) {
        size_t l0 = s->nlev * k / w->nparts, l1 = s->nlev * (k + 1) / w->nparts;
        level_terms(s, l0, l1, w->P + k * pr * pr, w->rhs + k * pr, w->g, w->nz);
    }
    return NULL;
}

static size_t solve_threads(const mr__absorb_sums *s, size_t most)
{
    size_t T = s->threads > 1 ? (size_t)s->threads : 1;
    if (T > MR__ABSORB_MAX_THREADS) T = MR__ABSORB_MAX_THREADS;
    return T < most ? T : most > 0 ? most : 1;
}

/* S = A - the levels' terms, and its right-hand side, the parts added in
 * order (absorb.h, `threads`). */
static mr_status schur(const mr__absorb_sums *s, double *S, double *rhs, mr__error *err)
{
    size_t pr = s->pr, nparts = mr__absorb_parts(s->nlev, pr), T = solve_threads(s, nparts), k, t, i;
    schur_work work[MR__ABSORB_MAX_THREADS];
    double *P, *prhs, *scratch;
    size_t *nz;
    if (pr == 0) return MR_OK; /* the levels alone: A and b_R may be NULL */
    P = mr__malloc_array(nparts * pr * pr + 1, sizeof *P);
    prhs = mr__malloc_array(nparts * pr + 1, sizeof *prhs);
    scratch = mr__malloc_array(T * pr + 1, sizeof *scratch);
    nz = mr__malloc_array(T * pr + 1, sizeof *nz);
    if (!P || !prhs || !scratch || !nz) {
        mr__free(P), mr__free(prhs), mr__free(scratch), mr__free(nz);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    for (t = 0; t < T; t++) work[t] = (schur_work){s, nparts, T, t, P, prhs, scratch + t * pr, nz + t * pr};
    mr__run_threads(schur_parts, work, sizeof work[0], T);
    memcpy(S, s->A, pr * pr * sizeof *S);
    memcpy(rhs, s->bR, pr * sizeof *rhs);
    for (k = 0; k < nparts; k++) {
        const double *Pk = P + k * pr * pr;
        for (i = 0; i < pr * pr; i++) S[i] -= Pk[i];
        for (i = 0; i < pr; i++) rhs[i] -= prhs[k * pr + i];
    }
    if (s->ref != NULL) reference_row(s, S, rhs);
    mr__free(P), mr__free(prhs), mr__free(scratch), mr__free(nz);
    return MR_OK;
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

/* Levels [l0, l1) from the rest's solution: each level's estimate and
 * variance stand alone, so any share of them among threads gives the same
 * bits.  g and nz: scratch of pr. */
typedef struct level_work {
    const mr__absorb_sums *s;
    mr__absorb_solution *sol;
    size_t l0, l1, nempty;
    int want_cov;
    double *g;
    size_t *nz;
} level_work;

static void *levels_from_rest(void *arg)
{
    level_work *w = arg;
    const mr__absorb_sums *s = w->s;
    mr__absorb_solution *sol = w->sol;
    size_t pr = s->pr, l, a, n;
    double *g = w->g;
    for (l = w->l0; l < w->l1; l++) {
        const double *row = row_of(s, l), *c = row + 2;
        double b;
        sol->empty[l] = level_empty(row);
        if (sol->empty[l]) {
            w->nempty++;
            sol->beta_lev[l] = 0;
            if (w->want_cov) sol->var_lev[l] = NAN;
            continue;
        }
        b = row[1] / row[0];
        n = nonzero_columns(c, pr, w->nz);
        for (a = 0; a < n; a++) {
            g[a] = c[w->nz[a]] / row[0];
            b -= g[a] * sol->beta_rest[w->nz[a]];
        }
        sol->beta_lev[l] = b;
        if (w->want_cov == MR__ABSORB_COV) sol->var_lev[l] = 1.0 / row[0] + form(sol->cov_rest, pr, g, w->nz, n);
        else if (w->want_cov == MR__ABSORB_COV_OWN) sol->var_lev[l] = 1.0 / row[0];
    }
    return NULL;
}

static mr_status levels_all(const mr__absorb_sums *s, mr__absorb_solution *sol, int want_cov, mr__error *err)
{
    size_t T = solve_threads(s, s->nlev), t;
    level_work work[MR__ABSORB_MAX_THREADS];
    double *g = mr__malloc_array(T * (s->pr + 1), sizeof *g);
    size_t *nz = mr__malloc_array(T * (s->pr + 1), sizeof *nz);
    if (g == NULL || nz == NULL) {
        mr__free(g), mr__free(nz);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    for (t = 0; t < T; t++)
        work[t] = (level_work){s, sol, s->nlev * t / T, s->nlev * (t + 1) / T, 0, want_cov, g + t * (s->pr + 1),
                               nz + t * (s->pr + 1)};
    mr__run_threads(levels_from_rest, work, sizeof work[0], T);
    for (t = 0; t < T; t++) sol->nempty += work[t].nempty;
    mr__free(g), mr__free(nz);
    return MR_OK;
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
    double *S = NULL, *rhs = NULL, *ref = NULL;
    mr_status st = solution_alloc(sol, s->nlev, pr, want_cov, err);
    if (st != MR_OK) return st;
    S = mr__malloc_array(pr * pr + 1, sizeof *S);
    rhs = mr__malloc_array(pr + 1, sizeof *rhs);
    ref = mr__malloc_array(pr + 1, sizeof *ref);
    if (!S || !rhs || !ref) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) st = schur(s, S, rhs, err);
    for (j = 0; st == MR_OK && j < pr; j++) ref[j] = s->A[j * pr + j];
    if (st == MR_OK)
        st = mr__solve_normal_ref(S, rhs, pr, ref, sol->beta_rest, sol->aliased, &sol->rank,
                                  want_cov ? sol->cov_rest : NULL, err);
    if (st == MR_OK) st = levels_all(s, sol, want_cov, err);
    mr__free(S);
    mr__free(rhs);
    mr__free(ref);
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
