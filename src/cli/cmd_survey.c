/* cmd_survey.c - millrace survey: the columns of a file described in one
 * pass, before a model. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

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

typedef struct survey_cli {
    const char *json;
    int quiet, help, missing_given;
    mr_survey *survey;
} survey_cli;

/* 0 when the option was taken, else an exit code. */
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
        return mr_survey_add_missing(s, arg) == MR_OK ? 0 : cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    case OPT_THREADS:
        if (cli_parse_count(arg, &n) != 0 || n > 256 || mr_survey_set_threads(s, (int)n) != MR_OK)
            return cli_usage_error("--threads takes a count from 0 to 256");
        return 0;
    case OPT_BUFFER:
        if (cli_parse_count(arg, &n) != 0 || mr_survey_set_buffer_size(s, (size_t)n) != MR_OK)
            return cli_usage_error("--buffer-size takes a byte count of at least 4096");
        return 0;
    case OPT_DISTINCT_CAP:
        if (cli_parse_count(arg, &n) != 0 || mr_survey_set_distinct_cap(s, (size_t)n) != MR_OK)
            return cli_usage_error("--distinct-cap takes a count from 1 to 10000000");
        return 0;
    default: return cli_usage_error("survey takes --json, --distinct-cap, --missing, --threads, --buffer-size, --quiet");
    }
}

static int survey_next(void *ctx, int opt, const char *arg)
{
    survey_cli *o = ctx;
    return cli_next(survey_option(o->survey, o, opt, arg));
}

/* millrace survey [options] DATA: the columns of DATA, before a model. */
int cmd_survey(int argc, char **argv)
{
    survey_cli o;
    mr_survey *s = mr_survey_new();
    char msg[1024], *text;
    int rc;
    mr_status st;
    memset(&o, 0, sizeof o);
    if (s == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    o.survey = s;
    if ((rc = cli_options(argc, argv, "", survey_options, "bad option", survey_next, &o)) == CLI_NEXT) rc = 0;
    if (rc == 0 && o.help) fputs(cli_usage_text, stdout);
    else if (rc == 0 && optind != argc - 1) rc = cli_usage_error("survey takes exactly one data file (or - for standard input)");
    else if (rc == 0 && o.json && (st = mr_output_check(o.json, (const char *const *)&argv[optind], 1, msg, sizeof msg)) != MR_OK)
        rc = cli_fail(st, msg);
    else if (rc == 0 && (st = mr_survey_run(s, argv[optind])) != MR_OK) rc = cli_fail(st, mr_survey_errmsg(s));
    else if (rc == 0 && o.json && (st = mr_survey_write_json(s, o.json)) != MR_OK) rc = cli_fail(st, mr_survey_errmsg(s));
    else if (rc == 0 && !o.quiet) {
        if ((text = mr_survey_report(s)) == NULL) rc = cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        else fputs(text, stdout);
        mr_free(text);
    }
    mr_survey_free(s);
    return rc;
}
