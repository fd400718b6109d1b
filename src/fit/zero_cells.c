/* zero_cells.c - factor levels and cells of two or three interacting factors whose
 * outcomes leave no room for a finite estimate: every count 0 (poisson,
 * negative binomial, Tweedie, binomial), or every trial a success
 * (binomial).  Their fitted mean goes to the edge of the family's range
 * and a coefficient to infinity; IRLS stops somewhere on the way (a logit
 * of about -24 with a standard error in the thousands), which looks like a
 * number.  The first pass counted, per level and cell, rows, outcomes
 * above 0 and below the maximum (accum/level_outcomes.h), in each worker's
 * own level numbers: here they are mapped to the shared numbers and added
 * (integers: the same totals for any thread count). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/irls.h"
#include "fit/run.h"

/* What an outcome count says about a level or cell: 0 nothing, else the
 * reason its coefficient runs off. */
enum { FINE = 0, ALL_ZERO = 1, ALL_MAX = 2 };

typedef struct zero_report {
    mr_fit *fit;
    int binomial;
    mr__strbuf list[3]; /* by kind: the levels and cells named */
    size_t count[3];
} zero_report;

static int kind_of(const mr__outcome_counts *c, int binomial)
{
    if (c->rows == 0) return FINE;
    if (c->above_zero == 0) return ALL_ZERO;
    if (binomial && c->below_max == 0) return ALL_MAX;
    return FINE;
}

static void flag_name(mr_fit *fit, const char *name)
{
    size_t j;
    for (j = 0; j < fit->p; j++)
        if (!fit->aliased[j] && strcmp(fit->name[j], name) == 0) fit->inestimable[j] = 1;
}

/* Every coefficient of factor f's main effect (its reference level is the
 * empty one: they all run off together), and the intercept. */
static void flag_factor(mr_fit *fit, const char *factor)
{
    size_t j, n = strlen(factor);
    for (j = 0; j < fit->p; j++)
        if (!fit->aliased[j] && strncmp(fit->name[j], factor, n) == 0 && fit->name[j][n] == '=' &&
            strstr(fit->name[j], " & ") == NULL)
            fit->inestimable[j] = 1;
    flag_name(fit, MR__INTERCEPT_NAME);
}

static void note(zero_report *z, int kind, const char *what, uint64_t rows)
{
    if (z->count[kind]++ < 8) mr__strbuf_printf(&z->list[kind], "%s%s (%llu rows)", z->count[kind] > 1 ? ", " : "",
                                                 what, (unsigned long long)rows);
}

/* Worker w's level numbers of factor f mapped to the shared ones (-1:
 * none); NULL on no memory.  The run's remap when made (a many factor's
 * workers' sets are gone by then, cache.c). */
static int32_t *local_map(const mr__run *r, size_t w, size_t f)
{
    const int32_t *made = r->remap != NULL ? r->remap[w * r->bind.nfac + f] : NULL;
    size_t n = r->first.worker_levels[w][f].n;
    int32_t *map;
    if (made == NULL) return mr__level_map(r, w, f);
    if ((map = mr__malloc_array(n + 1, sizeof *map)) != NULL) memcpy(map, made, (n + 1) * sizeof *map);
    return map;
}

/* Factor f's totals over the workers, by shared level number. */
static mr__outcome_counts *level_totals(const mr__run *r, size_t f)
{
    mr__outcome_counts *t = mr__calloc(r->levels[f].n + 1, sizeof *t);
    size_t w, l;
    for (w = 0; t && w < r->first.nworkers; w++) {
        const mr__level_outcomes *lo = r->first.worker_outcomes[w];
        int32_t *map = local_map(r, w, f);
        size_t n = r->first.worker_levels[w][f].n;
        if (map == NULL) {
            mr__free(t);
            return NULL;
        }
        for (l = 0; l < n && l < lo->nlevel[f]; l++) {
            if (map[l] < 0) continue;
            t[map[l]].rows += lo->level[f][l].rows;
            t[map[l]].above_zero += lo->level[f][l].above_zero;
            t[map[l]].below_max += lo->level[f][l].below_max;
        }
        mr__free(map);
    }
    return t;
}

static void check_factor(zero_report *z, const mr__run *r, size_t f, int *bad_level)
{
    const mr__factor *fac = &r->fac[f];
    mr__outcome_counts *t = level_totals(r, f);
    size_t l;
    char what[512];
    if (t == NULL) return;
    for (l = 0; l < fac->nlevels; l++) {
        int kind = kind_of(&t[l], z->binomial);
        if (kind == FINE) continue;
        bad_level[l] = 1;
        snprintf(what, sizeof what, "%s=%s%s", fac->name, fac->level[l], (int32_t)l == fac->ref ? " (the reference)" : "");
        note(z, kind, what, t[l].rows);
        snprintf(what, sizeof what, "%s=%s", fac->name, fac->level[l]);
        if ((int32_t)l == fac->ref) flag_factor(z->fit, fac->name);
        else flag_name(z->fit, what);
    }
    mr__free(t);
}

static int add_worker_cells(const mr__run *r, size_t w, size_t k, mr__cell_table *t)
{
    const mr__cell_table *c = &r->first.worker_outcomes[w]->cells[k];
    size_t i, fa = (size_t)r->pairs[k][0], fb = (size_t)r->pairs[k][1];
    int32_t *ma = local_map(r, w, fa), *mb = local_map(r, w, fb);
    int rc = ma && mb ? 0 : -1;
    for (i = 0; rc == 0 && i < c->cap; i++) {
        uint32_t a, b;
        if (!mr__cell_table_slot(c, i, &a, &b)) continue;
        if (a >= r->first.worker_levels[w][fa].n || b >= r->first.worker_levels[w][fb].n || ma[a] < 0 || mb[b] < 0)
            continue;
        rc = mr__cell_table_add(t, (uint32_t)ma[a], (uint32_t)mb[b], &c->slot[i].c);
    }
    mr__free(ma);
    mr__free(mb);
    return rc;
}

/* Pair k's cells over the workers, by shared level numbers, into t. */
static int cell_totals(const mr__run *r, size_t k, mr__cell_table *t)
{
    size_t w;
    for (w = 0; w < r->first.nworkers; w++)
        if (add_worker_cells(r, w, k, t) != 0) return -1;
    return 0;
}

/* Whether one part of a coefficient's name ("F=level") is factor F[q] at
 * a level it may have: the cell's own where the cell's level is not the
 * reference, any where it is; seen notes which factor it was. */
static int part_fits(const char *part, size_t len, const mr__factor *const *F, const uint32_t *lev, size_t n,
                     unsigned *seen)
{
    size_t q, m;
    for (q = 0; q < n; q++) {
        m = strlen(F[q]->name);
        if (len <= m || strncmp(part, F[q]->name, m) != 0 || part[m] != '=') continue;
        if ((int32_t)lev[q] != F[q]->ref &&
            (len - m - 1 != strlen(F[q]->level[lev[q]]) || strncmp(part + m + 1, F[q]->level[lev[q]], len - m - 1) != 0))
            return 0;
        *seen |= 1u << q;
        return 1;
    }
    return 0;
}

/* Whether coefficient `name` runs off with the cell: all its parts are
 * the cell's factors, each at the cell's level where that is not the
 * reference (that coefficient alone reaches the cell) or at any level
 * where it is (those cells keep their outcomes: their own coefficient
 * runs the other way to make up for it), and every factor whose level is
 * not the reference is among them.  With every level the reference, the
 * intercept too. */
static int runs_off_with(const char *name, const mr__factor *const *F, const uint32_t *lev, size_t n)
{
    unsigned seen = 0, need = 0;
    size_t q;
    for (q = 0; q < n; q++)
        if ((int32_t)lev[q] != F[q]->ref) need |= 1u << q;
    if (strcmp(name, MR__INTERCEPT_NAME) == 0) return need == 0;
    for (;;) {
        const char *amp = strstr(name, " & ");
        size_t len = amp ? (size_t)(amp - name) : strlen(name);
        if (!part_fits(name, len, F, lev, n, &seen)) return 0;
        if (amp == NULL) break;
        name = amp + 3;
    }
    return (seen & need) == need;
}

/* The coefficients a cell's empty outcomes send off (runs_off_with). */
static void flag_cell(mr_fit *fit, const mr__factor *const *F, const uint32_t *lev, size_t n)
{
    size_t j;
    for (j = 0; j < fit->p; j++)
        if (!fit->aliased[j] && runs_off_with(fit->name[j], F, lev, n)) fit->inestimable[j] = 1;
}

/* Cells in level order (the first factor's slowest), so the warning reads
 * the same whatever order the workers' tables were added in. */
static void check_pair(zero_report *z, const mr__run *r, size_t k, int *const *bad_level)
{
    size_t fa = (size_t)r->pairs[k][0], fb = (size_t)r->pairs[k][1];
    const mr__factor *A = &r->fac[fa], *B = &r->fac[fb];
    mr__cell_table t = {NULL, 0, 0};
    char what[512];
    uint32_t a, b;
    if (cell_totals(r, k, &t) == 0 && t.n > 0)
        for (a = 0; a < A->nlevels; a++)
            for (b = 0; b < B->nlevels; b++) {
                const mr__outcome_counts *c = mr__cell_table_find(&t, a, b);
                int kind = c ? kind_of(c, z->binomial) : FINE;
                /* a level empty on its own was named already */
                if (kind == FINE || bad_level[fa][a] || bad_level[fb][b]) continue;
                snprintf(what, sizeof what, "%s=%s & %s=%s", A->name, A->level[a], B->name, B->level[b]);
                note(z, kind, what, c->rows);
                flag_cell(z->fit, (const mr__factor *const[]){A, B}, (const uint32_t[]){a, b}, 2);
            }
    mr__free(t.slot);
}

/* ---- cells of three factors ---------------------------------------------- */

static int add_worker_triples(const mr__run *r, size_t w, size_t k, mr__cell_table *t)
{
    const mr__cell_table *c = &r->first.worker_outcomes[w]->cells[r->dcfg.npairs + k];
    int32_t *m[3];
    size_t i, q, f[3];
    int rc = 0;
    for (q = 0; q < 3; q++) {
        f[q] = (size_t)r->triples[k][q];
        if ((m[q] = local_map(r, w, f[q])) == NULL) rc = -1;
    }
    for (i = 0; rc == 0 && i < c->cap; i++) {
        uint32_t lev[3];
        int ok = mr__cell_table_slot3(c, i, lev);
        for (q = 0; ok && q < 3; q++) ok = lev[q] < r->first.worker_levels[w][f[q]].n && m[q][lev[q]] >= 0;
        if (ok)
            rc = mr__cell_table_add_key(t, mr__cell_key3((uint32_t)m[0][lev[0]], (uint32_t)m[1][lev[1]], (uint32_t)m[2][lev[2]]),
                                        &c->slot[i].c);
    }
    for (q = 0; q < 3; q++) mr__free(m[q]);
    return rc;
}

/* Whether factors x and y (binding numbers) interact as a pair in the
 * model: check_pair named that pair's empty cells already. */
static int model_pair(const mr__run *r, int32_t x, int32_t y)
{
    size_t k;
    for (k = 0; k < r->dcfg.npairs; k++)
        if ((r->pairs[k][0] == x && r->pairs[k][1] == y) || (r->pairs[k][0] == y && r->pairs[k][1] == x)) return 1;
    return 0;
}

/* The cells of each pair of the triple's factors, added up over the third
 * (pair q leaves factor q out). */
static int pair_margins(const mr__cell_table *t, mr__cell_table margin[3])
{
    size_t i, q;
    for (i = 0; i < t->cap; i++) {
        uint32_t lev[3];
        if (!mr__cell_table_slot3(t, i, lev)) continue;
        for (q = 0; q < 3; q++)
            if (mr__cell_table_add(&margin[q], lev[q == 0 ? 1 : 0], lev[q == 2 ? 1 : 2], &t->slot[i].c) != 0) return -1;
    }
    return 0;
}

/* A cell named already: one of its levels alone, or its cell of a pair of
 * the factors that the model has as a pair. */
static int named_before(const zero_report *z, const mr__run *r, size_t k, const uint32_t lev[3],
                        const mr__cell_table margin[3], int *const *bad_level)
{
    size_t q;
    for (q = 0; q < 3; q++)
        if (bad_level[r->triples[k][q]][lev[q]]) return 1;
    for (q = 0; q < 3; q++) {
        size_t x = q == 0 ? 1 : 0, y = q == 2 ? 1 : 2;
        const mr__outcome_counts *c = mr__cell_table_find(&margin[q], lev[x], lev[y]);
        if (c && kind_of(c, z->binomial) != FINE && model_pair(r, r->triples[k][x], r->triples[k][y])) return 1;
    }
    return 0;
}

static int compare_keys(const void *x, const void *y)
{
    uint64_t a = *(const uint64_t *)x, b = *(const uint64_t *)y;
    return a < b ? -1 : a > b;
}

/* The triple's cells whose outcomes leave no finite estimate, by key:
 * in level order (the first factor's slowest) once sorted. */
static uint64_t *bad_cells(const zero_report *z, const mr__cell_table *t, size_t *n)
{
    uint64_t *key = mr__malloc_array(t->n + 1, sizeof *key);
    size_t i;
    *n = 0;
    for (i = 0; key && i < t->cap; i++)
        if (t->slot[i].key != 0 && kind_of(&t->slot[i].c, z->binomial) != FINE) key[(*n)++] = t->slot[i].key;
    if (key) qsort(key, *n, sizeof *key, compare_keys);
    return key;
}

static void name_triples(zero_report *z, const mr__run *r, size_t k, const mr__cell_table *t,
                         const mr__cell_table margin[3], int *const *bad_level)
{
    const mr__factor *F[3] = {&r->fac[r->triples[k][0]], &r->fac[r->triples[k][1]], &r->fac[r->triples[k][2]]};
    size_t n, i;
    uint64_t *key = bad_cells(z, t, &n);
    char what[1536];
    for (i = 0; key && i < n; i++) {
        const mr__outcome_counts *c = mr__cell_table_find_key(t, key[i]);
        uint32_t lev[3];
        mr__cell_key3_levels(key[i], lev);
        /* the shared numbers are the settled factors' (as check_pair's loops) */
        if (lev[0] >= F[0]->nlevels || lev[1] >= F[1]->nlevels || lev[2] >= F[2]->nlevels ||
            named_before(z, r, k, lev, margin, bad_level))
            continue;
        snprintf(what, sizeof what, "%s=%s & %s=%s & %s=%s", F[0]->name, F[0]->level[lev[0]], F[1]->name,
                 F[1]->level[lev[1]], F[2]->name, F[2]->level[lev[2]]);
        note(z, kind_of(c, z->binomial), what, c->rows);
        flag_cell(z->fit, F, lev, 3);
    }
    mr__free(key);
}

static void check_triple(zero_report *z, const mr__run *r, size_t k, int *const *bad_level)
{
    mr__cell_table t = {NULL, 0, 0}, margin[3];
    size_t w, q;
    int rc = 0;
    memset(margin, 0, sizeof margin);
    for (w = 0; rc == 0 && w < r->first.nworkers; w++) rc = add_worker_triples(r, w, k, &t);
    if (rc == 0 && t.n > 0 && pair_margins(&t, margin) == 0) name_triples(z, r, k, &t, margin, bad_level);
    mr__free(t.slot);
    for (q = 0; q < 3; q++) mr__free(margin[q].slot);
}

static void warn(zero_report *z, int kind)
{
    size_t n = z->count[kind];
    if (n == 0) return;
    mr__fit_warn(z->fit,
                 "%s in %zu factor level%s or cell%s: %s%s; there the fitted mean is at the edge of the range, the "
                 "coefficients marked not estimable run off to infinity and their estimates and standard errors "
                 "mean nothing. Merge such a level with a neighbouring one, or drop its rows (the stratum), and refit",
                 kind == ALL_ZERO ? "every outcome 0" : "every trial a success (outcome at its maximum)", n,
                 n == 1 ? "" : "s", n == 1 ? "" : "s", z->list[kind].data ? z->list[kind].data : "",
                 n > 8 ? " and others" : "");
}

/* Coefficients whose standard error grew at each of the last passes,
 * fitted means at the edge of the range: on their way to infinity. */
static void flag_growing(mr_fit *fit, const mr__run *r)
{
    mr__strbuf sb;
    size_t j, n = 0;
    mr__strbuf_init(&sb);
    for (j = 0; j < fit->p; j++) {
        if (!r->growing[j] || fit->aliased[j]) continue;
        fit->inestimable[j] = 1;
        if (n++ < 8) mr__strbuf_printf(&sb, "%s'%s'", n > 1 ? ", " : "", fit->name[j]);
    }
    /* the eliminated factor's levels follow the coefficients in the
     * IRLS numbering; they are named here (they have no mark) */
    for (j = 0; j < fit->nmany; j++) {
        if (!r->growing[fit->p + j] || isnan(fit->many_se[j])) continue;
        if (n++ < 8)
            mr__strbuf_printf(&sb, "%s'%s=%s'", n > 1 ? ", " : "", fit->many_factor, fit->many_level[j]);
    }
    if (n)
        mr__fit_warn(fit,
                     "the standard error of %zu coefficient%s grew pass after pass (at each of the last %d, or %g-fold): "
                     "%s%s; %s running off to infinity (separation, or quasi-separation by a "
                     "covariate) and marked not estimable. Regroup or drop the covariate or level that separates the "
                     "outcomes, or fit the rows where it does not",
                     n, n == 1 ? "" : "s", MR__IRLS_GROWTH_PASSES, MR__IRLS_GROWTH_FACTOR, sb.data ? sb.data : "", n > 8 ? " and others" : "",
                     n == 1 ? "it is" : "they are");
    mr__strbuf_release(&sb);
}

void mr__flag_zero_cells(mr_fit *fit, const mr__run *r)
{
    zero_report z;
    int **bad_level;
    size_t f, k, w, nfac = r->bind.nfac;
    int family = r->f->spec.family;
    flag_growing(fit, r);
    if (family != MR_BINOMIAL && family != MR_POISSON && family != MR_NEGATIVE_BINOMIAL && family != MR_TWEEDIE)
        return;
    if (r->first.worker_outcomes == NULL) return;
    for (w = 0; w < r->first.nworkers; w++)
        if (r->first.worker_outcomes[w] == NULL || r->first.worker_outcomes[w]->failed) return;
    memset(&z, 0, sizeof z);
    z.fit = fit;
    z.binomial = family == MR_BINOMIAL;
    for (k = 0; k < 3; k++) mr__strbuf_init(&z.list[k]);
    bad_level = mr__calloc(nfac + 1, sizeof *bad_level);
    for (f = 0; bad_level && f < nfac; f++) {
        if ((bad_level[f] = mr__calloc(r->fac[f].nlevels + 1, sizeof **bad_level)) == NULL) break;
        check_factor(&z, r, f, bad_level[f]);
    }
    for (k = 0; bad_level && f == nfac && k < r->dcfg.npairs; k++) check_pair(&z, r, k, bad_level);
    for (k = 0; bad_level && f == nfac && k < r->dcfg.ntriples; k++) check_triple(&z, r, k, bad_level);
    warn(&z, ALL_ZERO);
    warn(&z, ALL_MAX);
    for (f = 0; bad_level && f < nfac; f++) mr__free(bad_level[f]);
    mr__free(bad_level);
    for (k = 0; k < 3; k++) mr__strbuf_release(&z.list[k]);
}
