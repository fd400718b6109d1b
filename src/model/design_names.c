/* design_names.c - each design column's name (term, levels, spline
 * column), and the check that no two columns share one. */
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "model/design.h"

static void append_level_name(mr__strbuf *sb, const mr__design *d, const mr__term *t, int k, int32_t code)
{
    const mr__factor *f = &d->fac[t->fac[k]];
    int32_t lev = t->full ? code : (code < f->ref ? code : code + 1);
    mr__strbuf_printf(sb, "%s=%s", f->name, f->level[lev]);
}

static void append_numeric_name(mr__strbuf *sb, const mr__term *t, int k, const char *name)
{
    if (t->spline[k] == NULL) mr__strbuf_printf(sb, "%s", name);
    else mr__strbuf_printf(sb, "%s[spline %zu/%zu]", name, t->spline_col[k] + 1, t->spline[k]->ncols);
}

/* Parts are named in the order the analyst wrote them. */
static char *column_name(const mr__design *d, const mr__spec *s, size_t ti, size_t j, const char *const *num_name)
{
    const mr__term *t = &d->term[ti];
    const size_t g = t->group;
    mr__strbuf sb;
    int32_t code[MR__MAX_INTERACT];
    int k, fi = 0, ni = 0, nparts = t->nfac + t->nnum;
    mr__strbuf_init(&sb);
    mr__design_column_levels(d, t, j, code);
    for (k = 0; k < nparts; k++) {
        const char *part = g < s->ncov ? s->cov[g].name : s->inter[g - s->ncov].name[k];
        int is_fac = fi < t->nfac && strcmp(d->fac[t->fac[fi]].name, part) == 0;
        if (k) mr__strbuf_append(&sb, " & ", 3);
        if (is_fac) append_level_name(&sb, d, t, fi, code[fi]), fi++;
        else append_numeric_name(&sb, t, ni, num_name[t->num[ni]]), ni++;
    }
    return mr__strbuf_take(&sb);
}

/* Pointers to the names, by name, then by place (the later column last). */
static int by_name(const void *a, const void *b)
{
    char *const *x = *(char *const *const *)a, *const *y = *(char *const *const *)b;
    int c = strcmp(*x, *y);
    return c != 0 ? c : (x > y) - (x < y);
}

/* The line that asked for term t (NULL when none is known). */
static const char *term_origin(const mr__spec *s, const mr__term *t)
{
    return t->group < s->ncov ? s->cov[t->group].origin : s->inter[t->group - s->ncov].origin;
}

static size_t term_of_column(const mr__design *d, size_t j)
{
    size_t i;
    for (i = 0; i + 1 < d->nterms && j >= d->term[i + 1].col0; i++) continue;
    return i;
}

/* Coefficients are found by name (a start, drift, scoring), so two columns
 * must never share one: a numeric column called "intercept", or one called
 * "sex=M" beside the factor sex, is refused on the line that declared the
 * later of the two. */
static mr_status check_names_unique(const mr__design *d, const mr__spec *s, mr__error *err)
{
    char ***sorted;
    size_t j, dup = d->p;
    if (d->p < 2) return MR_OK;
    if ((sorted = mr__malloc_array(d->p, sizeof *sorted)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (j = 0; j < d->p; j++) sorted[j] = &d->name[j];
    qsort(sorted, d->p, sizeof *sorted, by_name);
    for (j = 1; j < d->p && dup == d->p; j++)
        if (strcmp(*sorted[j], *sorted[j - 1]) == 0) dup = (size_t)(sorted[j] - d->name);
    mr__free(sorted);
    if (dup == d->p) return MR_OK;
    {
        const char *origin = term_origin(s, &d->term[term_of_column(d, dup)]);
        return mr__fail(err, MR_ERR_USAGE, "%s: the coefficient name '%s' is taken twice%s; rename the column",
                        origin ? origin : "model", d->name[dup],
                        d->intercept && strcmp(d->name[dup], MR__INTERCEPT_NAME) == 0 ? " (it is the intercept's name)"
                                                                                      : "");
    }
}

mr_status mr__design_name_columns(mr__design *d, const mr__spec *s, const mr__binding *b, mr__error *err)
{
    const char *num_name[64];
    size_t i, j, k;
    for (k = 0; k < b->nnum && k < 64; k++) num_name[k] = b->col[b->num_col[k]].name;
    if (b->nnum > 64) return mr__fail(err, MR_ERR_USAGE, "model: more than 64 numeric covariates");
    d->name = mr__calloc(d->p, sizeof *d->name);
    if (d->name == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (d->intercept && (d->name[0] = mr__strdup(MR__INTERCEPT_NAME)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < d->nterms; i++)
        for (j = d->term[i].col0; j < d->term[i].col0 + d->term[i].ncols; j++)
            if ((d->name[j] = column_name(d, s, i, j, num_name)) == NULL)
                return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return check_names_unique(d, s, err);
}
