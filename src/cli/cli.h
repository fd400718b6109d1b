/* cli.h - what the commands of the millrace client share: the option
 * codes, the usage text, failure messages, standard output, the output
 * lock and the signals, the option loop, and the fit's option handling
 * (compare replays it on each model's fitter).  Each command is one
 * cmd_*.c file; main.c only dispatches. */
#ifndef MR_CLI_H
#define MR_CLI_H

#include <getopt.h>
#include <stddef.h>

#include "millrace.h"

enum {
    OPT_OUTCOME = 256, OPT_TRIALS, OPT_FAMILY, OPT_LINK, OPT_NUMERIC, OPT_FACTOR, OPT_INTERACT, OPT_SPLINE, OPT_OFFSET,
    OPT_EXPOSURE, OPT_WEIGHT, OPT_NO_INTERCEPT, OPT_DISPERSION, OPT_THREADS, OPT_BUFFER, OPT_TOLERANCE,
    OPT_MAX_PASSES, OPT_LEVEL, OPT_DELIMITER, OPT_MISSING, OPT_IN_MEMORY, OPT_ON_BAD_ROW, OPT_JSON, OPT_QUIET,
    OPT_DIGITS, OPT_NO_CACHE, OPT_NO_COLLAPSE, OPT_START_FROM, OPT_HELP, OPT_RUN_LOG, OPT_THRESHOLD, OPT_CSV,
    OPT_FIT, OPT_OUT, OPT_KEEP, OPT_UNSEEN, OPT_BY, OPT_BY_OUT, OPT_DROP_ONE, OPT_FIT_JSON, OPT_ROBUST, OPT_CLUSTER,
    OPT_CLUSTER_MEMORY, OPT_CHECKPOINT, OPT_PROGRESS, OPT_COLUMNS, OPT_MANY_CSV, OPT_MANY_MEANS
};

/* The run's options, in fit's table and compare's (each model's fitter
 * gets them there). */
#define CLI_RUN_OPTIONS \
    {"threads", required_argument, NULL, OPT_THREADS},       \
    {"buffer-size", required_argument, NULL, OPT_BUFFER},    \
    {"tolerance", required_argument, NULL, OPT_TOLERANCE},   \
    {"max-passes", required_argument, NULL, OPT_MAX_PASSES}, \
    {"level", required_argument, NULL, OPT_LEVEL},           \
    {"delimiter", required_argument, NULL, OPT_DELIMITER},   \
    {"missing", required_argument, NULL, OPT_MISSING},       \
    {"in-memory", no_argument, NULL, OPT_IN_MEMORY},         \
    {"no-cache", no_argument, NULL, OPT_NO_CACHE},           \
    {"no-collapse", no_argument, NULL, OPT_NO_COLLAPSE},     \
    {"on-bad-row", required_argument, NULL, OPT_ON_BAD_ROW},

/* What an option handler returns when the option was taken and the loop
 * goes on; anything else ends the loop and is the exit code. */
enum { CLI_NEXT = -1 };

typedef int (*cli_option_fn)(void *ctx, int opt, const char *arg);

/* The fit's options (score reads the same table). */
extern const struct option cli_fit_options[];
extern const char cli_usage_text[];

/* The fit command's state; compare builds one per model. */
typedef struct cli {
    mr_fitter *fitter;
    const char *json_path, *run_log;
    int quiet, digits, missing_given, progress_shown, show_progress;
    int progress_lines;   /* --progress: a line a pass (and every 10 s) when stderr is no terminal */
    mr_progress last;     /* the last progress seen in line mode */
    double line_due;      /* when in the pass the next line is due */
    const char *share_note; /* cli_fit_hooks */
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

/* Optional replacements for parts of the fit command (NULL: the
 * library's own).  run fits the data in place of mr_fitter_run_set.
 * no_outputs: another process writes the outputs (millrace-mpi's ranks
 * but 0, mpi_main.c): no output checks, JSON, lock or run log here, and
 * the fit's status is the exit code.  share_note: what a progress line's
 * counts cover when they are one process's share of a pass (NULL: all). */
typedef struct cli_fit_hooks {
    mr_status (*run)(mr_fitter *fitter, const char *const *data, size_t ndata, mr_fit **out, void *user);
    void *user;
    int no_outputs;
    const char *share_note;
} cli_fit_hooks;

/* cli.c */
int cli_fail(mr_status st, const char *msg);
int cli_usage_error(const char *msg);
const char *cli_last_error(void);
int cli_parse_count(const char *s, long long *out);
int cli_parse_real(const char *s, double *out);
int cli_digits(const char *arg, int *out);
int cli_next(int rc);
int cli_options(int argc, char **argv, const char *shortopts, const struct option *opts, const char *bad,
                cli_option_fn fn, void *ctx);
int cli_print_text(char *report);
int cli_print_report(const mr_fit *fit, int digits);
int cli_close_stdout(int rc);
void cli_clean_up_on_signals(void);
void cli_keep_memory_flat(void);
int cli_lock_output(const char *json_path, mr_output_lock **lock);
void cli_unlock_output(mr_output_lock *lock);
void cli_stop_at_block(int on);
int cli_stop_signal(void);
int cli_stopped(void);

/* fit_options.c */
int cli_fit_option(void *c, int opt, const char *arg);
int cli_apply_model(cli *c);

/* the commands: argc and argv from the command's name on */
int cmd_fit(int argc, char **argv, const cli_fit_hooks *hooks);
int cmd_show(int argc, char **argv);
int cmd_drift(int argc, char **argv);
int cmd_report(int argc, char **argv);
int cmd_score(int argc, char **argv);
int cmd_survey(int argc, char **argv);
int cmd_compare(int argc, char **argv);

#endif
