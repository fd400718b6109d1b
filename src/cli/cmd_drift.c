/* cmd_drift.c - millrace drift: what changed between two saved fits. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* The drift command's own options (--json and --digits mean what they
 * mean for fit). */
static const struct option drift_options[] = {
    {"threshold", required_argument, NULL, OPT_THRESHOLD},
    {"json", required_argument, NULL, OPT_JSON},
    {"csv", required_argument, NULL, OPT_CSV},
    {"digits", required_argument, NULL, OPT_DIGITS},
    {NULL, 0, NULL, 0},
};

typedef struct drift_cli {
    double threshold;
    const char *json_path, *csv_path;
    int digits;
} drift_cli;

/* CLI_NEXT when the option was handled, else an exit code. */
static int drift_option(void *ctx, int opt, const char *arg)
{
    drift_cli *dc = ctx;
    switch (opt) {
    case OPT_THRESHOLD:
        if (cli_parse_real(arg, &dc->threshold) != 0 || !(dc->threshold > 0) || dc->threshold > 1e300)
            return cli_usage_error("--threshold takes a positive number of standard errors");
        return CLI_NEXT;
    case OPT_JSON: dc->json_path = arg; return CLI_NEXT;
    case OPT_CSV: dc->csv_path = arg; return CLI_NEXT;
    case OPT_DIGITS: return cli_next(cli_digits(arg, &dc->digits));
    default: return cli_usage_error("bad option (drift takes --threshold, --json, --csv, --digits)");
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
    return st == MR_OK ? 0 : cli_fail(st, msg);
}

static int compare_fits(const drift_cli *dc, const char *const *paths, mr_fit *const *fits)
{
    char msg[1024], said[2200];
    mr_drift *d = NULL;
    mr_status st = mr_drift_compare(fits[0], fits[1], dc->threshold, &d, msg, sizeof msg);
    int rc;
    if (st != MR_OK) {
        snprintf(said, sizeof said, "%s, %s: %s", paths[0], paths[1], msg);
        return cli_fail(st, said);
    }
    rc = cli_print_text(mr_drift_report(d, dc->digits));
    if (rc == 0) rc = drift_outputs(dc, d, paths);
    if (rc == 0 && mr_drift_nflagged(d) > 0) rc = MR_DRIFT_FLAGGED;
    mr_drift_free(d);
    return rc;
}

/* What changed between two saved fits; MR_DRIFT_FLAGGED when anything
 * is flagged, so that a scheduler can alert. */
int cmd_drift(int argc, char **argv)
{
    drift_cli dc = {3.0, NULL, NULL, 0};
    mr_fit *fits[2] = {NULL, NULL};
    char msg[1024];
    int rc, i;
    if ((rc = cli_options(argc, argv, "", drift_options, NULL, drift_option, &dc)) != CLI_NEXT) return rc;
    if (optind != argc - 2) return cli_usage_error("drift takes two fits saved with --json: the old and the new");
    if ((rc = drift_outputs(&dc, NULL, (const char *const *)argv + optind)) != 0) return rc;
    for (i = 0; i < 2 && rc == 0; i++) {
        mr_status st = mr_fit_read_json(argv[optind + i], &fits[i], msg, sizeof msg);
        if (st != MR_OK) rc = cli_fail(st, msg);
    }
    if (rc == 0) rc = compare_fits(&dc, (const char *const *)argv + optind, fits);
    mr_fit_free(fits[0]);
    mr_fit_free(fits[1]);
    return rc;
}
