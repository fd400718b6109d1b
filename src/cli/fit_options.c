/* fit_options.c - the fit's options: model lines, fitter settings and
 * outputs (compare replays them on each model's fitter). */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

const struct option cli_fit_options[] = {
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
    CLI_RUN_OPTIONS
    {"start-from", required_argument, NULL, OPT_START_FROM},
    {"robust", required_argument, NULL, OPT_ROBUST},
    {"many-means", no_argument, NULL, OPT_MANY_MEANS},
    {"cluster", required_argument, NULL, OPT_CLUSTER},
    {"cluster-memory", required_argument, NULL, OPT_CLUSTER_MEMORY},
    {"json", required_argument, NULL, OPT_JSON},
    {"run-log", required_argument, NULL, OPT_RUN_LOG},
    {"quiet", no_argument, NULL, OPT_QUIET},
    {"progress", no_argument, NULL, OPT_PROGRESS},
    {"digits", required_argument, NULL, OPT_DIGITS},
    {"help", no_argument, NULL, OPT_HELP},
    {"fit", required_argument, NULL, OPT_FIT},
    {"out", required_argument, NULL, OPT_OUT},
    {"keep", required_argument, NULL, OPT_KEEP},
    {"unseen", required_argument, NULL, OPT_UNSEEN},
    {"by", required_argument, NULL, OPT_BY},
    {"by-out", required_argument, NULL, OPT_BY_OUT},
    {"columns", required_argument, NULL, OPT_COLUMNS},
    {"checkpoint", required_argument, NULL, OPT_CHECKPOINT},
    {NULL, 0, NULL, 0},
};

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

static int set_int(cli *c, mr_int_option opt, const char *arg, const char *name)
{
    long long v;
    char msg[256];
    if (cli_parse_count(arg, &v) != 0) {
        snprintf(msg, sizeof msg, "%s takes a whole number, got '%s'", name, arg);
        return cli_usage_error(msg);
    }
    if (mr_fitter_set_int(c->fitter, opt, v) != MR_OK) return cli_usage_error(mr_fitter_errmsg(c->fitter));
    return 0;
}

static int set_real(cli *c, mr_real_option opt, const char *arg, const char *name)
{
    double v;
    char msg[256];
    if (cli_parse_real(arg, &v) != 0) {
        snprintf(msg, sizeof msg, "%s takes a number, got '%s'", name, arg);
        return cli_usage_error(msg);
    }
    if (mr_fitter_set_real(c->fitter, opt, v) != MR_OK) return cli_usage_error(mr_fitter_errmsg(c->fitter));
    return 0;
}

static int set_delimiter(cli *c, const char *arg)
{
    int d = strcmp(arg, "tab") == 0 || strcmp(arg, "\\t") == 0 ? '\t' : (strlen(arg) == 1 ? arg[0] : -1);
    if (d != ',' && d != ';' && d != '\t') return cli_usage_error("--delimiter takes ',', ';' or tab");
    mr_fitter_set_int(c->fitter, MR_OPT_DELIMITER, d);
    return 0;
}

static int set_missing(cli *c, const char *arg)
{
    if (!c->missing_given) mr_fitter_clear_missing(c->fitter);
    c->missing_given = 1;
    if (mr_fitter_add_missing(c->fitter, arg) != MR_OK) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    return 0;
}

static int set_bad_rows(cli *c, const char *arg)
{
    if (strcmp(arg, "fail") != 0 && strcmp(arg, "skip") != 0) return cli_usage_error("--on-bad-row takes fail or skip");
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
    if (st != MR_OK) return cli_fail(st, msg);
    st = mr_fitter_set_start(c->fitter, previous, path);
    mr_fit_free(previous);
    return st == MR_OK ? 0 : cli_fail(st, mr_fitter_errmsg(c->fitter));
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

static int set_robust(cli *c, int opt, const char *arg)
{
    mr_status st;
    if (opt == OPT_ROBUST) {
        if (strcmp(arg, "hc0") != 0 && strcmp(arg, "hc1") != 0) return cli_usage_error("--robust takes hc0 or hc1");
        st = mr_fitter_set_robust(c->fitter, strcmp(arg, "hc0") == 0 ? MR_ROBUST_HC0 : MR_ROBUST_HC1);
        return st == MR_OK ? 0 : cli_fail(st, mr_fitter_errmsg(c->fitter));
    }
    if (opt == OPT_CLUSTER) c->cluster = arg;
    else if (cli_parse_count(arg, &c->cluster_mib) != 0 || c->cluster_mib < 1 || c->cluster_mib > (1LL << 30))
        return cli_usage_error("--cluster-memory takes a number of MiB (1 or more)");
    if (c->cluster == NULL) return 0;
    st = mr_fitter_set_cluster(c->fitter, c->cluster, (size_t)c->cluster_mib << 20);
    return st == MR_OK ? 0 : cli_fail(st, mr_fitter_errmsg(c->fitter));
}

/* CLI_NEXT when the option was handled, else an exit code. */
int cli_fit_option(void *ctx, int opt, const char *arg)
{
    cli *c = ctx;
    const char *d = directive_of(opt);
    if (d != NULL) return add_line(c, d, arg, d) == 0 ? CLI_NEXT : cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    switch (opt) {
    case 'm': c->model_file = arg; return CLI_NEXT;
    case OPT_NO_INTERCEPT: return add_line(c, "intercept", "no", "--no-intercept") == 0 ? CLI_NEXT : 8;
    case OPT_THREADS: return cli_next(set_int(c, MR_OPT_THREADS, arg, "--threads"));
    case OPT_BUFFER: return cli_next(set_int(c, MR_OPT_BUFFER_SIZE, arg, "--buffer-size"));
    case OPT_MAX_PASSES: return cli_next(set_int(c, MR_OPT_MAX_PASSES, arg, "--max-passes"));
    case OPT_TOLERANCE: return cli_next(set_real(c, MR_OPT_TOLERANCE, arg, "--tolerance"));
    case OPT_LEVEL: return cli_next(set_real(c, MR_OPT_LEVEL, arg, "--level"));
    case OPT_DELIMITER: return cli_next(set_delimiter(c, arg));
    case OPT_MISSING: return cli_next(set_missing(c, arg));
    case OPT_IN_MEMORY: mr_fitter_set_int(c->fitter, MR_OPT_IN_MEMORY, 1); return CLI_NEXT;
    case OPT_NO_CACHE: mr_fitter_set_int(c->fitter, MR_OPT_NO_CACHE, 1); return CLI_NEXT;
    case OPT_NO_COLLAPSE: mr_fitter_set_int(c->fitter, MR_OPT_NO_COLLAPSE, 1); return CLI_NEXT;
    case OPT_ON_BAD_ROW: return cli_next(set_bad_rows(c, arg));
    case OPT_START_FROM: return cli_next(set_start(c, arg));
    case OPT_ROBUST:
    case OPT_CLUSTER:
    case OPT_CLUSTER_MEMORY: return cli_next(set_robust(c, opt, arg));
    case OPT_MANY_MEANS: mr_fitter_set_int(c->fitter, MR_OPT_MANY_MEANS, 1); return CLI_NEXT;
    case OPT_JSON: c->json_path = arg; return CLI_NEXT;
    case OPT_RUN_LOG: c->run_log = arg; return CLI_NEXT;
    case OPT_CHECKPOINT:
        if (mr_fitter_set_checkpoint(c->fitter, arg) != MR_OK) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        return CLI_NEXT;
    case OPT_QUIET: c->quiet = 1; return CLI_NEXT;
    case OPT_PROGRESS: c->progress_lines = 1; return CLI_NEXT;
    case OPT_DIGITS: return cli_next(cli_digits(arg, &c->digits));
    case OPT_HELP: fputs(cli_usage_text, stdout); return 0;
    default: return cli_usage_error("unknown option");
    }
}

int cli_apply_model(cli *c)
{
    size_t i;
    mr_status st = c->model_file ? mr_fitter_model_file(c->fitter, c->model_file) : MR_OK;
    /* a model file that cannot be read is an I/O error (3), not a usage one */
    if (st == MR_ERR_USAGE) return cli_usage_error(mr_fitter_errmsg(c->fitter));
    if (st != MR_OK) return cli_fail(st, mr_fitter_errmsg(c->fitter));
    for (i = 0; i < c->nlines; i++) {
        char origin[64];
        snprintf(origin, sizeof origin, "--%s", c->model_origin[i]);
        if (mr_fitter_model_line(c->fitter, c->model_lines[i], origin) != MR_OK)
            return cli_usage_error(mr_fitter_errmsg(c->fitter));
    }
    return 0;
}
