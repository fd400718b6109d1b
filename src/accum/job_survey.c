/* job_survey.c - the survey as a job of the pass engine (pass_job.h):
 * compute reads a block's rows itself (raw_rows) into per-column partial
 * sums and value tables (accum/survey.h); add merges them in block order. */
#include <math.h>
#include <string.h>

#include "accum/partial.h"
#include "accum/pass.h"
#include "accum/survey.h"
#include "common/alloc.h"
#include "input/fields.h"
#include "input/numparse.h"

typedef struct survey_slot {
    mr__survey_col *col;
    uint64_t rows, malformed, first_malformed_line;
    size_t first_malformed_fields;
    int nomem;
} survey_slot;

typedef struct survey_worker {
    const mr__survey_cfg *c;
    mr__tokenizer tok;
    mr__numparser *np;
    mr__row_cells cells;
    mr__pass_slot *s;
} survey_worker;

void mr__survey_col_init(mr__survey_col *c, size_t cap)
{
    memset(c, 0, sizeof *c);
    mr__levelset_init(&c->values);
    c->values.limit = cap;
    c->min = INFINITY;
    c->max = -INFINITY;
}

void mr__survey_col_release(mr__survey_col *c)
{
    mr__levelset_release(&c->values);
    mr__free(c->count);
    memset(c, 0, sizeof *c);
}

static void drop_table(mr__survey_col *c)
{
    size_t limit = c->values.limit;
    mr__levelset_release(&c->values);
    mr__levelset_init(&c->values);
    c->values.limit = limit;
    c->over = 1;
}

mr_status mr__survey_col_count(mr__survey_col *c, const char *p, size_t len, uint64_t n)
{
    int32_t id;
    mr_status st;
    if (c->over) return MR_ERR_DOMAIN;
    st = mr__levelset_add(&c->values, p, len, &id);
    if (st == MR_ERR_DOMAIN) drop_table(c);
    if (st != MR_OK) return st;
    if ((size_t)id >= c->count_cap) {
        size_t cap = c->count_cap ? 2 * c->count_cap : 64;
        uint64_t *grown = mr__realloc(c->count, cap * sizeof *grown);
        if (grown == NULL) return MR_ERR_NO_MEMORY;
        memset(grown + c->count_cap, 0, (cap - c->count_cap) * sizeof *grown);
        c->count = grown;
        c->count_cap = cap;
    }
    c->count[id] += n;
    return MR_OK;
}

static mr_status survey_open(const mr__pass_env *env, void **out, mr__error *err)
{
    (void)err;
    *out = (void *)env->cfg->job_arg;
    return MR_OK;
}

static mr_status survey_slot_init(void *job, mr__pass_slot *s, mr__error *err)
{
    (void)job;
    s->part = mr__calloc(1, sizeof(survey_slot));
    if (s->part == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* The columns are known once the header is read. */
static mr_status slot_columns(const mr__survey_cfg *c, survey_slot *out)
{
    size_t k;
    if (out->col != NULL) return MR_OK;
    out->col = mr__calloc(c->nfields + 1, sizeof *out->col);
    if (out->col == NULL) return MR_ERR_NO_MEMORY;
    for (k = 0; k < c->nfields; k++) mr__survey_col_init(&out->col[k], c->cap);
    return MR_OK;
}

static mr_status survey_start(void *job, mr__error *err)
{
    (void)job;
    (void)err;
    return MR_OK;
}

static mr_status survey_worker_init(void *job, mr__pass_worker *w, mr__error *err)
{
    const mr__survey_cfg *c = job;
    survey_worker *sw = mr__calloc(1, sizeof *sw);
    if (sw == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    w->part = sw;
    sw->c = c;
    sw->np = mr__numparser_new();
    if (sw->np == NULL || mr__row_cells_init(&sw->cells, c->nfields) != MR_OK) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return mr__tokenizer_init(&sw->tok, c->delim, err);
}

static int wants_nothing_packed(void *job, const mr__pass_slot *s)
{
    (void)job;
    (void)s;
    return 0;
}

static int is_missing(const mr__survey_cfg *c, const char *p, size_t n)
{
    return mr__cell_is_token((const char *const *)c->missing, c->nmissing, p, n);
}

/* Digits with an optional sign, and blanks around as numparse.h allows. */
static int integer_form(const char *p, size_t n)
{
    size_t i = 0, digits = 0;
    while (i < n && (p[i] == ' ' || p[i] == '\t')) i++;
    if (i < n && (p[i] == '+' || p[i] == '-')) i++;
    while (i < n && p[i] >= '0' && p[i] <= '9') i++, digits++;
    while (i < n && (p[i] == ' ' || p[i] == '\t')) i++;
    return digits > 0 && i == n;
}

static void survey_cell(survey_worker *sw, mr__survey_col *col, size_t k, const char *p, size_t n, survey_slot *out)
{
    double v;
    if (is_missing(sw->c, p, n)) {
        col->missing++;
        return;
    }
    if (mr__parse_double(sw->np, p, n, &v)) {
        col->numbers++;
        col->integers += (uint64_t)integer_form(p, n);
        col->sum += v;
        if (v < col->min) col->min = v;
        if (v > col->max) col->max = v;
    }
    if (!col->over && !atomic_load_explicit(&sw->c->over[k], memory_order_relaxed)) {
        mr_status st = mr__survey_col_count(col, p, n, 1);
        if (st == MR_ERR_NO_MEMORY) out->nomem = 1;
    }
}

static void on_row_end(void *user, uint32_t r, size_t nfields)
{
    survey_worker *sw = user;
    survey_slot *out = sw->s->part;
    size_t k;
    out->rows++;
    if (nfields != sw->c->nfields) {
        if (out->malformed++ == 0) {
            out->first_malformed_line = sw->s->chunk->first_line + sw->s->chunk->row_line[r];
            out->first_malformed_fields = nfields;
        }
    } else {
        for (k = 0; k < nfields; k++) {
            size_t n;
            const char *p = mr__row_cell(&sw->cells, k, &n);
            survey_cell(sw, &out->col[k], k, p, n, out);
        }
    }
}

static void reset_slot(const mr__survey_cfg *c, survey_slot *out)
{
    size_t k;
    for (k = 0; k < c->nfields; k++) {
        mr__survey_col_release(&out->col[k]);
        mr__survey_col_init(&out->col[k], c->cap);
    }
    out->rows = out->malformed = out->first_malformed_line = 0;
    out->first_malformed_fields = 0;
}

static void survey_compute(void *job, mr__pass_worker *w, mr__pass_slot *s)
{
    const mr__survey_cfg *c = job;
    survey_worker *sw = w->part;
    survey_slot *out = s->part;
    mr_status st;
    if (slot_columns(c, out) != MR_OK) {
        s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
        return;
    }
    reset_slot(c, out);
    sw->s = s;
    st = mr__tokenize_cells(&sw->tok, s->chunk, &sw->cells, NULL, 0, on_row_end, sw, c->display, &s->err);
    if (st != MR_OK && s->st == MR_OK) s->st = st;
    if (s->st == MR_OK && (sw->cells.nomem || out->nomem)) s->st = mr__fail(&s->err, MR_ERR_NO_MEMORY, "out of memory");
}

/* A block's table into the column's, values in their order of first
 * appearance in the block: the file's order of first appearance. */
static mr_status merge_values(mr__survey_cfg *c, size_t k, const mr__survey_col *from)
{
    mr__survey_col *to = &c->col[k];
    size_t j;
    mr_status st = MR_OK;
    if (to->over) return MR_OK;
    if (from->over) st = MR_ERR_DOMAIN;
    for (j = 0; st == MR_OK && j < from->values.n; j++)
        st = mr__survey_col_count(to, from->values.name[j].str, from->values.name[j].len, from->count[j]);
    if (st == MR_ERR_DOMAIN) {
        if (!to->over) drop_table(to);
        atomic_store(&c->over[k], 1);
        return MR_OK;
    }
    return st;
}

static void close_group(mr__survey_cfg *c)
{
    size_t k;
    for (k = 0; k < c->nfields; k++) {
        c->col[k].sum += c->group_sum[k];
        c->group_sum[k] = 0;
    }
    c->group_open = 0;
}

static mr_status survey_add(void *job, mr__pass_slot *s, mr__error *err)
{
    mr__survey_cfg *c = job;
    survey_slot *out = s->part;
    size_t k;
    if (out->malformed && c->malformed == 0) {
        c->first_malformed_line = out->first_malformed_line;
        c->first_malformed_fields = out->first_malformed_fields;
    }
    c->rows += out->rows;
    c->malformed += out->malformed;
    for (k = 0; k < c->nfields; k++) {
        mr__survey_col *to = &c->col[k];
        const mr__survey_col *from = &out->col[k];
        to->missing += from->missing;
        to->numbers += from->numbers;
        to->integers += from->integers;
        c->group_sum[k] += from->sum;
        if (from->min < to->min) to->min = from->min;
        if (from->max > to->max) to->max = from->max;
        if (merge_values(c, k, from) != MR_OK) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    c->group_open = 1;
    if (mr__group_closes(s->index, 0)) close_group(c);
    return MR_OK;
}

static mr_status survey_finish(void *job, mr_status st, mr__error *err)
{
    mr__survey_cfg *c = job;
    (void)err;
    if (st == MR_OK && c->group_open) close_group(c);
    return st;
}

static void survey_worker_release(void *job, mr__pass_worker *w)
{
    survey_worker *sw = w->part;
    (void)job;
    if (sw == NULL) return;
    mr__tokenizer_release(&sw->tok);
    mr__numparser_free(sw->np);
    mr__row_cells_release(&sw->cells);
    mr__free(sw);
    w->part = NULL;
}

static void survey_slot_release(void *job, mr__pass_slot *s)
{
    const mr__survey_cfg *c = job;
    survey_slot *out = s->part;
    size_t k;
    if (out == NULL) return;
    for (k = 0; out->col && k < c->nfields; k++) mr__survey_col_release(&out->col[k]);
    mr__free(out->col);
    mr__free(out);
    s->part = NULL;
}

static void survey_close(void *job) { (void)job; }

const mr__pass_job_ops mr__job_survey = {
    .name = "survey",
    .packs = 0,
    .raw_rows = 1,
    .open = survey_open,
    .slot_init = survey_slot_init,
    .start = survey_start,
    .worker_init = survey_worker_init,
    .wants_packed = wants_nothing_packed,
    .compute = survey_compute,
    .add = survey_add,
    .finish = survey_finish,
    .worker_release = survey_worker_release,
    .slot_release = survey_slot_release,
    .close = survey_close,
};
