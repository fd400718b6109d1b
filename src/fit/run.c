/* run.c - one fit from start to end.
 *
 * Pass 1 reads the data once to learn what it holds (header, factor
 * levels, row counts, missing cells, numeric spreads) and to validate
 * every row.  Then IRLS: each pass evaluates the model at the current
 * coefficients, accumulating X'WX, X'Wz, the deviance and the Pearson
 * statistic, and the small p x p system gives the next coefficients.  The
 * loop stops when the step a pass gives is at most the tolerance in
 * standard errors (irls.c); that step is taken without another pass, and
 * the reported statistics are those of the last pass.  The null model (intercept and offset only) is fitted
 * alongside in the same passes.
 *
 * This file only sequences: the threads, the passes' configuration, the
 * first pass, then the IRLS passes and the warm start (run_irls.c), the
 * meat pass (robust.c) and the published fit (result.c). */
#define _POSIX_C_SOURCE 200809L
#include <cblas.h>

/* OpenBLAS's own entry points; declared here so any CBLAS header will do. */
void openblas_set_num_threads(int num_threads);
int openblas_get_num_threads(void);
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
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
#include "fit/start.h"
#include "model/design.h"

/* Each worker costs about 6 MB (its two ring slots of 2 MiB, its
 * decoder and scratch), and past the cores more workers only queue: the
 * count is capped, so that --threads 256 is not 1.6 GB for nothing. */
#define THREADS_PER_CPU 4
#define MAX_THREADS 64

int mr__worker_threads(int asked, int *cpus)
{
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    int cap;
    *cpus = n > 0 ? (int)(n > MAX_THREADS ? MAX_THREADS : n) : 1;
    cap = *cpus * THREADS_PER_CPU > MAX_THREADS ? MAX_THREADS : *cpus * THREADS_PER_CPU;
    if (asked <= 0) return *cpus;
    return asked > cap ? cap : asked;
}

static void choose_threads(mr__run *r)
{
    int cpus;
    r->nthreads = mr__worker_threads(r->f->threads, &cpus);
    if (r->f->threads <= r->nthreads) return;
    snprintf(r->threads_note, sizeof r->threads_note,
             "%d worker threads asked for, %d used: at most %d per online CPU (%d here) and %d in all, as each costs "
             "about 6 MB and more than the cores only wait; results do not depend on the count",
             r->f->threads, r->nthreads, THREADS_PER_CPU, cpus, MAX_THREADS);
}

/* ---- passes ------------------------------------------------------------ */

mr__pass_cfg mr__run_pass_config(mr__run *r, mr__pass_kind kind)
{
    mr__pass_cfg c;
    memset(&c, 0, sizeof c);
    c.kind = kind;
    c.path = r->read_path;
    c.set = r->set.n > 0 ? &r->set : NULL;
    c.display = r->display;
    c.read_size = r->f->buffer_size;
    c.tee_fd = -1;
    c.nthreads = r->nthreads;
    c.on_header = mr__run_on_header;
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

mr_status mr__run_note_pass(mr__run *r, const mr__pass_result *res, mr__error *err)
{
    double *grown = mr__realloc(r->pass_seconds, (size_t)(r->npasses + 1) * sizeof *grown);
    if (grown == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    r->pass_seconds = grown;
    r->pass_seconds[r->npasses++] = res->seconds;
    return MR_OK;
}

/* Later passes must see the very file the first pass saw: its size and
 * time, and its checksum (an edit in place may keep both). */
mr_status mr__run_check_same_input(mr__run *r, const mr__pass_result *res, mr__error *err)
{
    int streamed_same;
    if (res->raw_bytes == 0 && r->use_store) return MR_OK;
    /* a pass by the map checked each block's rows and their checksum itself */
    streamed_same = res->by_map || (res->raw_bytes == r->raw_bytes && res->checksum == r->first.checksum);
    if (res->size != r->size || res->mtime_ns != r->mtime_ns || !streamed_same)
        return mr__fail(err, MR_ERR_IO, "%s: the file changed during the fit", r->display);
    return MR_OK;
}

mr_status mr__run_scan_cfg(mr__run *r, mr__pass_cfg *c, int spool, mr__error *err)
{
    *c = mr__run_pass_config(r, MR__PASS_SCAN);
    if (spool && r->set.n == 0 && mr__read_only_once(r->path)) {
        MR__TRY(mr__open_spool(r, err));
        c->tee_fd = r->spool_fd;
    }
    if (r->use_store) {
        c->store = &r->store;
        c->store_fill = 1;
    }
    return MR_OK;
}

mr_status mr__run_scan_done(mr__run *r, mr_status st, mr__error *err)
{
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
    return mr__run_note_pass(r, &r->first, err);
}

static mr_status scan_pass(mr__run *r, mr__error *err)
{
    mr__pass_cfg c;
    MR__TRY(mr__run_scan_cfg(r, &c, 1, err));
    return mr__run_scan_done(r, mr__pass_run(&c, &r->first, err), err);
}

/* ---- the run ------------------------------------------------------------ */

void mr__run_release(mr__run *r)
{
    size_t f;
    mr__irls_release(&r->resume);
    mr__free(r->resume_done);
    mr__free(r->done_state);
    mr__pass_result_release(&r->first, r->bind.nfac);
    mr__bytebuf_release(&r->first_bytes);
    mr__pass_result_release(&r->last, 0);
    mr__pass_result_release(&r->meat, 0);
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
    mr__free(r->growing);
    mr__store_release(&r->store);
    mr__store_release(&r->patterns);
    mr__pass_pool_release(&r->pool);
    for (f = 0; r->remap && f < r->nremap; f++) mr__free(r->remap[f]);
    mr__free(r->remap);
    if (r->bound) mr__binding_release(&r->bind);
    mr__inputset_release(&r->set);
    if (r->spool_fd >= 0) close(r->spool_fd);
}

static mr_status allocate_coefficients(mr__run *r, mr__error *err)
{
    size_t p = mr__design_ncoef(&r->design) + 1;
    r->beta_final = mr__calloc(p, sizeof(double));
    r->beta_warm = mr__calloc(p, sizeof(double));
    r->growing = mr__calloc(p, sizeof *r->growing);
    if (!r->beta_final || !r->beta_warm || !r->growing)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* A checkpoint's first-pass result in place of the pass: later passes
 * compare the input with it, and keep blocks afresh (none were kept). */
static void restore_first(mr__run *r)
{
    r->size = r->first.size;
    r->mtime_ns = r->first.mtime_ns;
    r->raw_bytes = r->first.raw_bytes;
    r->first.store_incomplete = 1;
}

/* The name of a set in messages: the paths given, one after the other
 * (cut, if long, at a whole character). */
static void name_set(mr__run *r, const char *const *paths, size_t n)
{
    size_t i, at = 0;
    r->display[0] = '\0';
    for (i = 0; i < n && at < sizeof r->display; i++)
        at += (size_t)snprintf(r->display + at, sizeof r->display - at, "%s%s", i ? " " : "", paths[i]);
    mr__utf8_mend_cut(r->display, sizeof r->display, (int)at);
}

/* set: NULL, or several files read as one (the run takes it over), made
 * of the npaths paths given. */
static mr_status run_begin(mr__run *r, mr_fitter *f, const char *path, mr__inputset *set, const char *const *paths,
                           size_t npaths)
{
    mr_status st;
    memset(r, 0, sizeof *r);
    mr__store_init_memory(&r->store);
    mr__store_init_memory(&r->patterns);
    atomic_init(&r->collapse_abandoned, 0);
    r->f = f;
    if (set != NULL) {
        r->set = *set;
        path = set->path[0];
        name_set(r, paths, npaths);
    } else {
        mr__utf8_mend_cut(r->display, sizeof r->display,
                          snprintf(r->display, sizeof r->display, "%s", strcmp(path, "-") == 0 ? "<stdin>" : path));
    }
    r->path = path;
    r->read_path = path;
    r->spool_fd = -1;
    r->t0 = mr__seconds_now();
    choose_threads(r);
    r->family = mr__spec_family(&f->spec);
    /* an estimated parameter's start: the first pass at coefficients
     * replaces it by a moment estimate (fit/irls.c) */
    if (r->family.estimate) r->family.param = 1.0;
    r->dcfg.collapse = mr__collapse_mode(r);
    r->dcfg.collapse_abandoned = &r->collapse_abandoned;
    st = mr__spec_validate(&f->spec, &f->err);
    if (st == MR_OK) st = mr__robust_check(f, &f->err);
    /* a parameter by profile likelihood is fitted once per value
     * (fit/profile.c), never by one run */
    if (st == MR_OK && f->spec.family_profile)
        st = mr__fail(&f->err, MR_ERR_USAGE, "model: %s=profile is for a fit alone (its values are fitted one after "
                                             "another), not for models fitted together",
                      r->family.ops->param_name);
    if (st == MR_OK && f->start) st = mr__start_check(f->start, &f->spec, &f->err);
    if (st == MR_OK) mr__choose_store(r);
    return st;
}

mr_status mr__run_begin(mr__run *r, mr_fitter *f, const char *path) { return run_begin(r, f, path, NULL, NULL, 0); }

mr_status mr__run_rest(mr__run *r, mr_fit **out)
{
    mr_fitter *f = r->f;
    mr__error *err = &f->err;
    mr_status st = mr__settle_scan(r, err);
    if (st == MR_OK) st = allocate_coefficients(r, err);
    if (st == MR_OK && r->first.collapsed) st = mr__build_patterns(r, err);
    if (st == MR_OK) st = mr__settle_store(r, err);
    if (st == MR_OK) st = mr__drop_worker_levels(r, err);
    if (st == MR_OK && f->start)
        st = mr__start_map(f->start, &r->design, NULL, r->beta_warm, &r->start_carried, &r->start_guessed, err);
    r->started = st == MR_OK && f->start != NULL;
    /* a previous fit's point is nearer the maximum than a sample's: the
     * warm start then only gives its sample back */
    if (st == MR_OK && !r->have_resume) mr__run_warm_start(r);
    if (st == MR_OK) st = mr__run_fit_data(r, r->have_resume ? &r->resume : NULL, err);
    if (st == MR_OK && mr__robust_type(f) != MR_ROBUST_NONE) st = mr__robust_pass(r, err);
    if (st == MR_OK) st = mr__build_fit(r, out, err);
    return st;
}

/* The run begun (st: how its beginning went): the passes, the fit, the
 * end. */
static mr_status run_all(mr__run *r, mr_status st, mr_fit **out)
{
    int blas_threads = 0; /* the count to set back; 0: never changed */
    /* a share refuses a checkpoint before any rank takes its lock */
    if (st == MR_OK) st = mr__share_begin(r, &r->f->err);
    if (st == MR_OK) st = mr__checkpoint_begin(r, &r->resume, &r->have_resume, &r->f->err);
    if (st == MR_OK) st = mr__share_join(r, &r->f->err);
    if (st == MR_OK) {
        /* Our workers use every core; BLAS threads inside them would only
         * oversubscribe.  The caller's count comes back at the end, as
         * millrace.h promises. */
        blas_threads = openblas_get_num_threads();
        openblas_set_num_threads(1);
        if (r->have_resume) restore_first(r);
        else st = scan_pass(r, &r->f->err);
    }
    if (st == MR_OK) st = mr__run_rest(r, out);
    st = mr__share_end(r, st, &r->f->err);
    mr__checkpoint_end(r, st == MR_OK);
    mr__run_release(r);
    if (blas_threads > 0) openblas_set_num_threads(blas_threads);
    return st;
}

mr_status mr__fit_file(mr_fitter *f, const char *path, mr_fit **out)
{
    mr__run r;
    return run_all(&r, mr__run_begin(&r, f, path), out);
}

mr_status mr__fit_files(mr_fitter *f, const char *const *paths, size_t n, mr_fit **out)
{
    mr__run r;
    mr__inputset set;
    mr_status st = mr__inputset_build(&set, paths, n, &f->err);
    if (st != MR_OK) return st;
    return run_all(&r, run_begin(&r, f, NULL, &set, paths, n), out);
}
