/* cli.c - what every command of the client shares: failure messages (the
 * last one kept for the run log), number parsing, the option loop,
 * standard output, and the signals with the output lock they clean up. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cli.h"

/* The last error said, for the run log. */
static char last_error[1024];

int cli_fail(mr_status st, const char *msg)
{
    snprintf(last_error, sizeof last_error, "%s", msg);
    fprintf(stderr, "millrace: %s\n", msg);
    return (int)st;
}

/* glibc raises its mmap threshold (up to 32 MiB) each time a large block
 * is freed, and large blocks after that come from the heaps of the
 * threads, which give pages back late: a fit, whose passes allocate and
 * free blocks of MiB on several threads, then peaks well above what it
 * holds (a factor of 10^5 levels declared `many`, two threads: 142 to 149
 * MiB against 127; README "Memory").  A fixed threshold keeps large blocks
 * mapped and returned when freed, for some hundred more mmap calls a fit. */
void cli_keep_memory_flat(void)
{
#if defined(__GLIBC__) && defined(M_MMAP_THRESHOLD)
    (void)mallopt(M_MMAP_THRESHOLD, 128 * 1024);
#endif
}

int cli_usage_error(const char *msg)
{
    snprintf(last_error, sizeof last_error, "%s", msg);
    fprintf(stderr, "millrace: %s (see 'millrace help')\n", msg);
    return (int)MR_ERR_USAGE;
}

const char *cli_last_error(void) { return last_error; }

int cli_parse_count(const char *s, long long *out)
{
    char *end;
    long long v = strtoll(s, &end, 10);
    if (*s == '\0' || *end != '\0') return -1;
    *out = v;
    return 0;
}

int cli_parse_real(const char *s, double *out)
{
    char *end;
    double v = strtod(s, &end);
    if (*s == '\0' || *end != '\0') return -1;
    *out = v;
    return 0;
}

/* --digits of any command: 0, or the usage error's exit code. */
int cli_digits(const char *arg, int *out)
{
    long long v;
    if (cli_parse_count(arg, &v) != 0 || v < 1 || v > 17) return cli_usage_error("--digits takes 1 to 17");
    *out = (int)v;
    return 0;
}

/* An option handler's 0 (taken) as CLI_NEXT; an exit code stays. */
int cli_next(int rc) { return rc ? rc : CLI_NEXT; }

/* Every option of argv through fn, in order: CLI_NEXT when all were
 * taken, else the exit code that ended the loop.  An unknown option is
 * the usage error bad, or (bad NULL) fn's to say with opt 0. */
int cli_options(int argc, char **argv, const char *shortopts, const struct option *opts, const char *bad,
                cli_option_fn fn, void *ctx)
{
    int opt, rc;
    optind = 1;
    while ((opt = getopt_long(argc, argv, shortopts, opts, NULL)) != -1) {
        if (opt == '?' && bad != NULL) return cli_usage_error(bad);
        if ((rc = fn(ctx, opt == '?' ? 0 : opt, optarg)) != CLI_NEXT) return rc;
    }
    return CLI_NEXT;
}

static int stdout_failed(const char *what)
{
    char msg[256];
    snprintf(msg, sizeof msg, "cannot write %sto standard output: %s", what, strerror(errno));
    return cli_fail(MR_ERR_IO, msg);
}

/* A report on standard output (freed here); 0 or the exit code of the
 * failure. */
int cli_print_text(char *report)
{
    int written;
    if (report == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory writing the report");
    /* A failed write past the stdio buffer is not remembered by fflush:
     * each step's result counts. */
    written = fputs(report, stdout) != EOF && fflush(stdout) == 0 && !ferror(stdout);
    mr_free(report);
    return written ? 0 : stdout_failed("the report ");
}

int cli_print_report(const mr_fit *fit, int digits) { return cli_print_text(mr_fit_report(fit, digits)); }

/* What went to standard output counts only once it is out: a write that
 * failed earlier or the last flush failing turns success into MR_ERR_IO. */
int cli_close_stdout(int rc)
{
    int bad = ferror(stdout);
    if (fclose(stdout) != 0) bad = 1;
    if (bad && (rc == 0 || rc == MR_ERR_NOT_CONVERGED || rc == MR_DRIFT_FLAGGED)) return stdout_failed("");
    return rc;
}

/* the JSON's lock file while this process holds it (cli_lock_output) */
static char held_lock[4096];
static volatile sig_atomic_t lock_held;

/* Two runs writing one JSON at once: the second is refused at its start,
 * naming the first, and the lock is held until the JSON is in place. */
int cli_lock_output(const char *json_path, mr_output_lock **lock)
{
    char msg[1024];
    mr_status st;
    if (json_path == NULL) return 0;
    st = mr_output_lock_take(json_path, lock, msg, sizeof msg);
    if (st != MR_OK) return cli_fail(st, msg);
    if (strlen(mr_output_lock_file(*lock)) < sizeof held_lock) {
        strcpy(held_lock, mr_output_lock_file(*lock));
        lock_held = 1;
    }
    return 0;
}

void cli_unlock_output(mr_output_lock *lock)
{
    lock_held = 0; /* before the release: then the name may be another's */
    mr_output_lock_release(lock);
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

void cli_clean_up_on_signals(void)
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

void cli_stop_at_block(int on) { stop_at_block = on; }

int cli_stop_signal(void) { return (int)stop_signal; }

int cli_stopped(void)
{
    char msg[128];
    snprintf(msg, sizeof msg, "stopped by signal %d (%s); nothing written", (int)stop_signal,
             stop_signal == SIGINT ? "SIGINT" : stop_signal == SIGTERM ? "SIGTERM" : "SIGHUP");
    cli_fail(MR_ERR_STOPPED, msg);
    return 128 + (int)stop_signal;
}
