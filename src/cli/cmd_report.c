/* cmd_report.c - millrace report: saved fits as one HTML page. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* Options of `millrace report`. */
enum { OPT_HTML = 512, OPT_AT, OPT_REPORT_DIGITS, OPT_GROUPS };
static const struct option report_options[] = {
    {"html", required_argument, NULL, OPT_HTML},
    {"at", required_argument, NULL, OPT_AT},
    {"digits", required_argument, NULL, OPT_REPORT_DIGITS},
    {"groups", required_argument, NULL, OPT_GROUPS},
    {NULL, 0, NULL, 0},
};

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
    return st == MR_OK ? 0 : cli_fail(st, msg);
}

typedef struct report_cli {
    const char *html;
    char **settings;   /* "at COL=VALUE", "digits N", "groups FILE": the page's settings */
    size_t n;
} report_cli;

static int report_option(void *ctx, int opt, const char *arg)
{
    report_cli *o = ctx;
    if (opt == OPT_HTML) o->html = arg;
    else if (opt == OPT_AT || opt == OPT_REPORT_DIGITS || opt == OPT_GROUPS)
        return add_setting(&o->settings, &o->n, opt == OPT_AT ? "at " : opt == OPT_GROUPS ? "groups " : "digits ", arg) == 0
                   ? CLI_NEXT
                   : cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    else return cli_usage_error("bad option");
    return CLI_NEXT;
}

/* millrace report --html PATH [--at COL=VALUE]... [--digits N] [--groups FILE] FIT.json... */
int cmd_report(int argc, char **argv)
{
    report_cli o = {NULL, NULL, 0};
    size_t i;
    int rc = cli_options(argc, argv, "", report_options, "bad option", report_option, &o);
    if (rc == CLI_NEXT) rc = 0;
    if (rc == 0 && o.html == NULL) rc = cli_usage_error("report needs --html PATH");
    if (rc == 0 && optind >= argc) rc = cli_usage_error("report takes one or more fits saved with --json");
    if (rc == 0) rc = write_page(o.html, argv + optind, (size_t)(argc - optind), o.settings, o.n);
    for (i = 0; i < o.n; i++) free(o.settings[i]);
    free(o.settings);
    return rc;
}
