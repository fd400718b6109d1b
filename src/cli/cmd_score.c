/* cmd_score.c - millrace score: each row of a file scored with a saved
 * fit, and observed/expected by group. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

typedef struct score_cli {
    const char *fit_path, *out_path, *by_out;
    int quiet, by, help;
    mr_scorer *scorer;
} score_cli;

/* --columns NAME,NAME...: each one asked of the scorer. */
static int score_columns(mr_scorer *s, const char *list)
{
    char *copy = strdup(list), *name, *save = NULL;
    mr_status st = copy ? MR_OK : MR_ERR_NO_MEMORY;
    for (name = copy ? strtok_r(copy, ",", &save) : NULL; st == MR_OK && name; name = strtok_r(NULL, ",", &save))
        st = mr_scorer_column(s, name);
    free(copy);
    if (st == MR_ERR_NO_MEMORY) return cli_fail(st, "out of memory");
    return st == MR_OK ? 0 : cli_fail(st, mr_scorer_errmsg(s));
}

/* 0 when the option was taken, else an exit code. */
static int score_option(mr_scorer *s, score_cli *o, int opt, const char *arg)
{
    long long n;
    double v;
    switch (opt) {
    case OPT_FIT: o->fit_path = arg; return 0;
    case OPT_OUT: o->out_path = arg; return 0;
    case OPT_QUIET: o->quiet = 1; return 0;
    case OPT_KEEP: return mr_scorer_keep(s, arg) == MR_OK ? 0 : cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    case OPT_BY: o->by = 1; return mr_scorer_group_by(s, arg) == MR_OK ? 0 : cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    case OPT_BY_OUT: o->by_out = arg; return 0;
    case OPT_COLUMNS: return score_columns(s, arg);
    case OPT_HELP: o->help = 1; return 0;
    case OPT_UNSEEN:
        if (strcmp(arg, "fail") != 0 && strcmp(arg, "blank") != 0) return cli_usage_error("--unseen takes fail or blank");
        return mr_scorer_set_unseen(s, strcmp(arg, "blank") == 0 ? MR_UNSEEN_BLANK : MR_UNSEEN_FAIL);
    case OPT_LEVEL:
        if (cli_parse_real(arg, &v) != 0 || mr_scorer_set_level(s, v) != MR_OK) return cli_usage_error("--level takes a number in (0, 1)");
        return 0;
    case OPT_THREADS:
        if (cli_parse_count(arg, &n) != 0 || n > 256 || mr_scorer_set_threads(s, (int)n) != MR_OK)
            return cli_usage_error("--threads takes 0 to 256");
        return 0;
    default: return cli_usage_error("score takes --fit, --out, --keep, --columns, --level, --unseen, --threads, --by, --by-out, "
                                           "--quiet");
    }
}

static int score_next(void *ctx, int opt, const char *arg)
{
    score_cli *o = ctx;
    return cli_next(score_option(o->scorer, o, opt, arg));
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
        return st == MR_OK ? 0 : cli_fail(st, mr_scorer_errmsg(s));
    }
    if ((text = mr_scorer_groups_report(s, MR_GROUPS_TEXT)) == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    fputs(text, stdout);
    mr_free(text);
    return 0;
}

/* Each row of DATA scored with a saved fit (README, "Scoring"). */
static int run_score(mr_scorer *s, score_cli *o, int argc, char **argv)
{
    const char *inputs[2];
    char msg[1024];
    int rc;
    mr_status st;
    o->scorer = s;
    if ((rc = cli_options(argc, argv, "", cli_fit_options, "bad option", score_next, o)) != CLI_NEXT) return rc;
    if (o->help) {
        fputs(cli_usage_text, stdout);
        return 0;
    }
    if (optind >= argc) return cli_usage_error("score takes one or more data files or directories (or - for standard input)");
    if (o->fit_path == NULL || o->out_path == NULL) return cli_usage_error("score needs --fit and --out");
    if (o->by_out && !o->by) return cli_usage_error("--by-out needs --by");
    inputs[0] = argv[optind];
    inputs[1] = o->fit_path;
    if ((st = mr_output_check(o->out_path, inputs, 2, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
    if (o->by_out && (st = mr_output_check(o->by_out, inputs, 2, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
    st = mr_scorer_run_set(s, (const char *const *)argv + optind, (size_t)(argc - optind), o->out_path);
    if (st != MR_OK) return cli_fail(st, mr_scorer_errmsg(s));
    if (!o->quiet) score_summary(s, o->out_path);
    return o->by ? write_groups(s, o) : 0;
}

/* millrace score --fit FIT.json --out FILE [options] DATA */
int cmd_score(int argc, char **argv)
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
        else if (strcmp(argv[i], "--help") == 0) return fputs(cli_usage_text, stdout), 0;
    }
    if (o.fit_path == NULL) return cli_usage_error("score needs --fit FIT.json");
    if ((st = mr_fit_read_json(o.fit_path, &fit, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
    if ((s = mr_scorer_new(fit)) == NULL) rc = cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    else rc = run_score(s, &o, argc, argv);
    mr_scorer_free(s);
    mr_fit_free(fit);
    return rc;
}
