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
    MR_ERR_FORMAT = 4,       /* malformed input: CSV, number, zstd stream   */
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
    MR_ERR_STOPPED = 11      /* the progress callback set with
                                mr_fitter_set_progress_stop asked the run
                                to stop (never returned by the command,
                                which stops a fit this way on SIGINT,
                                SIGTERM, SIGHUP and exits 128 + the
                                signal's number)                            */
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
 *   inverse-gaussian  inverse-squared, inverse, identity, log          */

typedef enum mr_family {
    MR_GAUSSIAN = 0,
    MR_BINOMIAL = 1,
    MR_POISSON = 2,
    MR_GAMMA = 3,
    MR_INVERSE_GAUSSIAN = 4
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
 *   outcome COL | trials COL | family NAME | link NAME |
 *   numeric COL | factor COL [ref=LEVEL] | interact A B [C] |
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
    MR_OPT_NO_COLLAPSE = 7   /* 1: never collapse rows into covariate
                                patterns (default 0: collapse when every
                                term is a factor or a numeric with few
                                values and there is no offset, or poisson
                                with a log link; the fit then reads the
                                file once) */
} mr_int_option;

/* Real-valued options. */
typedef enum mr_real_option {
    MR_OPT_TOLERANCE = 0,    /* converged when |D_k - D_k-1| / (|D_k| + 0.1)
                                is below this, or when the next Newton step
                                is predicted to change the deviance by less
                                than a hundredth of it (default 1e-10)     */
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

/* Fits the model to the CSV (optionally zstd-compressed) at `path`, or to
 * standard input when path is "-".  The input is only read, once or more
 * (input that is not a regular file - standard input, a pipe such as
 * /dev/fd/N, a FIFO, a device - is copied during the first pass to an
 * unlinked temporary file in $TMPDIR, and later passes read the copy); a file
 * that changes between reads (its size, time, header, rows or bytes not as
 * first read: later passes compare checksums) ends the fit with MR_ERR_IO.  On MR_OK, *out receives a new fit that the caller frees with mr_fit_free;
 * a fit that stopped at the pass limit is still returned with MR_OK and
 * flagged (mr_fit_status() gives MR_ERR_NOT_CONVERGED).  On any other
 * status *out is NULL and mr_fitter_errmsg says why.  The fitter may be run
 * again, on the same or another file. */
MR_API mr_status mr_fitter_run(mr_fitter *f, const char *path, mr_fit **out);

/* ------------------------------------------------------------------ */
/* The fit.  All accessors take a non-NULL fit; indices are 0-based and
 * must be below mr_fit_ncoef().                                        */

MR_API void mr_fit_free(mr_fit *fit);

/* MR_OK, or MR_ERR_NOT_CONVERGED when the pass limit was reached. */
MR_API mr_status mr_fit_status(const mr_fit *fit);

MR_API size_t mr_fit_ncoef(const mr_fit *fit);
/* Coefficient names: "(intercept)", "year", "sex=M", "age_band=45-49 & sex=M".
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
    MR_STAT_RELATIVE_CHANGE = 13,
    MR_STAT_SECONDS = 14,
    MR_STAT_RANK = 15,
    MR_STAT_LEVEL = 16,      /* confidence level of the intervals            */
    MR_STAT_START_CARRIED = 17 /* coefficients taken from the previous fit
                                  (mr_fitter_set_start); NaN without one     */
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
 * format_version 2): the same coefficients, covariance, statistics,
 * warnings and report, and what rebuilding the model needs (the model's
 * lines as given, its terms, factor levels and references, and the input's
 * path, size, modification time and checksum).  Writing the fit read gives
 * the same bytes as the file read, and NaN and infinities, written as null,
 * read back as NaN.  On MR_OK, *out receives a new fit the caller frees
 * with mr_fit_free; it is read-only like any other, and mr_fit_status
 * gives what it gave when written.  Otherwise *out is NULL and `msg`
 * (capacity `msgcap`, may be 0) says why: MR_ERR_IO when the file cannot
 * be opened or read; MR_ERR_FORMAT when it is not JSON (with jansson's
 * line and column), not a millrace fit, of another format_version, or
 * lacks a field or has one of the wrong type (the field is named, e.g.
 * 'model.terms[2].label'); MR_ERR_NO_MEMORY. */
MR_API mr_status mr_fit_read_json(const char *path, mr_fit **out, char *msg, size_t msgcap);

/* ------------------------------------------------------------------ */
/* Output files.  Every file the library writes (mr_fit_write_json) obeys:
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

/* Frees memory the library returned (mr_fit_report). NULL is fine. */
MR_API void mr_free(void *p);

#ifdef __cplusplus
}
#endif
#endif /* MILLRACE_H */
