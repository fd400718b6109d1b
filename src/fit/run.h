/* run.h - the state of one fit while it runs (run.c), and the step that
 * turns it into an mr_fit (result.c). */
#ifndef MR_RUN_H
#define MR_RUN_H

#include <limits.h>
#include <stdatomic.h>
#include "accum/pass.h"
#include "fit/fitter.h"
#include "fit/irls.h"
#include "model/design.h"

#define MR__MAX_MISSING_TOKENS 64

/* Pairs and triples of interacting factors whose cells the first pass
 * counts. */
#define MR__MAX_PAIRS 32
#define MR__MAX_TRIPLES 16

typedef struct mr__run {
    mr_fitter *f;
    const char *path, *read_path;
    mr__inputset set;    /* several files read as one (n 0: path alone) */
    char display[1024];
    char spool[4096];
    int spool_fd;
    int nthreads;
    double t0;
    /* columns */
    mr__binding bind;
    int bound;
    mr__family family; /* the spec's, as fitted */
    mr__decode_cfg dcfg;
    int32_t pairs[MR__MAX_PAIRS][2]; /* factors (binding numbers) that interact, two by two */
    int32_t triples[MR__MAX_TRIPLES][3]; /* ... and three by three */
    size_t missing_len[MR__MAX_MISSING_TOKENS];
    char delim;
    int delim_detected;
    char *header;
    size_t header_len;
    /* what pass 1 learned */
    mr__pass_result first;
    /* its encoding for checkpoints (accum/first_bytes.h), made before a
     * `many` factor's worker levels are dropped (mr__drop_worker_levels),
     * which the encoding needs; empty otherwise */
    mr__bytebuf first_bytes;
    uint64_t size, raw_bytes;
    int64_t mtime_ns;
    mr__levelset *levels;
    const char ***level_names;
    mr__factor *fac;
    double *mean, *spread;
    mr__design design;
    mr__store store;
    mr__pass_pool pool; /* buffers passed from pass to pass */
    int use_store, store_filled, cached;
    int32_t **remap; /* first-pass level numbers -> shared ones */
    size_t nremap;
    /* collapsed covariate patterns */
    atomic_int collapse_abandoned;
    int collapsed;
    size_t npatterns;
    mr__store patterns;
    double within_deviance;
    char cache_note[MR__MSG_CAP + 64]; /* why there is no cache (a warning) */
    uint64_t cache_budget; /* bytes the cache file may take (0: no limit) */
    char threads_note[256];
    /* IRLS */
    mr__pass_result last; /* sums at the reported coefficients */
    double *beta_final, *beta_warm;
    int *growing; /* per coefficient: its SE grew pass after pass at the boundary */
    int warm, warm_iterations;
    int started;           /* beta_warm holds a previous fit's coefficients */
    /* the family's parameter where estimated (family.param holds it):
     * the warm start's value is a fit's already; the dispersion the last
     * pass summed a series density at (NaN: none) */
    int param_known;
    double loglik_dispersion;
    size_t start_carried;  /* how many of them came from it */
    size_t start_guessed;  /* values it could not give (start.h) */
    int warm_blocks, warm_polish_blocks; /* sample blocks of the two stages (0: none) */
    double null_b0, rel_change;
    int iterations, halvings, converged, by_step;
    int calib_at_reported; /* the last bins are at the coefficients reported */
    double step;           /* the last step, in standard errors (irls.h) */
    double *pass_seconds;
    int npasses;
    /* robust standard errors: the meat pass's result (accum/meat.h) and
     * whether the clusters had to be held in a table */
    mr__pass_result meat;
    int clusters_table;
    /* the checkpoint (checkpoint.c): its lock, the pass it was taken up
     * after (0: none), checkpoints written */
    struct mr_output_lock *checkpoint_lock;
    int resumed_from, checkpoint_writes;
    mr__irls resume; /* with have_resume: the state the checkpoint left */
    int have_resume;
    /* the stage the checkpoint taken up had reached (checkpoint_done.c:
     * 0 in the IRLS passes, 1 past the last, 2 past the robust pass) and
     * its finished parts' bytes, read once the design is built; the IRLS
     * state after the last step as bytes, for the stage-2 checkpoint */
    int resume_stage;
    unsigned char *resume_done, *done_state;
    size_t resume_done_len, done_state_len;
} mr__run;

/* The design's map to the raw columns (model/design.h, A) by its
 * non-zeros, column by column: column k's are row[start[k] ..
 * start[k + 1]), rows increasing, with their values.  Centring makes A
 * the identity plus a few entries per column, above the diagonal (a
 * centred column's intercept share, an interaction's lower-order parts),
 * so the map back costs p times those (result.c). */
typedef struct mr__raw_map {
    size_t *start, *row;
    double *value;
} mr__raw_map;
mr_status mr__raw_map_from(const double *A, size_t p, mr__raw_map *a, mr__error *err);
void mr__raw_map_release(mr__raw_map *a);

/* result.c: cov_raw = A cov_internal A' and beta_raw = A beta_internal;
 * se_small[j] (zeroed by the caller) gets the standard error of a variance
 * below the range of a double, computed apart. */
mr_status mr__map_to_raw(const mr__design *d, const double *beta_s, const double *cov_s, double *beta, double *cov,
                         double *se_small, mr__error *err);
/* robust.c: the robust covariance and standard errors into fit, from the
 * meat pass's result r->meat (its bread and meat); after the fit's rank. */
mr_status mr__robust_result(mr_fit *fit, const mr__run *r, mr__error *err);

mr_status mr__build_fit(mr__run *r, mr_fit **out, mr__error *err);
/* result_record.c: what the fit records beside its estimates: the model,
 * the run and its options, the data's summary, the numeric columns. */
mr_status mr__result_copy_model(mr_fit *fit, const mr__run *r, mr__error *err);
mr_status mr__result_copy_run_info(mr_fit *fit, const mr__run *r, mr__error *err);
mr_status mr__result_copy_data_summary(mr_fit *fit, const mr__run *r, mr__error *err);
mr_status mr__result_copy_numerics(mr_fit *fit, const mr__run *r, mr__error *err);
/* result_warnings.c: the fit's warnings, once its estimates are in. */
void mr__result_warnings(mr_fit *fit, const mr__run *r);
/* The fit's calibration table from the last pass's bins (calibrate.c). */
mr_status mr__fit_calibration(mr_fit *fit, const mr__run *r, mr__error *err);
/* 1: the calibration bins rows by their rate, the model having an offset
 * or an exposure (calibrate.c). */
int mr__calib_by_rate(const mr__run *r);

/* zero_cells.c: factor levels and cells of two interacting factors whose
 * outcomes are all 0 (or all at the binomial's maximum), from the first
 * pass's counts: a warning naming them, and fit->inestimable set for the
 * coefficients they send to infinity.  Out of memory: nothing said. */
void mr__flag_zero_cells(mr_fit *fit, const mr__run *r);

/* A fit in steps (run.c), for runs that share their first pass
 * (multi.c): begin (the run set up, its model checked; r->f->err says
 * why not), the first pass's configuration and what follows that pass,
 * the rest (IRLS to the published fit), release (always, after begin). */
mr_status mr__run_begin(mr__run *r, mr_fitter *f, const char *path);
/* spool 0: input read only once is not copied for this run (another run
 * of the same pass copies it, and this run's read_path is set to the copy
 * before mr__run_scan_done). */
mr_status mr__run_scan_cfg(mr__run *r, mr__pass_cfg *c, int spool, mr__error *err);
mr_status mr__run_scan_done(mr__run *r, mr_status st, mr__error *err);
mr_status mr__run_rest(mr__run *r, mr_fit **out);
void mr__run_release(mr__run *r);
/* run.c, for the run's passes: a pass's configuration for this run; a
 * pass's time noted; a later pass's input checked to be the first's. */
mr__pass_cfg mr__run_pass_config(mr__run *r, mr__pass_kind kind);
mr_status mr__run_note_pass(mr__run *r, const mr__pass_result *res, mr__error *err);
mr_status mr__run_check_same_input(mr__run *r, const mr__pass_result *res, mr__error *err);
/* run_irls.c: the warm start on the first pass's sample (any trouble: a
 * cold start); the IRLS fit of the data (resume: NULL, or a checkpoint's
 * state, taken over). */
void mr__run_warm_start(mr__run *r);
mr_status mr__run_fit_data(mr__run *r, mr__irls *resume, mr__error *err);
/* robust.c: the meat pass at the final coefficients (by clusters: again
 * with a table when the file is not grouped), into r->meat. */
mr_status mr__robust_pass(mr__run *r, mr__error *err);

/* header.c: binds the columns on the first pass, checks the row after. */
mr_status mr__run_on_header(void *user, const char *line, size_t len, mr__error *err);

/* spool.c: $TMPDIR or /tmp; whether the input must be copied to be read
 * again; the copy (unlinked at once, reopened through its descriptor). */
const char *mr__temp_dir(void);
int mr__read_only_once(const char *path);
mr_status mr__open_spool(mr__run *r, mr__error *err);

/* settle.c: factors, centring and design from the first pass's sums. */
mr_status mr__settle_scan(mr__run *r, mr__error *err);

/* cache.c: the store chosen before the first pass, settled after it
 * (kept blocks used, or started afresh); giving the cache up; the first
 * pass's level numbers mapped to the shared ones. */
void mr__choose_store(mr__run *r);
mr_status mr__settle_store(mr__run *r, mr__error *err);
void mr__go_without_cache(mr__run *r, const char *why);
mr_status mr__build_remap(mr__run *r, mr__error *err);
/* First-pass worker w's level numbers of factor f mapped to the shared
 * ones (-1: none; local n + 1 entries, caller frees); NULL on no memory. */
int32_t *mr__level_map(const mr__run *r, size_t w, size_t f);
/* With a factor declared many and rows not collapsed: the remap made, and
 * the workers' sets of that factor's levels (the largest sets of the run:
 * a hash table and a copy of every string each) freed but for their
 * counts.  Nothing reads them after: zero_cells.c counts through the
 * remap, and a checkpoint or a share, which would encode them, is refused
 * with such a factor. */
mr_status mr__drop_worker_levels(mr__run *r, mr__error *err);

/* collapse.c: 0 no collapsing, 1 rows by their covariates, 2 poisson
 * log-link rows with an exposure; the patterns as blocks to replay. */
int mr__collapse_mode(const mr__run *r);
mr_status mr__build_patterns(mr__run *r, mr__error *err);

/* checkpoint.c: a killed fit taken up again (mr_fitter_set_checkpoint). */
/* Before the first pass: refuses standard input and pipes (MR_ERR_USAGE),
 * takes the lock and checks the path as an output (MR_ERR_IO), and reads
 * a checkpoint there.  When one can be resumed, r->first, the binding, the
 * run's counts and *resume (a decoded IRLS state) are set and
 * r->resumed_from is its pass; otherwise r->checkpoint_note may say why
 * it was not used.  A run without a checkpoint path: MR_OK, nothing done. */
mr_status mr__checkpoint_begin(mr__run *r, mr__irls *resume, int *have_resume, mr__error *err);

/* After a finished pass: the state `s` written (MR_ERR_IO, MR_ERR_NO_MEMORY). */
mr_status mr__checkpoint_write(mr__run *r, const mr__irls *s, mr__error *err);

/* The run's state after its first pass (the counts, the first pass's
 * result, the IRLS state s, and for a run resumed after its passes its
 * stage and finished parts) appended to b, as a checkpoint holds it
 * (b->failed on out of memory); and taken up from such bytes as a resumed
 * run takes a checkpoint (the header bound again): MR_ERR_INTERNAL on
 * bytes that do not take, MR_ERR_NO_MEMORY.  Another process's start
 * (fit/share.c). */
void mr__checkpoint_put_state(mr__run *r, const mr__irls *s, mr__bytebuf *b);
mr_status mr__checkpoint_take_state(mr__run *r, const unsigned char *data, size_t len, mr__irls *resume,
                                    mr__error *err);

/* After the last IRLS pass (its totals in r->last, the state `s` after
 * its last step): stage 1.  After the robust pass (r->meat): stage 2.
 * Either rewrites the checkpoint so that a rerun reads no data for what
 * is done (MR_ERR_IO, MR_ERR_NO_MEMORY). */
mr_status mr__checkpoint_write_done(mr__run *r, const mr__irls *s, mr__error *err);
mr_status mr__checkpoint_write_robust(mr__run *r, mr__error *err);

/* The run's end: the checkpoint removed when the fit succeeded (unless
 * kept for the caller: MR_OPT_KEEP_CHECKPOINT), the lock let go. */
void mr__checkpoint_end(mr__run *r, int succeeded);

/* checkpoint_done.c: the finished stages' parts.  _put appends those of
 * `stage` (1, 2) from r; _take reads r->resume_done into r->last and the
 * dispersion (stage 1) or r->meat (stage 2, stage 1's parts skipped). */
struct mr__bytebuf;
void mr__checkpoint_done_put(struct mr__bytebuf *b, const mr__run *r, int stage);
mr_status mr__checkpoint_done_take(mr__run *r, int stage, mr__error *err);

/* Worker threads for `asked` (0: one per online CPU): at most 4 per
 * online CPU and 64 in all, as each costs about 6 MB and more than the
 * cores only wait.  *cpus: the online CPUs counted.  Fits and scoring
 * alike. */
int mr__worker_threads(int asked, int *cpus);

/* share.c: a fit shared by several processes (mr_share in millrace.h):
 * rank 0's first pass handed to the others, each IRLS pass's groups split
 * between the ranks and their totals added in group order by every rank,
 * and the errors that end every rank alike.  What one exchange carries,
 * little-endian (common/bytebuf.h): u64 status, text message, then the
 * payload (rank 0's start: the run's state as a checkpoint holds it; a
 * pass: the rank's group totals, accum/group_bytes.h; else nothing). */
/* Whether the run is shared (its fitter has a share). */
int mr__shared(const mr__run *r);

/* Before anything else: the options a share cannot take refused
 * (MR_ERR_USAGE), alike on every rank. */
mr_status mr__share_begin(mr__run *r, mr__error *err);

/* Before the first pass, on a rank other than 0: the first exchange, rank
 * 0's state taken up (r->resume, r->have_resume) as a checkpoint's is. */
mr_status mr__share_join(mr__run *r, mr__error *err);

/* Rank 0, the IRLS state s made: the first exchange, s and the first
 * pass's result sent to every rank. */
mr_status mr__share_send_start(mr__run *r, const mr__irls *s, mr__error *err);

/* The blocks of this rank's IRLS and meat passes over the data: whole
 * groups. */
mr__partial_range mr__share_range(const mr__run *r);

/* After this rank's IRLS pass (st: how it went; groups: its group totals):
 * every rank's totals added in group order into res->sums, or the lowest
 * failing rank's error. */
mr_status mr__share_reduce(mr__run *r, mr_status st, const mr__bytebuf *groups, mr__pass_result *res, mr__error *err);

/* The same after the meat pass by rows (robust.c): its rows' totals into
 * res->sums, its bread into res->bread. */
mr_status mr__share_reduce_meat(mr__run *r, mr_status st, const mr__bytebuf *groups, mr__pass_result *res,
                                mr__error *err);

/* The same after the meat pass by clusters, streamed (robust.c): its
 * bread's groups into res->bread and its blocks of runs (accum/clusters.h)
 * added in block order into res->sums, res->clusters their number.  A
 * file not grouped by the cluster column is MR_ERR_CLUSTERS on every rank
 * (a share holds no table of clusters). */
mr_status mr__share_reduce_clusters(mr__run *r, mr_status st, const mr__bytebuf *groups, const mr__bytebuf *blocks,
                                    mr__pass_result *res, mr__error *err);

/* The run's end (st: how it went): a failure not yet exchanged is, and
 * err then holds the error every rank ends with. */
mr_status mr__share_end(mr__run *r, mr_status st, mr__error *err);

#endif
