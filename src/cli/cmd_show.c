/* cmd_show.c - millrace show: the report of a saved fit. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* The report of a saved fit, as the fit printed it. */
int cmd_show(int argc, char **argv)
{
    char msg[1024];
    int digits = 0;
    mr_fit *fit = NULL;
    mr_status st;
    int rc;
    if (argc == 4 && strcmp(argv[1], "--digits") == 0) {
        if ((rc = cli_digits(argv[2], &digits)) != 0) return rc;
        argv += 2;
        argc -= 2;
    }
    if (argc != 2) return cli_usage_error("show takes one fit saved with --json");
    if ((st = mr_fit_read_json(argv[1], &fit, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
    rc = cli_print_report(fit, digits);
    mr_fit_free(fit);
    return rc;
}
