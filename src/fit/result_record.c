/* result_record.c - what the published fit records beside its estimates:
 * the model (family, link, columns, terms, factors and their levels, the
 * model's lines), the data as the first pass found it (rows, missing and
 * bad cells, the numeric columns' spread, a set's files), and the run
 * (passes, times, warm start, the input's identity, the options).  Apart
 * from result.c, which computes the estimates and their statistics. */
#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "common/clock.h"
#include "common/strbuf.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/run.h"
#include "fit/start.h"

static char *dup_or_null(const char *s) { return s ? mr__strdup(s) : NULL; }

static char *term_label(const mr__spec *s, size_t i)
{
    mr__strbuf sb;
    int k;
    mr__strbuf_init(&sb);
    if (i < s->ncov) {
        mr__strbuf_printf(&sb, "%s", s->cov[i].name);
    } else {
        const mr__interaction *it = &s->inter[i - s->ncov];
        for (k = 0; k < it->n; k++) mr__strbuf_printf(&sb, "%s%s", k ? " & " : "", it->name[k]);
    }
    return mr__strbuf_take(&sb);
}

/* The spline of a group's first design term, copied into t. */
static mr_status copy_spline(mr__fit_term *t, const mr__term *dt, const mr__spec *s, size_t g)
{
    int k, ni = 0, n = g < s->ncov ? 1 : s->inter[g - s->ncov].n;
    const mr__spline *sp = NULL;
    const char *column = NULL;
    for (k = 0; k < n; k++) {
        const char *name = g < s->ncov ? s->cov[g].name : s->inter[g - s->ncov].name[k];
        const mr__covariate *c = mr__spec_find(s, name);
        if (c->role == MR__ROLE_FACTOR) continue;
        if (dt->spline[ni] != NULL) sp = dt->spline[ni], column = name;
        ni++;
    }
    if (sp == NULL) return MR_OK;
    t->spline = 1;
    t->spline_column = mr__strdup(column);
    t->knots = mr__malloc_array(sp->nknots + 1, sizeof *t->knots);
    t->boundary = mr__malloc_array(2, sizeof *t->boundary);
    if (t->spline_column == NULL || t->knots == NULL || t->boundary == NULL) return MR_ERR_NO_MEMORY;
    memcpy(t->knots, sp->knots, sp->nknots * sizeof *t->knots);
    t->nknots = sp->nknots;
    memcpy(t->boundary, sp->boundary, 2 * sizeof *t->boundary);
    t->nboundary = 2;
    return MR_OK;
}

/* Each term's label, parts, coding and coefficients, from the design,
 * whose terms are the spec's covariates, then its interactions, each a
 * group of one term or of one per spline column. */
static mr_status copy_terms(mr_fit *fit, const mr__run *r)
{
    const mr__spec *s = &r->f->spec;
    size_t i, d = 0;
    int k;
    fit->term = mr__calloc(fit->nterms + 1, sizeof *fit->term);
    if (fit->term == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < fit->nterms; i++) {
        mr__fit_term *t = &fit->term[i];
        /* the `many` factor has no design term: no coefficient here */
        const mr__term *dt = (long)i == r->design.absorb_group ? NULL : &r->design.term[d];
        int nparts = i < s->ncov ? 1 : s->inter[i - s->ncov].n;
        t->full = dt ? dt->full : 0;
        t->first = dt ? dt->col0 : 0;
        for (; dt && d < r->design.nterms && r->design.term[d].group == i; d++) t->ncoef += r->design.term[d].ncols;
        if ((t->label = term_label(s, i)) == NULL) return MR_ERR_NO_MEMORY;
        for (k = 0; k < nparts; k++, t->nparts++)
            if ((t->part[k] = mr__strdup(i < s->ncov ? s->cov[i].name : s->inter[i - s->ncov].name[k])) == NULL)
                return MR_ERR_NO_MEMORY;
        if (dt) MR__TRY(copy_spline(t, dt, s, i));
    }
    return MR_OK;
}

static mr_status copy_lines(mr_fit *fit, const mr__spec *s)
{
    size_t i;
    fit->model_line = mr__calloc(s->nlines + 1, sizeof *fit->model_line);
    fit->model_origin = mr__calloc(s->nlines + 1, sizeof *fit->model_origin);
    if (fit->model_line == NULL || fit->model_origin == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < s->nlines; i++, fit->nmodel_lines++) {
        fit->model_line[i] = mr__strdup(s->line[i]);
        fit->model_origin[i] = dup_or_null(s->line_origin[i]);
        if (fit->model_line[i] == NULL || (s->line_origin[i] != NULL && fit->model_origin[i] == NULL)) {
            fit->nmodel_lines++; /* so that mr_fit_free frees this one too */
            return MR_ERR_NO_MEMORY;
        }
    }
    return MR_OK;
}

mr_status mr__result_copy_model(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr__spec *s = &r->f->spec;
    size_t i, l;
    fit->family = s->family;
    fit->family_param = r->family.estimate ? r->family.param : s->family_param;
    fit->family_param_given = !isnan(fit->family_param);
    fit->family_param_estimated = r->family.estimate;
    fit->family_param_se = NAN;
    if (r->family.estimate && r->last.sums.fam[MR__PS_INFO] > 0)
        fit->family_param_se = 1 / sqrt(r->last.sums.fam[MR__PS_INFO]);
    fit->link = mr__spec_link(s);
    fit->intercept = s->intercept;
    fit->dispersion_estimated = mr__spec_dispersion_estimated(s);
    fit->outcome = dup_or_null(s->outcome);
    fit->trials = dup_or_null(s->trials);
    fit->offset = dup_or_null(s->offset);
    fit->exposure = dup_or_null(s->exposure);
    fit->weight = dup_or_null(s->weight);
    fit->nterms = s->ncov + s->ninter;
    fit->nfactors = r->bind.nfac;
    fit->factor = mr__calloc(fit->nfactors + 1, sizeof *fit->factor);
    if (!fit->factor || copy_terms(fit, r) != MR_OK || copy_lines(fit, s) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < fit->nfactors; i++) {
        const mr__factor *f = &r->fac[i];
        mr__fit_factor *o = &fit->factor[i];
        o->name = mr__strdup(f->name);
        o->reference = f->nlevels ? mr__strdup(f->level[f->ref]) : mr__strdup("");
        o->level = mr__calloc(f->nlevels + 1, sizeof *o->level);
        if (!o->name || !o->reference || !o->level) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        for (l = 0; l < f->nlevels; l++, o->nlevels++)
            if ((o->level[l] = mr__strdup(f->level[l])) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    return MR_OK;
}

/* The numeric columns' spread and range, as the first pass found them. */
mr_status mr__result_copy_numerics(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    size_t k, n = r->bind.nnum;
    fit->numerics_known = 1;
    if ((fit->numeric = mr__calloc(n + 1, sizeof *fit->numeric)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (k = 0; k < n; k++, fit->nnumerics++) {
        mr__fit_numeric *o = &fit->numeric[k];
        if ((o->name = mr__strdup(r->bind.col[r->bind.num_col[k]].name)) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        o->mean = r->mean[k];
        o->sd = r->spread[k];
        o->min = s->xmin[k];
        o->max = s->xmax[k];
    }
    return MR_OK;
}

mr_status mr__result_copy_data_summary(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr__scan_sums *s = &r->first.scan;
    size_t c, i;
    fit->rows_read = s->nread;
    fit->rows_used = s->nused;
    fit->rows_bad = s->nbad;
    fit->rows_incomplete = s->incomplete;
    fit->zero_weight = s->nused - s->npos;
    fit->missing_name = mr__calloc(r->bind.ncol + 1, sizeof *fit->missing_name);
    fit->missing_count = mr__calloc(r->bind.ncol + 1, sizeof *fit->missing_count);
    fit->bad_example = mr__calloc(s->nbad_shown + 1, sizeof *fit->bad_example);
    if (!fit->missing_name || !fit->missing_count || !fit->bad_example)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (c = 0; c < r->bind.ncol; c++) {
        if (s->missing[c] == 0) continue;
        fit->missing_name[fit->nmissing] = mr__strdup(r->bind.col[c].name);
        if (fit->missing_name[fit->nmissing] == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->missing_count[fit->nmissing++] = s->missing[c];
    }
    for (i = 0; i < s->nbad_shown; i++) {
        mr__strbuf sb;
        mr__strbuf_init(&sb);
        mr__strbuf_printf(&sb, "%s:%llu:%s", s->bad[i].file ? s->bad[i].file : r->display,
                          (unsigned long long)s->bad[i].line, s->bad[i].msg);
        if ((fit->bad_example[i] = mr__strbuf_take(&sb)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->nbad_examples++;
    }
    return MR_OK;
}

/* Each file of a set as the first pass read it. */
static mr_status record_set(const mr__run *r, mr_fit *fit, mr__error *err)
{
    size_t i;
    if (r->set.n == 0) return MR_OK;
    fit->set_known = 1;
    if ((fit->set_file = mr__calloc(r->first.nfiles + 1, sizeof *fit->set_file)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < r->first.nfiles; i++) {
        const mr__file_identity *id = &r->first.files[i];
        mr__fit_input_file *to = &fit->set_file[i];
        if ((to->path = mr__strdup(r->set.display[i])) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        fit->nset_files++;
        to->size = id->size;
        to->mtime_ns = id->mtime_ns;
        to->bytes = id->raw_bytes;
        to->decompressed_bytes = id->out_bytes;
        to->checksum = id->checksum;
        to->compression = id->compression;
    }
    return MR_OK;
}

static mr_status record_missing_tokens(const mr_fitter *f, mr_fit *fit, mr__error *err)
{
    fit->missing_token = mr__strings_copy((const char *const *)f->missing, f->nmissing);
    if (fit->missing_token == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    fit->nmissing_tokens = f->nmissing;
    fit->missing_known = 1;
    return MR_OK;
}

mr_status mr__result_copy_run_info(mr_fit *fit, const mr__run *r, mr__error *err)
{
    const mr_fitter *f = r->f;
    fit->iterations = r->iterations;
    fit->passes = r->npasses;
    fit->resumed = r->resumed_from > 0;
    fit->resumed_from_pass = r->resumed_from;
    fit->halvings = r->halvings;
    fit->warm_start = r->warm;
    fit->by_step = r->by_step;
    fit->patterns = r->collapsed ? r->npatterns : 0;
    fit->warm_iterations = r->warm_iterations;
    fit->warm_blocks = r->warm ? r->warm_blocks : 0;
    fit->warm_polish_blocks = r->warm ? r->warm_polish_blocks : 0;
    if ((fit->start_given = r->started) != 0) {
        fit->start_carried = r->start_carried;
        fit->start_previous = f->start->p;
        if ((fit->start_from = mr__strdup(f->start->label)) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    fit->converged = r->converged;
    fit->status = r->converged ? MR_OK : MR_ERR_NOT_CONVERGED;
    fit->rel_change = r->rel_change;
    fit->seconds = mr__seconds_now() - r->t0;
    fit->rows_per_second = fit->seconds > 0 ? (double)r->first.scan.nread * r->npasses / fit->seconds : 0;
    fit->pass_seconds = mr__malloc_array((size_t)r->npasses + 1, sizeof *fit->pass_seconds);
    fit->path = mr__strdup(r->display);
    fit->version = mr__strdup(MR_VERSION_STRING);
    if (!fit->pass_seconds || !fit->path || !fit->version) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    /* standard input is kept in a file of our own: it has no identity */
    fit->file_known = strcmp(r->path, "-") != 0;
    fit->file_size = fit->file_known ? r->first.size : 0;
    fit->file_mtime_ns = fit->file_known ? r->first.mtime_ns : 0;
    memcpy(fit->pass_seconds, r->pass_seconds, (size_t)r->npasses * sizeof *fit->pass_seconds);
    fit->npass_seconds = (size_t)r->npasses;
    fit->bytes = r->first.raw_bytes;
    fit->decompressed_bytes = r->first.out_bytes;
    fit->checksum = r->first.checksum;
    fit->compression = r->first.zstd; /* the pass's field holds the mr__compression */
    MR__TRY(record_set(r, fit, err));
    fit->delimiter = r->delim;
    fit->delimiter_detected = r->delim_detected;
    fit->threads = r->nthreads;
    fit->max_passes = f->max_passes;
    fit->in_memory = f->in_memory;
    fit->cached = r->cached;
    fit->skip_bad = f->skip_bad;
    fit->buffer_size = f->buffer_size;
    fit->tolerance = f->tolerance;
    fit->level = f->level;
    return record_missing_tokens(f, fit, err);
}
