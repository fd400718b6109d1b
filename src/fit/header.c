/* header.c - the header row: the model's columns bound on the first pass, the
 * same row checked on every later one. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "fit/run.h"
#include "input/fields.h"
/* The binding number of factor `name`, or -1. */
static int32_t factor_number(const mr__binding *b, const char *name)
{
    size_t k;
    for (k = 0; k < b->nfac; k++)
        if (strcmp(b->col[b->fac_col[k]].name, name) == 0) return (int32_t)k;
    return -1;
}

/* Interaction i's factors' binding numbers into f, if all its parts are
 * factors and it has `parts` of them. */
static int all_factors(const mr__run *r, size_t i, size_t parts, int32_t *f)
{
    const mr__spec *s = &r->f->spec;
    size_t k;
    if ((size_t)s->inter[i].n != parts) return 0;
    for (k = 0; k < parts; k++)
        if ((f[k] = factor_number(&r->bind, s->inter[i].name[k])) < 0) return 0;
    return 1;
}

/* Interactions of two or three factors: the first pass counts their cells. */
static void find_pairs(mr__run *r)
{
    const mr__spec *s = &r->f->spec;
    size_t i, n = 0, n3 = 0;
    for (i = 0; i < s->ninter; i++) {
        if (n < MR__MAX_PAIRS && all_factors(r, i, 2, r->pairs[n])) n++;
        else if (n3 < MR__MAX_TRIPLES && all_factors(r, i, 3, r->triples[n3])) n3++;
    }
    r->dcfg.pairs = (const int32_t(*)[2])r->pairs;
    r->dcfg.npairs = n;
    r->dcfg.triples = (const int32_t(*)[3])r->triples;
    r->dcfg.ntriples = n3;
}

static mr_status bind_header(mr__run *r, const char *line, size_t len, mr__error *err)
{
    char **names = NULL;
    size_t n = 0, i;
    mr_status st;
    r->delim = r->f->delimiter ? (char)r->f->delimiter : mr__detect_delimiter(line, len);
    r->delim_detected = r->f->delimiter == 0;
    MR__TRY(mr__parse_header(line, len, r->delim, &names, &n, r->display, err));
    st = mr__bind(&r->bind, &r->f->spec, names, n, r->display, err);
    r->bound = 1; /* the binding owns the names now, even when it failed */
    if (st == MR_OK && r->f->cluster != NULL) st = mr__bind_cluster(&r->bind, r->f->cluster, r->display, err);
    if (st != MR_OK) return st;
    r->dcfg.bind = &r->bind;
    r->dcfg.family = &r->family;
    r->dcfg.skip_bad = r->f->skip_bad;
    r->dcfg.delim = r->delim;
    r->dcfg.display = r->display;
    r->dcfg.missing = r->f->missing;
    r->dcfg.nmissing = r->f->nmissing;
    r->dcfg.missing_len = r->missing_len;
    if (r->f->nmissing > MR__MAX_MISSING_TOKENS)
        return mr__fail(err, MR_ERR_USAGE, "more than %d missing-value tokens", MR__MAX_MISSING_TOKENS);
    for (i = 0; i < r->f->nmissing; i++) r->missing_len[i] = strlen(r->f->missing[i]);
    r->dcfg.levels = NULL;
    find_pairs(r);
    r->header = mr__strndup(line, len);
    r->header_len = len;
    return r->header ? MR_OK : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
}

mr_status mr__run_on_header(void *user, const char *line, size_t len, mr__error *err)
{
    mr__run *r = user;
    if (!r->bound) return bind_header(r, line, len, err);
    if (len != r->header_len || memcmp(line, r->header, len) != 0)
        return mr__fail(err, MR_ERR_IO, "%s: the header changed during the fit", r->display);
    return MR_OK;
}
