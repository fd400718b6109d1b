/* cmd_compare.c - millrace compare: several models fitted to one file,
 * their deviance, AIC and BIC, and tests of nested models. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"

/* Options of `millrace compare`: the models, the run's options (each
 * model's fitter gets them), and the comparison's outputs. */
static const struct option compare_options[] = {
    {"model", required_argument, NULL, 'm'},
    {"drop-one", required_argument, NULL, OPT_DROP_ONE},
    {"json", required_argument, NULL, OPT_JSON},
    {"fit-json", required_argument, NULL, OPT_FIT_JSON},
    {"digits", required_argument, NULL, OPT_DIGITS},
    {"quiet", no_argument, NULL, OPT_QUIET},
    CLI_RUN_OPTIONS
    {"help", no_argument, NULL, OPT_HELP},
    {NULL, 0, NULL, 0},
};

typedef struct compare_cli {
    const char **model;     /* the model files, in order */
    char **label;           /* each one's name: its file's base name less .model */
    mr_fitter **fitter;
    size_t n;
    const char **drop;      /* names given to --drop-one */
    size_t ndrop;
    int *opt;               /* the run's options, replayed on every fitter */
    const char **arg;
    size_t nopt;
    const char *json, *fit_json, *data;
    const char **inputs;    /* the data file, then the model files: never an output */
    int digits, quiet;
    int argc;               /* the whole command line, for each fit's audit trail */
    char **argv;
} compare_cli;

static int grow(void *array, size_t n, size_t unit)
{
    void *p = realloc(*(void **)array, (n + 1) * unit);
    if (p == NULL) return -1;
    *(void **)array = p;
    return 0;
}

static char *model_label(const char *path)
{
    const char *base = strrchr(path, '/') ? strrchr(path, '/') + 1 : path;
    size_t n = strlen(base);
    char *label;
    if (n > 6 && strcmp(base + n - 6, ".model") == 0) n -= 6;
    if ((label = malloc(n + 1)) != NULL) memcpy(label, base, n), label[n] = '\0';
    return label;
}

/* CLI_NEXT when the option was taken; 0 after --help; else an exit code. */
static int compare_option(void *ctx, int opt, const char *arg)
{
    compare_cli *o = ctx;
    switch (opt) {
    case 'm':
        if (grow(&o->model, o->n, sizeof *o->model) != 0) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        o->model[o->n++] = arg;
        return CLI_NEXT;
    case OPT_DROP_ONE:
        if (grow(&o->drop, o->ndrop, sizeof *o->drop) != 0) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        o->drop[o->ndrop++] = arg;
        return CLI_NEXT;
    case OPT_JSON: o->json = arg; return CLI_NEXT;
    case OPT_FIT_JSON: o->fit_json = arg; return CLI_NEXT;
    case OPT_QUIET: o->quiet = 1; return CLI_NEXT;
    case OPT_DIGITS: return cli_next(cli_digits(arg, &o->digits));
    case OPT_HELP: fputs(cli_usage_text, stdout); return 0;
    default:
        if (grow(&o->opt, o->nopt, sizeof *o->opt) != 0 || grow(&o->arg, o->nopt, sizeof *o->arg) != 0)
            return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        o->opt[o->nopt] = opt;
        o->arg[o->nopt++] = arg;
        return CLI_NEXT;
    }
}

/* Model i's fitter: its file, then the run's options. */
static int compare_fitter(compare_cli *o, size_t i, mr_comparison *cmp)
{
    cli c;
    size_t k;
    int rc = 0;
    memset(&c, 0, sizeof c);
    if ((o->fitter[i] = c.fitter = mr_fitter_new()) == NULL || (o->label[i] = model_label(o->model[i])) == NULL)
        return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    c.model_file = o->model[i];
    if ((rc = cli_apply_model(&c)) != 0) return rc;
    for (k = 0; k < o->nopt && rc == 0; k++) rc = cli_fit_option(&c, o->opt[k], o->arg[k]) == CLI_NEXT ? 0 : MR_ERR_USAGE;
    if (rc == 0 && mr_fitter_set_command_line(c.fitter, (size_t)o->argc, (const char *const *)o->argv) != MR_OK)
        rc = cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    if (rc == 0 && mr_comparison_add(cmp, c.fitter, o->label[i]) != MR_OK)
        rc = cli_usage_error(mr_comparison_errmsg(cmp));
    return rc;
}

static int compare_outputs(const compare_cli *o, const mr_comparison *cmp)
{
    char msg[1024], *path;
    size_t i;
    mr_status st;
    int rc = cli_print_text(mr_comparison_report(cmp, o->digits));
    if (rc == 0 && o->json && (st = mr_comparison_write_json(cmp, o->json, o->inputs, o->n + 1, msg, sizeof msg)) != MR_OK)
        rc = cli_fail(st, msg);
    for (i = 0; rc == 0 && o->fit_json && i < o->n; i++) {
        size_t len = strlen(o->fit_json) + strlen(o->label[i]) + 6;
        if ((path = malloc(len)) == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        snprintf(path, len, "%s%s.json", o->fit_json, o->label[i]);
        if ((st = mr_fit_write_json(mr_comparison_fit(cmp, i), path, msg, sizeof msg)) != MR_OK) rc = cli_fail(st, msg);
        free(path);
    }
    return rc;
}

/* Each model's fit JSON, checked before the run as the comparison's is. */
static int check_fit_json(const compare_cli *o)
{
    char msg[1024], *path;
    size_t i;
    mr_status st = MR_OK;
    for (i = 0; o->fit_json && st == MR_OK && i < o->n; i++) {
        size_t len = strlen(o->fit_json) + strlen(o->label[i]) + 6;
        if ((path = malloc(len)) == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
        snprintf(path, len, "%s%s.json", o->fit_json, o->label[i]);
        st = mr_output_check(path, o->inputs, o->n + 1, msg, sizeof msg);
        free(path);
    }
    return st == MR_OK ? 0 : cli_fail(st, msg);
}

static int compare_run(compare_cli *o, mr_comparison *cmp)
{
    char msg[1024];
    size_t i, j;
    int rc = 0, unconverged = 0;
    mr_status st;
    o->fitter = calloc(o->n, sizeof *o->fitter);
    o->label = calloc(o->n, sizeof *o->label);
    if (o->fitter == NULL || o->label == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < o->n && rc == 0; i++) rc = compare_fitter(o, i, cmp);
    for (j = 0; j < o->ndrop && rc == 0; j++) {
        for (i = 0; i < o->n && strcmp(o->label[i], o->drop[j]) != 0; i++) continue;
        if (i == o->n) return cli_usage_error("--drop-one names no model given with -m (a model is named by its file's "
                                          "name less .model)");
        mr_comparison_drop_one(cmp, i);
    }
    if (rc != 0) return rc;
    if ((o->inputs = calloc(o->n + 1, sizeof *o->inputs)) == NULL) return cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    o->inputs[0] = o->data;
    for (i = 0; i < o->n; i++) o->inputs[i + 1] = o->model[i];
    if (o->json && (st = mr_output_check(o->json, o->inputs, o->n + 1, msg, sizeof msg)) != MR_OK) return cli_fail(st, msg);
    if ((rc = check_fit_json(o)) != 0) return rc;
    if ((st = mr_comparison_run(cmp, o->data)) != MR_OK) return cli_fail(st, mr_comparison_errmsg(cmp));
    rc = compare_outputs(o, cmp);
    /* as fit: everything written, and 7 when a model did not converge */
    for (i = 0; rc == 0 && i < o->n; i++)
        if (mr_fit_status(mr_comparison_fit(cmp, i)) != MR_OK) {
            fprintf(stderr, "millrace: model %s did not converge (see the table)\n", o->label[i]);
            unconverged = 1;
        }
    return rc == 0 && unconverged ? (int)MR_ERR_NOT_CONVERGED : rc;
}

/* Several models fitted to one file and compared (README, "Comparing
 * models"). */
int cmd_compare(int argc, char **argv)
{
    compare_cli o;
    mr_comparison *cmp = NULL;
    int rc;
    size_t i;
    memset(&o, 0, sizeof o);
    o.argc = argc + 1;
    o.argv = argv - 1;
    rc = cli_options(argc, argv, "m:", compare_options, "bad option (see 'millrace help' for compare's)", compare_option, &o);
    if (rc != CLI_NEXT) {
        /* --help, or an option refused: rc is the exit code */
    } else if (optind != argc - 1) rc = cli_usage_error("compare takes exactly one data file");
    else if (o.n < 1) rc = cli_usage_error("compare needs a model file (-m MODEL) for each model");
    else if ((cmp = mr_comparison_new()) == NULL) rc = cli_fail(MR_ERR_NO_MEMORY, "out of memory");
    else {
        o.data = argv[optind];
        rc = compare_run(&o, cmp);
    }
    mr_comparison_free(cmp);
    for (i = 0; o.fitter && i < o.n; i++) mr_fitter_free(o.fitter[i]);
    for (i = 0; o.label && i < o.n; i++) free(o.label[i]);
    free(o.fitter);
    free(o.label);
    free(o.model);
    free(o.drop);
    free(o.opt);
    free(o.arg);
    free(o.inputs);
    return rc;
}
