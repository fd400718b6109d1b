#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "solve/absorb.h"
#include "solve/normal_eq.h"

mr_status mr__absorb_sums_init(mr__absorb_sums *s, size_t nlev, size_t pr, mr__error *err)
{
    memset(s, 0, sizeof *s);
    s->nlev = nlev;
    s->pr = pr;
    s->d = mr__calloc(nlev + 1, sizeof *s->d);
    s->bD = mr__calloc(nlev + 1, sizeof *s->bD);
    s->C = mr__calloc(nlev * pr + 1, sizeof *s->C);
    s->A = mr__calloc(pr * pr + 1, sizeof *s->A);
    s->bR = mr__calloc(pr + 1, sizeof *s->bR);
    if (!s->d || !s->bD || !s->C || !s->A || !s->bR) {
        mr__absorb_sums_release(s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

void mr__absorb_sums_release(mr__absorb_sums *s)
{
    mr__free(s->d);
    mr__free(s->bD);
    mr__free(s->C);
    mr__free(s->A);
    mr__free(s->bR);
    memset(s, 0, sizeof *s);
}

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

static int level_empty(const mr__absorb_sums *s, size_t l) { return !(s->d[l] > 0) || !isfinite(s->d[l]); }

/* S = A - sum_l c_l c_l' / d_l and its right-hand side, levels added in
 * order (the same bits whatever produced the sums); g holds pr doubles. */
static void schur(const mr__absorb_sums *s, double *S, double *rhs, double *g)
{
    size_t pr = s->pr, l, i, j;
    memcpy(S, s->A, pr * pr * sizeof *S);
    memcpy(rhs, s->bR, pr * sizeof *rhs);
    for (l = 0; l < s->nlev; l++) {
        const double *c = s->C + l * pr;
        if (level_empty(s, l)) continue;
        for (i = 0; i < pr; i++) g[i] = c[i] / s->d[l];
        for (j = 0; j < pr; j++) {
            double *col = S + j * pr;
            for (i = 0; i <= j; i++) col[i] -= g[i] * c[j];
            rhs[j] -= g[j] * s->bD[l];
        }
    }
}

/* g_l' M h for M pr x pr full (zero where aliased) and g_l = c_l / d_l. */
static double form(const mr__absorb_sums *s, const double *M, size_t l, const double *h)
{
    size_t pr = s->pr, i, j;
    const double *c = s->C + l * pr;
    double sum = 0;
    for (j = 0; j < pr; j++) {
        double mh = 0;
        for (i = 0; i < pr; i++) mh += M[i * pr + j] * h[i];
        sum += c[j] / s->d[l] * mh;
    }
    return sum;
}

static void levels_from_rest(const mr__absorb_sums *s, mr__absorb_solution *sol, double *g, int want_cov)
{
    size_t pr = s->pr, l, j;
    for (l = 0; l < s->nlev; l++) {
        const double *c = s->C + l * pr;
        double b;
        sol->empty[l] = level_empty(s, l);
        if (sol->empty[l]) {
            sol->nempty++;
            sol->beta_lev[l] = 0;
            if (want_cov) sol->var_lev[l] = NAN;
            continue;
        }
        b = s->bD[l] / s->d[l];
        for (j = 0; j < pr; j++) {
            g[j] = c[j] / s->d[l];
            b -= g[j] * sol->beta_rest[j];
        }
        sol->beta_lev[l] = b;
        if (want_cov) sol->var_lev[l] = 1.0 / s->d[l] + form(s, sol->cov_rest, l, g);
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
    mr_status st = solution_alloc(sol, s->nlev, pr, want_cov, err);
    if (st != MR_OK) return st;
    S = mr__malloc_array(pr * pr + 1, sizeof *S);
    rhs = mr__malloc_array(pr + 1, sizeof *rhs);
    g = mr__malloc_array(pr + 1, sizeof *g);
    ref = mr__malloc_array(pr + 1, sizeof *ref);
    if (!S || !rhs || !g || !ref) {
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        goto done;
    }
    schur(s, S, rhs, g);
    for (j = 0; j < pr; j++) ref[j] = s->A[j * pr + j];
    st = mr__solve_normal_ref(S, rhs, pr, ref, sol->beta_rest, sol->aliased, &sol->rank,
                              want_cov ? sol->cov_rest : NULL, err);
    if (st == MR_OK) levels_from_rest(s, sol, g, want_cov);
done:
    mr__free(S);
    mr__free(rhs);
    mr__free(g);
    mr__free(ref);
    return st;
}

double mr__absorb_level_cov(const mr__absorb_sums *s, const mr__absorb_solution *sol, size_t l, size_t m,
                            double *scratch)
{
    size_t j;
    if (sol->empty[l] || sol->empty[m]) return NAN;
    if (l == m) return sol->var_lev[l];
    for (j = 0; j < s->pr; j++) scratch[j] = s->C[m * s->pr + j] / s->d[m];
    return form(s, sol->cov_rest, l, scratch);
}

void mr__absorb_contrasts(const mr__absorb_sums *s, const mr__absorb_solution *sol, size_t ref, double *intercept,
                          double *intercept_var, double *coef, double *var, double *scratch)
{
    size_t l;
    *intercept = sol->beta_lev[ref];
    *intercept_var = sol->var_lev[ref];
    for (l = 0; l < s->nlev; l++) {
        if (l == ref) {
            coef[l] = 0;
            var[l] = 0;
        } else if (sol->empty[l]) {
            coef[l] = 0;
            var[l] = NAN;
        } else {
            coef[l] = sol->beta_lev[l] - sol->beta_lev[ref];
            var[l] = sol->var_lev[l] + sol->var_lev[ref] - 2 * mr__absorb_level_cov(s, sol, l, ref, scratch);
        }
    }
}

void mr__absorb_head_cov(const mr__absorb_sums *s, const mr__absorb_solution *sol, size_t ref, double *out,
                         double *scratch)
{
    size_t pr = s->pr, q = pr + 1, i, j;
    const double *V = sol->cov_rest;
    /* cov(beta_R, beta_D,ref) = -S^-1 g_ref */
    for (i = 0; i < pr; i++) {
        double v = 0;
        for (j = 0; j < pr; j++) v += V[j * pr + i] * (s->C[ref * pr + j] / s->d[ref]);
        scratch[i] = -v;
    }
    out[0] = sol->var_lev[ref];
    for (i = 0; i < pr; i++) {
        out[i + 1] = scratch[i];
        out[(i + 1) * q] = scratch[i];
        for (j = 0; j < pr; j++) out[(j + 1) * q + i + 1] = V[j * pr + i];
    }
}
