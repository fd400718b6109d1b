/* scorer.c - the mr_scorer handle: a saved fit made into the scoring job's
 * model (accum/score.h), its columns found in the data's header, one pass
 * of the engine, the lines into an output file (zstd-compressed when its
 * name ends in .zst) written atomically. */
#define _POSIX_C_SOURCE 200809L
#include <math.h>
#include <string.h>
#include <unistd.h>
#include <zstd.h>

#include "accum/pass.h"
#include "accum/score.h"
#include "common/alloc.h"
#include "common/outfile.h"
#include "common/probability.h"
#include "common/utf8.h"
#include "fit/fit.h"
#include "fit/run.h"
#include "fit/scorer.h"
#include "input/fields.h"


mr_scorer *mr_scorer_new(const mr_fit *fit)
{
    mr_scorer *s = mr__calloc(1, sizeof *s);
    if (s == NULL) return NULL;
    s->fit = fit;
    s->level = 0.95;
    return s;
}

void mr__score_groups_release(mr__score_groups *g)
{
    mr__levelset_release(&g->groups);
    mr__free(g->obs);
    mr__free(g->exp);
    mr__free(g->expo);
    mr__free(g->prior);
    mr__free(g->rows);
    memset(g, 0, sizeof *g);
}

void mr_scorer_free(mr_scorer *s)
{
    size_t i;
    if (s == NULL) return;
    for (i = 0; i < s->nkeep; i++) mr__free(s->keep[i]);
    for (i = 0; i < s->nby; i++) mr__free(s->by[i]);
    mr__free(s->keep);
    mr__free(s->by);
    mr__free(s->data);
    mr__score_groups_release(&s->g);
    mr__free(s);
}

static char *copy_text(const char *t)
{
    size_t n = strlen(t) + 1;
    char *c = mr__malloc(n);
    if (c) memcpy(c, t, n);
    return c;
}

const char *mr_scorer_errmsg(const mr_scorer *s) { return s->err.msg; }

static mr_status add_name(mr_scorer *s, char ***list, size_t *n, const char *column)
{
    char **k = mr__realloc(*list, (*n + 1) * sizeof *k);
    if (k == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
    *list = k;
    if ((k[*n] = copy_text(column)) == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
    ++*n;
    return MR_OK;
}

mr_status mr_scorer_keep(mr_scorer *s, const char *column) { return add_name(s, &s->keep, &s->nkeep, column); }

mr_status mr_scorer_group_by(mr_scorer *s, const char *column) { return add_name(s, &s->by, &s->nby, column); }

mr_status mr_scorer_column(mr_scorer *s, const char *name)
{
    int k = mr__score_column_index(name);
    if (k < 0)
        return mr__fail(&s->err, MR_ERR_USAGE,
                        "--columns: no column '%s' (eta, se_eta, mean, mean_low, mean_high, resid_response, "
                        "resid_pearson, resid_deviance)",
                        name);
    s->columns |= 1u << k;
    return MR_OK;
}

mr_status mr_scorer_set_level(mr_scorer *s, double level)
{
    if (!(level > 0 && level < 1)) return mr__fail(&s->err, MR_ERR_USAGE, "--level: must lie strictly between 0 and 1");
    s->level = level;
    return MR_OK;
}

mr_status mr_scorer_set_unseen(mr_scorer *s, mr_unseen policy)
{
    if (policy != MR_UNSEEN_FAIL && policy != MR_UNSEEN_BLANK)
        return mr__fail(&s->err, MR_ERR_USAGE, "--unseen: fail or blank");
    s->blank = policy == MR_UNSEEN_BLANK;
    return MR_OK;
}

mr_status mr_scorer_set_threads(mr_scorer *s, int threads)
{
    if (threads < 0 || threads > 256) return mr__fail(&s->err, MR_ERR_USAGE, "--threads: 0 to 256");
    s->threads = threads;
    return MR_OK;
}

uint64_t mr_scorer_count(const mr_scorer *s, mr_score_count which)
{
    return (unsigned)which < 4 ? s->count[which] : 0;
}

/* ---- the fit as the job's model ---------------------------------------- */

typedef struct scoring {
    mr_scorer *s;
    mr__score_cfg c;
    const char **num_name;
    char **header;
    size_t nheader;
    mr__outfile *out;
    ZSTD_CCtx *z;
    char *zbuf;
    size_t zcap;
    char display[256];
    mr__inputset set; /* several files read as one (n 0: data alone) */
} scoring;

static size_t numeric_index(scoring *g, const char *name)
{
    size_t i;
    for (i = 0; i < g->c.nnum; i++)
        if (strcmp(g->num_name[i], name) == 0) return i;
    g->num_name[g->c.nnum] = name;
    g->c.num[g->c.nnum].name = name;
    return g->c.nnum++;
}

static mr_status make_factors(scoring *g, mr__error *err)
{
    const mr_fit *fit = g->s->fit;
    size_t i, l;
    int32_t id;
    g->c.fac = mr__calloc(fit->nfactors + 1, sizeof *g->c.fac);
    if (g->c.fac == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < fit->nfactors; i++) {
        mr__score_factor *f = &g->c.fac[g->c.nfac++];
        const mr__fit_factor *ff = &fit->factor[i];
        mr__levelset_init(&f->levels);
        f->levels.limit = (size_t)-1; /* a fit's levels were held to their limit when it was made */
        f->name = ff->name;
        f->ref = -1;
        for (l = 0; l < ff->nlevels; l++) {
            MR__TRY(mr__levelset_add(&f->levels, ff->level[l], strlen(ff->level[l]), &id));
            if ((size_t)id != l) return mr__fail(err, MR_ERR_FORMAT, "fit: factor '%s' lists a level twice", ff->name);
            if (ff->reference && strcmp(ff->reference, ff->level[l]) == 0) f->ref = id;
        }
    }
    return MR_OK;
}

/* A term's parts and the columns its factors' levels run over (the last
 * factor fastest, as the design lays them out). */
static mr_status make_term(scoring *g, const mr__fit_term *ft, mr__score_term *t, mr__error *err)
{
    size_t n = 1;
    int k;
    t->nparts = (int)ft->nparts;
    t->full = ft->full;
    t->first = ft->first;
    /* a main effect alone (spec.c): its levels are many_beta's */
    t->many = g->c.many_var >= 0 && ft->nparts == 1 && strcmp(ft->part[0], g->s->fit->many_factor) == 0;
    if (t->many) {
        t->is_factor[0] = 1;
        t->var[0] = (size_t)g->c.many_var;
        return MR_OK;
    }
    for (k = 0; k < t->nparts; k++) {
        long f = mr__fit_find_factor(g->s->fit, ft->part[k]);
        t->is_factor[k] = f >= 0;
        t->var[k] = f >= 0 ? (size_t)f : numeric_index(g, ft->part[k]);
    }
    for (k = t->nparts - 1; k >= 0; k--) {
        const mr__score_factor *f = &g->c.fac[t->var[k]];
        size_t levels;
        if (!t->is_factor[k]) continue;
        levels = f->levels.n;
        if (!t->full && f->ref < 0) return mr__fail(err, MR_ERR_FORMAT, "fit: factor '%s' has no reference", f->name);
        t->stride[k] = n;
        n *= t->full ? levels : levels - 1;
    }
    if (n != ft->ncoef || ft->first + n > g->c.p)
        return mr__fail(err, MR_ERR_FORMAT, "fit: term '%s' has %zu coefficients, its levels make %zu", ft->label,
                        ft->ncoef, n);
    return MR_OK;
}

/* beta and cov with aliased coefficients as 0: they take no part. */
static mr_status make_coefficients(scoring *g, mr__error *err)
{
    const mr_fit *fit = g->s->fit;
    size_t i, p = fit->p;
    double *beta = mr__calloc(p + 1, sizeof *beta), *cov = mr__calloc(p * p + 1, sizeof *cov);
    g->c.beta = beta;
    g->c.cov = cov;
    if (beta == NULL || cov == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < p; i++) beta[i] = fit->aliased[i] || !isfinite(fit->beta[i]) ? 0 : fit->beta[i];
    for (i = 0; i < p * p; i++) cov[i] = isfinite(fit->cov[i]) && !fit->aliased[i / p] && !fit->aliased[i % p] ? fit->cov[i] : 0;
    g->c.p = p;
    return MR_OK;
}

/* The `many` factor's estimates by its level numbers here. */
static mr_status make_many(scoring *g, mr__error *err)
{
    const mr_fit *fit = g->s->fit;
    const mr__score_factor *f;
    size_t k, n;
    long v = fit->many_given ? mr__fit_find_factor(fit, fit->many_factor) : -1;
    g->c.many_var = v;
    if (v < 0) return fit->many_given ? mr__fail(err, MR_ERR_FORMAT, "fit: its many factor is not among its factors") : MR_OK;
    f = &g->c.fac[v];
    n = f->levels.n;
    g->c.many_ref = f->ref;
    g->c.many_beta = mr__malloc_array(n + 1, sizeof *g->c.many_beta);
    g->c.many_own_var = mr__malloc_array(n + 1, sizeof *g->c.many_own_var);
    if (fit->many_mean_start != NULL) g->c.many_mean_span = mr__calloc(2 * n + 1, sizeof *g->c.many_mean_span);
    if (!g->c.many_beta || !g->c.many_own_var || (fit->many_mean_start != NULL && !g->c.many_mean_span))
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    g->c.many_mean_col = fit->many_mean_col;
    g->c.many_mean_val = fit->many_mean_val;
    for (k = 0; k < n; k++) g->c.many_beta[k] = g->c.many_own_var[k] = NAN;
    if (f->ref >= 0) g->c.many_beta[f->ref] = 0;
    for (k = 0; k < fit->nmany; k++) {
        int32_t id = mr__levelset_find(&f->levels, fit->many_level[k], strlen(fit->many_level[k]));
        if (id < 0) return mr__fail(err, MR_ERR_FORMAT, "fit: many level '%s' is not a level of '%s'",
                                    fit->many_level[k], fit->many_factor);
        g->c.many_beta[id] = fit->many_beta[k];
        if (g->c.many_mean_span == NULL) continue;
        g->c.many_own_var[id] = fit->dispersion / fit->many_info[k];
        g->c.many_mean_span[2 * id] = fit->many_mean_start[k];
        g->c.many_mean_span[2 * id + 1] = fit->many_mean_start[k + 1];
    }
    return MR_OK;
}

static mr_status make_model(scoring *g, mr__error *err)
{
    const mr_fit *fit = g->s->fit;
    size_t i, parts = 0;
    g->c.many_var = -1;
    for (i = 0; i < fit->nterms; i++) parts += fit->term[i].nparts;
    g->c.term = mr__calloc(fit->nterms + 1, sizeof *g->c.term);
    g->c.num = mr__calloc(parts + 1, sizeof *g->c.num);
    g->num_name = mr__calloc(parts + 1, sizeof *g->num_name);
    if (!g->c.term || !g->c.num || !g->num_name) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    MR__TRY(make_coefficients(g, err));
    MR__TRY(make_factors(g, err));
    MR__TRY(make_many(g, err));
    for (i = 0; i < fit->nterms; i++) MR__TRY(make_term(g, &fit->term[i], &g->c.term[g->c.nterms++], err));
    g->c.intercept = fit->intercept;
    g->c.family = mr__family_plain((mr_family)fit->family);
    g->c.family.param = fit->family_param;
    g->c.link = mr__link_ops_of((mr_link)fit->link);
    g->c.role_name[MR__SCORE_OUTCOME] = fit->outcome;
    g->c.role_name[MR__SCORE_TRIALS] = fit->trials;
    g->c.role_name[MR__SCORE_WEIGHT] = fit->weight;
    g->c.role_name[MR__SCORE_OFFSET] = fit->offset;
    g->c.role_name[MR__SCORE_EXPOSURE] = fit->exposure;
    g->c.z = mr__normal_quantile(0.5 + g->s->level / 2);
    g->c.blank_unscorable = g->s->blank;
    g->c.columns = g->s->columns;
    g->c.display = g->display;
    /* a fit read from a JSON older than its tokens: the defaults it had */
    g->c.missing_token = fit->missing_known ? (const char *const *)fit->missing_token : mr__default_missing;
    g->c.nmissing_tokens = fit->missing_known ? fit->nmissing_tokens : MR__DEFAULT_MISSING_N;
    return MR_OK;
}

/* ---- the header --------------------------------------------------------- */

static long field_of(const scoring *g, const char *name)
{
    size_t i;
    for (i = 0; i < g->nheader; i++)
        if (strcmp(g->header[i], name) == 0) return (long)i;
    return -1;
}

/* A column the run reads: there, and there once (which would it be?). */
static mr_status need_field(const scoring *g, const char *name, const char *what, size_t *field, mr__error *err)
{
    long f = field_of(g, name);
    size_t i;
    if (f < 0) return mr__fail(err, MR_ERR_USAGE, "%s: the %s names column '%s', which the header does not have",
                               g->display, what, name);
    for (i = (size_t)f + 1; i < g->nheader; i++)
        if (strcmp(g->header[i], name) == 0)
            return mr__fail(err, MR_ERR_FORMAT, "%s:1:%zu: duplicate column name '%s' (also column %ld)", g->display,
                            i + 1, name, f + 1);
    *field = (size_t)f;
    return MR_OK;
}

/* The outcome with its trials and weight gives residuals when all are
 * there; the offset and exposure are needed for the mean. */
static mr_status bind_roles(scoring *g, mr__error *err)
{
    int i, whole = 1;
    size_t f = 0;
    for (i = 0; i < MR__SCORE_ROLES; i++) {
        g->c.role_field[i] = g->c.role_name[i] ? field_of(g, g->c.role_name[i]) : -1;
        if (i <= MR__SCORE_WEIGHT && g->c.role_name[i] && g->c.role_field[i] < 0) whole = 0;
    }
    if (!whole) g->c.role_field[MR__SCORE_OUTCOME] = g->c.role_field[MR__SCORE_TRIALS] = g->c.role_field[MR__SCORE_WEIGHT] = -1;
    for (i = MR__SCORE_OFFSET; i <= MR__SCORE_EXPOSURE; i++) {
        if (g->c.role_name[i] == NULL) continue;
        MR__TRY(need_field(g, g->c.role_name[i], "fit", &f, err));
        g->c.role_field[i] = (long)f;
    }
    return MR_OK;
}

static mr_status on_header(void *user, const char *line, size_t len, mr__error *err)
{
    scoring *g = user;
    size_t i;
    g->c.delim = mr__detect_delimiter(line, len);
    MR__TRY(mr__parse_header(line, len, g->c.delim, &g->header, &g->nheader, g->display, err));
    g->c.nfields = g->nheader;
    for (i = 0; i < g->c.nfac; i++) MR__TRY(need_field(g, g->c.fac[i].name, "fit", &g->c.fac[i].field, err));
    for (i = 0; i < g->c.nnum; i++) MR__TRY(need_field(g, g->c.num[i].name, "fit", &g->c.num[i].field, err));
    g->c.keep_field = mr__calloc(g->s->nkeep + 1, sizeof *g->c.keep_field);
    if (g->c.keep_field == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < g->s->nkeep; i++) MR__TRY(need_field(g, g->s->keep[i], "--keep", &g->c.keep_field[i], err));
    g->c.nkeep = g->s->nkeep;
    g->c.by_field = mr__calloc(g->s->nby + 1, sizeof *g->c.by_field);
    if (g->c.by_field == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < g->s->nby; i++) MR__TRY(need_field(g, g->s->by[i], "--by", &g->c.by_field[i], err));
    g->c.nby = g->s->nby;
    g->c.keep_name = (const char *const *)g->s->keep;
    MR__TRY(bind_roles(g, err));
    if (g->c.role_field[MR__SCORE_OUTCOME] < 0 && (g->c.columns >> MR__SCORE_FIRST_RESIDUAL) != 0)
        return mr__fail(err, MR_ERR_USAGE, "%s: --columns asks for residuals, which need the outcome '%s' (and the "
                                           "trials and weight the fit names)",
                        g->display, g->c.role_name[MR__SCORE_OUTCOME]);
    if (g->c.nby && g->c.role_field[MR__SCORE_OUTCOME] < 0)
        return mr__fail(err, MR_ERR_USAGE, "%s: --by needs the outcome '%s' (and the trials and weight the fit names)",
                        g->display, g->c.role_name[MR__SCORE_OUTCOME]);
    return MR_OK;
}

/* ---- the output ---------------------------------------------------------- */

static int ends_with_zst(const char *path)
{
    size_t n = strlen(path);
    return n >= 4 && strcmp(path + n - 4, ".zst") == 0;
}

static mr_status compress(scoring *g, const char *p, size_t n, ZSTD_EndDirective mode, mr__error *err)
{
    ZSTD_inBuffer in = {p, n, 0};
    size_t left;
    do {
        ZSTD_outBuffer out = {g->zbuf, g->zcap, 0};
        left = ZSTD_compressStream2(g->z, &out, &in, mode);
        if (ZSTD_isError(left)) return mr__fail(err, MR_ERR_INTERNAL, "zstd: %s", ZSTD_getErrorName(left));
        if (out.pos) MR__TRY(mr__outfile_write(g->out, g->zbuf, out.pos, err));
    } while (mode == ZSTD_e_end ? left != 0 : in.pos < in.size);
    return MR_OK;
}

static mr_status write_lines(void *user, const char *p, size_t n, mr__error *err)
{
    scoring *g = user;
    if (g->z) return compress(g, p, n, ZSTD_e_continue, err);
    return mr__outfile_write(g->out, p, n, err);
}

static mr_status open_output(scoring *g, const char *out, const char *data, mr__error *err)
{
    const char *const one[1] = {data};
    const char *const *inputs = g->set.n > 0 ? (const char *const *)g->set.path : one;
    if (ends_with_zst(out)) {
        g->z = ZSTD_createCCtx();
        g->zcap = ZSTD_CStreamOutSize();
        g->zbuf = mr__malloc(g->zcap);
        if (g->z == NULL || g->zbuf == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        /* one thread and a fixed level: the same bytes on every run */
        if (ZSTD_isError(ZSTD_CCtx_setParameter(g->z, ZSTD_c_compressionLevel, 3)) ||
            ZSTD_isError(ZSTD_CCtx_setParameter(g->z, ZSTD_c_checksumFlag, 1)))
            return mr__fail(err, MR_ERR_INTERNAL, "zstd: cannot set the compression level");
    }
    return mr__outfile_open(&g->out, out, inputs, g->set.n > 0 ? g->set.n : 1, err);
}

static void release_scoring(scoring *g)
{
    size_t i;
    for (i = 0; i < g->c.nfac; i++) mr__levelset_release(&g->c.fac[i].levels);
    mr__free(g->c.fac);
    mr__free(g->c.term);
    mr__free(g->c.num);
    mr__free(g->num_name);
    mr__free((void *)g->c.beta);
    mr__free((void *)g->c.cov);
    mr__free(g->c.many_beta);
    mr__free(g->c.many_own_var);
    mr__free(g->c.many_mean_span);
    mr__free(g->c.keep_field);
    mr__free(g->c.by_field);
    mr__levelset_release(&g->c.groups);
    mr__free(g->c.g_obs);
    mr__free(g->c.g_exp);
    mr__free(g->c.g_expo);
    mr__free(g->c.g_prior);
    mr__free(g->c.g_rows);
    if (g->header) mr__free_names(g->header, g->nheader);
    mr__outfile_abort(g->out);
    ZSTD_freeCCtx(g->z);
    mr__free(g->zbuf);
}

/* ---- the run -------------------------------------------------------------- */

static mr_status run_pass(scoring *g, const char *data, mr__error *err)
{
    mr__binding none;
    mr__decode_cfg dcfg;
    mr__pass_cfg cfg;
    mr__pass_result res;
    mr_status st;
    int cpus;
    memset(&none, 0, sizeof none);
    memset(&dcfg, 0, sizeof dcfg);
    memset(&cfg, 0, sizeof cfg);
    dcfg.bind = &none; /* the job reads its rows itself */
    dcfg.family = &g->c.family;
    dcfg.display = g->display;
    cfg.kind = MR__PASS_SCORE;
    cfg.path = data;
    cfg.set = g->set.n > 0 ? &g->set : NULL;
    cfg.display = g->display;
    cfg.read_size = 1 << 20;
    cfg.tee_fd = -1;
    cfg.nthreads = mr__worker_threads(g->s->threads, &cpus);
    cfg.on_header = on_header;
    cfg.header_user = g;
    cfg.dcfg = &dcfg;
    cfg.job_arg = &g->c;
    cfg.pass_number = 1;
    g->c.write = write_lines;
    g->c.write_user = g;
    st = mr__pass_run(&cfg, &res, err);
    mr__pass_result_release(&res, 0);
    return st;
}

/* The run's group totals become the scorer's. */
static void keep_groups(mr_scorer *s, scoring *g)
{
    s->g.groups = g->c.groups;
    s->g.obs = g->c.g_obs;
    s->g.exp = g->c.g_exp;
    s->g.expo = g->c.g_expo;
    s->g.prior = g->c.g_prior;
    s->g.rows = g->c.g_rows;
    s->g.n = g->c.groups.n;
    memset(&g->c.groups, 0, sizeof g->c.groups);
    g->c.g_obs = g->c.g_exp = g->c.g_expo = g->c.g_prior = NULL;
    g->c.g_rows = NULL;
}

static mr_status score_run(mr_scorer *s, const char *const *paths, size_t n, const char *out);

mr_status mr_scorer_run(mr_scorer *s, const char *data, const char *out) { return score_run(s, &data, 1, out); }

mr_status mr_scorer_run_set(mr_scorer *s, const char *const *paths, size_t npaths, const char *out)
{
    mr__error_clear(&s->err);
    if (npaths == 0 || paths == NULL) return mr__fail(&s->err, MR_ERR_USAGE, "no input given");
    return score_run(s, paths, npaths, out);
}

static mr_status score_run(mr_scorer *s, const char *const *paths, size_t n, const char *out)
{
    scoring g;
    mr_status st;
    const char *data = paths[0];
    memset(&g, 0, sizeof g);
    memset(s->count, 0, sizeof s->count);
    mr__error_clear(&s->err);
    mr__score_groups_release(&s->g);
    mr__free(s->data);
    if ((s->data = copy_text(data)) == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
    if ((n > 1 || mr__path_is_directory(data)) && (st = mr__inputset_build(&g.set, paths, n, &s->err)) != MR_OK)
        return st;
    g.s = s;
    mr__levelset_init(&g.c.groups);
    g.c.groups.limit = MR__SCORE_MAX_GROUPS;
    mr__utf8_mend_cut(g.display, sizeof g.display,
                      snprintf(g.display, sizeof g.display, "%s", strcmp(data, "-") == 0 ? "<stdin>" : data));
    st = make_model(&g, &s->err);
    if (st == MR_OK) st = open_output(&g, out, data, &s->err);
    if (st == MR_OK) st = run_pass(&g, data, &s->err);
    if (st == MR_OK && g.z) st = compress(&g, NULL, 0, ZSTD_e_end, &s->err);
    if (st == MR_OK) {
        st = mr__outfile_commit(g.out, &s->err);
        g.out = NULL;
    }
    s->count[MR_SCORE_ROWS] = g.c.rows;
    s->count[MR_SCORE_SCORED] = g.c.scored;
    s->count[MR_SCORE_UNSEEN] = g.c.unseen;
    s->count[MR_SCORE_MISSING] = g.c.missing;
    if (st == MR_OK) keep_groups(s, &g);
    release_scoring(&g);
    mr__inputset_release(&g.set);
    return st;
}
