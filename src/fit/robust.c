/* robust.c - robust (sandwich) standard errors: the options, the meat
 * pass's set-up (its job: accum/job_meat.c), the covariance from it and
 * the accessors.
 *
 * V = B M B, with B = (X'WX)^-1 (the bread) and M the meat, both added up
 * by the meat pass at the final coefficients (the last IRLS pass may be a
 * Newton step behind them), M the sum
 * over rows of u^2 x x', or over clusters of s s' (u x a row's score, s a
 * cluster's sum of them).  The dispersion cancels, so V is the same for
 * any family's estimate of it.  Scaled as R's sandwich package does:
 *   HC0                   1
 *   HC1                   n / (n - k)
 *   clusters, HC0         G / (G - 1)   (vcovCL's default for a glm)
 *   clusters, HC1         G / (G - 1) x (n - 1) / (n - k)
 * n the rows with a positive weight, k the rank, G the clusters.  V is
 * formed on the internal (centred) scale and mapped to the raw columns as
 * the model's covariance is. */
#include <math.h>
#include <string.h>

#include "accum/clusters.h"
#include "accum/meat.h"
#include "accum/pass.h"
#include "common/alloc.h"
#include "fit/fit.h"
#include "fit/fitter.h"
#include "fit/run.h"
#include "solve/absorb.h"
#include "solve/normal_eq.h"

#define DEFAULT_CLUSTER_MEMORY ((size_t)1 << 30)

mr_status mr_fitter_set_robust(mr_fitter *f, mr_robust type)
{
    mr__error_clear(&f->err);
    if (type != MR_ROBUST_NONE && type != MR_ROBUST_HC0 && type != MR_ROBUST_HC1)
        return mr__fail(&f->err, MR_ERR_USAGE, "robust standard errors: unknown type %d", (int)type);
    f->robust = (int)type;
    return MR_OK;
}

mr_status mr_fitter_set_cluster(mr_fitter *f, const char *column, size_t memory_limit)
{
    char *copy = NULL;
    mr__error_clear(&f->err);
    if (column != NULL && column[0] == '\0') return mr__fail(&f->err, MR_ERR_USAGE, "cluster column: empty name");
    if (column != NULL && (copy = mr__strdup(column)) == NULL)
        return mr__fail(&f->err, MR_ERR_NO_MEMORY, "out of memory");
    mr__free(f->cluster);
    f->cluster = copy;
    f->cluster_memory = memory_limit ? memory_limit : DEFAULT_CLUSTER_MEMORY;
    return MR_OK;
}

int mr__robust_type(const mr_fitter *f)
{
    if (f->robust != MR_ROBUST_NONE) return f->robust;
    /* sandwich::vcovCL's default for a glm (HC1 is its default for lm alone) */
    return f->cluster != NULL ? MR_ROBUST_HC0 : MR_ROBUST_NONE;
}

/* By rows, or by the eliminated factor's own levels, each level takes its
 * means out of the scores (centred_meat); another column's cluster would
 * need its levels' means before the pass that makes them ends. */
mr_status mr__robust_check(const mr_fitter *f, mr__error *err)
{
    long m = mr__spec_many(&f->spec);
    if (m < 0 || f->cluster == NULL || strcmp(f->cluster, f->spec.cov[m].name) == 0) return MR_OK;
    return mr__fail(err, MR_ERR_USAGE,
                    "cluster-robust standard errors with a 'many' factor are by that factor alone (--cluster %s), "
                    "or by rows (--robust hc0|hc1)", f->spec.cov[m].name);
}

/* The small-sample factor of the table above. */
static double adjustment(int type, double n, double k, int clustered, double g)
{
    double a = clustered ? g / (g - 1) : 1.0;
    if (type == MR_ROBUST_HC1) a *= clustered ? (n - 1) / (n - k) : n / (n - k);
    return a;
}

/* V_s = B M B (B: p x p full, symmetric; M: upper triangle), every sum in
 * increasing index. */
static void sandwich(const double *B, const double *M, size_t p, double *T, double *V)
{
    size_t i, j, k;
    for (j = 0; j < p; j++) /* T = B M, column j */
        for (i = 0; i < p; i++) {
            double s = 0;
            for (k = 0; k < p; k++) s += B[k * p + i] * (k <= j ? M[j * p + k] : M[k * p + j]);
            T[j * p + i] = s;
        }
    for (j = 0; j < p; j++)
        for (i = 0; i < p; i++) {
            double s = 0;
            for (k = 0; k < p; k++) s += T[k * p + i] * B[j * p + k];
            V[j * p + i] = s;
        }
}

static mr_status robust_alloc(mr_fit *fit, size_t p)
{
    fit->robust_se = mr__calloc(p + 1, sizeof *fit->robust_se);
    fit->robust_cov = mr__calloc(p * p + 1, sizeof *fit->robust_cov);
    fit->nrobust_se = p;
    return fit->robust_se && fit->robust_cov ? MR_OK : MR_ERR_NO_MEMORY;
}

static mr_status robust_labels(mr_fit *fit, const mr__run *r, int type)
{
    fit->robust_type = mr__strdup(type == MR_ROBUST_HC0 ? "HC0" : "HC1");
    if (fit->robust_type == NULL) return MR_ERR_NO_MEMORY;
    if (r->f->cluster != NULL && (fit->cluster = mr__strdup(r->f->cluster)) == NULL) return MR_ERR_NO_MEMORY;
    return MR_OK;
}

/* B: the inverse of the meat pass's X'WX, the aliased columns as the fit's
 * (a column aliased at one point is at the other: the design is the same);
 * with an eliminated factor, the other coefficients' block of it, S^-1
 * (solve/absorb.h). */
static mr_status invert_bread(const mr__run *r, double *beta, int *aliased, double *B, mr__error *err)
{
    size_t rank, p = r->design.p;
    const mr__block_sums *s = &r->meat.bread;
    mr__absorb_sums a = {s->nlev, p, s->lev, s->xtwx, s->xtwz, mr__sums_reference_row(s, p), r->nthreads};
    mr__absorb_solution sol;
    mr_status st;
    if (r->design.nabsorb == 0) return mr__solve_normal(s->xtwx, s->xtwz, p, beta, aliased, &rank, B, err);
    st = mr__absorb_solve(&a, MR__ABSORB_COV_OWN, &sol, err);
    if (st == MR_OK) {
        memcpy(B, sol.cov_rest, p * p * sizeof *B);
        memcpy(aliased, sol.aliased, p * sizeof *aliased);
    }
    mr__absorb_solution_release(&sol);
    return st;
}

/* Clustered by the eliminated factor itself: a level's summed scores of
 * the other columns less g_l times its summed u (the sums of u x and u
 * of its rows: the meat pass's level rows), the reference's as they are;
 * M the sum of their outer products, the levels in order, then the
 * reference. */
static void level_cluster_meat(const mr__run *r, double *g, double *v, size_t *nz, double *M)
{
    size_t p = r->design.p, w = p + 2, l, i;
    const double *wrow = r->meat.bread.lev, *urow = r->meat.sums.lev;
    memset(M, 0, p * p * sizeof *M);
    for (l = 0; l <= r->design.nabsorb; l++, wrow += w, urow += w) {
        if (!(wrow[0] > 0)) continue; /* an empty level: no rows */
        for (i = 0; i < p; i++) {
            g[i] = l < r->design.nabsorb ? wrow[2 + i] / wrow[0] : 0.0;
            v[i] = urow[2 + i] - g[i] * urow[0];
        }
        mr__add_outer(M, p, v, nz);
    }
}

/* By rows: the pass's sum u^2 x x' less, per level, g_l b_l' + b_l g_l'
 * - e_l g_l g_l' (centred_meat below). */
static void row_meat(const mr__run *r, double *g, double *M)
{
    size_t p = r->design.p, w = p + 2, l, i, j;
    const double *wrow = r->meat.bread.lev, *urow = r->meat.sums.lev;
    memcpy(M, r->meat.sums.xtwx, p * p * sizeof *M);
    for (l = 0; l < r->design.nabsorb; l++, wrow += w, urow += w) {
        const double *b = urow + 2;
        double e = urow[0];
        if (!(wrow[0] > 0)) continue; /* an empty level: no rows */
        for (i = 0; i < p; i++) g[i] = wrow[2 + i] / wrow[0];
        for (j = 0; j < p; j++)
            for (i = 0; i <= j; i++) M[j * p + i] -= g[i] * b[j] + b[i] * g[j] - e * g[i] * g[j];
    }
}

/* With an eliminated factor, the other coefficients' rows of B times a
 * row's whole score are S^-1 (x - g_l) u, g_l = c_l / d_l its level's
 * weighted mean of x (solve/absorb.h), so their meat is the sum over rows
 * of u^2 (x - g_l)(x - g_l)': the pass's sum u^2 x x' less, per level,
 * g_l b_l' + b_l g_l' - e_l g_l g_l', with b_l = sum u^2 x and e_l =
 * sum u^2 over its rows (the meat pass's level rows, accum/job_meat.c).
 * The reference level has no column: its rows are not centred.  By the
 * factor's levels as clusters, level_cluster_meat.  *M: that meat (p x p,
 * upper; the caller frees it), or NULL without such a factor (the pass's
 * meat is the meat). */
static mr_status centred_meat(const mr__run *r, double **M, mr__error *err)
{
    size_t p = r->design.p, *nz;
    double *g;
    *M = NULL;
    if (r->design.nabsorb == 0) return MR_OK;
    if (r->meat.bread.lev == NULL || r->meat.sums.lev == NULL)
        return mr__fail(err, MR_ERR_INTERNAL, "the meat pass has no level sums");
    *M = mr__malloc_array(p * p + 1, sizeof **M);
    g = mr__malloc_array(2 * p + 1, sizeof *g);
    nz = mr__malloc_array(p + 1, sizeof *nz);
    if (*M != NULL && g != NULL && nz != NULL) {
        if (r->f->cluster != NULL) level_cluster_meat(r, g, g + p, nz, *M);
        else row_meat(r, g, *M);
    }
    mr__free(g);
    mr__free(nz);
    return *M != NULL && g != NULL && nz != NULL ? MR_OK : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
}

mr_status mr__robust_result(mr_fit *fit, const mr__run *r, mr__error *err)
{
    size_t p = r->design.p, j;
    int type = mr__robust_type(r->f), *aliased;
    double n = (double)r->first.scan.npos, a, *T, *V, *beta, *B, *M = NULL;
    mr_status st;
    if (type == MR_ROBUST_NONE) return MR_OK;
    fit->robust = 1;
    fit->nclusters = r->meat.clusters;
    a = adjustment(type, n, (double)fit->rank, r->f->cluster != NULL, (double)fit->nclusters);
    if (!(a > 0) || !isfinite(a)) {
        /* one cluster, or no residual df: nothing to estimate the spread from */
        a = NAN;
        mr__fit_warn(fit, "robust standard errors cannot be estimated with %s: they are NaN",
                     r->f->cluster && fit->nclusters < 2 ? "a single cluster" : "no residual degrees of freedom");
    }
    fit->robust_adjustment = a;
    T = mr__malloc_array(p * p + 1, sizeof *T);
    V = mr__malloc_array(p * p + 1, sizeof *V);
    beta = mr__malloc_array(p + 1, sizeof *beta);
    B = mr__malloc_array(p * p + 1, sizeof *B);
    aliased = mr__calloc(p + 1, sizeof *aliased);
    st = T && V && beta && B && aliased && robust_alloc(fit, p) == MR_OK && robust_labels(fit, r, type) == MR_OK
             ? MR_OK
             : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) st = invert_bread(r, beta, aliased, B, err);
    if (st == MR_OK) st = centred_meat(r, &M, err);
    if (st == MR_OK) {
        sandwich(B, M != NULL ? M : r->meat.sums.xtwx, p, T, V);
        st = mr__map_to_raw(&r->design, r->beta_final, V, beta, fit->robust_cov, fit->robust_se, err);
    }
    for (j = 0; st == MR_OK && j < p * p; j++) fit->robust_cov[j] *= a;
    /* a variance below the range of a double was computed apart */
    for (j = 0; st == MR_OK && j < p; j++)
        fit->robust_se[j] = fit->robust_se[j] > 0 ? fit->robust_se[j] * sqrt(a) : sqrt(fit->robust_cov[j * p + j]);
    mr__free(T);
    mr__free(V);
    mr__free(beta);
    mr__free(B);
    mr__free(M);
    mr__free(aliased);
    return st;
}

/* ---- accessors ------------------------------------------------------------ */

mr_robust mr_fit_robust(const mr_fit *fit)
{
    if (!fit->robust || fit->robust_type == NULL) return MR_ROBUST_NONE;
    return strcmp(fit->robust_type, "HC0") == 0 ? MR_ROBUST_HC0 : MR_ROBUST_HC1;
}

const char *mr_fit_cluster(const mr_fit *fit) { return fit->robust ? fit->cluster : NULL; }
uint64_t mr_fit_clusters(const mr_fit *fit) { return fit->robust && fit->cluster ? fit->nclusters : 0; }
double mr_fit_robust_adjustment(const mr_fit *fit) { return fit->robust ? fit->robust_adjustment : NAN; }

double mr_fit_robust_std_error(const mr_fit *fit, size_t j)
{
    return fit->robust && j < fit->p && j < fit->nrobust_se ? fit->robust_se[j] : NAN;
}

double mr_fit_robust_covariance(const mr_fit *fit, size_t i, size_t j)
{
    return fit->robust && fit->robust_cov && i < fit->p && j < fit->p ? fit->robust_cov[j * fit->p + i] : NAN;
}

/* ---- the meat pass ------------------------------------------------------ */

/* Over this rank's blocks, then every rank's groups (and by clusters,
 * every rank's blocks of runs) added in order, as one process would. */
static mr_status shared_meat_pass(mr__run *r, mr__pass_cfg *c, mr__meat_cfg *mc, mr__error *err)
{
    mr__partial_range range = mr__share_range(r);
    mr__bytebuf groups, blocks;
    mr_status st;
    memset(&groups, 0, sizeof groups);
    memset(&blocks, 0, sizeof blocks);
    c->range = &range;
    c->groups_out = &groups;
    if (mc->clusters) mc->blocks_out = &blocks;
    mr__pass_result_release(&r->meat, 0);
    st = mr__pass_run(c, &r->meat, err);
    /* this rank's own check first: every rank then learns how it went */
    if (st == MR_OK && c->store == NULL) st = mr__run_check_same_input(r, &r->meat, err);
    if (mc->clusters) st = mr__share_reduce_clusters(r, st, &groups, &blocks, &r->meat, err);
    else st = mr__share_reduce_meat(r, st, &groups, &r->meat, err);
    mr__bytebuf_release(&groups);
    mr__bytebuf_release(&blocks);
    return st == MR_OK ? mr__run_note_pass(r, &r->meat, err) : st;
}

/* One pass at the final coefficients for the sandwich's meat (accum/meat.h):
 * by rows from the kept blocks when there are any, else from the input
 * (collapsed patterns cannot give it: within a pattern the rows' residuals
 * differ); by clusters always from the input, whose blocks carry the
 * cluster column. */
static mr_status meat_pass(mr__run *r, int table, mr__error *err)
{
    mr__irls_point pt;
    mr__meat_cfg mc;
    mr__pass_cfg c = mr__run_pass_config(r, MR__PASS_MEAT);
    mr__family fam = r->family;
    mr_status st;
    /* the family at its final parameter, without the sums of its own
     * (theta's score, a series density) that this pass has no use for */
    fam.estimate = 0;
    fam.dispersion = NAN;
    memset(&pt, 0, sizeof pt);
    pt.design = &r->design;
    pt.family = &fam;
    pt.link = mr__link_ops_of((mr_link)mr__spec_link(&r->f->spec));
    pt.beta = r->beta_final;
    pt.null_skip = 1;
    memset(&mc, 0, sizeof mc);
    /* with an eliminated factor the clusters can only be its levels
     * (mr__robust_check) */
    mc.by_levels = r->f->cluster != NULL && r->design.nabsorb > 0;
    mc.clusters = r->f->cluster != NULL && !mc.by_levels;
    mc.table = table;
    mc.limit = r->f->cluster_memory;
    mc.display = r->display;
    c.point = &pt;
    c.job_arg = &mc;
    c.map = &r->first.map;
    if (!mc.clusters && r->use_store && r->store_filled) {
        c.store = &r->store;
        c.store_fill = 0;
    }
    if (mr__shared(r)) return shared_meat_pass(r, &c, &mc, err);
    mr__pass_result_release(&r->meat, 0);
    st = mr__pass_run(&c, &r->meat, err);
    if (st != MR_OK) return st;
    if (c.store == NULL) MR__TRY(mr__run_check_same_input(r, &r->meat, err));
    return mr__run_note_pass(r, &r->meat, err);
}

/* Streamed first: a file grouped by the cluster column needs one set of
 * the clusters seen; when a cluster comes back, the pass runs again with
 * every cluster's sums in a table (not when shared: fit/share.c says to
 * group the file instead). */
mr_status mr__robust_pass(mr__run *r, mr__error *err)
{
    mr_status st;
    if (r->have_resume && r->resume_stage >= 2) return mr__checkpoint_done_take(r, 2, err);
    st = meat_pass(r, 0, err);
    if (st != MR_OK && r->meat.clusters_not_grouped) {
        mr__error_clear(err);
        r->clusters_table = 1;
        st = meat_pass(r, 1, err);
    }
    return st == MR_OK ? mr__checkpoint_write_robust(r, err) : st;
}
