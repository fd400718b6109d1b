/* cmd_show.c - millrace show: the report of a saved fit, or its `many`
 * factor's levels as CSV. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* --digits means what it means for fit. */
static const struct option show_options[] = {
    {"digits", required_argument, NULL, OPT_DIGITS},
    {"many-csv", required_argument, NULL, OPT_MANY_CSV},
    {NULL, 0, NULL, 0},
};

typedef struct show_cli {
    int digits;
    const char *many_csv;
} show_cli;

/* CLI_NEXT when the option was handled, else an exit code. */
static int show_option(void *ctx, int opt, const char *arg)
{
    show_cli *sc = ctx;
    switch (opt) {
    case OPT_DIGITS: return cli_next(cli_digits(arg, &sc->digits));
    case OPT_MANY_CSV: sc->many_csv = arg; return CLI_NEXT;
    default: return cli_usage_error("bad option (show takes --digits, --many-csv)");
    }
}

/* The report of a saved fit, as the fit printed it; or, with --many-csv
 * PATH, its `many` factor's levels as CSV (the path checked before the fit
 * is read, as fit does). */
int cmd_show(int argc, char **argv)
{
    show_cli sc = {0, NULL};
    char msg[1024];
    const char *input;
    mr_fit *fit = NULL;
    mr_status st;
    int rc;
    if ((rc = cli_options(argc, argv, "", show_options, NULL, show_option, &sc)) != CLI_NEXT) return rc;
    if (optind != argc - 1) return cli_usage_error("show takes one fit saved with --json");
    input = argv[optind];
    if (sc.many_csv && (st = mr_output_check(sc.many_csv, &input, 1, msg, sizeof msg)) != MR_OK)
        return cli_fail(st, msg);
    if ((st = mr_fit_read_json(input, &fit, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
    if (sc.many_csv == NULL) rc = cli_print_report(fit, sc.digits);
    else if ((st = mr_fit_write_many_csv(fit, sc.many_csv, &input, 1, msg, sizeof msg)) != MR_OK) rc = cli_fail(st, msg);
    else rc = 0;
    mr_fit_free(fit);
    return rc;
}
