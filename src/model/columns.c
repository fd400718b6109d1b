#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "input/fields.h"
#include "model/columns.h"

typedef struct named_field {
    const char *name;
    size_t field;
} named_field;

static int by_name_then_field(const void *a, const void *b)
{
    const named_field *x = a, *y = b;
    int c = strcmp(x->name, y->name);
    if (c != 0) return c;
    return (x->field > y->field) - (x->field < y->field);
}

/* Sorted by name, equal names lie together, first occurrence first: the
 * duplicate reported is the leftmost second occurrence of any name, with
 * its first occurrence (n log n; a header may have 10^5 columns). */
static mr_status check_duplicates(char **h, size_t n, const char *display, mr__error *err)
{
    named_field *f = mr__malloc_array(n ? n : 1, sizeof *f);
    size_t i, dup = n, first = 0;
    if (f == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < n; i++) {
        f[i].name = h[i];
        f[i].field = i;
    }
    qsort(f, n, sizeof *f, by_name_then_field);
    for (i = 1; i < n; i++)
        if (strcmp(f[i].name, f[i - 1].name) == 0 && (i < 2 || strcmp(f[i - 1].name, f[i - 2].name) != 0) &&
            f[i].field < dup) {
            dup = f[i].field;
            first = f[i - 1].field;
        }
    mr__free(f);
    if (dup == n) return MR_OK;
    return mr__fail(err, MR_ERR_FORMAT, "%s:1:%zu: duplicate column name '%s' (also column %zu)", display, dup + 1,
                    h[dup], first + 1);
}

static mr_status unknown_column(const char *name, char **h, size_t n, const char *display, mr__error *err)
{
    mr__strbuf sb;
    size_t i;
    mr__strbuf_init(&sb);
    for (i = 0; i < n && i < 30; i++) mr__strbuf_printf(&sb, "%s%s", i ? ", " : "", h[i]);
    if (n > 30) mr__strbuf_printf(&sb, ", ...");
    mr__fail(err, MR_ERR_USAGE, "%s: the model names column '%s', which the header does not have (columns: %s)",
             display, name, sb.data ? sb.data : "");
    mr__strbuf_release(&sb);
    return MR_ERR_USAGE;
}

static const char *role_name(mr__use use)
{
    static const char *const name[] = {"the outcome", "the trials", "the weight", "the offset",
                                       "the exposure", "a numeric covariate", "a factor",
                                       "the cluster column"};
    return name[use];
}

static mr_status add_column(mr__binding *b, const char *name, mr__use use, int var, const char *display,
                            mr__error *err)
{
    size_t f;
    for (f = 0; f < b->nfields; f++)
        if (strcmp(b->header[f], name) == 0) break;
    if (f == b->nfields) return unknown_column(name, b->header, b->nfields, display, err);
    if (b->col_of_field[f] >= 0)
        return mr__fail(err, MR_ERR_USAGE, "model: column '%s' is used twice, as %s and as %s", name,
                        role_name(b->col[b->col_of_field[f]].use), role_name(use));
    b->col[b->ncol].name = name;
    b->col[b->ncol].field = f;
    b->col[b->ncol].use = use;
    b->col[b->ncol].var = var;
    b->col_of_field[f] = (int)b->ncol;
    if (use <= MR__USE_EXPOSURE) b->role_col[use] = (int)b->ncol;
    b->ncol++;
    return MR_OK;
}

static mr_status bind_roles(mr__binding *b, const mr__spec *s, const char *display, mr__error *err)
{
    size_t i;
    MR__TRY(add_column(b, s->outcome, MR__USE_OUTCOME, -1, display, err));
    if (s->trials) MR__TRY(add_column(b, s->trials, MR__USE_TRIALS, -1, display, err));
    if (s->weight) MR__TRY(add_column(b, s->weight, MR__USE_WEIGHT, -1, display, err));
    if (s->offset) MR__TRY(add_column(b, s->offset, MR__USE_OFFSET, -1, display, err));
    if (s->exposure) MR__TRY(add_column(b, s->exposure, MR__USE_EXPOSURE, -1, display, err));
    for (i = 0; i < s->ncov; i++) {
        const mr__covariate *c = &s->cov[i];
        if (c->role == MR__ROLE_NUMERIC || c->role == MR__ROLE_SPLINE) {
            b->num_col[b->nnum] = b->ncol;
            b->counted[b->nnum] = c->role == MR__ROLE_SPLINE;
            b->ncounted += c->role == MR__ROLE_SPLINE;
            MR__TRY(add_column(b, c->name, MR__USE_NUMERIC, (int)b->nnum, display, err));
            b->nnum++;
        } else {
            if ((long)i == mr__spec_many(s)) {
                b->has_many = 1;
                b->many_fac = (int)b->nfac;
            }
            b->fac_col[b->nfac] = b->ncol;
            MR__TRY(add_column(b, c->name, MR__USE_FACTOR, (int)b->nfac, display, err));
            b->nfac++;
        }
    }
    return MR_OK;
}

mr_status mr__bind(mr__binding *b, const mr__spec *s, char **header, size_t nfields, const char *display,
                   mr__error *err)
{
    size_t i, maxcol = 6 + s->ncov; /* the roles, the covariates, a cluster column */
    mr_status st;
    memset(b, 0, sizeof *b);
    b->header = header;
    b->nfields = nfields;
    b->col = mr__calloc(maxcol, sizeof *b->col);
    b->col_of_field = mr__malloc_array(nfields, sizeof *b->col_of_field);
    b->num_col = mr__calloc(s->ncov + 1, sizeof *b->num_col);
    b->fac_col = mr__calloc(s->ncov + 1, sizeof *b->fac_col);
    b->counted = mr__calloc(s->ncov + 1, sizeof *b->counted);
    if (!b->col || !b->col_of_field || !b->num_col || !b->fac_col || !b->counted)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (i = 0; i < nfields; i++) b->col_of_field[i] = -1;
    for (i = 0; i <= MR__USE_EXPOSURE; i++) b->role_col[i] = -1;
    MR__TRY(check_duplicates(header, nfields, display, err));
    st = bind_roles(b, s, display, err);
    b->has_trials = s->trials != NULL;
    b->has_weight = s->weight != NULL;
    b->has_offset = s->offset != NULL;
    b->has_exposure = s->exposure != NULL;
    return st;
}

mr_status mr__bind_cluster(mr__binding *b, const char *name, const char *display, mr__error *err)
{
    size_t f;
    for (f = 0; f < b->nfields; f++)
        if (strcmp(b->header[f], name) == 0) break;
    if (f == b->nfields)
        return mr__fail(err, MR_ERR_USAGE, "%s: the cluster column '%s' is not in the header", display, name);
    b->has_cluster = 1;
    if (b->col_of_field[f] >= 0) {
        b->cluster_col = b->col_of_field[f];
        return MR_OK;
    }
    MR__TRY(add_column(b, name, MR__USE_CLUSTER, -1, display, err));
    b->cluster_col = (int)b->ncol - 1;
    return MR_OK;
}

void mr__binding_release(mr__binding *b)
{
    mr__free_names(b->header, b->nfields);
    mr__free(b->col);
    mr__free(b->col_of_field);
    mr__free(b->num_col);
    mr__free(b->fac_col);
    mr__free(b->counted);
    memset(b, 0, sizeof *b);
}
