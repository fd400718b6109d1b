/* surveyor.c - mr_survey: one pass over a file that describes its columns
 * (accum/job_survey.c adds them up), before any model is named. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "accum/pass.h"
#include "common/alloc.h"
#include "common/utf8.h"
#include "family/family.h"
#include "fit/run.h"
#include "fit/survey.h"
#include "input/fields.h"

#define DEFAULT_CAP 1000

static void release_names(mr_survey *s)
{
    if (s->name) mr__free_names(s->name, s->c.nfields);
    s->name = NULL;
}

static void release_results(mr_survey *s)
{
    size_t k;
    for (k = 0; s->c.col && k < s->c.nfields; k++) mr__survey_col_release(&s->c.col[k]);
    mr__free(s->c.col);
    mr__free(s->c.group_sum);
    mr__free(s->c.over);
    release_names(s);
    mr__free(s->path);
    s->path = NULL;
    memset(&s->c, 0, sizeof s->c);
    s->done = 0;
}

static mr_status add_token(mr_survey *s, const char *token)
{
    char **grown = mr__realloc(s->missing, (s->nmissing + 1) * sizeof *grown);
    if (grown == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
    s->missing = grown;
    if ((grown[s->nmissing] = mr__strdup(token)) == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
    s->nmissing++;
    return MR_OK;
}

mr_survey *mr_survey_new(void)
{
    mr_survey *s = mr__calloc(1, sizeof *s);
    size_t i;
    if (s == NULL) return NULL;
    s->cap = DEFAULT_CAP;
    s->buffer_size = 1 << 20;
    for (i = 0; i < MR__DEFAULT_MISSING_N; i++)
        if (add_token(s, mr__default_missing[i]) != MR_OK) {
            mr_survey_free(s);
            return NULL;
        }
    return s;
}

void mr_survey_free(mr_survey *s)
{
    if (s == NULL) return;
    mr_survey_clear_missing(s);
    release_results(s);
    mr__free(s);
}

const char *mr_survey_errmsg(const mr_survey *s) { return s->err.msg; }

void mr_survey_clear_missing(mr_survey *s)
{
    size_t i;
    for (i = 0; i < s->nmissing; i++) mr__free(s->missing[i]);
    mr__free(s->missing);
    s->missing = NULL;
    s->nmissing = 0;
}

mr_status mr_survey_add_missing(mr_survey *s, const char *token)
{
    if (token == NULL) return mr__fail(&s->err, MR_ERR_USAGE, "a missing token is NULL");
    return add_token(s, token);
}

mr_status mr_survey_set_threads(mr_survey *s, int threads)
{
    if (threads < 0) return mr__fail(&s->err, MR_ERR_USAGE, "threads must be >= 0");
    s->threads = threads;
    return MR_OK;
}

mr_status mr_survey_set_buffer_size(mr_survey *s, size_t bytes)
{
    if (bytes < 4096) return mr__fail(&s->err, MR_ERR_USAGE, "the buffer size must be at least 4096 bytes");
    s->buffer_size = bytes;
    return MR_OK;
}

mr_status mr_survey_set_distinct_cap(mr_survey *s, size_t cap)
{
    if (cap < 1 || cap > 10000000)
        return mr__fail(&s->err, MR_ERR_USAGE, "the distinct-value cap must be from 1 to 10000000");
    s->cap = cap;
    return MR_OK;
}

static mr_status on_header(void *user, const char *line, size_t len, mr__error *err)
{
    mr_survey *s = user;
    size_t k, n;
    s->c.delim = mr__detect_delimiter(line, len);
    MR__TRY(mr__parse_header(line, len, s->c.delim, &s->name, &n, s->c.display, err));
    s->c.nfields = n;
    s->c.col = mr__calloc(n + 1, sizeof *s->c.col);
    s->c.group_sum = mr__calloc(n + 1, sizeof *s->c.group_sum);
    s->c.over = mr__calloc(n + 1, sizeof *s->c.over);
    if (!s->c.col || !s->c.group_sum || !s->c.over) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; k < n; k++) {
        mr__survey_col_init(&s->c.col[k], s->cap);
        atomic_init(&s->c.over[k], 0);
    }
    return MR_OK;
}

mr_status mr_survey_run(mr_survey *s, const char *path)
{
    char display[512];
    mr__binding none;
    mr__decode_cfg dcfg;
    mr__pass_cfg cfg;
    mr__pass_result res;
    mr__family any = mr__family_plain(MR_GAUSSIAN); /* the decoder's, which decodes nothing here */
    mr_status st;
    int cpus;
    mr__error_clear(&s->err);
    release_results(s);
    if (path == NULL) return mr__fail(&s->err, MR_ERR_USAGE, "no input named");
    if ((s->path = mr__strdup(path)) == NULL) return mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
    mr__utf8_mend_cut(display, sizeof display,
                      snprintf(display, sizeof display, "%s", strcmp(path, "-") == 0 ? "<stdin>" : path));
    memset(&none, 0, sizeof none);
    memset(&dcfg, 0, sizeof dcfg);
    memset(&cfg, 0, sizeof cfg);
    memset(&res, 0, sizeof res);
    s->c.display = display;
    s->c.missing = s->missing;
    s->c.nmissing = s->nmissing;
    s->c.cap = s->cap;
    dcfg.bind = &none; /* the job reads its rows itself */
    dcfg.display = display;
    dcfg.family = &any;
    cfg.kind = MR__PASS_SURVEY;
    cfg.path = path;
    cfg.display = display;
    cfg.read_size = s->buffer_size;
    cfg.tee_fd = -1;
    cfg.nthreads = mr__worker_threads(s->threads, &cpus);
    cfg.on_header = on_header;
    cfg.header_user = s;
    cfg.dcfg = &dcfg;
    cfg.job_arg = &s->c;
    cfg.pass_number = 1;
    st = mr__pass_run(&cfg, &res, &s->err);
    mr__pass_result_release(&res, 0);
    s->c.display = NULL;
    s->done = st == MR_OK;
    if (st != MR_OK) {
        char *keep = s->path;
        s->path = NULL;
        release_results(s);
        s->path = keep;
    }
    return st;
}
