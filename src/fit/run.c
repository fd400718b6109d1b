/* run.c - one fit from start to end.
 *
 * Pass 1 reads the data once to learn what it holds (header, factor
 * levels, row counts, missing cells, numeric spreads) and to validate
 * every row.  Then IRLS: each pass evaluates the model at the current
 * coefficients, accumulating X'WX, X'Wz, the deviance and the Pearson
 * statistic, and the small p x p system gives the next coefficients.  The
 * loop stops when the relative change in deviance is below the tolerance;
 * the reported statistics are those of the last pass (and so are the
 * coefficients, unless the last Newton step was taken without a pass to
 * check it; see iterate()).  The null model (intercept and offset only) is fitted
 * alongside in the same passes. */
#define _POSIX_C_SOURCE 200809L
#include <cblas.h>

/* OpenBLAS's own entry points; declared here so any CBLAS header will do. */
void openblas_set_num_threads(int num_threads);
int openblas_get_num_threads(void);
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <unistd.h>

#include "accum/pass.h"
#include "common/alloc.h"
#include "common/clock.h"
#include "common/utf8.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/fitter.h"
#include "fit/irls.h"
#include "fit/run.h"
#include "input/fields.h"
#include "model/design.h"
#include "common/probability.h"
#include "solve/normal_eq.h"

/* Each worker costs about 6 MB (its two ring slots of 2 MiB, its
 * decoder and scratch), and past the cores more workers only queue: the
 * count is capped, so that --threads 256 is not 1.6 GB for nothing. */
#define THREADS_PER_CPU 4
#define MAX_THREADS 64

static int online_cpus(void)
{
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n > 0 ? (int)(n > MAX_THREADS ? MAX_THREADS : n) : 1;
}

static void choose_threads(mr__run *r)
{
    int cpus = online_cpus(), cap = cpus * THREADS_PER_CPU > MAX_THREADS ? MAX_THREADS : cpus * THREADS_PER_CPU;
    r->nthreads = r->f->threads > 0 ? r->f->threads : cpus;
    if (r->nthreads <= cap) return;
    snprintf(r->threads_note, sizeof r->threads_note,
             "%d worker threads asked for, %d used: at most %d per online CPU (%d here) and %d in all, as each costs "
             "about 6 MB and more than the cores only wait; results do not depend on the count",
             r->nthreads, cap, THREADS_PER_CPU, cpus, MAX_THREADS);
    r->nthreads = cap;
}

/* ---- header and columns ------------------------------------------------ */

static mr_status bind_header(mr__run *r, const char *line, size_t len, mr__error *err)
{
    char **names = NULL;
    size_t n = 0, i;
    mr_status st;
    r->delim = r->f->delimiter ? (char)r->f->delimiter : mr__detect_delimiter(line, len);
    r->delim_detected = r->f->delimiter == 0;
    MR__TRY(mr__parse_header(line, len, r->delim, &names, &n, r->display, err));
    st = mr__bind(&r->bind, &r->f->spec, names, n, r->display, err);
    r->bound = 1; /* the binding owns the names now, even when it failed */
    if (st != MR_OK) return st;
    r->dcfg.bind = &r->bind;
    r->dcfg.family = r->f->spec.family;
    r->dcfg.skip_bad = r->f->skip_bad;
    r->dcfg.delim = r->delim;
    r->dcfg.display = r->display;
    r->dcfg.missing = r->f->missing;
    r->dcfg.nmissing = r->f->nmissing;
    r->dcfg.missing_len = r->missing_len;
    if (r->f->nmissing > MR__MAX_MISSING_TOKENS)
        return mr__fail(err, MR_ERR_USAGE, "more than %d missing-value tokens", MR__MAX_MISSING_TOKENS);
    for (i = 0; i < r->f->nmissing; i++) r->missing_len[i] = strlen(r->f->missing[i]);
    r->dcfg.levels = NULL;
    r->header = mr__strndup(line, len);
    r->header_len = len;
    return r->header ? MR_OK : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
}

static mr_status on_header(void *user, const char *line, size_t len, mr__error *err)
{
    mr__run *r = user;
    if (!r->bound) return bind_header(r, line, len, err);
    if (len != r->header_len || memcmp(line, r->header, len) != 0)
        return mr__fail(err, MR_ERR_IO, "%s: the header changed during the fit", r->display);
    return MR_OK;
}

/* ---- passes ------------------------------------------------------------ */

static mr__pass_cfg pass_config(mr__run *r, mr__pass_kind kind)
{
    mr__pass_cfg c;
    memset(&c, 0, sizeof c);
    c.kind = kind;
    c.path = r->read_path;
    c.display = r->display;
    c.read_size = r->f->buffer_size;
    c.tee_fd = -1;
    c.nthreads = r->nthreads;
    c.on_header = on_header;
    c.header_user = r;
    c.dcfg = &r->dcfg;
    c.pass_number = r->npasses + 1;
    c.progress = r->f->progress;
    c.progress_stop = r->f->progress_stop;
    c.progress_user = r->f->progress_user;
    c.pool = &r->pool;
    if (kind == MR__PASS_IRLS) c.map = &r->first.map; /* the first pass makes it */
    if (r->use_store && kind == MR__PASS_IRLS) {
        c.store = &r->store;
        c.store_fill = !r->store_filled;
    }
    return c;
}

static mr_status note_pass(mr__run *r, const mr__pass_result *res, mr__error *err)
{
    double *grown = mr__realloc(r->pass_seconds, (size_t)(r->npasses + 1) * sizeof *grown);
    if (grown == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    r->pass_seconds = grown;
    r->pass_seconds[r->npasses++] = res->seconds;
    return MR_OK;
}

/* Later passes must see the very file the first pass saw: its size and
 * time, and its checksum (an edit in place may keep both). */
static mr_status check_same_input(mr__run *r, const mr__pass_result *res, mr__error *err)
{
    int streamed_same;
    if (res->raw_bytes == 0 && r->use_store) return MR_OK;
    /* a pass by the map checked each block's rows and their checksum itself */
    streamed_same = res->by_map || (res->raw_bytes == r->raw_bytes && res->checksum == r->first.checksum);
    if (res->size != r->size || res->mtime_ns != r->mtime_ns || !streamed_same)
        return mr__fail(err, MR_ERR_IO, "%s: the file changed during the fit", r->display);
    return MR_OK;
}

/* Where temporary files go: $TMPDIR, else /tmp. */
static const char *temp_dir(void)
{
    const char *dir = getenv("TMPDIR");
    return dir != NULL && *dir != '\0' ? dir : "/tmp";
}

/* Input that may not be there to read again - standard input, a pipe (a
 * /dev/fd/N name, as a shell's process substitution gives), a FIFO, a
 * character device, a socket - is copied as the first pass reads it, and
 * later passes read the copy: reopening a FIFO would wait for ever for a
 * writer, and a pipe read again is empty.  Only a regular file (or a
 * directory, which the source refuses) is read where it is. */
static int read_only_once(const char *path)
{
    struct stat st;
    if (strcmp(path, "-") == 0) return 1;
    return stat(path, &st) == 0 && !S_ISREG(st.st_mode) && !S_ISDIR(st.st_mode);
}

static mr_status open_spool(mr__run *r, mr__error *err)
{
    const char *dir = temp_dir();
    snprintf(r->spool, sizeof r->spool, "%s/millrace-input-XXXXXX", dir);
    r->spool_fd = mkstemp(r->spool);
    if (r->spool_fd < 0)
        return mr__fail(err, MR_ERR_IO,
                        "%s can be read only once, and its copy for the later passes cannot be created in %s: %s "
                        "(set TMPDIR to a writable directory with room for the whole input)",
                        r->display, dir, strerror(errno));
    /* Unlinked at once, so that nothing is left behind however the process
     * ends; later passes reopen it through the descriptor. */
    unlink(r->spool);
    snprintf(r->spool, sizeof r->spool, "/proc/self/fd/%d", r->spool_fd);
    return MR_OK;
}

static mr_status scan_pass(mr__run *r, mr__error *err)
{
    mr__pass_cfg c = pass_config(r, MR__PASS_SCAN);
    mr_status st;
    if (read_only_once(r->path)) {
        MR__TRY(open_spool(r, err));
        c.tee_fd = r->spool_fd;
    }
    if (r->use_store) {
        c.store = &r->store;
        c.store_fill = 1;
    }
    st = mr__pass_run(&c, &r->first, err);
    if (r->spool_fd >= 0) r->read_path = r->spool;
    if (st != MR_OK) return st;
    r->size = r->first.size;
    r->mtime_ns = r->first.mtime_ns;
    r->raw_bytes = r->first.raw_bytes;
    if (r->read_path == r->spool) {
        struct stat sb;
        if (stat(r->spool, &sb) != 0)
            return mr__fail(err, MR_ERR_IO, "%s: cannot reread its copy: %s", r->display, strerror(errno));
        r->size = (uint64_t)sb.st_size;
        r->mtime_ns = (int64_t)sb.st_mtim.tv_sec * 1000000000 + sb.st_mtim.tv_nsec;
    }
    return note_pass(r, &r->first, err);
}

/* ---- what the first pass learned --------------------------------------- */

static mr_status no_usable_rows(mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    char detail[600] = "";
    size_t c, o = 0;
    for (c = 0; c < r->bind.ncol && o < sizeof detail - 80; c++)
        if (s->missing[c])
            o += (size_t)snprintf(detail + o, sizeof detail - o, "%s'%s' missing in %llu", o ? ", " : "",
                                  r->bind.col[c].name, (unsigned long long)s->missing[c]);
    if (s->nbad) snprintf(detail + o, sizeof detail - o, "%s%llu bad rows", o ? ", " : "", (unsigned long long)s->nbad);
    return mr__fail(err, MR_ERR_NO_DATA, "%s: no usable rows: all %llu data rows were left out (%s)", r->display,
                    (unsigned long long)s->nread, detail);
}

/* Rows of prior weight 0 are read and checked but carry nothing: with no
 * other row there is no fit (rank 0, a null deviance on -1 df). */
static mr_status no_weighted_rows(mr__run *r, mr__error *err)
{
    const mr__spec *s = &r->f->spec;
    char what[300];
    if (s->weight && s->trials) snprintf(what, sizeof what, "weight '%s' times trials '%s'", s->weight, s->trials);
    else snprintf(what, sizeof what, "%s '%s'", s->weight ? "weight" : "trials", s->weight ? s->weight : s->trials);
    return mr__fail(err, MR_ERR_NO_DATA, "%s: no usable rows: the prior weight (%s) is 0 in all %llu complete rows",
                    r->display, what, (unsigned long long)r->first.scan.nused);
}

static mr_status settle_factor(mr__run *r, size_t f, mr__error *err)
{
    const mr__levelset **sets = mr__calloc(r->first.nworkers ? r->first.nworkers : 1, sizeof *sets);
    const mr__covariate *cov;
    mr__factor *fac = &r->fac[f];
    size_t w, i;
    int rc;
    if (sets == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (w = 0; w < r->first.nworkers; w++) sets[w] = &r->first.worker_levels[w][f];
    rc = mr__levelset_merge_sorted(sets, r->first.nworkers, &r->levels[f], &r->level_names[f]);
    mr__free(sets);
    if (rc != 0) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    fac->name = r->bind.col[r->bind.fac_col[f]].name;
    fac->level = r->level_names[f];
    fac->nlevels = r->levels[f].n;
    fac->ref = 0;
    cov = mr__spec_find(&r->f->spec, fac->name);
    if (cov == NULL || cov->ref == NULL) return MR_OK;
    for (i = 0; i < fac->nlevels; i++)
        if (strcmp(fac->level[i], cov->ref) == 0) {
            fac->ref = (int32_t)i;
            return MR_OK;
        }
    return mr__fail(err, MR_ERR_USAGE, "model: reference level '%s' of factor '%s' does not occur in the data%s",
                    cov->ref, fac->name, fac->nlevels ? "" : " (the factor has no levels)");
}

static mr_status settle_scan(mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    size_t f, k, nfac = r->bind.nfac, nnum = r->bind.nnum;
    if (s->nread == 0) return mr__fail(err, MR_ERR_NO_DATA, "%s: the file has a header but no data rows", r->display);
    if (s->nused == 0) return no_usable_rows(r, err);
    if (s->npos == 0) return no_weighted_rows(r, err);
    r->levels = mr__calloc(nfac + 1, sizeof *r->levels);
    r->level_names = mr__calloc(nfac + 1, sizeof *r->level_names);
    r->fac = mr__calloc(nfac + 1, sizeof *r->fac);
    r->mean = mr__calloc(nnum + 1, sizeof *r->mean);
    r->spread = mr__calloc(nnum + 1, sizeof *r->spread);
    if (!r->levels || !r->level_names || !r->fac || !r->mean || !r->spread)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (f = 0; f < nfac; f++) MR__TRY(settle_factor(r, f, err));
    for (k = 0; k < nnum; k++) {
        r->mean[k] = s->sx[k] / (double)s->nused;
        r->spread[k] = mr__scan_spread(s, k);
    }
    r->dcfg.levels = r->levels;
    return mr__design_build(&r->design, &r->f->spec, &r->bind, r->fac, r->mean, r->spread, err);
}

/* The cache only saves time: when it cannot be had (no file can be made in
 * TMPDIR, or a write to it failed), every pass rereads the input, which
 * gives the same bits, and the fit's warnings say why, once. */
static void go_without_cache(mr__run *r, const char *why)
{
    mr__store_release(&r->store);
    r->use_store = r->cached = r->store_filled = 0;
    if (r->cache_note[0] == '\0')
        snprintf(r->cache_note, sizeof r->cache_note, "no cache: %s; every pass rereads the input", why);
}

/* A cache file in TMPDIR, or none (and the reason noted). */
static void open_cache(mr__run *r)
{
    mr__error scratch;
    mr__error_clear(&scratch);
    if (mr__store_init_file(&r->store, temp_dir(), &scratch) != MR_OK) {
        go_without_cache(r, scratch.msg);
        return;
    }
    r->store.budget = r->cache_budget;
    r->use_store = 1;
    r->cached = 1;
}

/* Where later passes get their rows: memory (asked for), a cache file
 * (default, when the disk has room), or the input again. */
static void choose_store(mr__run *r)
{
    const char *dir = temp_dir();
    struct statvfs fs;
    struct stat in;
    double need = 0, room;
    /* Before the first pass only the input's size is known: decoded
     * columns take about 1.5 times the text, and zstd text about 4 times
     * less than that (generous on both counts, but a zstd file of blank
     * lines or repeated rows can expand far more: then a write fails and
     * the cache is given up). */
    if (strcmp(r->path, "-") != 0 && stat(r->path, &in) == 0) need = 8.0 * (double)in.st_size;
    if (r->f->in_memory) {
        mr__store_init_packed(&r->store);
        r->use_store = 1;
        return;
    }
    mr__store_init_memory(&r->store);
    if (r->f->no_cache) return;
    if (statvfs(dir, &fs) == 0) {
        room = (double)fs.f_bavail * (double)fs.f_frsize;
        /* the estimate can be far off: the cache stops at half the room */
        r->cache_budget = room / 2 >= 1 ? (uint64_t)(room / 2) : 1;
        if (need > room / 2) {
            snprintf(r->cache_note, sizeof r->cache_note,
                     "no cache: it could need %.0f MB and %s has %.0f MB free; every pass rereads the input",
                     need / 1e6, dir, room / 1e6);
            return;
        }
    }
    open_cache(r);
}

/* Maps each first-pass decoder's level numbers to the shared ones. */
static mr_status build_remap(mr__run *r, mr__error *err)
{
    size_t w, f, j, nfac = r->bind.nfac, nw = r->first.nworkers;
    r->remap = mr__calloc(nw * nfac + 1, sizeof *r->remap);
    if (r->remap == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    r->nremap = nw * nfac;
    for (w = 0; w < nw; w++)
        for (f = 0; f < nfac; f++) {
            const mr__levelset *local = &r->first.worker_levels[w][f];
            int32_t *map = mr__calloc(local->n + 1, sizeof *map);
            if (map == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
            r->remap[w * nfac + f] = map;
            for (j = 0; j < local->cap; j++)
                if (local->slot[j].str != NULL)
                    map[local->slot[j].id] = mr__levelset_find(&r->levels[f], local->slot[j].str, local->slot[j].len);
        }
    return MR_OK;
}

/* After the first pass: the kept blocks are used as they are, or (when
 * the rows collapsed, or some blocks went unkept) the store starts afresh
 * and is filled by the first IRLS pass. */
static mr_status settle_store(mr__run *r, mr__error *err)
{
    int file = r->store.fd >= 0;
    if (!r->use_store) return MR_OK;
    if (r->first.store_failed) {
        go_without_cache(r, r->first.store_err.msg);
        return MR_OK;
    }
    if (r->collapsed || r->first.store_incomplete) {
        mr__store_release(&r->store);
        if (r->collapsed) {
            r->use_store = r->cached = 0;
            return MR_OK;
        }
        if (file) open_cache(r);
        else mr__store_init_packed(&r->store);
        return MR_OK;
    }
    MR__TRY(build_remap(r, err));
    mr__store_remap(&r->store, r->remap, r->bind.nfac);
    r->store_filled = 1;
    return MR_OK;
}

/* ---- collapsed covariate patterns ---------------------------------------- */

static int collapse_mode(const mr__run *r)
{
    const mr__spec *s = &r->f->spec;
    if (r->f->no_collapse) return 0;
    if (s->offset == NULL && s->exposure == NULL) return 1;
    return s->family == MR_POISSON && mr__spec_link(s) == MR_LOG ? 2 : 0;
}

static mr_status new_pattern_block(mr__run *r, mr__block *blk, mr__error *err)
{
    MR__TRY(mr__block_init(blk, &r->bind, err));
    if (blk->prior == NULL) blk->prior = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->prior);
    blk->extra = mr__malloc_array(MR__BLOCK_ROWS, sizeof *blk->extra);
    if (blk->prior == NULL || blk->extra == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* For each key column, global value number -> what a row holds: the
 * shared sorted level number of a factor, the value of a numeric. */
typedef struct pattern_values {
    int32_t **level;
    double **value;
} pattern_values;

static void release_pattern_values(pattern_values *v, size_t nfac, size_t nnum)
{
    size_t k;
    for (k = 0; v->level && k < nfac; k++) mr__free(v->level[k]);
    for (k = 0; v->value && k < nnum; k++) mr__free(v->value[k]);
    mr__free(v->level);
    mr__free(v->value);
}

static mr_status resolve_pattern_values(const mr__run *r, pattern_values *v, mr__error *err)
{
    const mr__levelset *set = r->first.patterns.values;
    size_t k, j, nfac = r->bind.nfac, nnum = r->bind.nnum;
    v->level = mr__calloc(nfac + 1, sizeof *v->level);
    v->value = mr__calloc(nnum + 1, sizeof *v->value);
    if (v->level == NULL || v->value == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; k < nfac; k++) {
        v->level[k] = mr__malloc_array(set[k].n + 1, sizeof **v->level);
        if (v->level[k] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (j = 0; j < set[k].n; j++) {
            v->level[k][j] = mr__levelset_find(&r->levels[k], set[k].name[j].str, set[k].name[j].len);
            if (v->level[k][j] < 0) return mr__fail(err, MR_ERR_INTERNAL, "a pattern names an unknown level");
        }
    }
    for (k = 0; k < nnum; k++) { /* a numeric's values are kept as their 8 bytes */
        const mr__levelset *nv = &set[nfac + k];
        v->value[k] = mr__malloc_array(nv->n + 1, sizeof **v->value);
        if (v->value[k] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (j = 0; j < nv->n; j++) memcpy(&v->value[k][j], nv->name[j].str, sizeof(double));
    }
    return MR_OK;
}

static void pattern_covariates(const mr__run *r, const pattern_values *v, size_t e, mr__block *blk, uint32_t i)
{
    const mr__pattern_table *t = &r->first.patterns.table;
    size_t k, nfac = r->bind.nfac;
    for (k = 0; k < nfac; k++) blk->lev[k * MR__BLOCK_ROWS + i] = v->level[k][mr__pattern_id(t, e, k)];
    for (k = 0; k < r->bind.nnum; k++) blk->num[k * MR__BLOCK_ROWS + i] = v->value[k][mr__pattern_id(t, e, nfac + k)];
}

/* One pattern as one row, and what the rows add beyond it. */
static void pattern_row(mr__run *r, const double *pt, mr__block *blk, uint32_t i)
{
    double a = pt[MR__PATTERN_A], b = pt[MR__PATTERN_B], c = pt[MR__PATTERN_C], d = pt[MR__PATTERN_D];
    if (r->dcfg.collapse == 1) {
        double ybar = b / a;
        blk->y[i] = ybar;
        blk->prior[i] = a;
        blk->extra[i] = c - b * ybar;
        r->within_deviance += 2 * (d - a * mr__family_saturated_term(r->f->spec.family, ybar));
    } else {
        blk->y[i] = b;
        blk->prior[i] = 1.0;
        blk->off[i] = log(a);
        blk->extra[i] = c * a - b * b;
        r->within_deviance += 2 * (d - (b > 0 ? b * log(b / a) : 0.0));
    }
}

static mr_status build_patterns(mr__run *r, mr__error *err)
{
    const mr__pattern_table *t = &r->first.patterns.table;
    pattern_values v;
    mr__block blk;
    size_t e;
    mr_status st;
    memset(&blk, 0, sizeof blk);
    memset(&v, 0, sizeof v);
    mr__store_init_memory(&r->patterns);
    st = resolve_pattern_values(r, &v, err);
    for (e = 0; e < t->n && st == MR_OK; e++) {
        double pt[MR__PATTERN_SUMS];
        mr__pattern_sums(t, e, pt);
        if (!(pt[MR__PATTERN_A] > 0)) continue; /* only rows of weight 0 */
        if (blk.y == NULL) st = new_pattern_block(r, &blk, err);
        if (st != MR_OK) break;
        pattern_covariates(r, &v, e, &blk, blk.n);
        pattern_row(r, pt, &blk, blk.n);
        blk.index = r->patterns.n;
        if (++blk.n == MR__BLOCK_ROWS) st = mr__store_keep(&r->patterns, &blk, &r->bind, err);
        if (st == MR_OK && blk.n == 0) {
            mr__block_release(&blk);
        }
    }
    if (st == MR_OK && blk.y != NULL && blk.n > 0) st = mr__store_keep(&r->patterns, &blk, &r->bind, err);
    mr__block_release(&blk);
    release_pattern_values(&v, r->bind.nfac, r->bind.nnum);
    r->npatterns = t->n;
    r->collapsed = st == MR_OK;
    return st;
}

/* ---- IRLS -------------------------------------------------------------- */

/* Whether null_start is the null model's maximum-likelihood intercept:
 * with no offset the fitted mean is the weighted mean of y under every
 * family and link; with an offset, poisson's log-link score equation
 * sum w (y - exp(b0 + offset)) = 0 solves in closed form. */
static int null_start_exact(const mr__run *r)
{
    if (!r->dcfg.bind->has_offset && !r->dcfg.bind->has_exposure) return 1;
    return r->f->spec.family == MR_POISSON && mr__spec_link(&r->f->spec) == MR_LOG && r->first.scan.swy > 0 &&
           isfinite(log(r->first.scan.swy / r->first.scan.swe));
}

/* The null model's starting intercept; exact where null_start_exact says. */
static double null_start(const mr__run *r)
{
    const mr__scan_sums *s = &r->first.scan;
    int link = mr__spec_link(&r->f->spec), fam = r->f->spec.family;
    double ybar = s->swy / s->sw;
    if (fam == MR_BINOMIAL && !(ybar > 0 && ybar < 1)) ybar = ybar <= 0 ? 1e-8 : 1 - 1e-8;
    if ((fam == MR_POISSON || fam == MR_GAMMA || fam == MR_INVERSE_GAUSSIAN) && !(ybar > 0)) ybar = 1e-8;
    if (!r->dcfg.bind->has_offset && !r->dcfg.bind->has_exposure) return mr__link_fun(link, ybar);
    if (link == MR_LOG) return log(s->swy / s->swe);
    return mr__link_fun(link, ybar) - s->swoff / s->sw;
}

/* One IRLS run: on the data, or on the kept sample for a warm start. */
typedef struct irls_job {
    mr__store *replay;   /* NULL: the data (stream or cache); else these blocks */
    size_t replay_stride; /* of those, every stride-th (0, 1: all) */
    int step_at_end;     /* after the last pass allowed, still take its step */
    int restarted;       /* the start was given up for the family's own */
    const double *start; /* NULL: from the family's starting means */
    double tolerance;
    int max_iterations;
    double *beta_out;    /* the coefficients reached */
    double deviance_shift; /* collapsed patterns: the deviance within patterns */
    int iterations, halvings, converged, by_decrement;
    double rel_change, null_b0;
} irls_job;

/* Once the null model has converged its deviance no longer changes, and
 * its per-row work (a mean, a variance and a log each) is left out. */
static mr_status irls_pass(mr__run *r, const irls_job *job, const double *beta, double null_b0,
                           const double *null_dev_known, mr__pass_result *res, mr__error *err)
{
    mr__irls_point pt;
    mr__pass_cfg c;
    mr_status st;
    pt.design = &r->design;
    pt.family = r->f->spec.family;
    pt.link = mr__spec_link(&r->f->spec);
    pt.beta = beta;
    pt.null_intercept = r->f->spec.intercept;
    pt.null_b0 = null_b0;
    pt.null_skip = null_dev_known != NULL;
    c = pass_config(r, MR__PASS_IRLS);
    c.point = &pt;
    if (job->replay) {
        c.store = job->replay;
        c.store_fill = 0;
        c.replay_stride = job->replay_stride;
        c.progress = NULL;
        c.progress_stop = NULL;
    }
    mr__pass_result_release(res, 0);
    st = mr__pass_run(&c, res, err);
    res->sums.dev += job->deviance_shift;
    res->sums.null_dev = null_dev_known ? *null_dev_known : res->sums.null_dev + job->deviance_shift;
    if (st != MR_OK || job->replay) return st;
    if (res->store_failed) go_without_cache(r, res->store_err.msg);
    else if (c.store) r->store_filled = 1;
    MR__TRY(check_same_input(r, res, err));
    return note_pass(r, res, err);
}

/* The passes the state machine asks for, until it is done. */
static mr_status iterate(mr__run *r, irls_job *job, mr__pass_result *res, mr__error *err)
{
    mr__irls s;
    mr__irls_cfg c;
    mr_status st;
    int done = 0;
    memset(&c, 0, sizeof c);
    c.p = r->design.p;
    c.tolerance = job->tolerance;
    c.max_iterations = job->max_iterations;
    c.step_at_end = job->step_at_end;
    c.start = job->start;
    c.null_intercept = r->f->spec.intercept;
    c.null_b0 = null_start(r);
    c.null_exact = null_start_exact(r);
    c.family = r->f->spec.family;
    MR__TRY(mr__irls_init(&s, &c, err));
    do {
        st = irls_pass(r, job, mr__irls_beta(&s), s.null_b0, mr__irls_null_deviance(&s), res, err);
        if (st == MR_OK) st = mr__irls_step(&s, &res->sums, r->display, &done, err);
    } while (st == MR_OK && !done);
    job->iterations = s.iterations;
    job->halvings = s.halvings;
    job->converged = s.converged;
    job->by_decrement = s.by_decrement;
    job->restarted = s.restarted;
    job->rel_change = s.rel_change;
    job->null_b0 = s.null_b0;
    if (st == MR_OK) mr__irls_coefficients(&s, job->beta_out);
    mr__irls_release(&s);
    return st;
}

/* ---- the warm start ---------------------------------------------------- */

/* Most IRLS passes only walk towards the answer; taking those steps on a
 * sample spread over the whole file costs next to nothing, and the full
 * passes then only polish.  The steps are taken on about a quarter of the
 * sample's blocks, and one more on all of them: from a start that close,
 * one Newton step lands about where the whole sample's fit would, for a
 * fraction of the cost, and the better start saves full passes.  Any
 * trouble on the sample just means a cold start, or the first stage's
 * point. */
static int sample_fit(mr__run *r, size_t stride, const double *start, int max_iterations, double *out,
                      int *iterations)
{
    mr__pass_result res;
    mr__error scratch;
    irls_job job;
    int ok;
    size_t j;
    memset(&res, 0, sizeof res);
    memset(&job, 0, sizeof job);
    job.replay = &r->first.sample;
    job.replay_stride = stride;
    job.start = start;
    job.tolerance = 1e-8;
    job.max_iterations = max_iterations;
    job.step_at_end = start != NULL;
    job.beta_out = out;
    ok = iterate(r, &job, &res, &scratch) == MR_OK && !job.restarted && (job.converged || job.step_at_end);
    for (j = 0; ok && j < r->design.p; j++) ok = isfinite(out[j]);
    *iterations = job.iterations;
    mr__pass_result_release(&res, 0);
    return ok;
}

/* One step on the whole sample from the quarter's fit. */
static void polish_start(mr__run *r, const mr__store *sample)
{
    double *polished = mr__malloc_array(r->design.p, sizeof *polished);
    int steps;
    if (polished != NULL && sample_fit(r, 1, r->beta_warm, 1, polished, &steps)) {
        memcpy(r->beta_warm, polished, r->design.p * sizeof *polished);
        r->warm_polish_blocks = (int)sample->n;
    }
    mr__free(polished);
}

static void warm_start(mr__run *r)
{
    mr__store *sample = &r->first.sample;
    /* the first stage takes a quarter to a half of the sample's blocks; a
     * file of fewer than MR__SAMPLE_BLOCKS / 2 blocks gains little from
     * any of this */
    size_t stride = sample->n / (MR__SAMPLE_BLOCKS / 4);
    int whole_file = r->first.sample_stride == 1;
    mr__error scratch;
    /* the sample holds first-pass level numbers, as the cache does; with
     * no cache, or a cache started afresh, the maps are not made yet */
    if (!r->collapsed && stride >= 2 && (r->remap != NULL || build_remap(r, &scratch) == MR_OK)) {
        mr__store_remap(sample, r->remap, r->bind.nfac);
        r->warm = sample_fit(r, stride, NULL, 25, r->beta_warm, &r->warm_iterations);
        r->warm_blocks = (int)((sample->n + stride - 1) / stride);
        /* on a whole small file, a step on all of it is a full pass */
        if (r->warm && !whole_file) polish_start(r, sample);
    }
    mr__store_release(sample);
    mr__store_init_packed(sample);
}

static mr_status fit_data(mr__run *r, mr__error *err)
{
    irls_job job;
    memset(&job, 0, sizeof job);
    if (r->collapsed) {
        job.replay = &r->patterns;
        job.deviance_shift = r->within_deviance;
    }
    job.start = r->warm ? r->beta_warm : NULL;
    job.tolerance = r->f->tolerance;
    job.max_iterations = r->f->max_passes;
    job.beta_out = r->beta_final;
    MR__TRY(iterate(r, &job, &r->last, err));
    r->iterations = job.iterations;
    r->halvings = job.halvings;
    r->converged = job.converged;
    r->by_decrement = job.by_decrement;
    r->rel_change = job.rel_change;
    r->null_b0 = job.null_b0;
    return MR_OK;
}

/* ---- the run ------------------------------------------------------------ */

static void release_run(mr__run *r)
{
    size_t f;
    mr__pass_result_release(&r->first, r->bind.nfac);
    mr__pass_result_release(&r->last, 0);
    mr__design_release(&r->design);
    for (f = 0; r->levels && f < r->bind.nfac; f++) mr__levelset_release(&r->levels[f]);
    for (f = 0; r->level_names && f < r->bind.nfac; f++) mr__free(r->level_names[f]);
    mr__free(r->levels);
    mr__free(r->level_names);
    mr__free(r->fac);
    mr__free(r->mean);
    mr__free(r->spread);
    mr__free(r->header);
    mr__free(r->pass_seconds);
    mr__free(r->beta_final);
    mr__free(r->beta_warm);
    mr__store_release(&r->store);
    mr__store_release(&r->patterns);
    mr__pass_pool_release(&r->pool);
    for (f = 0; r->remap && f < r->nremap; f++) mr__free(r->remap[f]);
    mr__free(r->remap);
    if (r->bound) mr__binding_release(&r->bind);
    if (r->spool_fd >= 0) close(r->spool_fd);
}

static mr_status allocate_coefficients(mr__run *r, mr__error *err)
{
    size_t p = r->design.p + 1;
    r->beta_final = mr__calloc(p, sizeof(double));
    r->beta_warm = mr__calloc(p, sizeof(double));
    if (!r->beta_final || !r->beta_warm)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

mr_status mr__fit_file(mr_fitter *f, const char *path, mr_fit **out)
{
    mr__run r;
    mr__error *err = &f->err;
    mr_status st;
    int blas_threads = 0; /* the count to set back; 0: never changed */
    memset(&r, 0, sizeof r);
    mr__store_init_memory(&r.store);
    mr__store_init_memory(&r.patterns);
    atomic_init(&r.collapse_abandoned, 0);
    r.f = f;
    r.path = path;
    r.read_path = path;
    r.spool_fd = -1;
    r.t0 = mr__seconds_now();
    mr__utf8_mend_cut(r.display, sizeof r.display,
                      snprintf(r.display, sizeof r.display, "%s", strcmp(path, "-") == 0 ? "<stdin>" : path));
    choose_threads(&r);
    r.dcfg.collapse = collapse_mode(&r);
    r.dcfg.collapse_abandoned = &r.collapse_abandoned;
    st = mr__spec_validate(&f->spec, err);
    if (st == MR_OK) {
        choose_store(&r);
        /* Our workers use every core; BLAS threads inside them would only
         * oversubscribe.  The caller's count comes back at the end, as
         * millrace.h promises. */
        blas_threads = openblas_get_num_threads();
        openblas_set_num_threads(1);
        st = scan_pass(&r, err);
    }
    if (st == MR_OK) st = settle_scan(&r, err);
    if (st == MR_OK) st = allocate_coefficients(&r, err);
    if (st == MR_OK && r.first.collapsed) st = build_patterns(&r, err);
    if (st == MR_OK) st = settle_store(&r, err);
    if (st == MR_OK) warm_start(&r);
    if (st == MR_OK) st = fit_data(&r, err);
    if (st == MR_OK) st = mr__build_fit(&r, out, err);
    release_run(&r);
    if (blas_threads > 0) openblas_set_num_threads(blas_threads);
    return st;
}
