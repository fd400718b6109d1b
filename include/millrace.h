/*
 * millrace.h - the whole public API of millrace, a library that fits
 * generalized linear models to delimited text files far larger than memory.
 *
 * Everything a program needs is declared here; nothing else under src/ is
 * public.  The model:
 *
 *   mr_fitter   a description of one model plus the options of one run.
 *               Created by mr_fitter_new(), configured with model lines
 *               (mr_fitter_model_line, mr_fitter_model_file) and options
 *               (mr_fitter_set_*), then run on a file with mr_fitter_run().
 *               Freed with mr_fitter_free().  Owns the message of its last
 *               error (mr_fitter_errmsg).
 *   mr_fit      the result of a successful run (or one read back from its
 *               JSON with mr_fit_read_json): coefficients, covariance,
 *               fit statistics and everything needed to report them.
 *               Read-only once returned: any number of threads may read one
 *               fit at the same time.  Freed with mr_fit_free().
 *
 * Threads: a handle is used by one thread at a time; different handles are
 * independent.  The library keeps no mutable global state of its own but
 * the table of temporary output files ("Output files" below).  It
 * does set OpenBLAS to one thread (openblas_set_num_threads) while a run is
 * going, because its own workers already use every core and nested BLAS
 * threads would oversubscribe them: mr_fitter_run reads the count
 * (openblas_get_num_threads) before it sets 1, and sets that count back
 * when it returns, whatever the outcome.  The count is the process's, so
 * a program that calls BLAS on another thread during a run sees 1.  The
 * library itself calls no BLAS or LAPACK routine (its solver and the map
 * back to raw coefficients are its own loops, which take no working
 * buffer), so any BLAS build may be linked, and fitters may run on several
 * threads at once.
 *
 * Errors: every fallible call returns an mr_status.  MR_OK is 0; the other
 * values are fixed and never renumbered (the command-line tool uses them as
 * its exit codes).  mr_strerror() names a status; the handle's message says
 * what went wrong where (file, line, column, value).
 *
 * The library never prints, never exits and never aborts on bad input.
 * Memory it returns is freed with the matching _free function or mr_free().
 */
#ifndef MILLRACE_H
#define MILLRACE_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

#if defined(MR_BUILDING_LIBRARY) && defined(__GNUC__)
#define MR_API __attribute__((visibility("default")))
#else
#define MR_API
#endif

#define MR_VERSION_MAJOR 0
#define MR_VERSION_MINOR 1
#define MR_VERSION_PATCH 0
#define MR_VERSION_STRING "0.1.0"

/* Version of the library actually linked, e.g. "0.1.0". */
MR_API const char *mr_version(void);

/* ------------------------------------------------------------------ */
/* Status codes.  Values are permanent.                                */

typedef enum mr_status {
    MR_OK = 0,
    MR_ERR_USAGE = 2,        /* bad option, model line or model file       */
    MR_ERR_IO = 3,           /* a file could not be opened, read or written */
    MR_ERR_FORMAT = 4,       /* malformed input: CSV, number, zstd or gzip
                                stream (truncated, corrupt, trailing bytes) */
    MR_ERR_DOMAIN = 5,       /* a value the model cannot take (y < 0 for
                                poisson, exposure <= 0, weight < 0, ...)    */
    MR_ERR_NO_DATA = 6,      /* empty file, header only, no usable rows
                                (every row left out, or every prior weight
                                0)                                          */
    MR_ERR_NOT_CONVERGED = 7,/* only from mr_fit_status(): the fit stopped
                                at the pass limit; results are flagged      */
    MR_ERR_NO_MEMORY = 8,    /* an allocation failed, or the system refused
                                a thread (EAGAIN)                           */
    MR_ERR_INTERNAL = 9,     /* a bug: please report it                     */
    MR_ERR_NUMERIC = 10,     /* the fit broke down (no finite deviance even
                                after step halving)                         */
    MR_ERR_STOPPED = 11,     /* the progress callback set with
                                mr_fitter_set_progress_stop asked the run
                                to stop (never returned by the command,
                                which stops a fit this way on SIGINT,
                                SIGTERM, SIGHUP and exits 128 + the
                                signal's number)                            */
    MR_DRIFT_FLAGGED = 12,   /* not an error: a comparison of two fits
                                (mr_drift_compare) flagged a change; the
                                command's drift exits with it so that a
                                scheduler can alert                          */
    MR_ERR_CLUSTERS = 13     /* cluster-robust standard errors need more
                                memory than allowed (mr_fitter_set_cluster):
                                the file is not grouped by the cluster
                                column and its clusters' sums do not fit,
                                or too many clusters to check; the message
                                says how to go on                            */
} mr_status;

/* A static, human-readable name for a status ("bad input format", ...). */
MR_API const char *mr_strerror(mr_status status);

/* ------------------------------------------------------------------ */
/* Families and links.  Supported pairs (first is the canonical link,
 * the default when a model names no link):
 *   gaussian          identity, log, inverse
 *   binomial          logit, probit, cloglog, log
 *   poisson           log, identity, sqrt
 *   gamma             inverse, identity, log
 *   inverse-gaussian  inverse-squared, inverse, identity, log
 *   negative-binomial log, identity, sqrt (a fixed theta: the family's
 *                     line reads "family negative-binomial theta=2";
 *                     V(mu) = mu + mu^2/theta, dispersion fixed at 1;
 *                     "family negative-binomial" or "... theta=estimate"
 *                     estimates theta by maximum likelihood in the same
 *                     passes: MR_STAT_FAMILY_PARAMETER_SE gives its
 *                     standard error, the AIC and BIC count it, and rows
 *                     never collapse into covariate patterns)
 *   tweedie           log (a fixed power 1 < p < 2: "family tweedie
 *                     power=1.5"; V(mu) = mu^p, outcome >= 0, dispersion
 *                     estimated; the log-likelihood by Dunn and Smyth's
 *                     series at the dispersion deviance / sum of weights,
 *                     which AIC and BIC count; NaN when the fit stopped
 *                     before its steps were small; rows never collapse;
 *                     "power=profile" fits each power 1.1, 1.2, ..., 1.9,
 *                     all from one read of the input (their first pass
 *                     shared; no checkpoint), and returns the fit of the
 *                     largest log-likelihood, whose AIC and BIC count the
 *                     power)
 * Binomial, poisson and negative binomial with "dispersion estimate" are
 * quasi families, without a likelihood: MR_STAT_LOG_LIKELIHOOD,
 * MR_STAT_AIC and MR_STAT_BIC are NaN for them too (and a negative
 * binomial's theta, estimated by its likelihood, must then be given).
 * A tweedie needs its power on its line (mr_fitter_model_line:
 * MR_ERR_USAGE without it or out of range, as for a theta <= 0);
 * mr_fit_stat(fit, MR_STAT_FAMILY_PARAMETER) gives the parameter back
 * (the estimate, where estimated).                                    */

typedef enum mr_family {
    MR_GAUSSIAN = 0,
    MR_BINOMIAL = 1,
    MR_POISSON = 2,
    MR_GAMMA = 3,
    MR_INVERSE_GAUSSIAN = 4,
    MR_NEGATIVE_BINOMIAL = 5,
    MR_TWEEDIE = 6
} mr_family;

typedef enum mr_link {
    MR_IDENTITY = 0,
    MR_LOG = 1,
    MR_INVERSE = 2,
    MR_LOGIT = 3,
    MR_PROBIT = 4,
    MR_CLOGLOG = 5,
    MR_SQRT = 6,
    MR_INVERSE_SQUARED = 7
} mr_link;

/* ------------------------------------------------------------------ */
/* The fitter.                                                          */

typedef struct mr_fitter mr_fitter;
typedef struct mr_fit mr_fit;

/* A new fitter with default options and an empty model.  NULL only when
 * out of memory.  Free with mr_fitter_free (NULL is fine). */
MR_API mr_fitter *mr_fitter_new(void);
MR_API void mr_fitter_free(mr_fitter *f);

/* The message of the last failed call on this fitter, or "" if none.
 * Owned by the fitter; valid until its next call or until it is freed. */
MR_API const char *mr_fitter_errmsg(const mr_fitter *f);

/* Adds one line of the model language (see README, "The model file"):
 *   outcome COL | trials COL | family NAME [PARAM=VALUE] | link NAME |
 *   numeric COL | factor COL [ref=LEVEL] [many] | interact A B [C] |
 *   spline COL df=N|knots=K1,K2,... [boundary=LO,HI] |
 *   offset COL | exposure COL | weight COL | intercept yes|no |
 *   dispersion estimate|fixed
 * '#' starts a comment; blank lines are ignored.  A later line overrides an
 * earlier one for single-valued directives (outcome, family, ...) and for
 * the role of a column (a column declared numeric then factor is a factor).
 * `origin` names the line in error messages (e.g. "falls.model:3" or
 * "--factor"); it may be NULL.  Returns MR_OK or MR_ERR_USAGE. */
MR_API mr_status mr_fitter_model_line(mr_fitter *f, const char *line, const char *origin);

/* Reads a model file: mr_fitter_model_line for each of its lines. */
MR_API mr_status mr_fitter_model_file(mr_fitter *f, const char *path);

/* Integer options. */
typedef enum mr_int_option {
    MR_OPT_THREADS = 0,      /* worker threads; 0 = online CPUs (default).
                                0 to 256 accepted, but a run uses at most 4
                                per online CPU and 64 in all (a warning in
                                the fit says so): each worker costs about
                                6 MB of memory (two 2 MiB ring slots, its
                                decoder and scratch)                        */
    MR_OPT_MAX_PASSES = 1,   /* IRLS iterations at most (default 50)        */
    MR_OPT_BUFFER_SIZE = 2,  /* bytes per read from the file (default 1 MiB,
                                at least 16); results never depend on it    */
    MR_OPT_IN_MEMORY = 3,    /* 1: keep parsed columns in memory after the
                                first read and iterate on them (default 0)  */
    MR_OPT_SKIP_BAD_ROWS = 4,/* 1: count and skip malformed rows instead of
                                failing on the first one (default 0)        */
    MR_OPT_DELIMITER = 5,    /* ',' '\t' ';' or 0 = detect from the header
                                line (default 0)                            */
    MR_OPT_NO_CACHE = 6,     /* 1: reread and reparse the file on every pass
                                instead of replaying the decoded columns
                                from a temporary cache file (default 0).
                                The cache lives in $TMPDIR (default /tmp),
                                is unlinked at once, and is skipped when it
                                could take more than half the free space.
                                When it cannot be created or written (a
                                full or read-only TMPDIR), or grows past
                                half the free space, the fit goes on
                                rereading the file, with the same results,
                                and says so in a warning. */
    MR_OPT_NO_COLLAPSE = 7,  /* 1: never collapse rows into covariate
                                patterns (default 0: collapse when every
                                term is a factor or a numeric with few
                                values and there is no offset, or poisson
                                with a log link; the fit then reads the
                                file once) */
    MR_OPT_KEEP_CHECKPOINT = 8 /* 1: a run that succeeds leaves its
                                checkpoint (mr_fitter_set_checkpoint) for
                                the caller to remove with
                                mr_fitter_checkpoint_remove once its
                                outputs are in place (default 0: the run
                                removes it; a profile's fits, one per
                                value, remove theirs either way) */,
    MR_OPT_MANY_MEANS = 9     /* 1: a fit with a factor declared `many`
                                keeps each level's IRLS-weighted means of
                                the other columns (the JSON's
                                weighted_means), which scoring needs for
                                the standard errors and intervals of that
                                level's rows; they cost a number per level
                                and column its rows meet (10^5 levels
                                meeting 29 columns each: about 80 MB more
                                JSON, and the memory to write and read it).
                                Default 0: such rows score without them */
} mr_int_option;

/* Real-valued options. */
typedef enum mr_real_option {
    MR_OPT_TOLERANCE = 0,    /* converged when the IRLS step d of a pass is
                                this small in standard errors: sqrt(d' X'WX
                                d / phi) <= it, or under a canonical link
                                10 q^2 <= it (q: that step over the one
                                before, itself <= 1), or once steps stop
                                shrinking (rounding) <= 1000 times it;
                                the step is taken
                                without another pass (default 1e-9;
                                README, "Stopping rule")                    */
    MR_OPT_LEVEL = 1         /* confidence level of intervals (default 0.95) */
} mr_real_option;

/* Return MR_OK, or MR_ERR_USAGE for an unknown option or a value out of
 * range (the message says which). */
MR_API mr_status mr_fitter_set_int(mr_fitter *f, mr_int_option opt, long long value);
MR_API mr_status mr_fitter_set_real(mr_fitter *f, mr_real_option opt, double value);

/* Missing-value tokens.  By default an empty cell and "NA" are missing.
 * mr_fitter_clear_missing removes all tokens (empty cells then are errors
 * in numeric columns and a level of their own in factors);
 * mr_fitter_add_missing adds one (copied; "" means the empty cell). */
MR_API void mr_fitter_clear_missing(mr_fitter *f);
MR_API mr_status mr_fitter_add_missing(mr_fitter *f, const char *token);

/* Progress: called from the thread that called mr_fitter_run, at most a few
 * times a second and once at the end of each pass.  `bytes_total` is 0
 * when unknown (standard input).  Must not call back into the fitter. */
typedef struct mr_progress {
    int pass;                  /* 1 = the scan of the data, 2.. = IRLS      */
    uint64_t bytes_done;       /* input bytes consumed in this pass (0 for a
                                  pass over kept columns)                   */
    uint64_t bytes_total;      /* size of the input, 0 if unknown           */
    uint64_t rows_done;        /* rows added up so far in this pass         */
    double seconds;            /* since this pass started                   */
} mr_progress;
typedef void (*mr_progress_fn)(const mr_progress *p, void *user);
MR_API void mr_fitter_set_progress(mr_fitter *f, mr_progress_fn fn, void *user);

/* The same calls, from the same thread, but the return value is read:
 * nonzero stops the run.  Its workers and reader finish the block at hand
 * and end, every temporary file is removed, mr_fitter_run returns
 * MR_ERR_STOPPED with *out NULL, and the fitter may be run again.  The
 * last call of a pass comes after its rows are all read: a stop there
 * still stops the run.  To stop on a signal, let the handler set a
 * volatile sig_atomic_t that the callback returns (async-signal-safe; the
 * run then ends within about a quarter of a second, the calls' cadence),
 * and check the flag after mr_fitter_run too: a signal after the last
 * call leaves a finished fit that the caller should then discard.  A fitter has one progress callback: this setter
 * and mr_fitter_set_progress each replace the other's (NULL: none). */
typedef int (*mr_progress_stop_fn)(const mr_progress *p, void *user);
MR_API void mr_fitter_set_progress_stop(mr_fitter *f, mr_progress_stop_fn fn, void *user);

/* The command line that asked for the run, for the fit's audit trail
 * (the library cannot see argv): the `argc` words are copied, and every
 * later fit of this fitter records them ("run" in the JSON, README).
 * argc 0 forgets them.  MR_OK or MR_ERR_NO_MEMORY. */
MR_API mr_status mr_fitter_set_command_line(mr_fitter *f, size_t argc, const char *const *argv);

/* Starts the next runs' IRLS from a previous fit's coefficients (one
 * mr_fit_read_json read back, say) instead of the family's starting
 * means and the warm start: a fit of a refreshed extract then takes fewer
 * passes to the same maximum.  The fitter keeps a copy of what it needs;
 * `previous` may be freed at once.  `label` (copied; NULL: "a previous
 * fit") names it in the report, the JSON ("convergence.start") and
 * messages.  NULL `previous` removes the start.
 *
 * Coefficients are matched by name (term and level): a level the previous
 * fit lacked starts at 0, one this data lacks is dropped, an aliased one
 * starts at 0.  When a factor's reference level changed, its main effect
 * is carried over reparametrised (each level's coefficient less the new
 * reference's old one, which the intercept gains); the terms of
 * interactions with that factor, and its main effect in a model without an
 * intercept, start at 0.  Numeric columns are carried on their raw scale
 * and mapped to the fit's internal centring exactly.  mr_fit_stat(fit,
 * MR_STAT_START_CARRIED) counts the coefficients carried over.
 *
 * mr_fitter_run refuses, before reading any data, a previous fit of
 * another model - a different outcome or trials column, family, link,
 * intercept, or terms (their columns in order, each a factor or numeric
 * as before) - with MR_ERR_USAGE.  Offset, exposure, weights and options
 * may differ.  A start changes the way to the maximum, not the maximum:
 * from a start outside the family's range the run starts afresh.
 * Returns MR_OK or MR_ERR_NO_MEMORY. */
MR_API mr_status mr_fitter_set_start(mr_fitter *f, const mr_fit *previous, const char *label);

/* Robust (sandwich) standard errors.  The model-based standard errors
 * assume the family's variance is right and the rows independent; robust
 * ones stay valid when the variance is not (overdispersed counts) and,
 * with a cluster column, when rows of one cluster (one person's repeated
 * records, one practice's patients) are correlated.  They need one more
 * pass over the data at the final coefficients.  The covariance is
 * V = B M B: B the inverse of the final X'WX, M the sum over rows of the
 * outer products of the rows' scores u x (u = weight (y - mu) mu' / V(mu)),
 * or by clusters of the outer products of the clusters' score sums; the
 * dispersion cancels.  Scaled as R's sandwich package scales them:
 *   MR_ROBUST_HC0                  1             (vcovHC type "HC0")
 *   MR_ROBUST_HC1                  n / (n - k)   (vcovHC type "HC1")
 *   a cluster column, HC0          G / (G - 1)   (vcovCL type "HC0", its
 *                                  default for a glm, cadjust = TRUE)
 *   a cluster column, HC1          G / (G - 1) x (n - 1) / (n - k)
 *                                  (vcovCL type "HC1")
 * n the rows with a positive weight, k the number of estimated
 * coefficients, G the clusters.  When asked, the robust standard errors
 * drive the fit's Wald statistics, p-values, intervals and term tests
 * (always against the normal and chi-square: they are asymptotic), while
 * mr_fit_std_error and mr_fit_covariance stay model-based.  Few clusters
 * (under about 40 or 50, common practice) make cluster-robust standard
 * errors too small.
 *
 * With a factor declared `many` the robust standard errors (by rows) are
 * those of the other coefficients, k counting the levels too: each row's
 * score has its level's IRLS-weighted means of the other columns taken
 * out, which is what the full sandwich gives them; the levels' own
 * standard errors stay model-based.  Clustered, the clusters can be that
 * factor's levels alone (each level's summed scores less its means times
 * its summed u; the reference's rows one cluster more): another cluster
 * column is refused with such a factor (MR_ERR_USAGE).
 *
 * mr_fitter_set_robust: the type, or MR_ROBUST_NONE (the default) for
 * none.  MR_OK or MR_ERR_USAGE for an unknown type. */
typedef enum mr_robust { MR_ROBUST_NONE = 0, MR_ROBUST_HC0 = 1, MR_ROBUST_HC1 = 2 } mr_robust;
MR_API mr_status mr_fitter_set_robust(mr_fitter *f, mr_robust type);

/* Cluster-robust standard errors by the cells of `column` (copied; NULL:
 * none, the default): two rows are in one cluster when the cells' text is
 * the same (told apart by a 128-bit hash of it).  Without a type set, the
 * type is MR_ROBUST_HC0, as in vcovCL for a glm.  A row with the cell missing is left out of the
 * fit like any incomplete row.  The column may be one the model uses.
 *
 * A file grouped by the column (each cluster's rows together, in any
 * order of clusters) is streamed: memory holds one 8-byte word per
 * cluster, so 10^7 clusters take about 130 MiB.  Otherwise every
 * cluster's score sums are held, 16 + 8 k bytes each; `memory_limit`
 * bytes (0: 1 GiB) bound either, and beyond it the run fails with
 * MR_ERR_CLUSTERS and a message saying to group (sort) the file by the
 * column.  MR_OK, MR_ERR_USAGE (an empty name) or MR_ERR_NO_MEMORY. */
MR_API mr_status mr_fitter_set_cluster(mr_fitter *f, const char *column, size_t memory_limit);

/* Checkpoints (`path` copied; NULL: none, the default).  After each pass
 * over the data - the first, once its warm start is taken, then each IRLS
 * pass - the run writes to `path`, atomically (as mr_fit_write_json writes)
 * and holding mr_output_lock_take's lock on it for the whole run, what it
 * needs to go on: the first pass's result, the IRLS state, the pass count,
 * the input's name, size and time, the model lines and the options that
 * change results (tolerance, pass limit, level, bad-row rule, delimiter,
 * missing tokens, collapsing, the start's label, the robust type and the
 * cluster column; not the clusters' memory limit, which changes no number),
 * under a checksum.  A run given a path where such a file lies takes it
 * up when it is whole and made for this input, model and options, and
 * goes on after its last pass: a fit killed (kill -9, a crash, a reboot) and run again gives the
 * fit an uninterrupted run gives, to the bit (timings, threads and the
 * audit trail aside).  Else - cut short, damaged, of another input,
 * model or options - it is not used and the fit starts afresh;
 * mr_fitter_checkpoint_note says why.  Threads, buffer size and caching
 * may differ between the runs.  A fit that succeeds removes the file
 * (unless MR_OPT_KEEP_CHECKPOINT is set); one that fails or is stopped
 * leaves it.  A file changed in place with its
 * size and time kept is caught by the later passes' checksums (MR_ERR_IO,
 * as any change during a fit).  Standard input and pipes cannot be read
 * again after a restart: mr_fitter_run refuses a checkpoint with them
 * (MR_ERR_USAGE), as it and mr_fitter_run_set refuse one with a set of
 * files or a directory (the checkpoint records one file's identity) or a
 * model with a factor declared `many` (its levels' state is not carried
 * yet); the
 * path is checked as an output (MR_ERR_USAGE when it is the input,
 * MR_ERR_IO when it cannot be written or its lock is held).
 * Collapsed fits (one read of the file, IRLS in memory) write it once,
 * after the read.  Returns MR_OK or MR_ERR_NO_MEMORY. */
MR_API mr_status mr_fitter_set_checkpoint(mr_fitter *f, const char *path);
/* Removes the checkpoint file at the fitter's path under its lock: for a
 * caller that set MR_OPT_KEEP_CHECKPOINT, once the fit's outputs (its
 * JSON, a run log's line) are in place.  Until then the file holds the
 * finished state - after the last IRLS pass, the totals the fit is made
 * from, and after the robust pass its sums too - so that a process killed
 * between the run's end and its outputs, run again with the same
 * command, makes the same fit without reading the data again ("run":
 * {"resumed": {"after_pass": N}} with N all of its passes).  MR_OK (also
 * when there is no path or no file), or MR_ERR_IO when another run holds
 * the lock (the file is then left to it) or it cannot be removed, with
 * mr_fitter_errmsg. */
MR_API mr_status mr_fitter_checkpoint_remove(mr_fitter *f);
/* What the last run did with its checkpoint, one line: "" when it had none
 * or none lay at the path, else that it was taken up after pass N, or why it
 * was not used.  Owned by the fitter, valid until its next run. */
MR_API const char *mr_fitter_checkpoint_note(const mr_fitter *f);

/* Fits the model to the CSV (optionally zstd- or gzip-compressed, known by
 * its magic bytes; concatenated frames or members read as one) at `path`, or to
 * standard input when path is "-".  The input is only read, once or more
 * (input that is not a regular file - standard input, a pipe such as
 * /dev/fd/N, a FIFO, a device - is copied during the first pass to an
 * unlinked temporary file in $TMPDIR, and later passes read the copy); a file
 * that changes between reads (its size, time, header, rows or bytes not as
 * first read: later passes compare checksums) ends the fit with MR_ERR_IO.  On MR_OK, *out receives a new fit that the caller frees with mr_fit_free;
 * a fit that stopped at the pass limit is still returned with MR_OK and
 * flagged (mr_fit_status() gives MR_ERR_NOT_CONVERGED).  On any other
 * status *out is NULL and mr_fitter_errmsg says why.  The fitter may be run
 * again, on the same or another file.  A zstd file of several frames (as
 * pzstd writes) is decompressed by up to min(threads, 4) threads besides
 * the workers, frame by frame, with a bounded number of frames in memory:
 * the same bits for any count.  A directory is read as a set of files
 * (mr_fitter_run_set). */
MR_API mr_status mr_fitter_run(mr_fitter *f, const char *path, mr_fit **out);

/* Fits the model to several files read as one data set: `paths[0 ..
 * npaths)` in the order given, where a directory stands for every regular
 * file in it (symbolic links to regular files included; subdirectories
 * and names starting with '.' passed over) in byte order of the names.
 * mr_fitter_run with a directory is the same as a set of that directory.
 * Every file has a header row naming the same columns as the first file's
 * (else MR_ERR_FORMAT: "FILE:1:COLUMN: the header differs from FIRST's"),
 * each may be plain, zstd or gzip on its own, and the rows are those of
 * the files one after the other: the fit is bit for bit the fit of their
 * concatenation without the later header rows, provided each file's last
 * row ends with a line end (a file's last row ends with its file here,
 * where a plain concatenation would join it to the next file's header).
 * A quoted field cannot run from one file into the next.  Messages name
 * the file and its own line.  The files must be regular files (each is
 * read once per pass, or the cache is), so "-" is MR_ERR_USAGE here; an
 * empty directory MR_ERR_NO_DATA.  The fit's JSON records, under
 * input.set.files, each file's path, size, modification time, bytes,
 * compression and checksum; input.path is then the paths given, joined by
 * spaces; input.checksum the set's: FNV-1a 64 over the files' checksums,
 * each as 8 little-endian bytes, in order (a set's checksum is therefore
 * not the checksum of a file holding the same rows); input.file.size the
 * sizes summed and input.file.mtime_ns the newest file's time.  npaths ==
 * 1 is mr_fitter_run.  Statuses and ownership as for mr_fitter_run. */
MR_API mr_status mr_fitter_run_set(mr_fitter *f, const char *const *paths, size_t npaths, mr_fit **out);

/* ------------------------------------------------------------------ */
/* The fit.  All accessors take a non-NULL fit; indices are 0-based and
 * must be below mr_fit_ncoef().                                        */

MR_API void mr_fit_free(mr_fit *fit);

/* MR_OK, or MR_ERR_NOT_CONVERGED when the pass limit was reached. */
MR_API mr_status mr_fit_status(const mr_fit *fit);

MR_API size_t mr_fit_ncoef(const mr_fit *fit);
/* Coefficient names: "intercept", "year", "sex=M", "age_band=45-49 & sex=M",
 * "age[spline 2/4]" (basis column 2 of a 4-column spline of age).
 * Owned by the fit. */
MR_API const char *mr_fit_coef_name(const mr_fit *fit, size_t j);
/* 1 when the column is a linear combination of earlier ones: its estimate
 * and standard error are then NaN and it takes no part in the fit. */
MR_API int mr_fit_coef_aliased(const mr_fit *fit, size_t j);
MR_API double mr_fit_coef(const mr_fit *fit, size_t j);
MR_API double mr_fit_std_error(const mr_fit *fit, size_t j);
/* Covariance of coefficients i and j (dispersion included); NaN if either
 * is aliased. */
MR_API double mr_fit_covariance(const mr_fit *fit, size_t i, size_t j);

/* The Wald test of coefficient j against 0, as in the report: the two-sided
 * p-value of estimate / standard error, from Student's t with
 * MR_STAT_DF_RESIDUAL degrees of freedom when the dispersion is estimated,
 * else from the standard normal.  NaN when aliased (or j out of range). */
MR_API double mr_fit_p_value(const mr_fit *fit, size_t j);
/* The Wald interval of coefficient j at the fit's confidence level
 * (MR_OPT_LEVEL when it ran; mr_fit_stat(fit, MR_STAT_LEVEL)): estimate -+
 * the same t or normal quantile times the standard error, on the scale of
 * the coefficient (exp() of both bounds gives the ratio's interval for a
 * log or logit link).  NaN when aliased (or j out of range). */
MR_API double mr_fit_conf_low(const mr_fit *fit, size_t j);
MR_API double mr_fit_conf_high(const mr_fit *fit, size_t j);

/* Robust standard errors (mr_fitter_set_robust, mr_fitter_set_cluster):
 * the type made (MR_ROBUST_NONE when none was asked); the cluster column
 * (owned by the fit; NULL when by rows or none) and the number of its
 * clusters (0 when none); the small-sample factor applied (NaN when
 * none); coefficient j's robust standard error and entry (i, j) of the
 * robust covariance (NaN when none, when aliased or out of range).  When
 * made, they are what mr_fit_p_value, mr_fit_conf_low/high and
 * mr_fit_term_test use. */
MR_API mr_robust mr_fit_robust(const mr_fit *fit);
MR_API const char *mr_fit_cluster(const mr_fit *fit);
MR_API uint64_t mr_fit_clusters(const mr_fit *fit);
MR_API double mr_fit_robust_adjustment(const mr_fit *fit);
MR_API double mr_fit_robust_std_error(const mr_fit *fit, size_t j);
MR_API double mr_fit_robust_covariance(const mr_fit *fit, size_t i, size_t j);

/* Terms: the covariates and interactions of the model, in the order
 * declared (covariates, then interactions); the intercept is not a term.
 * mr_fit_term_name gives "age_band" or "age_band & sex" (owned by the fit;
 * NULL when t >= mr_fit_nterms).  mr_fit_term_coefs gives the number of
 * the term's coefficient columns and, in *first (may be NULL), the index
 * of the first: they are first .. first + count - 1, aliased ones
 * included (0 and 0 when t is out of range). */
MR_API size_t mr_fit_nterms(const mr_fit *fit);
MR_API const char *mr_fit_term_name(const mr_fit *fit, size_t t);
MR_API size_t mr_fit_term_coefs(const mr_fit *fit, size_t t, size_t *first);

/* The joint Wald test of term t: are all its estimated coefficients 0?
 * With b the term's non-aliased coefficients and V their block of the
 * covariance (mr_fit_covariance, dispersion included), chi2 = b' V^-1 b,
 * computed by a Cholesky factorisation of V on the correlation scale
 * (the same bits on any machine and for a fit read back from its JSON).
 *   *df    the number of the term's non-aliased coefficients (aliased ones
 *          are left out: they are not estimated);
 *   *stat  chi2 when the dispersion is fixed; F = chi2 / df when it is
 *          estimated (*is_f = 1), to be read against F(df,
 *          MR_STAT_DF_RESIDUAL);
 *   *p     the upper tail of that chi-square or F distribution.
 * Every term has the test, one-coefficient terms too: their statistic is
 * the square of the coefficient's z or t, and their p-value is the
 * coefficient's (mr_fit_p_value) up to rounding.  Under full coding (no
 * intercept, the first factor has a column per level) a factor's test is
 * of all its level effects being 0, not of their differences.
 * Returns 1 when the term has a test.  Returns 0, with *stat and *p NaN,
 * when it has none: t out of range (*df 0); every coefficient of the term
 * aliased, or no coefficient at all (a factor with one level; *df 0); or
 * V not usable (*df > 0): numerically singular (one coefficient nearly a
 * linear combination of the others), or not finite (the dispersion could
 * not be estimated: no residual df).  Any output pointer may be NULL. */
MR_API int mr_fit_term_test(const mr_fit *fit, size_t t, double *stat, double *df, double *p, int *is_f);

typedef enum mr_stat {
    MR_STAT_DEVIANCE = 0,
    MR_STAT_NULL_DEVIANCE = 1,
    MR_STAT_DF_RESIDUAL = 2,
    MR_STAT_DF_NULL = 3,
    MR_STAT_PEARSON_CHI2 = 4,
    MR_STAT_DISPERSION = 5,
    MR_STAT_LOG_LIKELIHOOD = 6,
    MR_STAT_AIC = 7,
    MR_STAT_BIC = 8,
    MR_STAT_ROWS_READ = 9,
    MR_STAT_ROWS_USED = 10,
    MR_STAT_ITERATIONS = 11,
    MR_STAT_PASSES = 12,
    MR_STAT_RELATIVE_CHANGE = 13, /* the last step in standard errors (README,
                                     "Stopping rule"); after a coefficient ran
                                     off to infinity, the relative deviance
                                     change */
    MR_STAT_SECONDS = 14,
    MR_STAT_RANK = 15,
    MR_STAT_LEVEL = 16,      /* confidence level of the intervals            */
    MR_STAT_FAMILY_PARAMETER = 17, /* the family's own parameter: a negative
                                binomial's theta, a Tweedie power; NaN for a
                                family without one                          */
    MR_STAT_START_CARRIED = 18, /* coefficients taken from the previous fit
                                  (mr_fitter_set_start); NaN without one     */
    MR_STAT_FAMILY_PARAMETER_SE = 19 /* the standard error of an estimated
                                family parameter (a negative binomial's theta
                                by maximum likelihood): 1/sqrt of its observed
                                information at the final means, the
                                coefficients held; NaN when the parameter was
                                given or the family has none                 */
} mr_stat;
/* A fit statistic; NaN for an unknown `which`. */
MR_API double mr_fit_stat(const mr_fit *fit, mr_stat which);

/* The plain-text report (data read, model, convergence, coefficient table,
 * fit statistics, warnings), at the confidence level the fitter had.
 * Coefficients print with `digits` significant digits (0 = a readable
 * default of 6).  Returns a NUL-terminated string the caller frees with
 * mr_free, or NULL when out of memory. */
MR_API char *mr_fit_report(const mr_fit *fit, int digits);

/* Writes everything in the fit as JSON (schema in README, "JSON output") to
 * `path` by the rules of "Output files" below.  The fit's own input file
 * counts as an input.  Returns MR_OK, or MR_ERR_USAGE / MR_ERR_IO /
 * MR_ERR_NO_MEMORY with a message in `msg` (capacity `msgcap`, may be 0).
 * Text is written losslessly whatever its encoding: a byte that is not part
 * of well-formed UTF-8 becomes the characters \xHH (two upper-case hex
 * digits) and a backslash becomes two; all other text is unchanged.
 * Messages the library cuts to a length (mr_fitter_errmsg, warnings, the
 * examples of bad rows) are cut between UTF-8 characters. */
MR_API mr_status mr_fit_write_json(const mr_fit *fit, const char *path, char *msg, size_t msgcap);

/* Reads back a fit that mr_fit_write_json wrote (format "millrace-fit",
 * format_version 3, or 2 from an older library: its names std_error,
 * df_residual, df_null and "(intercept)" are read as standard_error,
 * residual_df, null_df and "intercept", and a quasi family's
 * log-likelihood, AIC and BIC as NaN): the same coefficients, covariance, statistics,
 * warnings and report, and what rebuilding the model needs (the model's
 * lines as given, its terms, factor levels and references, spline knots,
 * and the input's path, size, modification time and checksum).  Writing the fit read gives
 * the same bytes as the file read (a version 3 file), and NaN and infinities, written as null,
 * read back as NaN.  On MR_OK, *out receives a new fit the caller frees
 * with mr_fit_free; it is read-only like any other, and mr_fit_status
 * gives what it gave when written.  Otherwise *out is NULL and `msg`
 * (capacity `msgcap`, may be 0) says why: MR_ERR_IO when the file cannot
 * be opened or read; MR_ERR_FORMAT when it is not JSON (with jansson's
 * line and column), not a millrace fit, of another format_version, or
 * lacks a field or has one of the wrong type (the field is named, e.g.
 * 'model.terms[2].label'); MR_ERR_NO_MEMORY. */
MR_API mr_status mr_fit_read_json(const char *path, mr_fit **out, char *msg, size_t msgcap);

/* Writes one or more fits as one HTML page to `path`, by the rules of
 * "Output files" below: a page that stands alone (styles inline, plots as
 * inline SVG, no script, no reference to any other file or address),
 * readable on a screen and printable.  For each fit: the data read (rows
 * read, used, left out and why), the model's lines, convergence and
 * warnings, the coefficient table (with rate or odds ratios under a log or
 * logit link), the fit statistics, a forest plot of the ratios (or
 * coefficients) by term with reference levels marked, and an effect plot
 * for each factor (at most 100 levels): the fitted rate, probability or
 * mean at each level, the other factors at their reference levels and
 * numeric covariates at their means (0 for a fit saved without them) or
 * at the value a setting gives, with intervals from the covariance (delta
 * method on the link scale, then transformed); an effect curve along each
 * numeric and spline column's range with its interval band; a fit of more
 * than 60 coefficients gets a forest plot of the 40 of largest |z|; a
 * calibration plot when the fit's file holds calibration groups.
 * With two fits or more: a table of deviance, df, AIC and BIC, and each
 * later fit's coefficients against the first's.  The page also says what
 * to check before using the results.  The same fits and settings give the
 * same bytes.
 *
 * `fits`: nfits >= 1 fits (not taken over).  `sources`: NULL, or for each
 * fit the file it was read from (or NULL): it names the fit on the page,
 * and the page never replaces it; the data files the fits were made from
 * are not replaced either.  `settings`: nsettings lines (may be NULL when
 * 0), each one of
 *   "digits N"          significant digits of the numbers, 1..17 (default 4)
 *   "at COLUMN=VALUE"   the value of a numeric covariate in the effect
 *                       plots and curves (default its mean, which the fit
 *                       records; 0 for a fit saved before it did)
 *   "groups FILE"       a scoring run's group table (the JSON of
 *                       mr_scorer_write_groups): a funnel plot of O/E
 *                       against the expected count, exact Poisson control
 *                       limits at 95% and 99.8%, the groups outside listed;
 *                       the page never replaces FILE
 * Text from the data is HTML-escaped; bytes that are not well-formed UTF-8
 * and control characters show as \xHH, a backslash as two (the JSON's
 * escape, made visible).  Returns MR_OK, or MR_ERR_USAGE (no fit, a bad
 * setting, `path` one of the inputs), MR_ERR_IO (FILE cannot be read),
 * MR_ERR_FORMAT (FILE is not a group table) or MR_ERR_NO_MEMORY with a
 * message in `msg` (capacity `msgcap`, may be 0). */
MR_API mr_status mr_fits_write_html(const mr_fit *const *fits, const char *const *sources, size_t nfits,
                                    const char *const *settings, size_t nsettings, const char *path, char *msg,
                                    size_t msgcap);

/* ------------------------------------------------------------------ */
/* Output files.  Every file the library writes (mr_fit_write_json,
 * mr_drift_write_json, mr_drift_write_csv, mr_fits_write_html;
 * mr_run_log_append appends instead, see there) obeys:
 *
 *  - A symbolic link at `path` is followed (to the end of a chain); its
 *    target is what gets written, and the link is kept.
 *  - An existing target that is not a regular file (a directory, a
 *    device, a FIFO, a socket) is refused with MR_ERR_IO, never replaced.
 *  - A target that is one of the run's inputs (the same device and inode,
 *    however named; "-" stands for whatever standard input is) is refused
 *    with MR_ERR_USAGE.
 *  - The bytes go to a temporary file beside the target, named
 *    TARGET.tmp-PID-XXXXXX (PID the writing process, XXXXXX random), which
 *    is synced, renamed over the target, and the directory synced.  On any
 *    failure before the rename (a full disk included) the temporary file
 *    is removed and an earlier target is left as it was.  A failure to
 *    sync the directory after the rename is MR_ERR_IO with the new,
 *    complete file in place.
 *  - A new file gets mode 0666 less the umask; a replaced file keeps its
 *    mode, and its owner and group where the process may set them.
 *  - Before a temporary file is created, older ones of the same target
 *    (that exact pattern, that directory, regular files owned by this
 *    user) whose PID names no running process are removed: what a killed
 *    run left.  PIDs are those of this machine: a directory shared with
 *    other machines or PID namespaces may see another host's temporary
 *    file taken for a stale one (that run then fails with MR_ERR_IO; no
 *    output is damaged).
 *
 * The library installs no signal handlers.  While a temporary file
 * exists its name sits in a small fixed table (16 entries, process-wide;
 * a write beyond that many at once still works but is not in it): the
 * library's one piece of global state.                                  */

/* Checks, before a long run, that `path` can take an output by the rules
 * above, given the run's input files (`inputs`, `ninputs` of them; "-" is
 * standard input).  Creates nothing.  MR_OK, MR_ERR_USAGE (it is an
 * input), MR_ERR_IO (not a regular file, a directory that does not exist
 * or cannot take a new file, or it cannot be examined) or
 * MR_ERR_NO_MEMORY, with a message in `msg` (capacity `msgcap`, may be 0).
 * mr_fit_write_json checks again when it writes. */
MR_API mr_status mr_output_check(const char *path, const char *const *inputs, size_t ninputs, char *msg,
                                 size_t msgcap);

/* Unlinks every temporary file that outputs are being written to right
 * now, by any thread.  Async-signal-safe: meant for a SIGINT/SIGTERM
 * handler that then ends the process (a write it interrupts would fail
 * with MR_ERR_IO at its rename, leaving no output).  Touches nothing
 * else. */
MR_API void mr_output_unlink_temps(void);

/* ------------------------------------------------------------------ */
/* The run log: one line per run appended to a file, for the operators
 * of a scheduler that reruns fits.  The one output that is not replaced
 * atomically: the line is appended with a single write() on a file
 * opened with O_APPEND (created with mode 0666 less the umask when
 * absent) and synced, so the lines of runs appending at once do not
 * interleave.  The target is checked as every output's (above): links
 * followed, anything but a regular file refused with MR_ERR_IO, one of
 * `inputs` (`ninputs` of them) refused with MR_ERR_USAGE.
 *
 * The line is a JSON object (README, "Run log"): the time of writing (UTC,
 * ISO 8601), the host, the exit code, the input, the error (null when
 * none), the command line, and from the fit when there is one (null
 * otherwise): rows read and used, passes, seconds, and flags (words such
 * as "not_converged", "warnings", "rows_left_out", "bad_rows_skipped"). */
typedef struct mr_run_record {
    const char *input;       /* the data file as given, "-" standard input */
    int exit_code;           /* what the run ends with                     */
    const char *error;       /* its one-line message, or NULL              */
    const mr_fit *fit;       /* the fit, or NULL when there is none        */
    size_t argc;             /* the command line (argv may be NULL if 0)   */
    const char *const *argv;
} mr_run_record;

/* MR_OK, or MR_ERR_USAGE / MR_ERR_IO / MR_ERR_NO_MEMORY with a message in
 * `msg` (capacity `msgcap`, may be 0).  A short write (a full disk) is
 * MR_ERR_IO and may leave part of the line at the end of the file. */
MR_API mr_status mr_run_log_append(const char *path, const mr_run_record *rec, const char *const *inputs,
                                   size_t ninputs, char *msg, size_t msgcap);

/* ------------------------------------------------------------------ */
/* Drift: what changed between two fits of the same model, e.g. the same
 * model refitted to a refreshed extract.  A comparison borrows both fits:
 * they must outlive it.  Free it with mr_drift_free (NULL is fine).
 *
 * Coefficients are matched by name.  One in both fits and not aliased in
 * either has its change (new - old) measured in standard errors: z =
 * change / max(se_old, se_new), the larger of the two fits' own SEs
 * (README, "Comparing two fits", says why not the independent-samples
 * sqrt(se_old^2 + se_new^2), which is reported beside it).  It is flagged
 * when |z| >= threshold.  Also flagged: a coefficient in one fit only
 * (a new or vanished level or term column), one aliased in one fit only,
 * and each factor level in one fit only.  The comparison also holds the
 * rows read, used and left out (per column for missing values), the
 * deviance per row used, the dispersion and whether the input changed
 * (checksum and sizes; the file's size and modification time where both
 * fits record them): the text, JSON and CSV below give them.
 *
 * MR_OK (flagged or not: mr_drift_nflagged says), MR_ERR_USAGE when the
 * fits are of different models (outcome, trials, family and its
 * parameter, link, offset,
 * exposure, weight, intercept, dispersion, terms or a factor's reference
 * differ; the message names the first difference) or the threshold is not
 * a positive number, MR_ERR_NO_MEMORY; with a message in `msg` (capacity
 * `msgcap`, may be 0).  The command's drift exits with MR_DRIFT_FLAGGED
 * when anything is flagged. */
typedef struct mr_drift mr_drift;
MR_API mr_status mr_drift_compare(const mr_fit *old_fit, const mr_fit *new_fit, double threshold, mr_drift **out,
                                  char *msg, size_t msgcap);
MR_API void mr_drift_free(mr_drift *d);

/* Flagged coefficients plus factor levels found in one fit only. */
MR_API size_t mr_drift_nflagged(const mr_drift *d);
/* The coefficients compared: the old fit's in order, then those only the
 * new fit has.  Name owned by a fit; change and z NaN when the coefficient
 * is in one fit only or aliased; out-of-range i gives NULL, NaN, 0. */
MR_API size_t mr_drift_ncoef(const mr_drift *d);
MR_API const char *mr_drift_coef_name(const mr_drift *d, size_t i);
MR_API double mr_drift_coef_change(const mr_drift *d, size_t i);
MR_API double mr_drift_coef_z(const mr_drift *d, size_t i);
MR_API int mr_drift_coef_flagged(const mr_drift *d, size_t i);

/* The comparison as text for people; numbers with `digits` significant
 * digits (0: 6).  Free with mr_free; NULL when out of memory. */
MR_API char *mr_drift_report(const mr_drift *d, int digits);

/* The comparison as JSON (format "millrace-drift", README) or as CSV (one
 * row per coefficient, RFC 4180, a header row), written to `path` by the
 * rules of "Output files" above; `inputs` (`ninputs`) are the files the
 * fits were read from, which the output must not replace.  MR_OK, or
 * MR_ERR_USAGE / MR_ERR_IO / MR_ERR_NO_MEMORY with a message in `msg`. */
MR_API mr_status mr_drift_write_json(const mr_drift *d, const char *path, const char *const *inputs, size_t ninputs,
                                     char *msg, size_t msgcap);
MR_API mr_status mr_drift_write_csv(const mr_drift *d, const char *path, const char *const *inputs, size_t ninputs,
                                    char *msg, size_t msgcap);

/* Scoring: a fit applied to the rows of a file (README, "Scoring").
 *
 *   mr_scorer   borrows a fit (from mr_fitter_run or mr_fit_read_json),
 *               which must outlive it; holds the options of a run and the
 *               counts of the last one.  Created by mr_scorer_new (NULL
 *               only when out of memory), freed by mr_scorer_free (NULL is
 *               fine).  One thread at a time; any number of scorers may
 *               share one fit.
 *
 * mr_scorer_run reads DATA (CSV or TSV, plain, zstd or gzip as a fit reads
 * it, or standard input as "-") once, in flat memory, on worker
 * threads, and writes one CSV line (RFC 4180) per data row, in input
 * order, to `out` by the rules of "Output files" above (DATA counts as
 * the input): zstd-compressed when `out` ends in ".zst".  Columns: those
 * kept with mr_scorer_keep, as named, then
 *   eta        the linear predictor x'b, plus the row's offset and
 *              log(exposure) when the model has them
 *   se_eta     sqrt(x' V x), V the fit's covariance (aliased coefficients
 *              count as 0); with a `many` factor (eta adds the row's
 *              level estimate; a level with none counts as unseen), in a
 *              level l other than the reference
 *              sqrt((x - m_l)' V (x - m_l) + dispersion / information_l),
 *              m_l the level's IRLS-weighted means of the columns that the
 *              fit keeps when asked (MR_OPT_MANY_MEANS: its JSON's
 *              weighted_means); without them empty, as are mean_low and
 *              mean_high, outside the reference level
 *   mean       the inverse link of eta (binomial: the probability)
 *   mean_low, mean_high   the inverse link of eta -+ z se_eta, z the
 *              normal quantile of the level (mr_scorer_set_level)
 * and, when the file has the outcome (and the trials and weight the model
 * names), resid_response (y - mean), resid_pearson
 * ((y - mean) sqrt(w / V(mean))) and resid_deviance (sign(y - mean)
 * sqrt(w d(y, mean))), empty on a row whose outcome is missing.  Numbers
 * are the shortest text that strtod reads back to the same double; an
 * empty field stands for none.  The bytes do not depend on the threads.
 *
 * A row the fit cannot score - a factor level the fit never saw, or a
 * missing cell (one of the fit's missing-value tokens, those of
 * mr_fitter_add_missing, kept in its JSON; the empty cell and NA for a fit
 * read from a JSON saved before they were kept) in a covariate, offset or
 * exposure - follows
 * the policy: MR_UNSEEN_FAIL (default) fails the run with MR_ERR_DOMAIN
 * naming file, line, column and value; MR_UNSEEN_BLANK writes the row with
 * its kept columns and empty predictions, and counts it.  A cell that is
 * not a number, or a row with another number of fields than the header,
 * always fails with MR_ERR_FORMAT; an exposure <= 0 with MR_ERR_DOMAIN.
 * A column the fit needs (or --keep names) missing from the header:
 * MR_ERR_USAGE.  On any failure no output is left and an earlier file at
 * `out` is as it was; mr_scorer_errmsg says why. */
typedef struct mr_scorer mr_scorer;
typedef enum mr_unseen { MR_UNSEEN_FAIL = 0, MR_UNSEEN_BLANK = 1 } mr_unseen;
typedef enum mr_score_count {
    MR_SCORE_ROWS = 0,    /* data rows written */
    MR_SCORE_SCORED = 1,  /* rows with predictions */
    MR_SCORE_UNSEEN = 2,  /* left empty: a level the fit never saw */
    MR_SCORE_MISSING = 3  /* left empty: a missing covariate, offset or exposure */
} mr_score_count;

MR_API mr_scorer *mr_scorer_new(const mr_fit *fit);
MR_API void mr_scorer_free(mr_scorer *s);
/* The message of the last failed call, or "".  Owned by the scorer. */
MR_API const char *mr_scorer_errmsg(const mr_scorer *s);
/* Passes a column of the data through, before the computed ones (copied;
 * repeatable, in order). */
MR_API mr_status mr_scorer_keep(mr_scorer *s, const char *column);
/* Writes only the computed columns named (repeatable; they come in the
 * order listed above whatever the order of the calls; none named: all of
 * them).  MR_ERR_USAGE for another name; a residual named while the data
 * lack the outcome (or the trials or weight the fit names) fails the run
 * with MR_ERR_USAGE, nothing written.  Fewer columns are a smaller file
 * and a faster run: each number costs about as much to write as to read. */
MR_API mr_status mr_scorer_column(mr_scorer *s, const char *name);
/* Level of the mean's interval, strictly between 0 and 1 (default 0.95). */
MR_API mr_status mr_scorer_set_level(mr_scorer *s, double level);
MR_API mr_status mr_scorer_set_unseen(mr_scorer *s, mr_unseen policy);
/* Worker threads as MR_OPT_THREADS (0 = online CPUs, the default). */
MR_API mr_status mr_scorer_set_threads(mr_scorer *s, int threads);
MR_API mr_status mr_scorer_run(mr_scorer *s, const char *data, const char *out);
/* The same over several files read as one data set, by the rules of
 * mr_fitter_run_set (a directory's regular files, the same header in
 * each, messages naming each file and its own line): one output row per
 * row of the files, in order.  mr_scorer_run with a directory is a set of
 * it; npaths == 1 is mr_scorer_run. */
MR_API mr_status mr_scorer_run_set(mr_scorer *s, const char *const *paths, size_t npaths, const char *out);
/* A count of the last run (also after a failed one: what was written
 * before it). */
MR_API uint64_t mr_scorer_count(const mr_scorer *s, mr_score_count which);

/* Observed and expected by group.  mr_scorer_group_by names a grouping
 * column (copied; repeatable: the groups are the combinations of their
 * cells met in the data).  A run then also adds up, per group, over the
 * rows it scored that have the outcome: rows, exposure (the exposure
 * column's sum; null without one), observed O = sum of w y and expected
 * E = sum of w mean (w: the trials for binomial, times the weight; 1
 * otherwise), O/E, and O/E's exact Poisson interval at the scorer's level
 * (Garwood: lower chi2_{a/2}(2 O) / 2 / E, upper chi2_{1-a/2}(2 (O + 1))
 * / 2 / E, a = 1 - level; when O = 0 the lower bound is 0 and the upper
 * the one-sided chi2_{1-a}(2) / 2 / E).  For a binomial fit (events out
 * of n = sum w trials) the interval is instead Clopper-Pearson's exact
 * binomial one for O / n, times n / E: lower Beta_{a/2}(O, n - O + 1),
 * upper Beta_{1-a/2}(O + 1, n - O) (beta quantiles), and one-sided of level
 * 1 - a at O = 0 (upper) or O = n (lower).  O there is a sum of events of
 * unequal probabilities, less spread than a Poisson count (whose interval
 * would be too wide) and at most as spread as a binomial of equal
 * probabilities E / n (Hoeffding 1956): the interval keeps its level,
 * conservatively.  Groups are held in memory, at
 * most 1,000,000 of them (more: MR_ERR_USAGE); a group column the header
 * lacks, or a file without the outcome, is MR_ERR_USAGE.  Groups come in
 * order of first appearance in the data. */
MR_API mr_status mr_scorer_group_by(mr_scorer *s, const char *column);

typedef enum mr_groups_format {
    MR_GROUPS_TEXT = 0, /* an aligned table */
    MR_GROUPS_CSV = 1,  /* RFC 4180, numbers as the shortest text giving the double back */
    MR_GROUPS_JSON = 2  /* {"level", "interval": "poisson-exact" | "binomial-exact", "by": [..],
                           "groups": [{"key": {col: cell}, ...}]} */
} mr_groups_format;

/* The last successful run's group table as text in `format` (the caller
 * frees it with mr_free), or NULL when out of memory or when the run had
 * no mr_scorer_group_by. */
MR_API char *mr_scorer_groups_report(const mr_scorer *s, mr_groups_format format);
/* The same table written to `path` by the rules of "Output files" (the
 * run's input counts as one).  MR_OK, MR_ERR_USAGE, MR_ERR_IO or
 * MR_ERR_NO_MEMORY with mr_scorer_errmsg. */
MR_API mr_status mr_scorer_write_groups(mr_scorer *s, const char *path, mr_groups_format format);

/* One writer per output.  mr_output_lock_take locks the side file
 * TARGET.lock (TARGET: `path` with its links followed, as above), created
 * when absent, for as long as the lock is held; it writes there the
 * holder's pid, host name and start time.  A second taker of the same
 * TARGET - another process, on this or (through a file system with
 * working fcntl locks, such as NFS with its lock service) another
 * machine, or another thread of this one - gets MR_ERR_IO at once, with a
 * message naming the holder from that file; it never waits.  The kernel
 * drops the lock when its holder ends in any way (a crash, kill -9, a
 * reboot), so a lock is never stale.  Only the holder removes
 * TARGET.lock: mr_output_lock_release unlinks it while the lock is still
 * held, then lets go; a taker that locked the file just as it was
 * unlinked sees that the name no longer leads to it and starts over, so
 * two takers never both hold it.  A killed holder leaves the file,
 * unlocked; the next taker takes it.  Never delete it by hand while a run
 * may hold it.  The lock is advisory: mr_fit_write_json neither needs nor
 * checks it.  Errors: MR_ERR_IO (held, or the lock file cannot be opened,
 * is not a regular file, cannot be locked), MR_ERR_NO_MEMORY, with a
 * message in `msg` (capacity `msgcap`, may be 0).  On MR_OK *out is
 * released with mr_output_lock_release (NULL is fine). */
typedef struct mr_output_lock mr_output_lock;
MR_API mr_status mr_output_lock_take(const char *path, mr_output_lock **out, char *msg, size_t msgcap);
MR_API void mr_output_lock_release(mr_output_lock *lock);
/* The lock file's path (owned by the lock, valid until it is released),
 * for a signal handler that ends the process at once: unlinking it
 * there, while the lock is still held, is the holder's part of the
 * scheme above.  Stop using the copy before releasing the lock: after
 * that, the name may be another run's lock. */
MR_API const char *mr_output_lock_file(const mr_output_lock *lock);

/* Number of warnings and the i-th one (owned by the fit): possible
 * separation, aliased columns, non-convergence, ... */
MR_API size_t mr_fit_nwarnings(const mr_fit *fit);
MR_API const char *mr_fit_warning(const mr_fit *fit, size_t i);

/* A factor declared `many` (`factor COL [ref=LEVEL] many`: its levels
 * eliminated exactly instead of being columns).  Its levels other than
 * the reference are not coefficients: mr_fit_ncoef does not count them and
 * the covariance leaves them out.  The factor's name (owned by the fit),
 * or NULL when the fit has none; the number of those levels (0 without). */
MR_API const char *mr_fit_many_factor(const mr_fit *fit);
MR_API size_t mr_fit_many_nlevels(const mr_fit *fit);
/* Level k of them (0 .. mr_fit_many_nlevels - 1, in byte-wise order): its
 * name (owned by the fit), and through each pointer that is not NULL its
 * estimate (the difference from the reference level, link scale; NaN for a
 * level with no information), standard error (dispersion included; NaN:
 * no information) and information (the sum of the IRLS weights of its
 * rows).  NULL when k is out of range. */
MR_API const char *mr_fit_many_level(const mr_fit *fit, size_t k, double *estimate, double *std_error,
                                     double *information);
/* Those levels as CSV (RFC 4180, lines ended by CRLF): a header row
 * `level,estimate,standard_error,information`, then a row a level in the
 * order above, numbers as the shortest text that gives the double back,
 * an empty cell for NaN; the reference level, whose estimate is 0 by
 * definition, has no row.  Written to `path` by the rules of "Output
 * files" above; `inputs` (`ninputs`) are files the output must not
 * replace (the fit's JSON it was read from).  MR_OK, or MR_ERR_USAGE (no
 * factor declared `many`, or a path refused) / MR_ERR_IO /
 * MR_ERR_NO_MEMORY with a message in `msg`. */
MR_API mr_status mr_fit_write_many_csv(const mr_fit *fit, const char *path, const char *const *inputs, size_t ninputs,
                                       char *msg, size_t msgcap);
/* The pass after which the run that made `fit` went on from a checkpoint
 * (mr_fitter_set_checkpoint; "run": {"resumed": {"after_pass": N}} in the
 * JSON), or 0 when it ran from the start. */
MR_API int mr_fit_resumed_after_pass(const mr_fit *fit);

/* Calibration: observed against expected by tenths of the fitted mean.
 * The last pass sums, for every row of positive prior weight w, its w,
 * w y (observed) and w mu (expected) into bins of the fitted mean mu on a
 * fixed grid (relative width 2^-4 on a log scale of |mu|; for means in
 * (0, 1), of min(mu, 1 - mu) mirrored at 1/2), added in block order, so
 * the same bits for any thread count or buffer size.  Whole bins are then
 * cut into at most ten groups where the rows reach each tenth: a group's
 * share of the rows is a tenth only to within a bin (fewer groups when
 * the means are few), while its sums are exact.  The means are those at
 * the coefficients reported, except for a fit of uncollapsed rows ended
 * by the size of its step, where they are the last pass's, one step before
 * (mr_fit_calibration_basis says which, and how large that step was in
 * standard errors: at most the tolerance).  With an intercept
 * and a canonical link the expected total equals the observed total at
 * the maximum (the score equation); a group's O/E far from 1 is a hint of
 * a misfit along the mean, not a test.
 *
 * A model with an offset or an exposure bins its rows by the fitted rate
 * per unit of exposure instead, g^-1(eta - offset) (mu / exposure with a
 * log link), the same for a row and for the covariate pattern it
 * collapses into (whose mean is its rows' total): collapsed or not, the
 * same groups.  mean_low and mean_high then hold rates, and the basis
 * says "fitted rate per unit of exposure"; observed and expected stay
 * sums of w y and w mu.  A fit saved before this change binned such
 * models by the mean.
 *
 * mr_fit_calibration_groups: the number of groups, or -1 for a fit read
 * from a JSON written without them.  mr_fit_calibration_basis: what the
 * numbers are, one line of text owned by the fit (NULL when -1 above).
 * mr_fit_calibration_group: group i (0 = smallest means) into *out;
 * MR_ERR_USAGE when i is out of range or there are none. */
typedef struct mr_calibration_group {
    uint64_t rows;       /* rows of positive weight (a pattern counts its rows) */
    double weight;       /* sum of prior weights (weight x trials) */
    double mean_low;     /* the least fitted mean in the group (rate: above) */
    double mean_high;    /* the greatest */
    double observed;     /* sum of w y (events, for binomial and poisson) */
    double expected;     /* sum of w mu */
} mr_calibration_group;
MR_API int mr_fit_calibration_groups(const mr_fit *fit);
MR_API const char *mr_fit_calibration_basis(const mr_fit *fit);
MR_API mr_status mr_fit_calibration_group(const mr_fit *fit, size_t i, mr_calibration_group *out);

/* Survey: a file described before any model is named, in one pass over
 * it (plain, zstd, gzip or standard input "-", as a fit reads), with
 * worker threads and memory that does not grow with the rows.  Per
 * column of the header: its kind (integer: every non-missing cell is an
 * optional sign and digits; decimal: every one is a number of the fit's
 * grammar; text: some cell is not; empty: all missing), missing cells
 * (the missing tokens: "" and "NA" unless changed), the least, greatest
 * and mean of its numbers (sums in block order: the same bits for any
 * thread count or buffer size), the number of distinct cells and the
 * five most frequent with their counts (ties: first met first).  Distinct
 * cells are counted exactly while a column has at most `cap` of them
 * (default 1000); past that its table is dropped: the count is only
 * "more than cap" and no frequent values are given (memory: columns x cap
 * strings at most).  A row with another number of fields than the header
 * is malformed: counted, its first line given, and left out of the
 * columns.  An unterminated quote stops the run with MR_ERR_FORMAT.
 *
 * mr_survey_new: NULL when out of memory; free with mr_survey_free.
 * Setters and runs give MR_OK or an mr_status with mr_survey_errmsg (owned
 * by the handle, valid until its next call).  mr_survey_report: the last
 * successful run as text (free with mr_free), NULL when there is none or
 * out of memory.  mr_survey_write_json writes it to `path` by the rules of
 * "Output files" (the input counts as one): {"format": "millrace-survey",
 * "format_version": 1, "path", "rows": {"read", "malformed",
 * "first_malformed_line"}, "missing_tokens", "distinct_cap", "columns":
 * [{"name", "kind", "missing", "numbers", "min", "max", "mean" (null
 * when no numbers or text), "distinct" (null past the cap),
 * "distinct_more_than" (the cap, or null), "most_frequent": [{"value",
 * "count"}]}]}. */
typedef struct mr_survey mr_survey;
MR_API mr_survey *mr_survey_new(void);
MR_API void mr_survey_free(mr_survey *s);
MR_API const char *mr_survey_errmsg(const mr_survey *s);
MR_API mr_status mr_survey_set_threads(mr_survey *s, int threads);     /* 0: one per online CPU */
MR_API mr_status mr_survey_set_buffer_size(mr_survey *s, size_t bytes); /* read size, >= 4096 */
MR_API mr_status mr_survey_set_distinct_cap(mr_survey *s, size_t cap);  /* 1 .. 10,000,000 */
MR_API void mr_survey_clear_missing(mr_survey *s);
MR_API mr_status mr_survey_add_missing(mr_survey *s, const char *token);
MR_API mr_status mr_survey_run(mr_survey *s, const char *path);
MR_API char *mr_survey_report(const mr_survey *s);
MR_API mr_status mr_survey_write_json(mr_survey *s, const char *path);

/* ------------------------------------------------------------------ */
/* Several models compared on one file (README, "Comparing models").
 *
 *   mr_comparison  k models, each given as a configured mr_fitter that the
 *                  comparison borrows (it must outlive the comparison and
 *                  not run elsewhere meanwhile), fitted to one file by
 *                  mr_comparison_run; it owns the fits it makes and the
 *                  tests between them.  Created by mr_comparison_new (NULL
 *                  only when out of memory), freed by mr_comparison_free
 *                  (NULL is fine).  One thread at a time.
 *
 * Each model is fitted exactly as mr_fitter_run would fit it alone, with
 * its own fitter's options: its own rows (complete cases of its own
 * columns), design, IRLS and convergence, so each model's fit has the
 * same coefficients, standard errors and deviance, bit for bit, as that
 * model fitted alone.  The first pass is shared: the file (or standard
 * input, "-") is read, decompressed and cut into rows once, and every
 * model decodes each block with its own columns.  Later passes are each
 * model's own, as alone: over its kept columns or covariate patterns
 * (no reading), or, without a cache, over the file again (input read
 * only once is copied once, for all the models).  The fitters' progress
 * callbacks: the first fitter's during the shared pass, each fitter's own
 * after it.
 *
 * Tests.  A model A is nested in B when both have the same outcome,
 * trials, family (and parameter), link, offset, exposure, weight,
 * intercept and dispersion rule, and every term of A is a term of B with
 * the same coefficient columns (so a column entered as a factor in one
 * and numeric in the other is not the same term), B having more.  For
 * each such pair, with D = deviance(A) - deviance(B) and df =
 * residual_df(A) - residual_df(B):
 *   fixed dispersion      chi2 = D, p = P(chi2_df > D)
 *   estimated dispersion  chi2 = D / phi_B, p from chi2_df as above, and
 *                         F = D / (df phi_B), p = P(F(df, residual_df(B)) > F),
 *                         phi_B being B's Pearson dispersion
 * (what R's anova.glm gives for the two models with test "Chisq" and
 * "F").  A pair whose models used different rows (a column of B has
 * missing values that A's columns do not) is listed with no statistics
 * and a note: the test needs both fitted to the same rows.
 *
 * Drop-one tests (mr_comparison_drop_one): model i refitted without each
 * of its terms in turn, each reduced model tested against model i as a
 * nested pair above.  A term that is part of a larger term (a covariate
 * of an interaction, an interaction inside a larger one) is kept, as
 * marginality asks; the reduced models are fitted in the same shared
 * first pass as the models.
 *
 * These are tests of models chosen by the analyst; p-values are not
 * adjusted for the number of tests or for choosing among models. */
typedef struct mr_comparison mr_comparison;
MR_API mr_comparison *mr_comparison_new(void);
MR_API void mr_comparison_free(mr_comparison *c);
/* The message of the last failed call, or "" (owned by the comparison). */
MR_API const char *mr_comparison_errmsg(const mr_comparison *c);
/* Adds a model: `fitter` borrowed, `label` copied (names the model in
 * messages, the report and the JSON; labels must differ and be non-empty).
 * MR_OK, MR_ERR_USAGE (a label empty or already taken), MR_ERR_NO_MEMORY. */
MR_API mr_status mr_comparison_add(mr_comparison *c, mr_fitter *fitter, const char *label);
/* Asks for the drop-one tests of model `model` (0-based, in the order
 * added) at the next run.  MR_OK or MR_ERR_USAGE (no such model). */
MR_API mr_status mr_comparison_drop_one(mr_comparison *c, size_t model);
/* Fits every model (and the reduced models of drop-one tests) to `path`
 * and computes the tests.  MR_OK, or the status of the first model that
 * failed, with a message naming that model ("model LABEL: ...", or
 * "model LABEL without TERM: ..." for a reduced one) - a column of its
 * model missing from the file, say; MR_ERR_USAGE for no model.  A reduced
 * model that is no model (nothing left to fit) is a test with a note.  A model that stopped at the pass limit is
 * kept and flagged (mr_fit_status), as with mr_fitter_run. */
MR_API mr_status mr_comparison_run(mr_comparison *c, const char *path);
MR_API size_t mr_comparison_nmodels(const mr_comparison *c);
/* Label of model i (owned by the comparison; NULL when out of range). */
MR_API const char *mr_comparison_label(const mr_comparison *c, size_t i);
/* The fit of model i after a successful run, owned by the comparison
 * (valid until the next run or mr_comparison_free); NULL otherwise. */
MR_API const mr_fit *mr_comparison_fit(const mr_comparison *c, size_t i);

typedef enum mr_test_kind { MR_TEST_NESTED = 0, MR_TEST_DROP_ONE = 1 } mr_test_kind;
/* One test.  NESTED: models `smaller` and `larger` (indices of the
 * models).  DROP_ONE: `larger` is the model, `term` the name of the term
 * left out (owned by the comparison), and the reduced model's deviance,
 * residual df and AIC are given (`smaller` is (size_t)-1).  Statistics are
 * NaN where they do not apply (F under a fixed dispersion) or when the
 * test could not be made; `note` (owned; "" when none) says why. */
typedef struct mr_model_test {
    mr_test_kind kind;
    size_t smaller, larger;
    const char *term;
    double reduced_deviance, reduced_residual_df, reduced_aic;
    double df, deviance_change;
    double chi2, chi2_p;
    double f, f_p, f_residual_df;
    const char *note;
} mr_model_test;
MR_API size_t mr_comparison_ntests(const mr_comparison *c);
/* Test k into *out; 0 when k is out of range. */
MR_API int mr_comparison_test(const mr_comparison *c, size_t k, mr_model_test *out);
/* The comparison as text for people: each model's rows, deviance,
 * residual df, AIC and BIC, then the tests; numbers with `digits`
 * significant digits (0: 6).  Free with mr_free; NULL when out of memory
 * or before a successful run. */
MR_API char *mr_comparison_report(const mr_comparison *c, int digits);
/* The comparison as JSON (format "millrace-comparison", README) to
 * `path` by the rules of "Output files"; `inputs` (`ninputs`) are files
 * it must not replace (the data file, the model files).  MR_OK, or
 * MR_ERR_USAGE / MR_ERR_IO / MR_ERR_NO_MEMORY with a message in `msg`
 * (capacity `msgcap`, may be 0). */
MR_API mr_status mr_comparison_write_json(const mr_comparison *c, const char *path, const char *const *inputs,
                                          size_t ninputs, char *msg, size_t msgcap);

/* Frees memory the library returned (mr_fit_report). NULL is fine. */
MR_API void mr_free(void *p);

/* 1 when coefficient j is not estimable in practice: the outcomes of a
 * factor level or of a cell of two or three interacting factors are all 0 (or, for
 * the binomial, all at the maximum), found from the first pass's counts,
 * or its standard error grew at each of the last passes (separation by a
 * covariate); its estimate and standard error are where IRLS stopped on
 * the way to infinity, and a warning names it and says what to do.
 * 0 for j out of range. */
MR_API int mr_fit_coef_not_estimable(const mr_fit *fit, size_t j);

/* ------------------------------------------------------------------ */
/* A fit shared by several processes (the command's MPI build: README,
 * "Fitting across processes").  The library knows nothing of MPI: the
 * caller gives it a way to gather bytes from every process to every
 * process, and the library keeps the order of additions that makes the
 * fit the same, to the bit, as one process's (timings aside).
 *
 * How a shared fit runs: rank 0 reads the data once (the first pass) and
 * takes the warm start, as one process does, then sends the first pass's
 * result and the IRLS state to the others, which take them up as a fit
 * resumed after its first pass does (mr_fitter_set_checkpoint).  Each IRLS
 * pass over the data then splits the blocks' groups (16 blocks of 16384
 * rows each, counted from the first data row) into contiguous ranges, one
 * per rank: each rank computes only its groups' totals (a plain file read
 * by the first pass's block map, its own bytes alone; a compressed file
 * or a set streamed, the other ranks' blocks passed over undecoded), all
 * group totals go to every rank, and every rank adds them in group order,
 * the order one process keeps; every rank then takes the same IRLS step.
 * Per pass one exchange: each rank sends, per group of its range, the
 * group's totals (p(p+1)/2 + p + 10 doubles and two counts for p
 * coefficients, and the calibration bins its means met), and receives
 * every group's; they cannot be summed further by a rank without changing
 * the last bits.  Every rank then takes the same step (no coefficients are
 * broadcast).  The first pass is not split;
 * a fit whose rows collapse into covariate patterns (one read, IRLS in
 * memory) runs its passes on every rank alone, with no messages.
 *
 * Robust standard errors by rows (mr_fitter_set_robust) split their final
 * pass the same way, each group sending its score sums and X'WX.
 * Cluster-robust ones (mr_fitter_set_cluster) need the file grouped by
 * the cluster column: each rank sends, per block of its range, its runs
 * of one cluster (each run's first key word, the first and last runs'
 * score sums, the sum of s s' over the runs between), and every rank adds
 * every block's in block order as one process does (the same bits).  A
 * file not grouped by the column is MR_ERR_CLUSTERS on every rank (one
 * process would hold a table of every cluster instead).
 *
 * A checkpoint (mr_fitter_set_checkpoint) is rank 0's alone: it takes
 * the lock, writes the file and takes it up; the other ranks ignore the
 * path and take rank 0's state, resumed or not, in the first exchange.
 * The ranks' states are the same bits, so a checkpoint made under any
 * number of ranks resumes under any other, or without a share.
 *
 * Refused under a share of more than one rank (MR_ERR_USAGE): standard
 * input or a pipe (each rank must read the file itself), a factor
 * declared `many`, a family parameter by profile likelihood.  mr_fitter_run and mr_fitter_run_set
 * take the share; other runs (comparisons, scoring) ignore it.
 *
 * Errors: every exchange carries each rank's status and message.  A rank
 * that fails (its own error or one it met in its blocks) makes one last
 * exchange with its error instead of its next one; every rank then ends
 * its run with the error of the lowest rank that failed (the first in the
 * file's order of rows, as one process would have reported), and the
 * share has ended: no further exchange takes place (mr_share_ended). */
typedef struct mr_share mr_share;

/* Gathers every rank's bytes to every rank, in rank order (an allgather of
 * bytes of any length): `mine` (len bytes) is this rank's; on return
 * *all holds the ranks' bytes one after another, from malloc (the library
 * frees it with free), and lens[k] (lens: nranks entries, the library's)
 * rank k's length.  Every rank calls it the same number of times.
 * Returns 0, or nonzero when the exchange failed (the run then fails with
 * MR_ERR_IO). */
typedef int (*mr_share_gather_fn)(void *user, const void *mine, size_t len, void **all, size_t *lens);

/* A new share: this process is `rank` of `nranks` (0 <= rank < nranks),
 * exchanging through `gather` with `user`.  *out owned by the caller
 * (mr_share_free), borrowed by every fitter given it.  MR_ERR_USAGE on
 * bad arguments, MR_ERR_NO_MEMORY. */
MR_API mr_status mr_share_new(int rank, int nranks, mr_share_gather_fn gather, void *user, mr_share **out);
MR_API void mr_share_free(mr_share *s);
MR_API int mr_share_rank(const mr_share *s);
MR_API int mr_share_nranks(const mr_share *s);
/* 1 once an exchange carried an error (or failed), which every rank then
 * knows, or once the share was closed (mr_share_close). */
MR_API int mr_share_ended(const mr_share *s);

/* The last exchange of a program's shared work, once its own part is done
 * (rank 0 wrote the outputs, say): each rank gives its status and message
 * (NULL: none); returns the lowest failing rank's status, its message in
 * msg (capacity msgcap, may be 0; "" when none failed), and ends the
 * share.  On a share that has ended already, no exchange: the status it
 * ended with. */
MR_API mr_status mr_share_close(mr_share *s, mr_status status, const char *message, char *msg, size_t msgcap);

/* Fits of f are shared (share borrowed, NULL: a fit of its own, the
 * default).  The fitter's options and model must be the same on every
 * rank, and every rank must run it on the same inputs. */
MR_API void mr_fitter_set_share(mr_fitter *f, mr_share *share);

#ifdef __cplusplus
}
#endif
#endif /* MILLRACE_H */
