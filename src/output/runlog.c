/* runlog.c - the run log's line: one JSON object per run, so that an
 * operator can read it and a program can parse it with any JSON reader
 * (a path or a message holding a tab or a quote needs no rules of its
 * own). */
#include <stdint.h>
#include <string.h>

#include "common/alloc.h"
#include "common/appendfile.h"
#include "common/clock.h"
#include "fit/fit.h"
#include "output/json_text.h"
#include "output/json_util.h"

static json_t *words(size_t n, const char *const *w)
{
    json_t *a = json_array();
    size_t i;
    for (i = 0; a != NULL && i < n; i++) a = mr__json_append(a, mr__json_text(w[i]));
    return a;
}

/* What an operator would look at first. */
static json_t *flags(const mr_fit *fit)
{
    json_t *a = json_array();
    if (!fit->converged) a = mr__json_append(a, json_string("not_converged"));
    if (fit->nwarnings > 0) a = mr__json_append(a, json_string("warnings"));
    if (fit->rows_used < fit->rows_read) a = mr__json_append(a, json_string("rows_left_out"));
    if (fit->rows_bad > 0) a = mr__json_append(a, json_string("bad_rows_skipped"));
    return a;
}

/* A set's files as the fit read them (a directory's, in their order);
 * null for one file. */
static json_t *set_files(const mr_fit *fit)
{
    json_t *a;
    size_t i;
    if (fit->nset_files == 0) return json_null();
    a = json_array();
    for (i = 0; a != NULL && i < fit->nset_files; i++) a = mr__json_append(a, mr__json_text(fit->set_file[i].path));
    return a;
}

static json_t *from_fit(json_t *o, const mr_fit *fit)
{
    if (fit == NULL) {
        const char *keys[] = {"files", "rows_read", "rows_used", "passes", "seconds", "flags"};
        size_t i;
        for (i = 0; i < sizeof keys / sizeof keys[0]; i++) o = mr__json_put(o, keys[i], json_null());
        return o;
    }
    o = mr__json_put(o, "files", set_files(fit));
    o = mr__json_put(o, "rows_read", json_integer((json_int_t)fit->rows_read));
    o = mr__json_put(o, "rows_used", json_integer((json_int_t)fit->rows_used));
    o = mr__json_put(o, "passes", json_integer(fit->passes));
    o = mr__json_put(o, "seconds", mr__json_num(fit->seconds));
    return mr__json_put(o, "flags", flags(fit));
}

static json_t *record(const mr_run_record *rec)
{
    char now[MR__UTC_TEXT_CAP], host[256];
    json_t *o = json_object();
    mr__utc_text(mr__wall_ns_now(), now, sizeof now);
    mr__host_name(host, sizeof host);
    o = mr__json_put(o, "time", json_string(now));
    o = mr__json_put(o, "host", mr__json_text(host));
    o = mr__json_put(o, "exit", json_integer(rec->exit_code));
    o = mr__json_put(o, "input", mr__json_text(rec->input));
    o = mr__json_put(o, "error", mr__json_text(rec->error));
    o = mr__json_put(o, "command_line", words(rec->argc, rec->argv));
    return from_fit(o, rec->fit);
}

mr_status mr_run_log_append(const char *path, const mr_run_record *rec, const char *const *inputs,
                            size_t ninputs, char *msg, size_t msgcap)
{
    json_t *root = record(rec);
    char *line = NULL;
    size_t n = 0;
    mr__error err;
    mr__error_clear(&err);
    if (root == NULL) mr__fail(&err, MR_ERR_NO_MEMORY, "%s: out of memory writing the run log", path);
    else if (mr__json_line(root, &line, &n, &err) == MR_OK) mr__append_line(path, line, n, inputs, ninputs, &err);
    json_decref(root);
    mr__free(line);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
