/* cmd_fit.c - millrace fit: the options to a fitter, the run with its
 * progress line and stop on a signal, the report, the JSON and the run
 * log's line.  cmd_fit is the whole command, callable with hooks. */
#define _POSIX_C_SOURCE 200809L
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"

/* --progress where stderr is no terminal (a log file, mpirun's pipe): a
 * line every 10 seconds of a pass and one when it ends, read by people
 * who look later. */
enum { LINE_EVERY_SECONDS = 10 };

/* What a pass's counts cover: "" (all), or the process's share; the first
 * pass is never split between processes. */
static const char *share_of(const cli *c, const mr_progress *p)
{
    return p->pass > 1 && c->share_note ? c->share_note : "";
}

static void pass_done_line(const cli *c)
{
    const mr_progress *p = &c->last;
    const char *note = share_of(c, p);
    fprintf(stderr, "pass %d done: %llu rows%s in %.1f s\n", p->pass, (unsigned long long)p->rows_done, note,
            p->seconds);
}

static void line_progress(const mr_progress *p, cli *c)
{
    if (c->last.pass != 0 && p->pass != c->last.pass) pass_done_line(c);
    if (p->pass != c->last.pass) c->line_due = LINE_EVERY_SECONDS;
    if (p->seconds >= c->line_due) {
        const char *note = share_of(c, p);
        if (p->bytes_total > 0 && !note[0])
            fprintf(stderr, "pass %d: %.1f%% of the input, %llu rows, %.0f s\n", p->pass,
                    100.0 * (double)p->bytes_done / (double)p->bytes_total, (unsigned long long)p->rows_done, p->seconds);
        else fprintf(stderr, "pass %d: %llu rows%s, %.0f s\n", p->pass, (unsigned long long)p->rows_done, note,
                     p->seconds);
        c->line_due = p->seconds + LINE_EVERY_SECONDS;
    }
    c->last = *p;
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

static int publish(cli *c, mr_fit *fit)
{
    char msg[1024];
    mr_status st;
    int rc = cli_print_report(fit, c->digits);
    if (rc != 0) return rc;
    if (c->json_path && (st = mr_fit_write_json(fit, c->json_path, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
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
    if (inputs == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    memcpy(inputs, data, ndata * sizeof *inputs);
    if (c->model_file) inputs[n++] = c->model_file;
    if (c->run_log && (st = mr_output_check(c->run_log, inputs, n, msg, sizeof msg)) != MR_OK) c->run_log_refused = 1;
    if (st == MR_OK && c->json_path) st = mr_output_check(c->json_path, inputs, n, msg, sizeof msg);
    free(inputs);
    return st == MR_OK ? 0 : cli_fail(st, msg);
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
    rec.error = rc != 0 && cli_last_error()[0] ? cli_last_error() : NULL;
    rec.fit = c->fit;
    rec.argc = (size_t)c->argc;
    rec.argv = (const char *const *)c->argv;
    st = mr_run_log_append(c->run_log, &rec, inputs, c->model_file ? 2 : 1, msg, sizeof msg);
    return st == MR_OK ? rc : cli_fail(st, msg);
}

/* Called by the library a few times a second: the progress line, and
 * whether a signal asked the fit to stop. */
/* MILLRACE_TEST_KILL=pass:K:ROWS (tests only, tests/cli/checkpoint.sh):
 * the process kills itself with SIGKILL, as kill -9 would, at the first
 * progress call of pass K with at least ROWS rows added (the last call of a
 * pass comes after all its rows: at the latest, then).
 * MILLRACE_TEST_KILL=publish: once the fit is made, just before its
 * outputs are written (its checkpoint outlives it until they are). */
static int kill_pass, kill_rows_set, kill_publish;
static unsigned long long kill_rows;

static void read_test_kill(void)
{
    const char *v = getenv("MILLRACE_TEST_KILL");
    kill_rows_set = v != NULL && sscanf(v, "pass:%d:%llu", &kill_pass, &kill_rows) == 2;
    kill_publish = v != NULL && strcmp(v, "publish") == 0;
}

static int progress_or_stop(const mr_progress *p, void *user)
{
    cli *c = user;
    if (kill_rows_set && p->pass == kill_pass && p->rows_done >= kill_rows) raise(SIGKILL);
    if (c->show_progress) show_progress(p, c);
    else if (c->progress_lines && !c->quiet) line_progress(p, c);
    return cli_stop_signal() != 0;
}

/* Whether this process writes the command's files (JSON, its lock, the
 * run log): not one of millrace-mpi's ranks but 0 (cli_fit_hooks). */
static int writes_outputs(const cli_fit_hooks *hooks) { return hooks == NULL || !hooks->no_outputs; }

static int run_fit(cli *c, int argc, char **argv, const cli_fit_hooks *hooks)
{
    int rc, writes = writes_outputs(hooks);
    mr_fit *fit = NULL;
    mr_status st;
    if ((rc = cli_options(argc, argv, "m:", cli_fit_options, "bad option", cli_fit_option, c)) != CLI_NEXT) return rc;
    if (optind >= argc) return cli_usage_error("fit takes one or more data files or directories (or - for standard input)");
    c->data = argv[optind];
    if ((rc = cli_apply_model(c)) != 0) return rc;
    if (writes && (rc = check_outputs(c, argv + optind, (size_t)(argc - optind))) != 0) return rc;
    if (mr_fitter_set_command_line(c->fitter, (size_t)c->argc, (const char *const *)c->argv) != MR_OK)
        return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    if (writes && (rc = cli_lock_output(c->json_path, &c->lock)) != 0) return rc;
    c->show_progress = !c->quiet && isatty(STDERR_FILENO);
    c->share_note = hooks != NULL ? hooks->share_note : NULL;
    mr_fitter_set_progress_stop(c->fitter, progress_or_stop, c);
    cli_stop_at_block(1);
    read_test_kill();
    /* the checkpoint goes only once the outputs are in place (drop_checkpoint) */
    mr_fitter_set_int(c->fitter, MR_OPT_KEEP_CHECKPOINT, 1);
    if (hooks != NULL && hooks->run != NULL)
        st = hooks->run(c->fitter, (const char *const *)argv + optind, (size_t)(argc - optind), &fit, hooks->user);
    else st = mr_fitter_run_set(c->fitter, (const char *const *)argv + optind, (size_t)(argc - optind), &fit);
    cli_stop_at_block(0);
    if (mr_fitter_checkpoint_note(c->fitter)[0])
        fprintf(stderr, "millrace: %s\n", mr_fitter_checkpoint_note(c->fitter));
    if (c->progress_shown) fputs("\r\033[K", stderr);
    if (c->last.pass != 0) pass_done_line(c);
    if (cli_stop_signal()) {
        mr_fit_free(fit);
        return cli_stopped();
    }
    if (st != MR_OK) return cli_fail(st, mr_fitter_errmsg(c->fitter));
    if (kill_publish) raise(SIGKILL);
    c->fit = fit;
    rc = writes ? publish(c, fit) : (int)mr_fit_status(fit);
    if (rc == MR_ERR_NOT_CONVERGED) fprintf(stderr, "millrace: the fit did not converge (see the report)\n");
    return rc;
}

/* The checkpoint the fit left (MR_OPT_KEEP_CHECKPOINT) goes once its
 * report, JSON and run log's line are in place: a kill before that, run
 * again, makes the fit from it without reading the data.  A fit that did
 * not converge is a result (exit 7); a failed output keeps it. */
static int drop_checkpoint(cli *c, int rc)
{
    if (c->fit == NULL || (rc != 0 && rc != (int)MR_ERR_NOT_CONVERGED)) return rc;
    if (mr_fitter_checkpoint_remove(c->fitter) != MR_OK) fprintf(stderr, "millrace: %s\n", mr_fitter_errmsg(c->fitter));
    return rc;
}

/* millrace fit [options] DATA...: argv[0] is "fit", argv[-1] the
 * program (the whole line goes into the fit's audit trail and run log).
 * hooks may be NULL. */
int cmd_fit(int argc, char **argv, const cli_fit_hooks *hooks)
{
    cli c;
    int rc;
    size_t i;
    memset(&c, 0, sizeof c);
    c.fitter = mr_fitter_new();
    if (c.fitter == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    c.argc = argc + 1;
    c.argv = argv - 1;
    rc = run_fit(&c, argc, argv, hooks);
    if (writes_outputs(hooks)) rc = drop_checkpoint(&c, log_run(&c, rc));
    mr_fit_free(c.fit);
    for (i = 0; i < c.nlines; i++) free(c.model_lines[i]);
    free(c.model_lines);
    free(c.model_origin);
    mr_fitter_free(c.fitter);
    cli_unlock_output(c.lock);
    return rc;
}
