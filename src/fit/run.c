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
#include <unistd.h>

#include "accum/meat.h"
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
#include "common/probability.h"
#include "solve/normal_eq.h"

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

static mr__pass_cfg pass_config(mr__run *r, mr__pass_kind kind)
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

mr_status mr__run_scan_cfg(mr__run *r, mr__pass_cfg *c, int spool, mr__error *err)
{
    *c = pass_config(r, MR__PASS_SCAN);
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
    return note_pass(r, &r->first, err);
}

static mr_status scan_pass(mr__run *r, mr__error *err)
{
    mr__pass_cfg c;
    MR__TRY(mr__run_scan_cfg(r, &c, 1, err));
    return mr__run_scan_done(r, mr__pass_run(&c, &r->first, err), err);
}

/* ---- IRLS -------------------------------------------------------------- */

/* Whether null_start is the null model's maximum-likelihood intercept:
 * with no offset the fitted mean is the weighted mean of y under every
 * family and link; with an offset, poisson's log-link score equation
 * sum w (y - exp(b0 + offset)) = 0 solves in closed form. */
static int null_start_exact(const mr__run *r)
{
    if (!r->dcfg.bind->has_offset && !r->dcfg.bind->has_exposure) return 1;
    return r->family.ops->log_offset_null_exact && mr__spec_link(&r->f->spec) == MR_LOG && r->first.scan.swy > 0 &&
           isfinite(log(r->first.scan.swy / r->first.scan.swe));
}

/* The null model's starting intercept; exact where null_start_exact says. */
static double null_start(const mr__run *r)
{
    const mr__scan_sums *s = &r->first.scan;
    int link = mr__spec_link(&r->f->spec);
    const mr__link_ops *g = mr__link_ops_of((mr_link)link);
    double ybar = r->family.ops->clamp_mean(s->swy / s->sw);
    if (!r->dcfg.bind->has_offset && !r->dcfg.bind->has_exposure) return mr__link_fun1(g, ybar);
    if (link == MR_LOG) return log(s->swy / s->swe);
    return mr__link_fun1(g, ybar) - s->swoff / s->sw;
}

/* One IRLS run: on the data, or on the kept sample for a warm start. */
typedef struct irls_job {
    mr__store *replay;   /* NULL: the data (stream or cache); else these blocks */
    size_t replay_stride; /* of those, every stride-th (0, 1: all) */
    int step_at_end;     /* after the last pass allowed, still take its step */
    int restarted;       /* the start was given up for the family's own */
    const double *start; /* NULL: from the family's starting means */
    double tolerance;
    double dispersion_rows; /* see mr__irls_cfg; 0 on the sample (phi taken as 1) */
    int max_iterations;
    double *beta_out;    /* the coefficients reached */
    int *growing_out;    /* NULL, or per coefficient: its SE grew pass after pass */
    double deviance_shift; /* collapsed patterns: the deviance within patterns */
    mr__irls *resume;    /* NULL, or the state a checkpoint left (taken over) */
    int finished;        /* that state is after the last step: no pass left */
    int checkpoints;     /* the fit of the data: a checkpoint after each pass */
    int calibrate;         /* bin the fitted means (accum/calibration.h) */
    int iterations, halvings, converged, by_step;
    double rel_change, null_b0, step;
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
    pt.family = &r->family;
    pt.link = mr__link_ops_of((mr_link)mr__spec_link(&r->f->spec));
    pt.beta = beta;
    pt.null_intercept = r->f->spec.intercept;
    pt.null_b0 = null_b0;
    pt.null_skip = null_dev_known != NULL;
    pt.calibrate = job->calibrate;
    pt.calib_unit = r->family.ops->mu_hi == 1.0;
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
    if (res->store_failed) mr__go_without_cache(r, res->store_err.msg);
    else if (c.store) r->store_filled = 1;
    MR__TRY(check_same_input(r, res, err));
    return note_pass(r, res, err);
}

/* IRLS is Newton's method under a family's canonical link; the negative
 * binomial's and the Tweedie's defaults (log) are not theirs. */
static int newton_link(const mr__run *r)
{
    int family = r->f->spec.family;
    return family != MR_NEGATIVE_BINOMIAL && family != MR_TWEEDIE &&
           mr__spec_link(&r->f->spec) == (int)mr__canonical_link((mr_family)family);
}

/* Where the family sums a series density (tweedie), the dispersion to
 * sum it at in the next pass: the deviance-based estimate of the last
 * accepted point, once the last step was within a standard error of the
 * maximum, so that only the passes near the end pay for the series; the
 * result carries the sum to the final pass's own dispersion
 * (fit/result.c).  NaN: not this pass. */
static double series_dispersion(const mr__run *r, const mr__irls *s)
{
    double sw = r->first.scan.sw;
    if (!r->family.ops->loglik_by_rows || !s->have_dev || !s->have_prev || !(sw > 0)) return NAN;
    if (!(s->step <= 1)) return NAN;
    return s->dev_prev / sw;
}

static mr_status init_state(mr__run *r, irls_job *job, mr__irls *s, mr__error *err)
{
    mr__irls_cfg c;
    if (job->resume) {
        *s = *job->resume;
        memset(job->resume, 0, sizeof *job->resume);
        if (s->p != r->design.p) return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's state does not fit the design");
        return MR_OK;
    }
    memset(&c, 0, sizeof c);
    c.p = mr__design_ncoef(&r->design);
    c.tolerance = job->tolerance;
    c.dispersion_rows = job->dispersion_rows;
    c.newton = newton_link(r);
    c.max_iterations = job->max_iterations;
    c.step_at_end = job->step_at_end;
    c.start = job->start;
    c.null_intercept = r->f->spec.intercept;
    c.null_b0 = null_start(r);
    c.null_exact = null_start_exact(r);
    c.family = r->f->spec.family;
    c.param_estimate = r->family.estimate;
    c.param_known = r->param_known;
    c.param_start = r->family.param;
    MR__TRY(mr__irls_init(s, &c, err));
    /* the first pass (and the warm start) done: the first checkpoint */
    return job->checkpoints ? mr__checkpoint_write(r, s, err) : MR_OK;
}

/* The passes the state machine asks for, until it is done; the family's
 * parameter, where estimated, moves with them (r->family.param).  A pass
 * over collapsed patterns runs in memory: only reads of the data are worth
 * a checkpoint. */
static mr_status iterate(mr__run *r, irls_job *job, mr__pass_result *res, mr__error *err)
{
    mr__irls s;
    mr_status st;
    int done = job->finished;
    size_t j;
    memset(&s, 0, sizeof s);
    st = init_state(r, job, &s, err);
    while (st == MR_OK && !done) {
        if (r->family.estimate) r->family.param = mr__irls_param(&s);
        r->family.dispersion = series_dispersion(r, &s);
        st = irls_pass(r, job, mr__irls_beta(&s), s.null_b0, mr__irls_null_deviance(&s), res, err);
        if (st == MR_OK) st = mr__irls_step(&s, &res->sums, r->display, &done, err);
        if (st == MR_OK && !done && job->checkpoints && !job->replay) st = mr__checkpoint_write(r, &s, err);
        /* the passes over: what the fit takes from the last, so that a
         * rerun killed before its outputs reads no data for it */
        if (st == MR_OK && done && job->checkpoints) st = mr__checkpoint_write_done(r, &s, err);
    }
    job->iterations = s.iterations;
    job->halvings = s.halvings;
    job->converged = s.converged;
    job->by_step = s.by_step;
    job->restarted = s.restarted;
    job->rel_change = s.rel_change;
    job->null_b0 = s.null_b0;
    job->step = s.step;
    if (r->family.estimate) r->family.param = mr__irls_param(&s);
    r->loglik_dispersion = r->family.dispersion;
    if (st == MR_OK) mr__irls_coefficients(&s, job->beta_out);
    for (j = 0; st == MR_OK && job->growing_out && j < s.p; j++)
        job->growing_out[j] = mr__irls_ran_off(&s, j);
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
    /* the sample's maximum is within its own sampling error of the
     * file's, so a step of a thousandth of its standard errors is near
     * enough */
    job.tolerance = 1e-3;
    job.max_iterations = max_iterations;
    job.step_at_end = start != NULL;
    job.beta_out = out;
    ok = iterate(r, &job, &res, &scratch) == MR_OK && !job.restarted && (job.converged || job.step_at_end);
    for (j = 0; ok && j < mr__design_ncoef(&r->design); j++) ok = isfinite(out[j]);
    *iterations = job.iterations;
    mr__pass_result_release(&res, 0);
    return ok;
}

/* One step on the whole sample from the quarter's fit. */
static void polish_start(mr__run *r, const mr__store *sample)
{
    double *polished = mr__malloc_array(mr__design_ncoef(&r->design), sizeof *polished), param = r->family.param;
    int steps;
    if (polished != NULL && sample_fit(r, 1, r->beta_warm, 1, polished, &steps)) {
        memcpy(r->beta_warm, polished, mr__design_ncoef(&r->design) * sizeof *polished);
        r->warm_polish_blocks = (int)sample->n;
    } else {
        r->family.param = param;
    }
    mr__free(polished);
}

/* A parameter estimated on the sample is the full fit's start; after a
 * failed warm start, the plain start again. */
static void warm_param(mr__run *r, double plain)
{
    if (!r->family.estimate) return;
    r->param_known = r->warm && isfinite(r->family.param) && r->family.param > 0;
    if (!r->param_known) r->family.param = plain;
}

static void warm_start(mr__run *r)
{
    mr__store *sample = &r->first.sample;
    double plain = r->family.param;
    /* the first stage takes a quarter to a half of the sample's blocks; a
     * file of fewer than MR__SAMPLE_BLOCKS / 2 blocks gains little from
     * any of this */
    size_t stride = sample->n / (MR__SAMPLE_BLOCKS / 4);
    int whole_file = r->first.sample_stride == 1;
    mr__error scratch;
    /* the sample holds first-pass level numbers, as the cache does; with
     * no cache, or a cache started afresh, the maps are not made yet */
    if (!r->started && !r->collapsed && stride >= 2 && (r->remap != NULL || mr__build_remap(r, &scratch) == MR_OK)) {
        mr__store_remap(sample, r->remap, r->bind.nfac);
        r->warm = sample_fit(r, stride, NULL, 25, r->beta_warm, &r->warm_iterations);
        r->warm_blocks = (int)((sample->n + stride - 1) / stride);
        /* on a whole small file, a step on all of it is a full pass */
        warm_param(r, plain);
        if (r->warm && !whole_file) polish_start(r, sample);
    }
    mr__store_release(sample);
    mr__store_init_packed(sample);
}

/* A fit ended by the size of its step took that step without a pass:
 * the last pass's bins hold the means one step before the coefficients
 * reported.  Collapsed patterns are in memory, and one more pass over them
 * at the coefficients reported costs next to nothing (and rereads no
 * file); a pass over the rows would cost a whole read, so there the bins
 * stay those of the last pass (the basis says so, result.c). */
static mr_status calibration_pass(mr__run *r, irls_job *job, mr__error *err)
{
    mr__pass_result res;
    mr_status st;
    memset(&res, 0, sizeof res);
    st = irls_pass(r, job, r->beta_final, job->null_b0, &r->last.sums.null_dev, &res, err);
    if (st == MR_OK) {
        mr__calib t = r->last.sums.calib;
        r->last.sums.calib = res.sums.calib;
        res.sums.calib = t;
        r->calib_at_reported = 1;
    }
    mr__pass_result_release(&res, 0);
    return st;
}

static mr_status fit_data(mr__run *r, mr__irls *resume, mr__error *err)
{
    irls_job job;
    memset(&job, 0, sizeof job);
    job.calibrate = 1;
    job.resume = resume;
    job.checkpoints = 1;
    /* a checkpoint made after the last pass: its totals, no pass */
    if (resume && r->resume_stage >= 1) {
        MR__TRY(mr__checkpoint_done_take(r, 1, err));
        job.finished = 1;
    }
    if (r->collapsed) {
        job.replay = &r->patterns;
        job.deviance_shift = r->within_deviance;
    }
    job.start = r->warm || r->started ? r->beta_warm : NULL;
    job.tolerance = r->f->tolerance;
    job.dispersion_rows = mr__spec_dispersion_estimated(&r->f->spec) ? (double)r->first.scan.npos : 0;
    job.max_iterations = r->f->max_passes;
    job.beta_out = r->beta_final;
    job.growing_out = r->growing;
    MR__TRY(iterate(r, &job, &r->last, err));
    r->iterations = job.iterations;
    r->halvings = job.halvings;
    r->converged = job.converged;
    r->by_step = job.by_step;
    r->rel_change = job.rel_change;
    r->null_b0 = job.null_b0;
    r->calib_at_reported = !job.by_step;
    r->step = job.step;
    if (job.by_step && r->collapsed) MR__TRY(calibration_pass(r, &job, err));
    return MR_OK;
}

/* ---- robust standard errors -------------------------------------------- */

/* One pass at the final coefficients for the sandwich's meat (accum/meat.h):
 * by rows from the kept blocks when there are any, else from the input
 * (collapsed patterns cannot give it: within a pattern the rows' residuals
 * differ); by clusters always from the input, whose blocks carry the
 * cluster column. */
static mr_status meat_pass(mr__run *r, int table, mr__error *err)
{
    mr__irls_point pt;
    mr__meat_cfg mc;
    mr__pass_cfg c = pass_config(r, MR__PASS_MEAT);
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
    mc.clusters = r->f->cluster != NULL;
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
    mr__pass_result_release(&r->meat, 0);
    st = mr__pass_run(&c, &r->meat, err);
    if (st != MR_OK) return st;
    if (c.store == NULL) MR__TRY(check_same_input(r, &r->meat, err));
    return note_pass(r, &r->meat, err);
}

/* Streamed first: a file grouped by the cluster column needs one set of
 * the clusters seen; when a cluster comes back, the pass runs again with
 * every cluster's sums in a table. */
static mr_status robust_pass(mr__run *r, mr__error *err)
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

/* ---- the run ------------------------------------------------------------ */

void mr__run_release(mr__run *r)
{
    size_t f;
    mr__irls_release(&r->resume);
    mr__free(r->resume_done);
    mr__free(r->done_state);
    mr__pass_result_release(&r->first, r->bind.nfac);
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
    /* the meat pass builds each row's full design row, which would hold
     * every level of the eliminated factor: not supported */
    if (st == MR_OK && mr__spec_many(&f->spec) >= 0 && mr__robust_type(f) != MR_ROBUST_NONE)
        st = mr__fail(&f->err, MR_ERR_USAGE,
                      "robust standard errors (--robust, --cluster) are not supported with a 'many' factor");
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
    if (st == MR_OK && f->start) st = mr__start_map(f->start, &r->design, r->beta_warm, &r->start_carried, err);
    r->started = st == MR_OK && f->start != NULL;
    /* a previous fit's point is nearer the maximum than a sample's: the
     * warm start then only gives its sample back */
    if (st == MR_OK && !r->have_resume) warm_start(r);
    if (st == MR_OK) st = fit_data(r, r->have_resume ? &r->resume : NULL, err);
    if (st == MR_OK && mr__robust_type(f) != MR_ROBUST_NONE) st = robust_pass(r, err);
    if (st == MR_OK) st = mr__build_fit(r, out, err);
    return st;
}

/* The run begun (st: how its beginning went): the passes, the fit, the
 * end. */
static mr_status run_all(mr__run *r, mr_status st, mr_fit **out)
{
    int blas_threads = 0; /* the count to set back; 0: never changed */
    if (st == MR_OK) st = mr__checkpoint_begin(r, &r->resume, &r->have_resume, &r->f->err);
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
