#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "model/design.h"

static size_t factor_columns(const mr__term *t, const mr__factor *f)
{
    return t->full ? f->nlevels : f->nlevels - 1;
}

static int covariate_var(const mr__binding *b, const char *name, int *is_factor)
{
    size_t c;
    for (c = 0; c < b->ncol; c++) {
        if (strcmp(b->col[c].name, name) != 0) continue;
        if (b->col[c].use == MR__USE_FACTOR) {
            *is_factor = 1;
            return b->col[c].var;
        }
        if (b->col[c].use == MR__USE_NUMERIC) {
            *is_factor = 0;
            return b->col[c].var;
        }
    }
    return -1;
}

static void add_part(mr__term *t, int var, int is_factor)
{
    if (is_factor) t->fac[t->nfac++] = var;
    else t->num[t->nnum++] = var;
}

/* The spline part of a group's parts, or -1 (at most one: spec.c). */
static int spline_part(const mr__design *d, const int *var, const int *isf, int nparts)
{
    int k;
    for (k = 0; k < nparts; k++)
        if (!isf[k] && var[k] >= 0 && d->spline[var[k]] != NULL) return k;
    return -1;
}

static size_t group_terms(const mr__design *d, const int *var, const int *isf, int nparts)
{
    int k = spline_part(d, var, isf, nparts);
    return k < 0 ? 1 : d->spline[var[k]]->ncols;
}

/* A group's terms: one, or one per column of its spline. */
static void add_group(mr__design *d, const int *var, const int *isf, int nparts, size_t group)
{
    int sk = spline_part(d, var, isf, nparts), k;
    size_t j, n = group_terms(d, var, isf, nparts);
    for (j = 0; j < n; j++) {
        mr__term *t = &d->term[d->nterms++];
        t->group = group;
        for (k = 0; k < nparts; k++) {
            if (k == sk) {
                t->spline[t->nnum] = d->spline[var[k]];
                t->spline_col[t->nnum] = j;
            }
            add_part(t, var[k], isf[k]);
        }
    }
}

/* The parts of group g: covariate g, or interaction g - ncov. */
static int group_parts(const mr__spec *s, const mr__binding *b, size_t g, int *var, int *isf)
{
    int k, n = g < s->ncov ? 1 : s->inter[g - s->ncov].n;
    for (k = 0; k < n; k++)
        var[k] = covariate_var(b, g < s->ncov ? s->cov[g].name : s->inter[g - s->ncov].name[k], &isf[k]);
    return n;
}

/* Terms in column order: each covariate, then each interaction. */
static mr_status collect_terms(mr__design *d, const mr__spec *s, const mr__binding *b, mr__error *err)
{
    size_t g, i, total = 0, ngroups = s->ncov + s->ninter;
    int var[MR__MAX_INTERACT], isf[MR__MAX_INTERACT] = {0}, n;
    for (g = 0; g < ngroups; g++) {
        if ((long)g == d->absorb_group) continue;
        n = group_parts(s, b, g, var, isf);
        total += group_terms(d, var, isf, n);
    }
    d->term = mr__calloc(total + 1, sizeof *d->term);
    if (d->term == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (g = 0; g < ngroups; g++) {
        if ((long)g == d->absorb_group) continue;
        n = group_parts(s, b, g, var, isf);
        add_group(d, var, isf, n, g);
    }
    /* Without an intercept the first factor takes every level, so the
     * model can still express a level-specific baseline. */
    if (!d->intercept)
        for (i = 0; i < d->nterms; i++)
            if (d->term[i].nfac == 1 && d->term[i].nnum == 0) {
                d->term[i].full = 1;
                break;
            }
    return MR_OK;
}

/* Each spline column's basis, its knots from the first pass's counts. */
static mr_status settle_splines(mr__design *d, const mr__spec *s, const mr__binding *b, mr__value_counts *counts,
                                mr__error *err)
{
    size_t i;
    int isf, v;
    d->spline = mr__calloc(b->nnum + 1, sizeof *d->spline);
    if (d->spline == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < s->ncov; i++) {
        if (s->cov[i].role != MR__ROLE_SPLINE) continue;
        v = covariate_var(b, s->cov[i].name, &isf);
        if ((d->spline[v] = mr__malloc(sizeof *d->spline[v])) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        MR__TRY(mr__spline_settle(d->spline[v], s->cov[i].name, &s->cov[i].spline, counts ? &counts[v] : NULL, err));
    }
    return MR_OK;
}

static mr_status lay_out_columns(mr__design *d, mr__error *err)
{
    size_t i, p = d->intercept ? 1 : 0;
    int k;
    for (i = 0; i < d->nterms; i++) {
        mr__term *t = &d->term[i];
        size_t n = 1;
        for (k = t->nfac - 1; k >= 0; k--) {
            t->stride[k] = n;
            n *= factor_columns(t, &d->fac[t->fac[k]]);
        }
        t->col0 = p;
        t->ncols = n;
        p += n;
        if (p > MR__MAX_COLUMNS)
            return mr__fail(err, MR_ERR_USAGE,
                            "model: the design has more than %d columns (a factor with very many levels?)",
                            MR__MAX_COLUMNS);
    }
    d->p = p;
    return MR_OK;
}

/* Is there an earlier term with the same factors (same coding) and
 * exactly the numerics in `mask` (bits over t's numerics)? */
static const mr__term *find_subterm(const mr__design *d, size_t ti, unsigned mask)
{
    const mr__term *t = &d->term[ti];
    size_t u;
    int k, m;
    for (u = 0; u < ti; u++) {
        const mr__term *c = &d->term[u];
        int nn = 0, ok = c->nfac == t->nfac && !c->full && !t->full;
        for (k = 0; ok && k < t->nfac; k++) {
            int found = 0;
            for (m = 0; m < c->nfac; m++) found |= c->fac[m] == t->fac[k];
            ok = found;
        }
        for (k = 0; ok && k < t->nnum; k++) {
            int in = 0;
            for (m = 0; m < c->nnum; m++) in |= c->num[m] == t->num[k] && c->spline_col[m] == t->spline_col[k];
            if ((mask >> k & 1u) != (unsigned)in) ok = 0;
            nn += in;
        }
        if (ok && nn == c->nnum) return c;
    }
    return NULL;
}

/* The column of term c holding the same factor levels as column j of t. */
static size_t matching_column(const mr__design *d, const mr__term *t, size_t j, const mr__term *c)
{
    int32_t code[MR__MAX_INTERACT];
    size_t col = c->col0;
    int k, m;
    mr__design_column_levels(d, t, j, code);
    for (m = 0; m < c->nfac; m++)
        for (k = 0; k < t->nfac; k++)
            if (c->fac[m] == t->fac[k]) col += (size_t)code[k] * c->stride[m];
    return col;
}

/* Subsets S of the numerics that the expansion of prod (x_k - c_k) needs:
 * those that keep every numeric with no centre. */
static int needs_subset(const mr__term *t, unsigned mask)
{
    int k;
    for (k = 0; k < t->nnum; k++)
        if (t->centre[k] == 0.0 && !(mask >> k & 1u)) return 0;
    return 1;
}

static int subterm_exists(const mr__design *d, size_t ti, unsigned mask)
{
    const mr__term *t = &d->term[ti];
    if (mask == 0 && t->nfac == 0) return d->intercept;
    return find_subterm(d, ti, mask) != NULL;
}

static void choose_centring(mr__design *d, size_t ti, const double *mean, const double *spread)
{
    mr__term *t = &d->term[ti];
    unsigned full = (1u << t->nnum) - 1, mask;
    int k, ok = 1;
    for (k = 0; k < t->nnum; k++) {
        double m = mean[t->num[k]], s = spread[t->num[k]];
        int usable = isfinite(s) && s > 0 && isfinite(m) && t->spline[k] == NULL;
        t->scale[k] = usable ? s : 1.0;
        t->centre[k] = usable ? m : 0.0;
    }
    for (mask = 0; mask < full && ok; mask++)
        if (needs_subset(t, mask)) ok = subterm_exists(d, ti, mask);
    t->centred = ok && t->nnum > 0;
    for (k = 0; k < t->nnum; k++) {
        if (!t->centred) t->centre[k] = 0.0;
        t->inv_scale[k] = 1.0 / t->scale[k];
    }
}

static void fill_transform_column(mr__design *d, size_t ti, size_t j)
{
    const mr__term *t = &d->term[ti];
    unsigned full = (1u << t->nnum) - 1, mask;
    double inv_scale = 1.0;
    int k;
    for (k = 0; k < t->nnum; k++) inv_scale /= t->scale[k];
    for (mask = 0; mask <= full; mask++) {
        double coef = inv_scale;
        size_t raw;
        if (!needs_subset(t, mask)) continue;
        for (k = 0; k < t->nnum; k++)
            if (!(mask >> k & 1u)) coef *= -t->centre[k];
        if (mask == full) raw = j;
        else if (mask == 0 && t->nfac == 0) raw = 0;
        else raw = matching_column(d, t, j, find_subterm(d, ti, mask));
        d->A[j * d->p + raw] += coef;
    }
}

static mr_status build_transform(mr__design *d, const double *mean, const double *spread, mr__error *err)
{
    size_t i, j;
    d->A = mr__calloc(d->p * d->p, sizeof *d->A);
    if (d->A == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (d->intercept) d->A[0] = 1.0;
    for (i = 0; i < d->nterms; i++) {
        choose_centring(d, i, mean, spread);
        for (j = d->term[i].col0; j < d->term[i].col0 + d->term[i].ncols; j++) {
            if (d->term[i].centred) {
                fill_transform_column(d, i, j);
            } else {
                double inv = 1.0;
                int k;
                for (k = 0; k < d->term[i].nnum; k++) inv /= d->term[i].scale[k];
                d->A[j * d->p + j] = inv;
            }
        }
    }
    return MR_OK;
}

/* A one-factor term's column for every level, so that coding a row is a
 * single lookup. */
static mr_status build_colmaps(mr__design *d, mr__error *err)
{
    size_t i;
    int32_t l;
    for (i = 0; i < d->nterms; i++) {
        mr__term *t = &d->term[i];
        const mr__factor *f;
        if (t->nfac != 1) continue;
        f = &d->fac[t->fac[0]];
        t->colmap = mr__malloc_array(f->nlevels + 1, sizeof *t->colmap);
        if (t->colmap == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (l = 0; l < (int32_t)f->nlevels; l++) {
            int32_t code = mr__design_level_code(t, f, l);
            t->colmap[l] = code < 0 ? -1 : (int32_t)t->col0 + code;
        }
    }
    return MR_OK;
}

static int one_column_factor(const mr__term *t) { return t->colmap != NULL && t->ncols == 1; }

static mr_status split_layout(mr__design *d, mr__error *err)
{
    size_t i, room = MR__MAX_DENSE - (d->intercept != 0);
    MR__TRY(build_colmaps(d, err));
    d->dense_col = mr__calloc(d->p + 1, sizeof *d->dense_col);
    d->sparse_term = mr__calloc(d->nterms + 1, sizeof *d->sparse_term);
    if (d->dense_col == NULL || d->sparse_term == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < d->nterms; i++) {
        if (d->term[i].nfac != 0) continue;
        if (room == 0)
            return mr__fail(err, MR_ERR_USAGE, "model: more than %d columns without a factor (numerics and their "
                                               "interactions)", MR__MAX_DENSE);
        room--;
    }
    /* one-column factor terms take what room is left, in model order */
    if (d->intercept) d->dense_col[d->ndense++] = 0;
    for (i = 0; i < d->nterms; i++) {
        mr__term *t = &d->term[i];
        t->dense = t->nfac == 0 || (one_column_factor(t) && room > 0);
        if (t->dense && t->nfac != 0) room--;
        if (t->dense) d->dense_col[d->ndense++] = t->col0;
        else d->sparse_term[d->nsparse++] = i;
    }
    return MR_OK;
}

static void add_run(mr__design *d, size_t at, size_t len)
{
    if (d->nruns > 0 && d->run_at[d->nruns - 1] + d->run_len[d->nruns - 1] == at) {
        d->run_len[d->nruns - 1] += len;
    } else {
        d->run_at[d->nruns] = at;
        d->run_off[d->nruns] = d->nnz;
        d->run_len[d->nruns++] = len;
    }
    d->nnz += len;
}

/* Column b's rows a <= b, less the other columns of b's own sparse term,
 * which come just before it: rows [0, col0 of the term), then b. */
static mr_status build_skeleton(mr__design *d, mr__error *err)
{
    const size_t p = d->p;
    size_t b, s;
    d->col_base = mr__calloc(p + 1, sizeof *d->col_base);
    d->col_lo = mr__calloc(p + 1, sizeof *d->col_lo);
    d->run_at = mr__calloc(2 * p + 1, sizeof *d->run_at);
    d->run_len = mr__calloc(2 * p + 1, sizeof *d->run_len);
    d->run_off = mr__calloc(2 * p + 1, sizeof *d->run_off);
    if (!d->col_base || !d->col_lo || !d->run_at || !d->run_len || !d->run_off)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (b = 0; b < p; b++) d->col_lo[b] = b + 1;
    for (s = 0; s < d->nsparse; s++) {
        const mr__term *t = &d->term[d->sparse_term[s]];
        for (b = t->col0; b < t->col0 + t->ncols; b++) d->col_lo[b] = t->col0;
    }
    for (b = 0; b < p; b++) {
        d->col_base[b] = d->nnz;
        if (d->col_lo[b] > 0) add_run(d, b * p, d->col_lo[b]);
        if (d->col_lo[b] <= b) add_run(d, b * p + b, 1);
    }
    return MR_OK;
}

/* The `many` factor's levels other than the reference, numbered in level
 * order. */
static mr_status settle_absorbed(mr__design *d, const mr__spec *s, const mr__binding *b, mr__error *err)
{
    const mr__factor *f;
    int32_t l, k = 0;
    int isf = 0;
    d->absorb_var = -1;
    d->absorb_group = mr__spec_many(s);
    if (d->absorb_group < 0) return MR_OK;
    d->absorb_var = covariate_var(b, s->cov[d->absorb_group].name, &isf);
    f = &d->fac[d->absorb_var];
    d->absorb_index = mr__malloc_array(f->nlevels + 1, sizeof *d->absorb_index);
    if (d->absorb_index == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (l = 0; l < (int32_t)f->nlevels; l++) d->absorb_index[l] = l == f->ref ? -1 : k++;
    d->nabsorb = (size_t)k;
    return MR_OK;
}

mr_status mr__design_build(mr__design *d, const mr__spec *s, const mr__binding *b, const mr__factor *fac,
                           const double *mean, const double *spread, mr__value_counts *counts,
                           mr__error *err)
{
    memset(d, 0, sizeof *d);
    d->intercept = s->intercept;
    d->fac = fac;
    d->nfac = b->nfac;
    d->nnum = b->nnum;
    MR__TRY(settle_absorbed(d, s, b, err));
    MR__TRY(settle_splines(d, s, b, counts, err));
    MR__TRY(collect_terms(d, s, b, err));
    MR__TRY(lay_out_columns(d, err));
    MR__TRY(mr__design_name_columns(d, s, b, err));
    MR__TRY(split_layout(d, err));
    MR__TRY(build_skeleton(d, err));
    return build_transform(d, mean, spread, err);
}

void mr__design_release(mr__design *d)
{
    size_t j;
    for (j = 0; d->name && j < d->p; j++) mr__free(d->name[j]);
    mr__free(d->name);
    for (j = 0; d->term && j < d->nterms; j++) mr__free(d->term[j].colmap);
    for (j = 0; d->spline && j < d->nnum; j++) mr__free(d->spline[j]);
    mr__free(d->spline);
    mr__free(d->term);
    mr__free(d->A);
    mr__free(d->dense_col);
    mr__free(d->sparse_term);
    mr__free(d->col_base);
    mr__free(d->col_lo);
    mr__free(d->run_at);
    mr__free(d->run_len);
    mr__free(d->run_off);
    mr__free(d->absorb_index);
    memset(d, 0, sizeof *d);
    d->absorb_var = -1;
    d->absorb_group = -1;
}
