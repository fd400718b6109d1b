/* main.c - the millrace command: a thin client of the library.  It turns
 * options into model lines and fitter options, shows progress, prints the
 * report and writes the JSON.  Exit codes are the library's status values
 * (see millrace.h and the README). */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <getopt.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"

enum {
    OPT_OUTCOME = 256, OPT_TRIALS, OPT_FAMILY, OPT_LINK, OPT_NUMERIC, OPT_FACTOR, OPT_INTERACT, OPT_SPLINE, OPT_OFFSET,
    OPT_EXPOSURE, OPT_WEIGHT, OPT_NO_INTERCEPT, OPT_DISPERSION, OPT_THREADS, OPT_BUFFER, OPT_TOLERANCE,
    OPT_MAX_PASSES, OPT_LEVEL, OPT_DELIMITER, OPT_MISSING, OPT_IN_MEMORY, OPT_ON_BAD_ROW, OPT_JSON, OPT_QUIET,
    OPT_DIGITS, OPT_NO_CACHE, OPT_NO_COLLAPSE, OPT_START_FROM, OPT_HELP, OPT_RUN_LOG, OPT_THRESHOLD, OPT_CSV,
    OPT_FIT, OPT_OUT, OPT_KEEP, OPT_UNSEEN, OPT_BY, OPT_BY_OUT, OPT_DROP_ONE, OPT_FIT_JSON, OPT_ROBUST, OPT_CLUSTER,
    OPT_CLUSTER_MEMORY, OPT_CHECKPOINT
};

static const struct option long_options[] = {
    {"model", required_argument, NULL, 'm'},
    {"outcome", required_argument, NULL, OPT_OUTCOME},
    {"trials", required_argument, NULL, OPT_TRIALS},
    {"family", required_argument, NULL, OPT_FAMILY},
    {"link", required_argument, NULL, OPT_LINK},
    {"numeric", required_argument, NULL, OPT_NUMERIC},
    {"factor", required_argument, NULL, OPT_FACTOR},
    {"interact", required_argument, NULL, OPT_INTERACT},
    {"spline", required_argument, NULL, OPT_SPLINE},
    {"offset", required_argument, NULL, OPT_OFFSET},
    {"exposure", required_argument, NULL, OPT_EXPOSURE},
    {"weight", required_argument, NULL, OPT_WEIGHT},
    {"no-intercept", no_argument, NULL, OPT_NO_INTERCEPT},
    {"dispersion", required_argument, NULL, OPT_DISPERSION},
    {"threads", required_argument, NULL, OPT_THREADS},
    {"buffer-size", required_argument, NULL, OPT_BUFFER},
    {"tolerance", required_argument, NULL, OPT_TOLERANCE},
    {"max-passes", required_argument, NULL, OPT_MAX_PASSES},
    {"level", required_argument, NULL, OPT_LEVEL},
    {"delimiter", required_argument, NULL, OPT_DELIMITER},
    {"missing", required_argument, NULL, OPT_MISSING},
    {"in-memory", no_argument, NULL, OPT_IN_MEMORY},
    {"no-cache", no_argument, NULL, OPT_NO_CACHE},
    {"no-collapse", no_argument, NULL, OPT_NO_COLLAPSE},
    {"on-bad-row", required_argument, NULL, OPT_ON_BAD_ROW},
    {"start-from", required_argument, NULL, OPT_START_FROM},
    {"robust", required_argument, NULL, OPT_ROBUST},
    {"cluster", required_argument, NULL, OPT_CLUSTER},
    {"cluster-memory", required_argument, NULL, OPT_CLUSTER_MEMORY},
    {"json", required_argument, NULL, OPT_JSON},
    {"run-log", required_argument, NULL, OPT_RUN_LOG},
    {"quiet", no_argument, NULL, OPT_QUIET},
    {"digits", required_argument, NULL, OPT_DIGITS},
    {"help", no_argument, NULL, OPT_HELP},
    {"fit", required_argument, NULL, OPT_FIT},
    {"out", required_argument, NULL, OPT_OUT},
    {"keep", required_argument, NULL, OPT_KEEP},
    {"unseen", required_argument, NULL, OPT_UNSEEN},
    {"by", required_argument, NULL, OPT_BY},
    {"by-out", required_argument, NULL, OPT_BY_OUT},
    {"checkpoint", required_argument, NULL, OPT_CHECKPOINT},
    {NULL, 0, NULL, 0},
};

/* The drift command's own options (--json and --digits mean what they
 * mean for fit). */
static const struct option drift_long_options[] = {
    {"threshold", required_argument, NULL, OPT_THRESHOLD},
    {"json", required_argument, NULL, OPT_JSON},
    {"csv", required_argument, NULL, OPT_CSV},
    {"digits", required_argument, NULL, OPT_DIGITS},
    {NULL, 0, NULL, 0},
};

/* Options of `millrace compare`: the models, the run's options (each
 * model's fitter gets them), and the comparison's outputs. */
static const struct option compare_options[] = {
    {"model", required_argument, NULL, 'm'},
    {"drop-one", required_argument, NULL, OPT_DROP_ONE},
    {"json", required_argument, NULL, OPT_JSON},
    {"fit-json", required_argument, NULL, OPT_FIT_JSON},
    {"digits", required_argument, NULL, OPT_DIGITS},
    {"quiet", no_argument, NULL, OPT_QUIET},
    {"threads", required_argument, NULL, OPT_THREADS},
    {"buffer-size", required_argument, NULL, OPT_BUFFER},
    {"tolerance", required_argument, NULL, OPT_TOLERANCE},
    {"max-passes", required_argument, NULL, OPT_MAX_PASSES},
    {"level", required_argument, NULL, OPT_LEVEL},
    {"delimiter", required_argument, NULL, OPT_DELIMITER},
    {"missing", required_argument, NULL, OPT_MISSING},
    {"in-memory", no_argument, NULL, OPT_IN_MEMORY},
    {"no-cache", no_argument, NULL, OPT_NO_CACHE},
    {"no-collapse", no_argument, NULL, OPT_NO_COLLAPSE},
    {"on-bad-row", required_argument, NULL, OPT_ON_BAD_ROW},
    {"help", no_argument, NULL, OPT_HELP},
    {NULL, 0, NULL, 0},
};

/* Options of `millrace report`. */
enum { OPT_HTML = 512, OPT_AT, OPT_REPORT_DIGITS, OPT_GROUPS };
static const struct option report_options[] = {
    {"html", required_argument, NULL, OPT_HTML},
    {"at", required_argument, NULL, OPT_AT},
    {"digits", required_argument, NULL, OPT_REPORT_DIGITS},
    {"groups", required_argument, NULL, OPT_GROUPS},
    {NULL, 0, NULL, 0},
};

/* Options of `millrace survey` (--json, --threads, --buffer-size,
 * --missing, --quiet mean what they mean for fit). */
enum { OPT_DISTINCT_CAP = 768 };
static const struct option survey_options[] = {
    {"json", required_argument, NULL, OPT_JSON},
    {"threads", required_argument, NULL, OPT_THREADS},
    {"buffer-size", required_argument, NULL, OPT_BUFFER},
    {"missing", required_argument, NULL, OPT_MISSING},
    {"distinct-cap", required_argument, NULL, OPT_DISTINCT_CAP},
    {"quiet", no_argument, NULL, OPT_QUIET},
    {"help", no_argument, NULL, OPT_HELP},
    {NULL, 0, NULL, 0},
};

static const char usage_text[] =
    "usage: millrace fit [options] DATA...  fit a GLM to DATA (CSV, TSV, zstd or gzip, or - for stdin);\n"
    "                               several files or a directory are read as one data set\n"
    "       millrace show [--digits N] FIT.json   the report of a fit saved with --json\n"
    "       millrace drift [--threshold SE] [--json PATH] [--csv PATH] [--digits N] OLD.json NEW.json\n"
    "                               what changed between two saved fits of one model (default 3 SE)\n"
    "       millrace report --html PATH [--at COL=VALUE]... [--digits N] [--groups GROUPS.json] FIT.json...\n"
    "                                  saved fits as one HTML page (plots, comparison of the fits;\n"
    "                                  a funnel plot of score's --by-out JSON)\n"
    "       millrace score --fit FIT.json --out FILE[.zst] [--keep COL]... [--level P]\n"
    "                      [--unseen fail|blank] [--threads N] [--by COL]... [--by-out PATH] DATA\n"
    "                      predictions and residuals per row; observed/expected by group\n"
    "       millrace survey [--json PATH] [--distinct-cap N] [--missing TOKEN]... [--threads N]\n"
    "                       [--buffer-size BYTES] [--quiet] DATA\n"
    "                      each column described in one pass, before a model: kind, missing, range,\n"
    "                      distinct values (exact up to N, default 1000), the most frequent\n"
    "       millrace compare -m MODEL -m MODEL... [--drop-one NAME]... [--json PATH] [--fit-json PREFIX]\n"
    "                        [--digits N] [--quiet] [run options] DATA\n"
    "                        several models fitted to DATA: deviance, AIC, BIC, tests of nested models\n"
    "                        (a model is named by its file's name less .model)\n"
    "       millrace version | help\n"
    "\n"
    "model (each option takes the words of the model-file line of the same name):\n"
    "  -m, --model FILE        model file\n"
    "  --outcome COL  --trials COL  --family NAME  --link NAME\n"
    "  --numeric COL  --factor 'COL [ref=LEVEL]'  --interact 'A B [C]'\n"
    "  --spline 'COL df=N|knots=K1,K2,... [boundary=LO,HI]'\n"
    "  --offset COL  --exposure COL  --weight COL  --no-intercept  --dispersion estimate|fixed\n"
    "run:\n"
    "  --threads N  --buffer-size BYTES  --tolerance X  --max-passes N  --level P\n"
    "  --delimiter ,|tab|;  --missing TOKEN (repeatable)  --in-memory  --no-cache  --no-collapse\n"
    "  --on-bad-row fail|skip  --start-from FIT.json (start from a previous fit of the same model)\n"
    "  --robust hc0|hc1  --cluster COL  --cluster-memory MB (robust standard errors, by rows or clusters)\n"
    "  --checkpoint PATH (state after each pass; a rerun of a killed fit goes on from it)\n"
    "output:\n"
    "  --json PATH  --run-log FILE (a line appended per run)  --quiet  --digits N\n"
    "exit codes: 0 ok, 2 usage, 3 I/O, 4 malformed input, 5 value outside the model, 6 no data,\n"
    "            7 not converged, 8 out of memory, 9 internal error, 10 numerical breakdown,\n"
    "            12 drift flagged a change, 13 clusters need more memory than allowed\n"
    "            128+N stopped by signal N (130 SIGINT, 143 SIGTERM, 129 SIGHUP; nothing written)\n";

typedef struct cli {
    mr_fitter *fitter;
    const char *json_path, *run_log;
    int quiet, digits, missing_given, progress_shown, show_progress;
    const char *data;     /* set once the arguments are read: the run gets logged */
    int argc;             /* the whole command line, for the fit's audit trail */
    char **argv;
    int run_log_refused;  /* its target failed the output checks */
    mr_fit *fit;
    char **model_lines; /* options as model lines, applied after the model file */
    const char **model_origin;
    size_t nlines;
    const char *model_file;
    mr_output_lock *lock; /* on the JSON, for the run */
    const char *cluster;  /* --cluster, --cluster-memory (MiB; 0 the default) */
    long long cluster_mib;
} cli;

/* The last error said, for the run log. */
static char last_error[1024];

static int fail(mr_status st, const char *msg)
{
    snprintf(last_error, sizeof last_error, "%s", msg);
    fprintf(stderr, "millrace: %s\n", msg);
    return (int)st;
}

static int usage_error(const char *msg)
{
    snprintf(last_error, sizeof last_error, "%s", msg);
    fprintf(stderr, "millrace: %s (see 'millrace help')\n", msg);
    return (int)MR_ERR_USAGE;
}

static int add_line(cli *c, const char *directive, const char *value, const char *origin)
{
    size_t n = strlen(directive) + (value ? strlen(value) : 0) + 2;
    char *line = malloc(n), **lines;
    const char **origins;
    if (line == NULL) return -1;
    snprintf(line, n, "%s %s", directive, value ? value : "");
    lines = realloc(c->model_lines, (c->nlines + 1) * sizeof *lines);
    if (lines == NULL) {
        free(line);
        return -1;
    }
    c->model_lines = lines;
    origins = realloc(c->model_origin, (c->nlines + 1) * sizeof *origins);
    if (origins == NULL) {
        free(line);
        return -1;
    }
    c->model_origin = origins;
    c->model_lines[c->nlines] = line;
    c->model_origin[c->nlines++] = origin;
    return 0;
}

static int parse_count(const char *s, long long *out)
{
    char *end;
    long long v = strtoll(s, &end, 10);
    if (*s == '\0' || *end != '\0') return -1;
    *out = v;
    return 0;
}

static int parse_real(const char *s, double *out)
{
    char *end;
    double v = strtod(s, &end);
    if (*s == '\0' || *end != '\0') return -1;
    *out = v;
    return 0;
}

static int set_int(cli *c, mr_int_option opt, const char *arg, const char *name)
{
    long long v;
    char msg[256];
    if (parse_count(arg, &v) != 0) {
        snprintf(msg, sizeof msg, "%s takes a whole number, got '%s'", name, arg);
        return usage_error(msg);
    }
    if (mr_fitter_set_int(c->fitter, opt, v) != MR_OK) return usage_error(mr_fitter_errmsg(c->fitter));
    return 0;
}

static int set_real(cli *c, mr_real_option opt, const char *arg, const char *name)
{
    double v;
    char msg[256];
    if (parse_real(arg, &v) != 0) {
        snprintf(msg, sizeof msg, "%s takes a number, got '%s'", name, arg);
        return usage_error(msg);
    }
    if (mr_fitter_set_real(c->fitter, opt, v) != MR_OK) return usage_error(mr_fitter_errmsg(c->fitter));
    return 0;
}

static int set_delimiter(cli *c, const char *arg)
{
    int d = strcmp(arg, "tab") == 0 || strcmp(arg, "\\t") == 0 ? '\t' : (strlen(arg) == 1 ? arg[0] : -1);
    if (d != ',' && d != ';' && d != '\t') return usage_error("--delimiter takes ',', ';' or tab");
    mr_fitter_set_int(c->fitter, MR_OPT_DELIMITER, d);
    return 0;
}

static int set_missing(cli *c, const char *arg)
{
    if (!c->missing_given) mr_fitter_clear_missing(c->fitter);
    c->missing_given = 1;
    if (mr_fitter_add_missing(c->fitter, arg) != MR_OK) return fail(MR_ERR_NO_MEMORY, "out of memory");
    return 0;
}

static int set_bad_rows(cli *c, const char *arg)
{
    if (strcmp(arg, "fail") != 0 && strcmp(arg, "skip") != 0) return usage_error("--on-bad-row takes fail or skip");
    mr_fitter_set_int(c->fitter, MR_OPT_SKIP_BAD_ROWS, strcmp(arg, "skip") == 0);
    return 0;
}

/* The previous fit is read now: a file that is not one fails before any
 * data is read; whether it is a fit of this model is the run's check. */
static int set_start(cli *c, const char *path)
{
    char msg[1024];
    mr_fit *previous = NULL;
    mr_status st = mr_fit_read_json(path, &previous, msg, sizeof msg);
    if (st != MR_OK) return fail(st, msg);
    st = mr_fitter_set_start(c->fitter, previous, path);
    mr_fit_free(previous);
    return st == MR_OK ? 0 : fail(st, mr_fitter_errmsg(c->fitter));
}

static const char *directive_of(int opt)
{
    switch (opt) {
    case OPT_OUTCOME: return "outcome";
    case OPT_TRIALS: return "trials";
    case OPT_FAMILY: return "family";
    case OPT_LINK: return "link";
    case OPT_NUMERIC: return "numeric";
    case OPT_FACTOR: return "factor";
    case OPT_INTERACT: return "interact";
    case OPT_SPLINE: return "spline";
    case OPT_OFFSET: return "offset";
    case OPT_EXPOSURE: return "exposure";
    case OPT_WEIGHT: return "weight";
    case OPT_DISPERSION: return "dispersion";
    default: return NULL;
    }
}

static int handled(int rc) { return rc ? rc : -1; }

static int set_robust(cli *c, int opt, const char *arg)
{
    mr_status st;
    if (opt == OPT_ROBUST) {
        if (strcmp(arg, "hc0") != 0 && strcmp(arg, "hc1") != 0) return usage_error("--robust takes hc0 or hc1");
        st = mr_fitter_set_robust(c->fitter, strcmp(arg, "hc0") == 0 ? MR_ROBUST_HC0 : MR_ROBUST_HC1);
        return st == MR_OK ? 0 : fail(st, mr_fitter_errmsg(c->fitter));
    }
    if (opt == OPT_CLUSTER) c->cluster = arg;
    else if (parse_count(arg, &c->cluster_mib) != 0 || c->cluster_mib < 1 || c->cluster_mib > (1LL << 30))
        return usage_error("--cluster-memory takes a number of MiB (1 or more)");
    if (c->cluster == NULL) return 0;
    st = mr_fitter_set_cluster(c->fitter, c->cluster, (size_t)c->cluster_mib << 20);
    return st == MR_OK ? 0 : fail(st, mr_fitter_errmsg(c->fitter));
}

/* Returns -1 when the option was handled, else an exit code. */
static int handle_option(cli *c, int opt, const char *arg)
{
    const char *d = directive_of(opt);
    if (d != NULL) return add_line(c, d, arg, d) == 0 ? -1 : fail(MR_ERR_NO_MEMORY, "out of memory");
    switch (opt) {
    case 'm': c->model_file = arg; return -1;
    case OPT_NO_INTERCEPT: return add_line(c, "intercept", "no", "--no-intercept") == 0 ? -1 : 8;
    case OPT_THREADS: return handled(set_int(c, MR_OPT_THREADS, arg, "--threads"));
    case OPT_BUFFER: return handled(set_int(c, MR_OPT_BUFFER_SIZE, arg, "--buffer-size"));
    case OPT_MAX_PASSES: return handled(set_int(c, MR_OPT_MAX_PASSES, arg, "--max-passes"));
    case OPT_TOLERANCE: return handled(set_real(c, MR_OPT_TOLERANCE, arg, "--tolerance"));
    case OPT_LEVEL: return handled(set_real(c, MR_OPT_LEVEL, arg, "--level"));
    case OPT_DELIMITER: return handled(set_delimiter(c, arg));
    case OPT_MISSING: return handled(set_missing(c, arg));
    case OPT_IN_MEMORY: mr_fitter_set_int(c->fitter, MR_OPT_IN_MEMORY, 1); return -1;
    case OPT_NO_CACHE: mr_fitter_set_int(c->fitter, MR_OPT_NO_CACHE, 1); return -1;
    case OPT_NO_COLLAPSE: mr_fitter_set_int(c->fitter, MR_OPT_NO_COLLAPSE, 1); return -1;
    case OPT_ON_BAD_ROW: return handled(set_bad_rows(c, arg));
    case OPT_START_FROM: return handled(set_start(c, arg));
    case OPT_ROBUST:
    case OPT_CLUSTER:
    case OPT_CLUSTER_MEMORY: return handled(set_robust(c, opt, arg));
    case OPT_JSON: c->json_path = arg; return -1;
    case OPT_RUN_LOG: c->run_log = arg; return -1;
    case OPT_CHECKPOINT:
        if (mr_fitter_set_checkpoint(c->fitter, arg) != MR_OK) return fail(MR_ERR_NO_MEMORY, "out of memory");
        return -1;
    case OPT_QUIET: c->quiet = 1; return -1;
    case OPT_DIGITS: {
        long long v;
        if (parse_count(arg, &v) != 0 || v < 1 || v > 17) return usage_error("--digits takes 1 to 17");
        c->digits = (int)v;
        return -1;
    }
    case OPT_HELP: fputs(usage_text, stdout); return 0;
    default: return usage_error("unknown option");
    }
}

static void show_progress(const mr_progress *p, cli *c)
{
    double rate = p->seconds > 0 ? p->rows_done / p->seconds : 0;
    if (p->bytes_total > 0) {
        double frac = (double)p->bytes_done / (double)p->bytes_total;
        double eta = frac > 0 ? p->seconds * (1 - frac) / frac : 0;
        fprintf(stderr, "\rpass %d: %5.1f%%  %.0f rows/s  eta %.0f s   ", p->pass, 100 * frac, rate, eta);
    } else if (p->bytes_done > 0) {
        fprintf(stderr, "\rpass %d: %llu bytes  %.0f rows/s   ", p->pass, (unsigned long long)p->bytes_done, rate);
    } else {
        /* A pass over kept columns reads no input bytes. */
        fprintf(stderr, "\rpass %d: %llu rows  %.0f rows/s   ", p->pass, (unsigned long long)p->rows_done, rate);
    }
    c->progress_shown = 1;
}

static int apply_model(cli *c)
{
    size_t i;
    mr_status st = c->model_file ? mr_fitter_model_file(c->fitter, c->model_file) : MR_OK;
    /* a model file that cannot be read is an I/O error (3), not a usage one */
    if (st == MR_ERR_USAGE) return usage_error(mr_fitter_errmsg(c->fitter));
    if (st != MR_OK) return fail(st, mr_fitter_errmsg(c->fitter));
    for (i = 0; i < c->nlines; i++) {
        char origin[64];
        snprintf(origin, sizeof origin, "--%s", c->model_origin[i]);
        if (mr_fitter_model_line(c->fitter, c->model_lines[i], origin) != MR_OK)
            return usage_error(mr_fitter_errmsg(c->fitter));
    }
    return 0;
}

static int stdout_failed(const char *what)
{
    char msg[256];
    snprintf(msg, sizeof msg, "cannot write %sto standard output: %s", what, strerror(errno));
    return fail(MR_ERR_IO, msg);
}

/* A report on standard output (freed here); 0 or the exit code of the
 * failure. */
static int print_text(char *report)
{
    int written;
    if (report == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory writing the report");
    /* A failed write past the stdio buffer is not remembered by fflush:
     * each step's result counts. */
    written = fputs(report, stdout) != EOF && fflush(stdout) == 0 && !ferror(stdout);
    mr_free(report);
    return written ? 0 : stdout_failed("the report ");
}

static int print_report(const mr_fit *fit, int digits) { return print_text(mr_fit_report(fit, digits)); }

static int publish(cli *c, mr_fit *fit)
{
    char msg[1024];
    mr_status st;
    int rc = print_report(fit, c->digits);
    if (rc != 0) return rc;
    if (c->json_path && (st = mr_fit_write_json(fit, c->json_path, msg, sizeof msg)) != MR_OK) return fail(st, msg);
    return (int)mr_fit_status(fit);
}

/* Refuses, before the fit, a JSON path that is the data or the model
 * file or cannot take an output (the library checks again as it writes). */
static int check_outputs(cli *c, char **data, size_t ndata)
{
    const char **inputs = calloc(ndata + 1, sizeof *inputs);
    size_t n = ndata;
    char msg[1024];
    mr_status st = MR_OK;
    if (inputs == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
    memcpy(inputs, data, ndata * sizeof *inputs);
    if (c->model_file) inputs[n++] = c->model_file;
    if (c->run_log && (st = mr_output_check(c->run_log, inputs, n, msg, sizeof msg)) != MR_OK) c->run_log_refused = 1;
    if (st == MR_OK && c->json_path) st = mr_output_check(c->json_path, inputs, n, msg, sizeof msg);
    free(inputs);
    return st == MR_OK ? 0 : fail(st, msg);
}

/* The run's line in the run log; the run's exit code, or the log's own
 * failure when the line could not be written. */
static int log_run(const cli *c, int rc)
{
    const char *inputs[2] = {c->data, c->model_file};
    mr_run_record rec;
    char msg[1024];
    mr_status st;
    if (c->run_log == NULL || c->data == NULL || c->run_log_refused) return rc;
    rec.input = c->data;
    rec.exit_code = rc;
    rec.error = rc != 0 && last_error[0] ? last_error : NULL;
    rec.fit = c->fit;
    rec.argc = (size_t)c->argc;
    rec.argv = (const char *const *)c->argv;
    st = mr_run_log_append(c->run_log, &rec, inputs, c->model_file ? 2 : 1, msg, sizeof msg);
    return st == MR_OK ? rc : fail(st, msg);
}

/* the JSON's lock file while this process holds it (lock_output) */
static char held_lock[4096];
static volatile sig_atomic_t lock_held;

/* Two runs writing one JSON at once: the second is refused at its start,
 * naming the first, and the lock is held until the JSON is in place. */
static int lock_output(cli *c)
{
    char msg[1024];
    mr_status st;
    if (c->json_path == NULL) return 0;
    st = mr_output_lock_take(c->json_path, &c->lock, msg, sizeof msg);
    if (st != MR_OK) return fail(st, msg);
    if (strlen(mr_output_lock_file(c->lock)) < sizeof held_lock) {
        strcpy(held_lock, mr_output_lock_file(c->lock));
        lock_held = 1;
    }
    return 0;
}

/* SIGINT, SIGTERM, SIGHUP.  While the fit runs, the first one only sets
 * stop_signal (async-signal-safe); the progress callback reads it at the
 * next block and the library ends the run, its temporary files removed,
 * and the command exits 128 + the signal's number without any output.
 * A second signal, or one while the JSON is written (a rename must not be
 * half done by a handler that returns), ends the process at once: the
 * temporary output is unlinked and the signal raised again. */
static volatile sig_atomic_t stop_signal, stop_at_block;

static void on_signal(int sig)
{
    if (stop_at_block && !stop_signal) {
        stop_signal = sig;
        return;
    }
    mr_output_unlink_temps();
    if (lock_held) unlink(held_lock); /* ours while held: the lock's own scheme */
    signal(sig, SIG_DFL);
    raise(sig);
}

static void clean_up_on_signals(void)
{
    static const int sigs[] = {SIGINT, SIGTERM, SIGHUP};
    struct sigaction sa;
    size_t i;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_signal;
    sigemptyset(&sa.sa_mask);
    for (i = 0; i < sizeof sigs / sizeof sigs[0]; i++) sigaddset(&sa.sa_mask, sigs[i]);
    for (i = 0; i < sizeof sigs / sizeof sigs[0]; i++) {
        struct sigaction old;
        /* a signal the caller chose to ignore stays ignored (nohup) */
        if (sigaction(sigs[i], NULL, &old) == 0 && old.sa_handler == SIG_IGN) continue;
        sigaction(sigs[i], &sa, NULL);
    }
}

/* Called by the library a few times a second: the progress line, and
 * whether a signal asked the fit to stop. */
/* MILLRACE_TEST_KILL=pass:K:ROWS (tests only, tests/cli/checkpoint.sh):
 * the process kills itself with SIGKILL, as kill -9 would, at the first
 * progress call of pass K with at least ROWS rows added (the last call of a
 * pass comes after all its rows: at the latest, then). */
static int kill_pass, kill_rows_set;
static unsigned long long kill_rows;

static void read_test_kill(void)
{
    const char *v = getenv("MILLRACE_TEST_KILL");
    kill_rows_set = v != NULL && sscanf(v, "pass:%d:%llu", &kill_pass, &kill_rows) == 2;
}

static int progress_or_stop(const mr_progress *p, void *user)
{
    cli *c = user;
    if (kill_rows_set && p->pass == kill_pass && p->rows_done >= kill_rows) raise(SIGKILL);
    if (c->show_progress) show_progress(p, c);
    return stop_signal != 0;
}

static int stopped(void)
{
    char msg[128];
    snprintf(msg, sizeof msg, "stopped by signal %d (%s); nothing written", (int)stop_signal,
             stop_signal == SIGINT ? "SIGINT" : stop_signal == SIGTERM ? "SIGTERM" : "SIGHUP");
    fail(MR_ERR_STOPPED, msg);
    return 128 + (int)stop_signal;
}

static int run_fit(cli *c, int argc, char **argv)
{
    int opt, rc;
    mr_fit *fit = NULL;
    mr_status st;
    optind = 1;
    while ((opt = getopt_long(argc, argv, "m:", long_options, NULL)) != -1) {
        if (opt == '?') return usage_error("bad option");
        if ((rc = handle_option(c, opt, optarg)) >= 0) return rc;
    }
    if (optind >= argc) return usage_error("fit takes one or more data files or directories (or - for standard input)");
    c->data = argv[optind];
    if ((rc = apply_model(c)) != 0) return rc;
    if ((rc = check_outputs(c, argv + optind, (size_t)(argc - optind))) != 0) return rc;
    if (mr_fitter_set_command_line(c->fitter, (size_t)c->argc, (const char *const *)c->argv) != MR_OK)
        return fail(MR_ERR_NO_MEMORY, "out of memory");
    if ((rc = lock_output(c)) != 0) return rc;
    c->show_progress = !c->quiet && isatty(STDERR_FILENO);
    mr_fitter_set_progress_stop(c->fitter, progress_or_stop, c);
    stop_at_block = 1;
    read_test_kill();
    st = mr_fitter_run_set(c->fitter, (const char *const *)argv + optind, (size_t)(argc - optind), &fit);
    stop_at_block = 0;
    if (mr_fitter_checkpoint_note(c->fitter)[0])
        fprintf(stderr, "millrace: %s\n", mr_fitter_checkpoint_note(c->fitter));
    if (c->progress_shown) fputs("\r\033[K", stderr);
    if (stop_signal) {
        mr_fit_free(fit);
        return stopped();
    }
    if (st != MR_OK) return fail(st, mr_fitter_errmsg(c->fitter));
    c->fit = fit;
    rc = publish(c, fit);
    if (rc == MR_ERR_NOT_CONVERGED) fprintf(stderr, "millrace: the fit did not converge (see the report)\n");
    return rc;
}

/* The report of a saved fit, as the fit printed it. */
static int show_fit(int argc, char **argv)
{
    char msg[1024];
    long long digits = 0;
    mr_fit *fit = NULL;
    mr_status st;
    int rc;
    if (argc == 4 && strcmp(argv[1], "--digits") == 0) {
        if (parse_count(argv[2], &digits) != 0 || digits < 1 || digits > 17) return usage_error("--digits takes 1 to 17");
        argv += 2;
        argc -= 2;
    }
    if (argc != 2) return usage_error("show takes one fit saved with --json");
    if ((st = mr_fit_read_json(argv[1], &fit, msg, sizeof msg)) != MR_OK) return fail(st, msg);
    rc = print_report(fit, (int)digits);
    mr_fit_free(fit);
    return rc;
}

typedef struct drift_cli {
    double threshold;
    const char *json_path, *csv_path;
    int digits;
} drift_cli;

/* Returns -1 when the option was handled, else an exit code. */
static int drift_option(drift_cli *dc, int opt, const char *arg)
{
    long long v;
    switch (opt) {
    case OPT_THRESHOLD:
        if (parse_real(arg, &dc->threshold) != 0 || !(dc->threshold > 0) || dc->threshold > 1e300)
            return usage_error("--threshold takes a positive number of standard errors");
        return -1;
    case OPT_JSON: dc->json_path = arg; return -1;
    case OPT_CSV: dc->csv_path = arg; return -1;
    case OPT_DIGITS:
        if (parse_count(arg, &v) != 0 || v < 1 || v > 17) return usage_error("--digits takes 1 to 17");
        dc->digits = (int)v;
        return -1;
    default: return usage_error("bad option (drift takes --threshold, --json, --csv, --digits)");
    }
}

/* The JSON and CSV, checked before the fits are read (as fit does), then
 * written; 0 or the exit code of the failure. */
static int drift_outputs(const drift_cli *dc, const mr_drift *d, const char *const *inputs)
{
    char msg[1024];
    mr_status st = MR_OK;
    if (d == NULL) {
        if (dc->json_path) st = mr_output_check(dc->json_path, inputs, 2, msg, sizeof msg);
        if (st == MR_OK && dc->csv_path) st = mr_output_check(dc->csv_path, inputs, 2, msg, sizeof msg);
    } else {
        if (dc->json_path) st = mr_drift_write_json(d, dc->json_path, inputs, 2, msg, sizeof msg);
        if (st == MR_OK && dc->csv_path) st = mr_drift_write_csv(d, dc->csv_path, inputs, 2, msg, sizeof msg);
    }
    return st == MR_OK ? 0 : fail(st, msg);
}

static int compare_fits(const drift_cli *dc, const char *const *paths, mr_fit *const *fits)
{
    char msg[1024], said[2200];
    mr_drift *d = NULL;
    mr_status st = mr_drift_compare(fits[0], fits[1], dc->threshold, &d, msg, sizeof msg);
    int rc;
    if (st != MR_OK) {
        snprintf(said, sizeof said, "%s, %s: %s", paths[0], paths[1], msg);
        return fail(st, said);
    }
    rc = print_text(mr_drift_report(d, dc->digits));
    if (rc == 0) rc = drift_outputs(dc, d, paths);
    if (rc == 0 && mr_drift_nflagged(d) > 0) rc = MR_DRIFT_FLAGGED;
    mr_drift_free(d);
    return rc;
}

/* What changed between two saved fits; MR_DRIFT_FLAGGED when anything
 * is flagged, so that a scheduler can alert. */
static int run_drift(int argc, char **argv)
{
    drift_cli dc = {3.0, NULL, NULL, 0};
    mr_fit *fits[2] = {NULL, NULL};
    char msg[1024];
    int opt, rc, i;
    optind = 1;
    while ((opt = getopt_long(argc, argv, "", drift_long_options, NULL)) != -1)
        if ((rc = drift_option(&dc, opt == '?' ? 0 : opt, optarg)) >= 0) return rc;
    if (optind != argc - 2) return usage_error("drift takes two fits saved with --json: the old and the new");
    if ((rc = drift_outputs(&dc, NULL, (const char *const *)argv + optind)) != 0) return rc;
    for (i = 0; i < 2 && rc == 0; i++) {
        mr_status st = mr_fit_read_json(argv[optind + i], &fits[i], msg, sizeof msg);
        if (st != MR_OK) rc = fail(st, msg);
    }
    if (rc == 0) rc = compare_fits(&dc, (const char *const *)argv + optind, fits);
    mr_fit_free(fits[0]);
    mr_fit_free(fits[1]);
    return rc;
}

static int add_setting(char ***settings, size_t *n, const char *prefix, const char *value)
{
    size_t len = strlen(prefix) + strlen(value) + 1;
    char **grown = realloc(*settings, (*n + 1) * sizeof **settings), *s = malloc(len);
    if (grown) *settings = grown;
    if (grown == NULL || s == NULL) {
        free(s);
        return -1;
    }
    snprintf(s, len, "%s%s", prefix, value);
    (*settings)[(*n)++] = s;
    return 0;
}

/* Reads every fit, then writes the page (the library checks the path). */
static int write_page(const char *html, char **paths, size_t nfits, char **settings, size_t nsettings)
{
    mr_fit **fits = calloc(nfits, sizeof *fits);
    char msg[1024];
    mr_status st = fits ? MR_OK : MR_ERR_NO_MEMORY;
    size_t k;
    snprintf(msg, sizeof msg, "out of memory");
    for (k = 0; st == MR_OK && k < nfits; k++) st = mr_fit_read_json(paths[k], &fits[k], msg, sizeof msg);
    if (st == MR_OK)
        st = mr_fits_write_html((const mr_fit *const *)fits, (const char *const *)paths, nfits,
                                (const char *const *)settings, nsettings, html, msg, sizeof msg);
    for (k = 0; fits && k < nfits; k++) mr_fit_free(fits[k]);
    free(fits);
    return st == MR_OK ? 0 : fail(st, msg);
}

/* millrace report --html PATH [--at COL=VALUE]... [--digits N] [--groups FILE] FIT.json... */
static int report_page(int argc, char **argv)
{
    char **settings = NULL;
    const char *html = NULL;
    size_t n = 0, i;
    int opt, rc = 0;
    optind = 1;
    while (rc == 0 && (opt = getopt_long(argc, argv, "", report_options, NULL)) != -1) {
        if (opt == OPT_HTML) html = optarg;
        else if (opt == OPT_AT || opt == OPT_REPORT_DIGITS || opt == OPT_GROUPS)
            rc = add_setting(&settings, &n, opt == OPT_AT ? "at " : opt == OPT_GROUPS ? "groups " : "digits ", optarg) == 0
                     ? 0
                     : fail(MR_ERR_NO_MEMORY, "out of memory");
        else rc = usage_error("bad option");
    }
    if (rc == 0 && html == NULL) rc = usage_error("report needs --html PATH");
    if (rc == 0 && optind >= argc) rc = usage_error("report takes one or more fits saved with --json");
    if (rc == 0) rc = write_page(html, argv + optind, (size_t)(argc - optind), settings, n);
    for (i = 0; i < n; i++) free(settings[i]);
    free(settings);
    return rc;
}

/* What went to standard output counts only once it is out: a write that
 * failed earlier or the last flush failing turns success into MR_ERR_IO. */
static int close_stdout(int rc)
{
    int bad = ferror(stdout);
    if (fclose(stdout) != 0) bad = 1;
    if (bad && (rc == 0 || rc == MR_ERR_NOT_CONVERGED || rc == MR_DRIFT_FLAGGED)) return stdout_failed("");
    return rc;
}

typedef struct score_cli {
    const char *fit_path, *out_path, *by_out;
    int quiet, by, help;
} score_cli;

static int score_option(mr_scorer *s, score_cli *o, int opt, const char *arg)
{
    long long n;
    double v;
    switch (opt) {
    case OPT_FIT: o->fit_path = arg; return 0;
    case OPT_OUT: o->out_path = arg; return 0;
    case OPT_QUIET: o->quiet = 1; return 0;
    case OPT_KEEP: return mr_scorer_keep(s, arg) == MR_OK ? 0 : fail(MR_ERR_NO_MEMORY, "out of memory");
    case OPT_BY: o->by = 1; return mr_scorer_group_by(s, arg) == MR_OK ? 0 : fail(MR_ERR_NO_MEMORY, "out of memory");
    case OPT_BY_OUT: o->by_out = arg; return 0;
    case OPT_HELP: o->help = 1; return 0;
    case OPT_UNSEEN:
        if (strcmp(arg, "fail") != 0 && strcmp(arg, "blank") != 0) return usage_error("--unseen takes fail or blank");
        return mr_scorer_set_unseen(s, strcmp(arg, "blank") == 0 ? MR_UNSEEN_BLANK : MR_UNSEEN_FAIL);
    case OPT_LEVEL:
        if (parse_real(arg, &v) != 0 || mr_scorer_set_level(s, v) != MR_OK) return usage_error("--level takes a number in (0, 1)");
        return 0;
    case OPT_THREADS:
        if (parse_count(arg, &n) != 0 || n > 256 || mr_scorer_set_threads(s, (int)n) != MR_OK)
            return usage_error("--threads takes 0 to 256");
        return 0;
    default: return usage_error("score takes --fit, --out, --keep, --level, --unseen, --threads, --by, --by-out, --quiet");
    }
}

static void score_summary(const mr_scorer *s, const char *out)
{
    fprintf(stderr, "millrace: %llu rows to %s: %llu scored, %llu left empty (%llu unseen level, %llu missing value)\n",
            (unsigned long long)mr_scorer_count(s, MR_SCORE_ROWS), out,
            (unsigned long long)mr_scorer_count(s, MR_SCORE_SCORED),
            (unsigned long long)(mr_scorer_count(s, MR_SCORE_UNSEEN) + mr_scorer_count(s, MR_SCORE_MISSING)),
            (unsigned long long)mr_scorer_count(s, MR_SCORE_UNSEEN),
            (unsigned long long)mr_scorer_count(s, MR_SCORE_MISSING));
}

static int ends_with(const char *s, const char *tail)
{
    size_t n = strlen(s), t = strlen(tail);
    return n >= t && strcmp(s + n - t, tail) == 0;
}

/* The observed/expected table: to --by-out (its format from its name), or
 * as text on standard output. */
static int write_groups(mr_scorer *s, const score_cli *o)
{
    mr_groups_format f = MR_GROUPS_TEXT;
    char *text;
    mr_status st;
    if (o->by_out) {
        if (ends_with(o->by_out, ".json")) f = MR_GROUPS_JSON;
        else if (ends_with(o->by_out, ".csv")) f = MR_GROUPS_CSV;
        st = mr_scorer_write_groups(s, o->by_out, f);
        return st == MR_OK ? 0 : fail(st, mr_scorer_errmsg(s));
    }
    if ((text = mr_scorer_groups_report(s, MR_GROUPS_TEXT)) == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
    fputs(text, stdout);
    mr_free(text);
    return 0;
}

/* Each row of DATA scored with a saved fit (README, "Scoring"). */
static int run_score(mr_scorer *s, score_cli *o, int argc, char **argv)
{
    const char *inputs[2];
    char msg[1024];
    int opt, rc;
    mr_status st;
    optind = 1;
    while ((opt = getopt_long(argc, argv, "", long_options, NULL)) != -1) {
        if (opt == '?') return usage_error("bad option");
        if ((rc = score_option(s, o, opt, optarg)) != 0) return rc;
    }
    if (o->help) {
        fputs(usage_text, stdout);
        return 0;
    }
    if (optind >= argc) return usage_error("score takes one or more data files or directories (or - for standard input)");
    if (o->fit_path == NULL || o->out_path == NULL) return usage_error("score needs --fit and --out");
    if (o->by_out && !o->by) return usage_error("--by-out needs --by");
    inputs[0] = argv[optind];
    inputs[1] = o->fit_path;
    if ((st = mr_output_check(o->out_path, inputs, 2, msg, sizeof msg)) != MR_OK) return fail(st, msg);
    if (o->by_out && (st = mr_output_check(o->by_out, inputs, 2, msg, sizeof msg)) != MR_OK) return fail(st, msg);
    st = mr_scorer_run_set(s, (const char *const *)argv + optind, (size_t)(argc - optind), o->out_path);
    if (st != MR_OK) return fail(st, mr_scorer_errmsg(s));
    if (!o->quiet) score_summary(s, o->out_path);
    return o->by ? write_groups(s, o) : 0;
}

static int score(int argc, char **argv)
{
    char msg[1024];
    score_cli o;
    mr_fit *fit = NULL;
    mr_scorer *s;
    mr_status st;
    int rc, i;
    memset(&o, 0, sizeof o);
    /* the fit first: options are checked on the scorer it makes */
    for (i = 1; i < argc && strcmp(argv[i], "--") != 0; i++) {
        if (strcmp(argv[i], "--fit") == 0 && i + 1 < argc) o.fit_path = argv[++i];
        else if (strncmp(argv[i], "--fit=", 6) == 0) o.fit_path = argv[i] + 6;
        else if (strcmp(argv[i], "--help") == 0) return fputs(usage_text, stdout), 0;
    }
    if (o.fit_path == NULL) return usage_error("score needs --fit FIT.json");
    if ((st = mr_fit_read_json(o.fit_path, &fit, msg, sizeof msg)) != MR_OK) return fail(st, msg);
    if ((s = mr_scorer_new(fit)) == NULL) rc = fail(MR_ERR_NO_MEMORY, "out of memory");
    else rc = run_score(s, &o, argc, argv);
    mr_scorer_free(s);
    mr_fit_free(fit);
    return rc;
}

typedef struct survey_cli {
    const char *json;
    int quiet, help, missing_given;
} survey_cli;

static int survey_option(mr_survey *s, survey_cli *o, int opt, const char *arg)
{
    long long n;
    switch (opt) {
    case OPT_JSON: o->json = arg; return 0;
    case OPT_QUIET: o->quiet = 1; return 0;
    case OPT_HELP: o->help = 1; return 0;
    case OPT_MISSING:
        if (!o->missing_given) mr_survey_clear_missing(s);
        o->missing_given = 1;
        return mr_survey_add_missing(s, arg) == MR_OK ? 0 : fail(MR_ERR_NO_MEMORY, "out of memory");
    case OPT_THREADS:
        if (parse_count(arg, &n) != 0 || n > 256 || mr_survey_set_threads(s, (int)n) != MR_OK)
            return usage_error("--threads takes a count from 0 to 256");
        return 0;
    case OPT_BUFFER:
        if (parse_count(arg, &n) != 0 || mr_survey_set_buffer_size(s, (size_t)n) != MR_OK)
            return usage_error("--buffer-size takes a byte count of at least 4096");
        return 0;
    case OPT_DISTINCT_CAP:
        if (parse_count(arg, &n) != 0 || mr_survey_set_distinct_cap(s, (size_t)n) != MR_OK)
            return usage_error("--distinct-cap takes a count from 1 to 10000000");
        return 0;
    default: return usage_error("survey takes --json, --distinct-cap, --missing, --threads, --buffer-size, --quiet");
    }
}

/* millrace survey [options] DATA: the columns of DATA, before a model. */
static int survey(int argc, char **argv)
{
    survey_cli o;
    mr_survey *s = mr_survey_new();
    char msg[1024], *text;
    int opt, rc = 0;
    mr_status st;
    memset(&o, 0, sizeof o);
    if (s == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
    optind = 1;
    while (rc == 0 && (opt = getopt_long(argc, argv, "", survey_options, NULL)) != -1)
        rc = opt == '?' ? usage_error("bad option") : survey_option(s, &o, opt, optarg);
    if (rc == 0 && o.help) fputs(usage_text, stdout);
    else if (rc == 0 && optind != argc - 1) rc = usage_error("survey takes exactly one data file (or - for standard input)");
    else if (rc == 0 && o.json && (st = mr_output_check(o.json, (const char *const *)&argv[optind], 1, msg, sizeof msg)) != MR_OK)
        rc = fail(st, msg);
    else if (rc == 0 && (st = mr_survey_run(s, argv[optind])) != MR_OK) rc = fail(st, mr_survey_errmsg(s));
    else if (rc == 0 && o.json && (st = mr_survey_write_json(s, o.json)) != MR_OK) rc = fail(st, mr_survey_errmsg(s));
    else if (rc == 0 && !o.quiet) {
        if ((text = mr_survey_report(s)) == NULL) rc = fail(MR_ERR_NO_MEMORY, "out of memory");
        else fputs(text, stdout);
        mr_free(text);
    }
    mr_survey_free(s);
    return rc;
}

/* ---- millrace compare -------------------------------------------------- */

typedef struct compare_cli {
    const char **model;     /* the model files, in order */
    char **label;           /* each one's name: its file's base name less .model */
    mr_fitter **fitter;
    size_t n;
    const char **drop;      /* names given to --drop-one */
    size_t ndrop;
    int *opt;               /* the run's options, replayed on every fitter */
    const char **arg;
    size_t nopt;
    const char *json, *fit_json, *data;
    const char **inputs;    /* the data file, then the model files: never an output */
    int digits, quiet;
    int argc;               /* the whole command line, for each fit's audit trail */
    char **argv;
} compare_cli;

static int grow(void *array, size_t n, size_t unit)
{
    void *p = realloc(*(void **)array, (n + 1) * unit);
    if (p == NULL) return -1;
    *(void **)array = p;
    return 0;
}

static char *model_label(const char *path)
{
    const char *base = strrchr(path, '/') ? strrchr(path, '/') + 1 : path;
    size_t n = strlen(base);
    char *label;
    if (n > 6 && strcmp(base + n - 6, ".model") == 0) n -= 6;
    if ((label = malloc(n + 1)) != NULL) memcpy(label, base, n), label[n] = '\0';
    return label;
}

static int compare_option(compare_cli *o, int opt, const char *arg)
{
    long long v;
    switch (opt) {
    case 'm':
        if (grow(&o->model, o->n, sizeof *o->model) != 0) return fail(MR_ERR_NO_MEMORY, "out of memory");
        o->model[o->n++] = arg;
        return 0;
    case OPT_DROP_ONE:
        if (grow(&o->drop, o->ndrop, sizeof *o->drop) != 0) return fail(MR_ERR_NO_MEMORY, "out of memory");
        o->drop[o->ndrop++] = arg;
        return 0;
    case OPT_JSON: o->json = arg; return 0;
    case OPT_FIT_JSON: o->fit_json = arg; return 0;
    case OPT_QUIET: o->quiet = 1; return 0;
    case OPT_DIGITS:
        if (parse_count(arg, &v) != 0 || v < 1 || v > 17) return usage_error("--digits takes 1 to 17");
        o->digits = (int)v;
        return 0;
    case OPT_HELP: fputs(usage_text, stdout); return -2;
    default:
        if (grow(&o->opt, o->nopt, sizeof *o->opt) != 0 || grow(&o->arg, o->nopt, sizeof *o->arg) != 0)
            return fail(MR_ERR_NO_MEMORY, "out of memory");
        o->opt[o->nopt] = opt;
        o->arg[o->nopt++] = arg;
        return 0;
    }
}

/* Model i's fitter: its file, then the run's options. */
static int compare_fitter(compare_cli *o, size_t i, mr_comparison *cmp)
{
    cli c;
    size_t k;
    int rc = 0;
    memset(&c, 0, sizeof c);
    if ((o->fitter[i] = c.fitter = mr_fitter_new()) == NULL || (o->label[i] = model_label(o->model[i])) == NULL)
        return fail(MR_ERR_NO_MEMORY, "out of memory");
    c.model_file = o->model[i];
    if ((rc = apply_model(&c)) != 0) return rc;
    for (k = 0; k < o->nopt && rc == 0; k++) rc = handle_option(&c, o->opt[k], o->arg[k]) == -1 ? 0 : MR_ERR_USAGE;
    if (rc == 0 && mr_fitter_set_command_line(c.fitter, (size_t)o->argc, (const char *const *)o->argv) != MR_OK)
        rc = fail(MR_ERR_NO_MEMORY, "out of memory");
    if (rc == 0 && mr_comparison_add(cmp, c.fitter, o->label[i]) != MR_OK)
        rc = usage_error(mr_comparison_errmsg(cmp));
    return rc;
}

static int compare_outputs(const compare_cli *o, const mr_comparison *cmp)
{
    char msg[1024], *path;
    size_t i;
    mr_status st;
    int rc = print_text(mr_comparison_report(cmp, o->digits));
    if (rc == 0 && o->json && (st = mr_comparison_write_json(cmp, o->json, o->inputs, o->n + 1, msg, sizeof msg)) != MR_OK)
        rc = fail(st, msg);
    for (i = 0; rc == 0 && o->fit_json && i < o->n; i++) {
        size_t len = strlen(o->fit_json) + strlen(o->label[i]) + 6;
        if ((path = malloc(len)) == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
        snprintf(path, len, "%s%s.json", o->fit_json, o->label[i]);
        if ((st = mr_fit_write_json(mr_comparison_fit(cmp, i), path, msg, sizeof msg)) != MR_OK) rc = fail(st, msg);
        free(path);
    }
    return rc;
}

/* Each model's fit JSON, checked before the run as the comparison's is. */
static int check_fit_json(const compare_cli *o)
{
    char msg[1024], *path;
    size_t i;
    mr_status st = MR_OK;
    for (i = 0; o->fit_json && st == MR_OK && i < o->n; i++) {
        size_t len = strlen(o->fit_json) + strlen(o->label[i]) + 6;
        if ((path = malloc(len)) == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
        snprintf(path, len, "%s%s.json", o->fit_json, o->label[i]);
        st = mr_output_check(path, o->inputs, o->n + 1, msg, sizeof msg);
        free(path);
    }
    return st == MR_OK ? 0 : fail(st, msg);
}

static int compare_run(compare_cli *o, mr_comparison *cmp)
{
    char msg[1024];
    size_t i, j;
    int rc = 0, unconverged = 0;
    mr_status st;
    o->fitter = calloc(o->n, sizeof *o->fitter);
    o->label = calloc(o->n, sizeof *o->label);
    if (o->fitter == NULL || o->label == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < o->n && rc == 0; i++) rc = compare_fitter(o, i, cmp);
    for (j = 0; j < o->ndrop && rc == 0; j++) {
        for (i = 0; i < o->n && strcmp(o->label[i], o->drop[j]) != 0; i++) continue;
        if (i == o->n) return usage_error("--drop-one names no model given with -m (a model is named by its file's "
                                          "name less .model)");
        mr_comparison_drop_one(cmp, i);
    }
    if (rc != 0) return rc;
    if ((o->inputs = calloc(o->n + 1, sizeof *o->inputs)) == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
    o->inputs[0] = o->data;
    for (i = 0; i < o->n; i++) o->inputs[i + 1] = o->model[i];
    if (o->json && (st = mr_output_check(o->json, o->inputs, o->n + 1, msg, sizeof msg)) != MR_OK) return fail(st, msg);
    if ((rc = check_fit_json(o)) != 0) return rc;
    if ((st = mr_comparison_run(cmp, o->data)) != MR_OK) return fail(st, mr_comparison_errmsg(cmp));
    rc = compare_outputs(o, cmp);
    /* as fit: everything written, and 7 when a model did not converge */
    for (i = 0; rc == 0 && i < o->n; i++)
        if (mr_fit_status(mr_comparison_fit(cmp, i)) != MR_OK) {
            fprintf(stderr, "millrace: model %s did not converge (see the table)\n", o->label[i]);
            unconverged = 1;
        }
    return rc == 0 && unconverged ? (int)MR_ERR_NOT_CONVERGED : rc;
}

/* Several models fitted to one file and compared (README, "Comparing
 * models"). */
static int compare(int argc, char **argv)
{
    compare_cli o;
    mr_comparison *cmp = NULL;
    int opt, rc = 0;
    size_t i;
    memset(&o, 0, sizeof o);
    o.argc = argc + 1;
    o.argv = argv - 1;
    optind = 1;
    while (rc == 0 && (opt = getopt_long(argc, argv, "m:", compare_options, NULL)) != -1)
        rc = opt == '?' ? usage_error("bad option (see 'millrace help' for compare's)") : compare_option(&o, opt, optarg);
    if (rc == -2) rc = 0;
    else if (rc == 0 && optind != argc - 1) rc = usage_error("compare takes exactly one data file");
    else if (rc == 0 && o.n < 1) rc = usage_error("compare needs a model file (-m MODEL) for each model");
    else if (rc == 0 && (cmp = mr_comparison_new()) == NULL) rc = fail(MR_ERR_NO_MEMORY, "out of memory");
    else if (rc == 0) {
        o.data = argv[optind];
        rc = compare_run(&o, cmp);
    }
    mr_comparison_free(cmp);
    for (i = 0; o.fitter && i < o.n; i++) mr_fitter_free(o.fitter[i]);
    for (i = 0; o.label && i < o.n; i++) free(o.label[i]);
    free(o.fitter);
    free(o.label);
    free(o.model);
    free(o.drop);
    free(o.opt);
    free(o.arg);
    free(o.inputs);
    return rc;
}

static int dispatch(int argc, char **argv)
{
    cli c;
    int rc;
    size_t i;
    if (argc < 2 || strcmp(argv[1], "help") == 0 || strcmp(argv[1], "--help") == 0) {
        fputs(usage_text, argc < 2 ? stderr : stdout);
        return argc < 2 ? (int)MR_ERR_USAGE : 0;
    }
    if (strcmp(argv[1], "version") == 0 || strcmp(argv[1], "--version") == 0) {
        printf("millrace %s\n", mr_version());
        return 0;
    }
    if (strcmp(argv[1], "show") == 0) return show_fit(argc - 1, argv + 1);
    if (strcmp(argv[1], "drift") == 0) return run_drift(argc - 1, argv + 1);
    if (strcmp(argv[1], "report") == 0) return report_page(argc - 1, argv + 1);
    if (strcmp(argv[1], "score") == 0) return score(argc - 1, argv + 1);
    if (strcmp(argv[1], "survey") == 0) return survey(argc - 1, argv + 1);
    if (strcmp(argv[1], "compare") == 0) return compare(argc - 1, argv + 1);
    if (strcmp(argv[1], "fit") != 0) return usage_error("unknown command (try 'millrace fit')");
    memset(&c, 0, sizeof c);
    c.fitter = mr_fitter_new();
    if (c.fitter == NULL) return fail(MR_ERR_NO_MEMORY, "out of memory");
    c.argc = argc;
    c.argv = argv;
    rc = log_run(&c, run_fit(&c, argc - 1, argv + 1));
    mr_fit_free(c.fit);
    for (i = 0; i < c.nlines; i++) free(c.model_lines[i]);
    free(c.model_lines);
    free(c.model_origin);
    mr_fitter_free(c.fitter);
    lock_held = 0; /* before the release: then the name may be another's */
    mr_output_lock_release(c.lock);
    return rc;
}

int main(int argc, char **argv)
{
    clean_up_on_signals();
    return close_stdout(dispatch(argc, argv));
}
