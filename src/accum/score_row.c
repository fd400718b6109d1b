/* score_row.c - one row of a scored file: its cells read (a missing or
 * unseen one leaves the row empty, a malformed one fails the pass), its
 * design row, linear predictor and interval, the CSV line, and the row's
 * outcome for the groups' observed and expected. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "accum/score_row.h"
#include "common/alloc.h"
#include "common/dtoa.h"
#include "family/family.h"
#include "input/fields.h"
#include "input/numparse.h"

typedef struct score_row {
    double off, y, prior, expo;
    int has_y;
} score_row;

/* A cell the fit would have read as missing: one of its tokens. */
static int is_missing(const mr__score_cfg *c, const char *p, size_t n)
{
    return mr__cell_is_token(c->missing_token, c->nmissing_tokens, p, n);
}

static const char *cell(const score_worker *sw, size_t field, size_t *n) { return mr__row_cell(&sw->cells, field, n); }

static uint64_t row_line(const score_worker *sw, uint32_t r) { return sw->chunk->first_line + sw->chunk->row_line[r]; }

/* The row's first problem, as the fit names a cell's: file:line:field. */
static void cell_error(score_worker *sw, uint32_t r, mr_status st, const char *name, size_t field, const char *what)
{
    char msg[300];
    size_t n;
    const char *p = cell(sw, field, &n);
    mr__column col = {.name = name, .field = field, .use = MR__USE_NUMERIC, .var = -1};
    if (sw->s->st != MR_OK) return;
    mr__cell_message(msg, sizeof msg, &col, what, p, n);
    sw->s->st = mr__fail(&sw->s->err, st, "%s:%llu:%s", mr__chunk_row_display(sw->chunk, r, sw->c->display),
                         (unsigned long long)row_line(sw, r), msg);
}

/* A numeric cell: 1 a number, 0 missing, -1 not a number (the error set). */
static int number_at(score_worker *sw, uint32_t r, const char *name, size_t field, double *v)
{
    size_t n;
    const char *p = cell(sw, field, &n);
    if (sw->quick_numbers && n > 0 && mr__parse_short_decimal(p, p + n, '\0', v) == p + n) return 1;
    if (is_missing(sw->c, p, n)) return 0;
    if (mr__parse_double(sw->np, p, n, v) && isfinite(*v)) return 1;
    cell_error(sw, r, MR_ERR_FORMAT, name, field, "not a number");
    return -1;
}

/* ROW_NO_ESTIMATE: a `many` factor's level the fit saw but has no
 * estimate for (none finite): counted with the unseen levels. */
enum { ROW_OK, ROW_MISSING, ROW_UNSEEN, ROW_NO_ESTIMATE, ROW_FAILED };

static int unscorable(score_worker *sw, uint32_t r, int why, const char *name, size_t field)
{
    static const char *const what[] = {"", "a missing value, which cannot be scored", "a level the fit never saw",
                                       "a level the fit has no estimate for"};
    if (why == ROW_FAILED || sw->c->blank_unscorable) return why;
    cell_error(sw, r, MR_ERR_DOMAIN, name, field, what[why]);
    return ROW_FAILED;
}

/* The offset, from the offset and exposure columns. */
static int row_offset(score_worker *sw, uint32_t r, double *off)
{
    const mr__score_cfg *c = sw->c;
    double v;
    int k;
    *off = 0;
    if (c->role_field[MR__SCORE_OFFSET] >= 0) {
        size_t f = (size_t)c->role_field[MR__SCORE_OFFSET];
        if ((k = number_at(sw, r, c->role_name[MR__SCORE_OFFSET], f, &v)) <= 0)
            return unscorable(sw, r, k ? ROW_FAILED : ROW_MISSING, c->role_name[MR__SCORE_OFFSET], f);
        *off += v;
    }
    if (c->role_field[MR__SCORE_EXPOSURE] >= 0) {
        size_t f = (size_t)c->role_field[MR__SCORE_EXPOSURE];
        if ((k = number_at(sw, r, c->role_name[MR__SCORE_EXPOSURE], f, &v)) <= 0)
            return unscorable(sw, r, k ? ROW_FAILED : ROW_MISSING, c->role_name[MR__SCORE_EXPOSURE], f);
        if (!(v > 0)) {
            cell_error(sw, r, MR_ERR_DOMAIN, c->role_name[MR__SCORE_EXPOSURE], f, "an exposure must be > 0");
            return ROW_FAILED;
        }
        *off += log(v);
        sw->expo = v;
    }
    return ROW_OK;
}

/* Each factor's level number and each numeric's value. */
static int row_values(score_worker *sw, uint32_t r, int32_t *lev, double *num)
{
    const mr__score_cfg *c = sw->c;
    size_t i, n;
    int k;
    for (i = 0; i < c->nfac; i++) {
        const char *p = cell(sw, c->fac[i].field, &n);
        if (is_missing(c, p, n)) return unscorable(sw, r, ROW_MISSING, c->fac[i].name, c->fac[i].field);
        lev[i] = mr__levelset_find(&c->fac[i].levels, p, n);
        if (lev[i] < 0) return unscorable(sw, r, ROW_UNSEEN, c->fac[i].name, c->fac[i].field);
        if ((long)i == c->many_var && !isfinite(c->many_beta[lev[i]]))
            return unscorable(sw, r, ROW_NO_ESTIMATE, c->fac[i].name, c->fac[i].field);
    }
    for (i = 0; i < c->nnum; i++)
        if ((k = number_at(sw, r, c->num[i].name, c->num[i].field, &num[i])) <= 0)
            return unscorable(sw, r, k ? ROW_FAILED : ROW_MISSING, c->num[i].name, c->num[i].field);
    return ROW_OK;
}

/* The row's non-zero design entries, in column order within each term. */
static size_t design_row(score_worker *sw, const int32_t *lev, const double *num)
{
    const mr__score_cfg *c = sw->c;
    size_t m = 0, t;
    int k;
    if (c->intercept) {
        sw->xcol[m] = 0;
        sw->xval[m++] = 1.0;
    }
    for (t = 0; t < c->nterms; t++) {
        const mr__score_term *tm = &c->term[t];
        size_t col = tm->first;
        double v = 1.0;
        if (tm->many) continue; /* linear_predictor adds it */
        for (k = 0; k < tm->nparts; k++) {
            if (tm->is_factor[k]) {
                int32_t l = lev[tm->var[k]], ref = c->fac[tm->var[k]].ref;
                if (!tm->full && l == ref) break;
                col += (size_t)(tm->full || l < ref ? l : l - 1) * tm->stride[k];
            } else {
                v *= num[tm->var[k]];
            }
        }
        if (k < tm->nparts) continue;
        sw->xcol[m] = col;
        sw->xval[m++] = v;
    }
    return m;
}

/* dx[j] += v, j added to the columns touched (n of them) when new. */
static void add_at(score_worker *sw, size_t j, double v, size_t *n)
{
    if (sw->dpos[j] == 0) {
        sw->dcol[*n] = j;
        sw->dx[j] = 0;
        sw->dpos[j] = ++*n;
    }
    sw->dx[j] += v;
}

/* x at the columns it touches, minus m_l (score.h) there; how many. */
static size_t level_difference(score_worker *sw, size_t m, int32_t l)
{
    const mr__score_cfg *c = sw->c;
    size_t a, e, n = 0;
    for (a = 0; a < m; a++) add_at(sw, sw->xcol[a], sw->xval[a], &n);
    for (e = c->many_mean_span[2 * l]; e < c->many_mean_span[2 * l + 1]; e++)
        add_at(sw, c->many_mean_col[e], -c->many_mean_val[e], &n);
    return n;
}

/* A `many` level's row: the variance of x'beta + beta_l (score.h). */
static double level_variance(score_worker *sw, size_t m, int32_t l)
{
    const mr__score_cfg *c = sw->c;
    size_t a, b, n;
    double v = 0;
    if (c->many_mean_span == NULL || !isfinite(c->many_own_var[l])) return NAN;
    n = level_difference(sw, m, l);
    for (a = 0; a < n; a++) {
        double row = 0;
        for (b = 0; b < n; b++) row += c->cov[sw->dcol[a] * c->p + sw->dcol[b]] * sw->dx[sw->dcol[b]];
        v += sw->dx[sw->dcol[a]] * row;
    }
    for (a = 0; a < n; a++) sw->dpos[sw->dcol[a]] = 0;
    return (v > 0 ? v : 0) + c->many_own_var[l];
}

/* x'Vx over the row's entries, V symmetric: each entry's square term,
 * then twice its products with the entries before it, in a fixed order
 * (the same bits whatever the thread). */
static double design_variance(const score_worker *sw, size_t m)
{
    const mr__score_cfg *c = sw->c;
    double v = 0;
    size_t a, b;
    for (a = 0; a < m; a++) {
        const double *row = c->cov + sw->xcol[a] * c->p;
        double cross = 0;
        for (b = 0; b < a; b++) cross += row[sw->xcol[b]] * sw->xval[b];
        v += sw->xval[a] * (row[sw->xcol[a]] * sw->xval[a] + 2 * cross);
    }
    return v;
}

/* eta = x'beta + offset and, when se is not NULL, its standard error
 * sqrt(x'Vx). */
static void linear_predictor(score_worker *sw, size_t m, double off, double *eta, double *se)
{
    const mr__score_cfg *c = sw->c;
    double e = 0, v;
    size_t a;
    for (a = 0; a < m; a++) e += c->beta[sw->xcol[a]] * sw->xval[a];
    if (c->many_var >= 0) {
        int32_t l = sw->lev[c->many_var];
        e += c->many_beta[l];
        if (l != c->many_ref) {
            *eta = e + off;
            if (se) *se = sqrt(level_variance(sw, m, l));
            return;
        }
    }
    *eta = e + off;
    if (se == NULL) return;
    v = design_variance(sw, m);
    *se = sqrt(v > 0 ? v : 0);
}

/* A row's predictions as text, built on the stack and added to the
 * output in one append: its up to 8 numbers, each after a comma. */
typedef struct row_text {
    char t[MR__SCORE_NCOLUMNS * (MR__DTOA_SIZE + 1)];
    size_t n;
} row_text;

/* A number after a comma (none before a line's first field), as the
 * shortest text that reads back to it; an empty field for none. */
static void put_number(row_text *o, double v, int comma)
{
    if (comma) o->t[o->n++] = ',';
    if (isfinite(v)) o->n += mr__dtoa(v, o->t + o->n);
}

/* The outcome as the fit took it: a proportion of the trials for
 * binomial, with the trials and the weight as the prior weight.
 * Residuals are left empty when the outcome is missing. */
static int row_outcome(score_worker *sw, uint32_t r, score_row *row)
{
    const mr__score_cfg *c = sw->c;
    double v;
    int i, k;
    row->has_y = 0;
    row->prior = 1;
    if (c->role_field[MR__SCORE_OUTCOME] < 0) return ROW_OK;
    for (i = MR__SCORE_OUTCOME; i <= MR__SCORE_WEIGHT; i++) {
        if (c->role_field[i] < 0) continue;
        k = number_at(sw, r, c->role_name[i], (size_t)c->role_field[i], &v);
        if (k < 0) return ROW_FAILED;
        if (k == 0) return ROW_OK;
        if (i == MR__SCORE_OUTCOME) row->y = v;
        else row->prior *= v;
        if (i == MR__SCORE_TRIALS) row->y = v > 0 ? row->y / v : NAN;
    }
    row->has_y = mr__family_y_valid(c->family.ops, row->y) && row->prior >= 0;
    return ROW_OK;
}

static double inverse_link(const mr__score_cfg *c, double eta)
{
    double mu_eta;
    return mr__link_inv1(c->link, eta, &mu_eta);
}

/* The residuals of a row with its outcome (v[5..7]; NaN, an empty
 * field, where the outcome is missing). */
static void residuals(const score_worker *sw, const score_row *row, double mu, double *v)
{
    const mr__score_cfg *c = sw->c;
    double d, var;
    v[0] = v[1] = v[2] = NAN;
    if (!row->has_y) return;
    c->family.ops->unit_deviance_n(&c->family, &row->y, &mu, 1, &d);
    c->family.ops->variance_n(&c->family, &mu, 1, &var);
    d *= row->prior;
    v[0] = row->y - mu;
    v[1] = (row->y - mu) * sqrt(row->prior / var);
    v[2] = (row->y > mu ? 1 : row->y < mu ? -1 : 0) * sqrt(d > 0 ? d : 0);
}

/* Writes the row's predictions (and residuals) that are asked for;
 * returns its mean. */
static double put_predictions(score_worker *sw, mr__strbuf *out, size_t m, const score_row *row)
{
    const mr__score_cfg *c = sw->c;
    row_text o;
    double eta, se = NAN, mu, v[MR__SCORE_NCOLUMNS] = {0};
    int k, n = 0;
    o.n = 0;
    linear_predictor(sw, m, row->off, &eta, sw->wants_se ? &se : NULL);
    mu = inverse_link(c, eta);
    v[MR__SCORE_ETA] = eta;
    v[MR__SCORE_SE_ETA] = se;
    v[MR__SCORE_MEAN] = mu;
    if (sw->wants_interval) {
        double lo = inverse_link(c, eta - c->z * se), hi = inverse_link(c, eta + c->z * se);
        v[MR__SCORE_MEAN_LOW] = lo < hi ? lo : hi;
        v[MR__SCORE_MEAN_HIGH] = lo < hi ? hi : lo;
    }
    if (sw->wants_residuals) residuals(sw, row, mu, v + MR__SCORE_FIRST_RESIDUAL);
    for (k = 0; k < MR__SCORE_NCOLUMNS; k++)
        if (sw->written[k]) put_number(&o, v[k], c->nkeep > 0 || n++ > 0);
    mr__strbuf_append(out, o.t, o.n);
    return mu;
}

static void put_key_len(mr__strbuf *b, size_t n)
{
    unsigned char len[4] = {(unsigned char)n, (unsigned char)(n >> 8), (unsigned char)(n >> 16),
                            (unsigned char)(n >> 24)};
    mr__strbuf_append(b, (const char *)len, 4);
}

/* The row's key in its block's table (score_row.h): a factor's level
 * number stands for its cell's bytes, one to one. */
static void local_key(score_worker *sw)
{
    const mr__score_cfg *c = sw->c;
    size_t i, n;
    sw->lkey.len = 0;
    for (i = 0; i < c->nby; i++) {
        if (sw->by_fac[i] >= 0) {
            mr__strbuf_append(&sw->lkey, (const char *)&sw->lev[sw->by_fac[i]], 4);
            continue;
        }
        const char *p = cell(sw, c->by_field[i], &n);
        put_key_len(&sw->lkey, n);
        mr__strbuf_append(&sw->lkey, p, n);
    }
}

/* A group new to the block: its key as the groups' table keeps it (each
 * cell as its length and bytes), from the row's cells. */
static int new_group_key(score_worker *sw, score_slot *out)
{
    const mr__score_cfg *c = sw->c;
    size_t i, n;
    if (out->nkey == out->gkey_cap) {
        size_t cap = out->gkey_cap ? 2 * out->gkey_cap : 64;
        group_key *more = mr__realloc(out->gkey, cap * sizeof *more);
        if (more == NULL) return -1;
        out->gkey = more;
        out->gkey_cap = cap;
    }
    out->gkey[out->nkey].at = out->keys.len;
    for (i = 0; i < c->nby; i++) {
        const char *p = cell(sw, c->by_field[i], &n);
        put_key_len(&out->keys, n);
        mr__strbuf_append(&out->keys, p, n);
    }
    out->gkey[out->nkey].len = out->keys.len - out->gkey[out->nkey].at;
    out->gkey[out->nkey].obs = out->gkey[out->nkey].exp = 0;
    out->gkey[out->nkey].expo = out->gkey[out->nkey].prior = 0;
    out->gkey[out->nkey].rows = 0;
    out->nkey++;
    return 0;
}

void mr__score_groups_reset(score_worker *sw)
{
    size_t k;
    if (sw->dense) {
        for (k = 0; k < sw->nlocal; k++) sw->dense[sw->dense_cell[k]] = -1;
        sw->nlocal = 0;
        return;
    }
    mr__levelset_release(&sw->local);
    mr__levelset_init(&sw->local);
    sw->local.limit = sw->c->groups.limit;
}

/* The row's group as numbered in its block: MR_OK, or MR_ERR_NO_MEMORY,
 * or MR_ERR_DOMAIN (more groups than the totals take). */
static mr_status local_group(score_worker *sw, score_slot *out, int32_t *id)
{
    const mr__score_cfg *c = sw->c;
    size_t before = sw->local.n, i, at = 0;
    mr_status st;
    if (sw->dense) { /* the common case: no key, no hash */
        for (i = 0; i < c->nby; i++) at += (size_t)sw->lev[sw->by_fac[i]] * sw->by_stride[i];
        if ((*id = sw->dense[at]) >= 0) return MR_OK;
        if (new_group_key(sw, out) != 0) return MR_ERR_NO_MEMORY;
        sw->dense_cell[sw->nlocal] = (int32_t)at;
        *id = sw->dense[at] = (int32_t)sw->nlocal++;
        return MR_OK;
    }
    local_key(sw);
    st = sw->lkey.failed ? MR_ERR_NO_MEMORY : mr__levelset_add(&sw->local, sw->lkey.data, sw->lkey.len, id);
    if (st == MR_OK && sw->local.n > before && new_group_key(sw, out) != 0) st = MR_ERR_NO_MEMORY;
    return st;
}

/* The row's counts into its group's sums in the block (numbered in the
 * block); the block's groups go into the totals in block order
 * (job_score.c). */
static void note_group_row(score_worker *sw, score_slot *out, const score_row *row, double mu)
{
    const mr__score_cfg *c = sw->c;
    group_key *g;
    int32_t id;
    mr_status st;
    if ((st = local_group(sw, out, &id)) != MR_OK) {
        if (st == MR_ERR_DOMAIN) out->toomany = 1;
        else out->nomem = 1;
        return;
    }
    g = &out->gkey[id];
    g->obs += row->prior * row->y;
    g->exp += row->prior * mu;
    g->expo += c->role_field[MR__SCORE_EXPOSURE] >= 0 ? sw->expo : NAN;
    g->prior += row->prior;
    g->rows++;
}

static void score_one(score_worker *sw, uint32_t r, score_slot *out)
{
    const mr__score_cfg *c = sw->c;
    score_row row = {.off = 0, .y = 0, .prior = 1, .expo = 0, .has_y = 0};
    size_t i, n, ncols = 0;
    int k, why = row_offset(sw, r, &row.off);
    if (why == ROW_OK) why = row_values(sw, r, sw->lev, sw->num);
    if (why == ROW_OK) why = row_outcome(sw, r, &row);
    if (why == ROW_FAILED) return;
    for (i = 0; i < c->nkeep; i++) {
        const char *p = cell(sw, c->keep_field[i], &n);
        if (i) mr__strbuf_append(&out->out, ",", 1);
        mr__strbuf_append_csv(&out->out, p, n);
    }
    out->rows++;
    if (why == ROW_OK) {
        double mu = put_predictions(sw, &out->out, design_row(sw, sw->lev, sw->num), &row);
        out->scored++;
        if (c->nby && row.has_y) note_group_row(sw, out, &row, mu);
    } else {
        for (k = 0; k < MR__SCORE_NCOLUMNS; k++) ncols += (size_t)mr__score_column_written(c, k);
        for (i = c->nkeep > 0 ? 0 : 1; i < ncols; i++) mr__strbuf_append(&out->out, ",", 1);
        if (why == ROW_UNSEEN || why == ROW_NO_ESTIMATE) out->unseen++;
        else out->missing++;
    }
    mr__strbuf_append(&out->out, "\n", 1);
}

void mr__score_row_end(void *user, uint32_t r, size_t nfields)
{
    score_worker *sw = user;
    const mr__score_cfg *c = sw->c;
    score_slot *out = sw->s->part;
    if (sw->s->st == MR_OK && sw->cells.nomem) sw->s->st = mr__fail(&sw->s->err, MR_ERR_NO_MEMORY, "out of memory");
    if (sw->s->st == MR_OK && nfields != c->nfields)
        sw->s->st = mr__fail(&sw->s->err, MR_ERR_FORMAT, "%s:%llu:%zu: expected %zu fields as in the header, found %zu",
                             mr__chunk_row_display(sw->chunk, r, c->display), (unsigned long long)row_line(sw, r),
                             nfields < c->nfields ? nfields : c->nfields + 1, c->nfields, nfields);
    if (sw->s->st == MR_OK) score_one(sw, r, out);
}
