/* run_irls.c - a run's IRLS: the job of one IRLS run (on the data, or on
 * the first pass's sample for a warm start), its passes' set-up, the loop
 * of passes and steps the state machine (irls.c) asks for, the warm start
 * and the fit of the data with its calibration pass.  Apart from run.c,
 * which only sequences the run: open, first pass, these, result. */
#include <math.h>
#include <string.h>

#include "accum/levelsums.h"
#include "accum/pass.h"
#include "common/alloc.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/fitter.h"
#include "fit/irls.h"
#include "fit/run.h"
#include "fit/start.h"
#include "model/design.h"

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
    int rest_only;       /* see mr__irls_cfg */
    double *beta_out;    /* the coefficients reached */
    int *growing_out;    /* NULL, or per coefficient: its SE grew pass after pass */
    double deviance_shift; /* collapsed patterns: the deviance within patterns */
    mr__irls *resume;    /* NULL, or the state a checkpoint left (taken over) */
    int finished;        /* that state is after the last step: no pass left */
    int checkpoints;     /* the fit of the data: a checkpoint after each pass */
    int calibrate;         /* bin the fitted means (accum/calibration.h) */
    /* Passes in memory (collapsed patterns): no pass bins; once the last
     * is known, one pass of bins alone at its point, or at the
     * coefficients reported where the fit ended by its step (the bins a
     * fit reports, for a fraction of the work of binning every pass). */
    int defer_calib;
    int calib_only;        /* this pass: the bins alone (mr__irls_point) */
    int calibrated;        /* the deferred bins are made */
    int calib_at_reported; /* ... at the coefficients reported */
    double *last_beta;     /* the last pass's point (defer_calib) */
    int last_beta_null;    /* ... the family's starting means */
    int iterations, halvings, converged, by_step;
    double rel_change, null_b0, step;
} irls_job;

/* A pass's level totals, done with, serve the next pass's (accum/pass.h). */
static void keep_levels(mr__run *r, mr__pass_result *res)
{
    mr__pass_pool_keep_levels(&r->pool, &res->sums.lev, mr__level_totals_size(&r->design));
}

/* Once the null model has converged its deviance no longer changes, and
 * its per-row work (a mean, a variance and a log each) is left out. */
static mr_status irls_pass(mr__run *r, const irls_job *job, const double *beta, double null_b0,
                           const double *null_dev_known, mr__pass_result *res, mr__error *err)
{
    mr__irls_point pt;
    mr__pass_cfg c;
    mr_status st;
    int shared = mr__shared(r);
    mr__partial_range range;
    mr__bytebuf groups;
    pt.design = &r->design;
    pt.family = &r->family;
    pt.link = mr__link_ops_of((mr_link)mr__spec_link(&r->f->spec));
    pt.beta = beta;
    pt.null_intercept = r->f->spec.intercept;
    pt.null_b0 = null_b0;
    pt.null_skip = null_dev_known != NULL;
    pt.calibrate = job->calibrate && (!job->defer_calib || job->calib_only);
    pt.calib_only = job->calib_only;
    pt.calib_unit = r->family.ops->mu_hi == 1.0;
    pt.calib_rate = mr__calib_by_rate(r);
    c = mr__run_pass_config(r, MR__PASS_IRLS);
    c.point = &pt;
    if (shared && !job->replay) {
        range = mr__share_range(r);
        c.range = &range;
        c.groups_out = &groups;
    }
    if (job->replay) {
        c.store = job->replay;
        c.store_fill = 0;
        c.replay_stride = job->replay_stride;
        c.progress = NULL;
        c.progress_stop = NULL;
    }
    keep_levels(r, res);
    mr__pass_result_release(res, 0);
    memset(&groups, 0, sizeof groups);
    st = mr__pass_run(&c, res, err);
    if (c.range != NULL) {
        /* this rank's own check first: every rank then learns how it went */
        if (st == MR_OK) st = mr__run_check_same_input(r, res, err);
        st = mr__share_reduce(r, st, &groups, res, err);
        mr__bytebuf_release(&groups);
    }
    res->sums.dev += job->deviance_shift;
    res->sums.null_dev = null_dev_known ? *null_dev_known : res->sums.null_dev + job->deviance_shift;
    if (st != MR_OK || job->replay) return st;
    if (res->store_failed) mr__go_without_cache(r, res->store_err.msg);
    else if (c.store) r->store_filled = 1;
    MR__TRY(mr__run_check_same_input(r, res, err));
    return mr__run_note_pass(r, res, err);
}

/* IRLS is Newton's method under a family's canonical link, not where
 * that names only its default (a negative binomial's, a Tweedie's log). */
static int newton_link(const mr__run *r)
{
    const mr__family_ops *ops = mr__family_ops_of((mr_family)r->f->spec.family);
    return ops != NULL && !ops->link_default_only && mr__spec_link(&r->f->spec) == (int)ops->canonical_link;
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
        /* not in the encoding: the run's threads, and what the design says */
        s->threads = r->nthreads;
        s->rest_only = job->rest_only;
        memset(job->resume, 0, sizeof *job->resume);
        if (s->p != mr__design_ncoef(&r->design))
            return mr__fail(err, MR_ERR_INTERNAL, "the checkpoint's state does not fit the design");
        /* resumed by rank 0: the others take up the same state */
        return job->checkpoints ? mr__share_send_start(r, s, err) : MR_OK;
    }
    memset(&c, 0, sizeof c);
    c.p = mr__design_ncoef(&r->design);
    c.tolerance = job->tolerance;
    c.dispersion_rows = job->dispersion_rows;
    c.newton = newton_link(r);
    c.rest_only = job->rest_only;
    c.threads = r->nthreads;
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
    /* the first pass (and the warm start) done: the first checkpoint, and
     * the other processes' start */
    if (!job->checkpoints) return MR_OK;
    MR__TRY(mr__checkpoint_write(r, s, err));
    return mr__share_send_start(r, s, err);
}

/* The deferred bins (irls_job.defer_calib) into res: a pass of bins alone
 * at `beta`, its bins swapped in for the pass's empty ones. */
static mr_status bins_at(mr__run *r, const irls_job *job, const double *beta, mr__pass_result *res, mr__error *err)
{
    mr__pass_result only;
    irls_job j = *job;
    mr_status st;
    mr__calib t;
    memset(&only, 0, sizeof only);
    j.calib_only = 1;
    /* the null model's sums are known: the pass leaves them out */
    st = irls_pass(r, &j, beta, 0.0, &res->sums.null_dev, &only, err);
    if (st == MR_OK) {
        t = res->sums.calib;
        res->sums.calib = only.sums.calib;
        only.sums.calib = t;
    }
    mr__pass_result_release(&only, 0);
    return st;
}

/* The last pass's point, kept for its bins. */
static void keep_point(irls_job *job, const double *beta, size_t p)
{
    job->last_beta_null = beta == NULL;
    if (beta != NULL) memcpy(job->last_beta, beta, p * sizeof *beta);
}

/* After the last step: the bins at the coefficients reported where the
 * fit ended by its step, else at the last pass's point, as a pass that
 * binned would have left them. */
static mr_status deferred_bins(mr__run *r, irls_job *job, const mr__irls *s, mr__pass_result *res, mr__error *err)
{
    double *beta = mr__malloc_array(s->p + 1, sizeof *beta);
    mr_status st;
    if (beta == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (s->by_step) mr__irls_coefficients(s, beta);
    st = bins_at(r, job, s->by_step ? beta : job->last_beta_null ? NULL : job->last_beta, res, err);
    mr__free(beta);
    job->calibrated = st == MR_OK;
    job->calib_at_reported = s->by_step;
    return st;
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
        if (st == MR_OK && job->defer_calib) keep_point(job, mr__irls_beta(&s), s.p);
        if (st == MR_OK) st = mr__irls_step(&s, &res->sums, r->display, &done, err);
        if (st == MR_OK && done && job->defer_calib) st = deferred_bins(r, job, &s, res, err);
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
    job.rest_only = r->design.nabsorb > 0;
    job.max_iterations = max_iterations;
    job.step_at_end = start != NULL;
    job.beta_out = out;
    job.growing_out = mr__calloc(mr__design_ncoef(&r->design) + 1, sizeof *job.growing_out);
    ok = job.growing_out != NULL && iterate(r, &job, &res, &scratch) == MR_OK && !job.restarted &&
         (job.converged || job.step_at_end);
    /* a coefficient running off on the sample has no value to start
     * from, and from its ever smaller weight the first full step would
     * leap out of range; a `many` factor's level doing so (its rows there
     * all zeros: many levels' are) starts at 0, as a level the sample
     * did not meet does */
    for (j = 0; ok && j < mr__design_ncoef(&r->design); j++) {
        int level = j >= r->design.p;
        if (level && (job.growing_out[j] || !isfinite(out[j]))) out[j] = 0;
        else ok = isfinite(out[j]) && !job.growing_out[j];
    }
    mr__free(job.growing_out);
    *iterations = job.iterations;
    keep_levels(r, &res);
    mr__pass_result_release(&res, 0);
    return ok;
}

/* One step on the whole sample from the quarter's fit (in `beta`). */
static void polish_start(mr__run *r, const mr__store *sample, double *beta)
{
    double *polished = mr__malloc_array(mr__design_ncoef(&r->design), sizeof *polished), param = r->family.param;
    int steps;
    if (polished != NULL && sample_fit(r, 1, beta, 1, polished, &steps)) {
        memcpy(beta, polished, mr__design_ncoef(&r->design) * sizeof *polished);
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

/* The sample's fit into `beta` (r->warm says whether it worked). */
static void sample_start(mr__run *r, mr__store *sample, size_t stride, double *beta)
{
    double plain = r->family.param;
    r->warm = sample_fit(r, stride, NULL, 25, beta, &r->warm_iterations);
    r->warm_blocks = (int)((sample->n + stride - 1) / stride);
    warm_param(r, plain);
    /* on a whole small file, a step on all of it is a full pass */
    if (r->warm && r->first.sample_stride != 1) polish_start(r, sample, beta);
}

/* A previous fit's point is nearer the maximum than a sample's, except
 * in what it lacks: a new level starting at 0 can sit many standard
 * errors from its estimate, and costs full passes to walk in.  Those
 * coefficients take the sample's values; the rest stay the previous
 * fit's. */
static void fill_new_coefficients(mr__run *r, mr__store *sample, size_t stride)
{
    double *beta = mr__malloc_array(mr__design_ncoef(&r->design), sizeof *beta);
    size_t carried, guessed;
    mr__error scratch;
    if (beta != NULL) sample_start(r, sample, stride, beta);
    /* on failure (no memory) beta_warm is left as it was: the old fit's */
    if (r->warm) (void)mr__start_map(r->f->start, &r->design, beta, r->beta_warm, &carried, &guessed, &scratch);
    mr__free(beta);
}

void mr__run_warm_start(mr__run *r)
{
    mr__store *sample = &r->first.sample;
    /* the first stage takes a quarter to a half of the sample's blocks; a
     * file of fewer than MR__SAMPLE_BLOCKS / 2 blocks gains little from
     * any of this */
    size_t stride = sample->n / (MR__SAMPLE_BLOCKS / 4);
    int fill = r->started && r->start_guessed > 0 && r->design.nabsorb == 0;
    mr__error scratch;
    /* the sample holds first-pass level numbers, as the cache does; with
     * no cache, or a cache started afresh, the maps are not made yet */
    if ((!r->started || fill) && !r->collapsed && stride >= 2 &&
        (r->remap != NULL || mr__build_remap(r, &scratch) == MR_OK)) {
        mr__store_remap(sample, r->remap, r->bind.nfac);
        if (fill) fill_new_coefficients(r, sample, stride);
        else sample_start(r, sample, stride, r->beta_warm);
    }
    mr__store_release(sample);
    mr__store_init_packed(sample);
}

/* A fit ended by the size of its step took that step without a pass:
 * the last pass's bins hold the means one step before the coefficients
 * reported.  Collapsed patterns are in memory, and a pass of bins over
 * them at the coefficients reported costs next to nothing (and rereads no
 * file); iterate makes it (defer_calib), and here it is made only for a
 * run resumed after its passes; a pass over the rows would cost a whole
 * read, so there the bins stay those of the last pass (the basis says so,
 * result.c). */
static mr_status calibration_pass(mr__run *r, irls_job *job, mr__error *err)
{
    MR__TRY(bins_at(r, job, r->beta_final, &r->last, err));
    r->calib_at_reported = 1;
    return MR_OK;
}

mr_status mr__run_fit_data(mr__run *r, mr__irls *resume, mr__error *err)
{
    irls_job job;
    mr_status st;
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
        job.defer_calib = 1;
        job.last_beta = mr__malloc_array(mr__design_ncoef(&r->design) + 1, sizeof *job.last_beta);
        if (job.last_beta == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    job.start = r->warm || r->started ? r->beta_warm : NULL;
    job.tolerance = r->f->tolerance;
    job.dispersion_rows = mr__spec_dispersion_estimated(&r->f->spec) ? (double)r->first.scan.npos : 0;
    job.max_iterations = r->f->max_passes;
    job.beta_out = r->beta_final;
    job.growing_out = r->growing;
    st = iterate(r, &job, &r->last, err);
    mr__free(job.last_beta);
    job.last_beta = NULL;
    if (st != MR_OK) return st;
    r->iterations = job.iterations;
    r->halvings = job.halvings;
    r->converged = job.converged;
    r->by_step = job.by_step;
    r->rel_change = job.rel_change;
    r->null_b0 = job.null_b0;
    r->calib_at_reported = !job.by_step || job.calib_at_reported;
    r->step = job.step;
    if (job.by_step && r->collapsed && !job.calibrated) MR__TRY(calibration_pass(r, &job, err));
    return MR_OK;
}
