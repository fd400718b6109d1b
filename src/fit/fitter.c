#define _POSIX_C_SOURCE 200809L
#include <fcntl.h>
#include <string.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/clock.h"
#include "fit/fit.h"
#include "fit/fitter.h"
#include "fit/start.h"
#include "input/fields.h"
#include "input/inputset.h"

#define DEFAULT_MAX_PASSES 50
#define DEFAULT_BUFFER (1u << 20)
#define DEFAULT_TOLERANCE 1e-9

const char *mr_version(void) { return MR_VERSION_STRING; }

mr_fitter *mr_fitter_new(void)
{
    mr_fitter *f = mr__calloc(1, sizeof *f);
    size_t i;
    if (f == NULL) return NULL;
    mr__spec_init(&f->spec);
    f->max_passes = DEFAULT_MAX_PASSES;
    f->buffer_size = DEFAULT_BUFFER;
    f->tolerance = DEFAULT_TOLERANCE;
    f->level = 0.95;
    for (i = 0; i < MR__DEFAULT_MISSING_N; i++)
        if (mr_fitter_add_missing(f, mr__default_missing[i]) != MR_OK) {
            mr_fitter_free(f);
            return NULL;
        }
    return f;
}

void mr_fitter_free(mr_fitter *f)
{
    if (f == NULL) return;
    mr__spec_release(&f->spec);
    mr_fitter_clear_missing(f);
    mr__strings_free(f->command_line, f->ncommand_line);
    mr__start_free(f->start);
    mr__free(f->checkpoint);
    mr__free(f->cluster);
    mr__free(f);
}

const char *mr_fitter_errmsg(const mr_fitter *f) { return f->err.msg; }

mr_status mr_fitter_model_line(mr_fitter *f, const char *line, const char *origin)
{
    mr__error_clear(&f->err);
    return mr__spec_line(&f->spec, line, origin, &f->err);
}

mr_status mr_fitter_model_file(mr_fitter *f, const char *path)
{
    mr__error_clear(&f->err);
    return mr__spec_file(&f->spec, path, &f->err);
}

static mr_status out_of_range(mr_fitter *f, const char *what)
{
    return mr__fail(&f->err, MR_ERR_USAGE, "%s is out of range", what);
}

mr_status mr_fitter_set_int(mr_fitter *f, mr_int_option opt, long long v)
{
    mr__error_clear(&f->err);
    switch (opt) {
    case MR_OPT_THREADS:
        if (v < 0 || v > 256) return out_of_range(f, "threads (0 to 256)");
        f->threads = (int)v;
        return MR_OK;
    case MR_OPT_MAX_PASSES:
        if (v < 2 || v > 100000) return out_of_range(f, "max passes (2 to 100000)");
        f->max_passes = (int)v;
        return MR_OK;
    case MR_OPT_BUFFER_SIZE:
        if (v < 16 || v > (1LL << 30)) return out_of_range(f, "buffer size (16 bytes to 1 GiB)");
        f->buffer_size = (size_t)v;
        return MR_OK;
    case MR_OPT_IN_MEMORY:
        f->in_memory = v != 0;
        return MR_OK;
    case MR_OPT_SKIP_BAD_ROWS:
        f->skip_bad = v != 0;
        return MR_OK;
    case MR_OPT_NO_COLLAPSE:
        f->no_collapse = v != 0;
        return MR_OK;
    case MR_OPT_NO_CACHE:
        f->no_cache = v != 0;
        return MR_OK;
    case MR_OPT_KEEP_CHECKPOINT:
        f->checkpoint_keep = v != 0;
        return MR_OK;
    case MR_OPT_MANY_MEANS:
        f->many_means = v != 0;
        return MR_OK;
    case MR_OPT_DELIMITER:
        if (v != 0 && v != ',' && v != '\t' && v != ';') return out_of_range(f, "delimiter (comma, tab or semicolon)");
        f->delimiter = (int)v;
        return MR_OK;
    }
    return mr__fail(&f->err, MR_ERR_USAGE, "unknown integer option %d", (int)opt);
}

mr_status mr_fitter_set_real(mr_fitter *f, mr_real_option opt, double v)
{
    mr__error_clear(&f->err);
    switch (opt) {
    case MR_OPT_TOLERANCE:
        if (!(v > 0 && v < 1)) return out_of_range(f, "tolerance (between 0 and 1)");
        f->tolerance = v;
        return MR_OK;
    case MR_OPT_LEVEL:
        if (!(v > 0 && v < 1)) return out_of_range(f, "confidence level (between 0 and 1)");
        f->level = v;
        return MR_OK;
    }
    return mr__fail(&f->err, MR_ERR_USAGE, "unknown real option %d", (int)opt);
}

void mr_fitter_clear_missing(mr_fitter *f)
{
    size_t i;
    for (i = 0; i < f->nmissing; i++) mr__free(f->missing[i]);
    mr__free(f->missing);
    f->missing = NULL;
    f->nmissing = 0;
}

mr_status mr_fitter_add_missing(mr_fitter *f, const char *token)
{
    char **grown = mr__realloc(f->missing, (f->nmissing + 1) * sizeof *grown);
    if (grown == NULL) return mr__fail(&f->err, MR_ERR_NO_MEMORY, "out of memory");
    f->missing = grown;
    if ((f->missing[f->nmissing] = mr__strdup(token)) == NULL)
        return mr__fail(&f->err, MR_ERR_NO_MEMORY, "out of memory");
    f->nmissing++;
    return MR_OK;
}

void mr_fitter_set_progress(mr_fitter *f, mr_progress_fn fn, void *user)
{
    f->progress = fn;
    f->progress_stop = NULL;
    f->progress_user = user;
}

mr_status mr_fitter_set_command_line(mr_fitter *f, size_t argc, const char *const *argv)
{
    char **copy = NULL;
    mr__error_clear(&f->err);
    if (argc > 0 && (copy = mr__strings_copy(argv, argc)) == NULL)
        return mr__fail(&f->err, MR_ERR_NO_MEMORY, "out of memory");
    mr__strings_free(f->command_line, f->ncommand_line);
    f->command_line = copy;
    f->ncommand_line = argc;
    return MR_OK;
}

mr_status mr_fitter_set_checkpoint(mr_fitter *f, const char *path)
{
    char *copy = NULL;
    mr__error_clear(&f->err);
    if (path != NULL && (copy = mr__strdup(path)) == NULL) return mr__fail(&f->err, MR_ERR_NO_MEMORY, "out of memory");
    mr__free(f->checkpoint);
    f->checkpoint = copy;
    return MR_OK;
}

mr_fitter *mr__fitter_twin(const mr_fitter *f, mr__error *err)
{
    mr_fitter *g = mr__malloc(sizeof *g);
    if (g == NULL) {
        mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        return NULL;
    }
    *g = *f;
    mr__error_clear(&g->err);
    if (mr__spec_copy(&g->spec, &f->spec, err) != MR_OK) {
        mr__free(g);
        return NULL;
    }
    return g;
}

void mr__fitter_twin_free(mr_fitter *g)
{
    if (g == NULL) return;
    mr__spec_release(&g->spec);
    mr__free(g);
}

const char *mr_fitter_checkpoint_note(const mr_fitter *f) { return f->checkpoint_note; }

/* The audit trail: who asked (the command line), on which machine, from
 * when to when (wall clock, UTC); one recorded before (a profile's fit,
 * recorded by the shared run, then as the whole run's) is replaced. */
mr_status mr__fitter_record_run(const mr_fitter *f, mr_fit *fit, int64_t started_ns, mr__error *err)
{
    char started[MR__UTC_TEXT_CAP], ended[MR__UTC_TEXT_CAP], host[256];
    mr__free(fit->started);
    mr__free(fit->ended);
    mr__free(fit->host);
    mr__strings_free(fit->command_line, fit->ncommand_line);
    fit->command_line = NULL;
    fit->ncommand_line = 0;
    mr__utc_text(started_ns, started, sizeof started);
    mr__utc_text(mr__wall_ns_now(), ended, sizeof ended);
    mr__host_name(host, sizeof host);
    fit->started = mr__strdup(started);
    fit->ended = mr__strdup(ended);
    fit->host = mr__strdup(host);
    fit->command_line = mr__strings_copy((const char *const *)f->command_line, f->ncommand_line);
    if (fit->command_line != NULL) fit->ncommand_line = f->ncommand_line; /* so that mr_fit_free frees them */
    if (fit->started == NULL || fit->ended == NULL || fit->host == NULL || fit->command_line == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    fit->run_known = 1;
    return MR_OK;
}

/* A profile over the family parameter's grid refits one file; a set is
 * not taken there yet. */
static mr_status profile_of_set(mr_fitter *f)
{
    return mr__fail(&f->err, MR_ERR_USAGE,
                    "a family parameter chosen by profile likelihood is fitted to one file; give one file, not a set "
                    "or a directory");
}

static mr_status finish_run(mr_fitter *f, mr_status st, int64_t started, mr_fit **out)
{
    if (st == MR_OK && (st = mr__fitter_record_run(f, *out, started, &f->err)) != MR_OK) {
        mr_fit_free(*out);
        *out = NULL;
    }
    return st;
}

mr_status mr_fitter_run(mr_fitter *f, const char *path, mr_fit **out)
{
    int64_t started = mr__wall_ns_now();
    mr_status st;
    *out = NULL;
    mr__error_clear(&f->err);
    f->checkpoint_note[0] = '\0';
    /* Closed, descriptor 0 would go to the next file opened (the copy of
     * standard input kept for later passes), and be read as empty input. */
    if (strcmp(path, "-") == 0 && fcntl(STDIN_FILENO, F_GETFD) < 0)
        return mr__fail(&f->err, MR_ERR_IO, "<stdin>: standard input is closed, so there is nothing to read");
    if (f->spec.family_profile)
        st = mr__path_is_directory(path) ? profile_of_set(f) : mr__fit_profile(f, path, out);
    else
        st = mr__path_is_directory(path) ? mr__fit_files(f, &path, 1, out) : mr__fit_file(f, path, out);
    return finish_run(f, st, started, out);
}

mr_status mr_fitter_run_set(mr_fitter *f, const char *const *paths, size_t npaths, mr_fit **out)
{
    int64_t started = mr__wall_ns_now();
    mr_status st;
    *out = NULL;
    mr__error_clear(&f->err);
    if (npaths == 0 || paths == NULL) return mr__fail(&f->err, MR_ERR_USAGE, "no input given");
    f->checkpoint_note[0] = '\0';
    if (npaths == 1) return mr_fitter_run(f, paths[0], out);
    if (f->spec.family_profile) return profile_of_set(f);
    st = mr__fit_files(f, paths, npaths, out);
    return finish_run(f, st, started, out);
}

void mr_fitter_set_progress_stop(mr_fitter *f, mr_progress_stop_fn fn, void *user)
{
    f->progress = NULL;
    f->progress_stop = fn;
    f->progress_user = user;
}

mr_status mr_fitter_set_start(mr_fitter *f, const mr_fit *previous, const char *label)
{
    mr__start *s = NULL;
    mr__error_clear(&f->err);
    if (previous != NULL && (s = mr__start_copy(previous, label)) == NULL)
        return mr__fail(&f->err, MR_ERR_NO_MEMORY, "out of memory");
    mr__start_free(f->start);
    f->start = s;
    return MR_OK;
}
