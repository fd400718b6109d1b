/* spec.c - the model language.  One directive a line, words separated by
 * blanks, double quotes around a word that holds blanks, '#' to the end of
 * the line is a comment. */
#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/utf8.h"
#include "family/family.h"
#include "model/spec.h"

#define MAX_WORDS 8
#define MAX_LINE 4096

typedef struct words {
    int n;
    char *w[MAX_WORDS];
    char buf[MAX_LINE];
} words;

void mr__spec_init(mr__spec *s)
{
    memset(s, 0, sizeof *s);
    s->family = MR_GAUSSIAN;
    s->family_param = NAN;
    s->link = -1;
    s->intercept = 1;
    s->dispersion = -1;
}

static void release_covariate(mr__covariate *c)
{
    mr__free(c->name);
    mr__free(c->ref);
    mr__free(c->spline.knots);
    mr__free(c->origin);
}

void mr__spec_release(mr__spec *s)
{
    size_t i;
    int k;
    mr__free(s->outcome);
    mr__free(s->trials);
    mr__free(s->offset);
    mr__free(s->exposure);
    mr__free(s->weight);
    for (i = 0; i < s->ncov; i++) release_covariate(&s->cov[i]);
    mr__free(s->cov);
    for (i = 0; i < s->ninter; i++) {
        for (k = 0; k < s->inter[i].n; k++) mr__free(s->inter[i].name[k]);
        mr__free(s->inter[i].origin);
    }
    mr__free(s->inter);
    for (i = 0; i < s->nlines; i++) {
        mr__free(s->line[i]);
        mr__free(s->line_origin[i]);
    }
    mr__free(s->line);
    mr__free(s->line_origin);
    mr__spec_init(s);
}

/* Splits a line into words in place; quotes group, '#' ends the line. */
static mr_status split_words(const char *line, words *ws, const char *origin, mr__error *err)
{
    size_t len = strlen(line), o = 0;
    const char *p = line;
    if (len >= MAX_LINE) return mr__fail(err, MR_ERR_USAGE, "%s: line too long", origin);
    ws->n = 0;
    while (*p) {
        while (*p == ' ' || *p == '\t' || *p == '\r' || *p == '\n') p++;
        if (*p == '\0' || *p == '#') break;
        if (ws->n == MAX_WORDS) return mr__fail(err, MR_ERR_USAGE, "%s: too many words", origin);
        ws->w[ws->n++] = ws->buf + o;
        while (*p && *p != ' ' && *p != '\t' && *p != '\r' && *p != '\n' && *p != '#') {
            if (*p == '"') {
                p++;
                while (*p && *p != '"') ws->buf[o++] = *p++;
                if (*p != '"') return mr__fail(err, MR_ERR_USAGE, "%s: unterminated quote", origin);
                p++;
            } else {
                ws->buf[o++] = *p++;
            }
        }
        ws->buf[o++] = '\0';
    }
    return MR_OK;
}

static mr_status set_string(char **slot, const char *value, mr__error *err)
{
    char *copy = mr__strdup(value);
    if (copy == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    mr__free(*slot);
    *slot = copy;
    return MR_OK;
}

const mr__covariate *mr__spec_find(const mr__spec *s, const char *name)
{
    size_t i;
    for (i = 0; i < s->ncov; i++)
        if (strcmp(s->cov[i].name, name) == 0) return &s->cov[i];
    return NULL;
}

/* A later declaration of the same column replaces its role and reference
 * but keeps its place in the term order. */
static mr_status declare_covariate(mr__spec *s, const char *name, mr__role role, const char *ref,
                                   const char *origin, mr__error *err)
{
    mr__covariate *c = (mr__covariate *)mr__spec_find(s, name);
    if (c == NULL) {
        if (mr__reserve((void **)&s->cov, &s->capcov, s->ncov + 1, sizeof *s->cov) != 0)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        c = &s->cov[s->ncov];
        memset(c, 0, sizeof *c);
        MR__TRY(set_string(&c->name, name, err));
        s->ncov++;
    }
    c->role = role;
    c->many = 0;
    mr__free(c->ref);
    c->ref = NULL;
    mr__free(c->spline.knots);
    memset(&c->spline, 0, sizeof c->spline);
    if (ref != NULL) MR__TRY(set_string(&c->ref, ref, err));
    return origin != NULL ? set_string(&c->origin, origin, err) : MR_OK;
}

static mr_status add_interaction(mr__spec *s, const words *ws, const char *origin, mr__error *err)
{
    mr__interaction *it;
    int k, j;
    if (ws->n < 3 || ws->n > 1 + MR__MAX_INTERACT)
        return mr__fail(err, MR_ERR_USAGE, "%s: interact takes 2 or 3 column names", origin);
    for (k = 1; k < ws->n; k++)
        for (j = 1; j < k; j++)
            if (strcmp(ws->w[k], ws->w[j]) == 0)
                return mr__fail(err, MR_ERR_USAGE, "%s: interact names '%s' twice", origin, ws->w[k]);
    if (mr__reserve((void **)&s->inter, &s->capinter, s->ninter + 1, sizeof *s->inter) != 0)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    it = &s->inter[s->ninter];
    memset(it, 0, sizeof *it);
    for (k = 1; k < ws->n; k++) {
        it->name[k - 1] = mr__strdup(ws->w[k]);
        if (it->name[k - 1] == NULL) {
            for (j = 0; j < k - 1; j++) mr__free(it->name[j]);
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        }
    }
    it->n = ws->n - 1;
    s->ninter++;
    return origin != NULL ? set_string(&it->origin, origin, err) : MR_OK;
}

static mr_status expect_args(const words *ws, int n, const char *origin, mr__error *err)
{
    if (ws->n - 1 != n)
        return mr__fail(err, MR_ERR_USAGE, "%s: '%s' takes %d value%s, got %d", origin, ws->w[0], n,
                        n == 1 ? "" : "s", ws->n - 1);
    return MR_OK;
}

/* "family NAME [PARAM=VALUE ...]": words after the name go to the family's
 * own parser; a family without one takes the name alone. */
static mr_status parse_family(mr__spec *s, const words *ws, const char *origin, mr__error *err)
{
    int v = ws->n >= 2 ? mr__family_from_name(ws->w[1]) : -1, i;
    const mr__family_ops *ops = v >= 0 ? mr__family_ops_of((mr_family)v) : NULL;
    double param = NAN;
    int profile = 0;
    if (ops == NULL || ops->parse_param == NULL) MR__TRY(expect_args(ws, 1, origin, err));
    if (ops == NULL)
        return mr__fail(err, MR_ERR_USAGE,
                        "%s: unknown family '%s' (gaussian, binomial, poisson, gamma, inverse-gaussian, "
                        "negative-binomial, tweedie)",
                        origin, ws->w[1]);
    /* a refused line leaves the spec as it was: nothing is stored before
     * every word is read */
    for (i = 2; i < ws->n; i++) {
        size_t k = ops->param_name ? strlen(ops->param_name) : 0;
        if (ops->profile_grid != NULL && strncmp(ws->w[i], ops->param_name, k) == 0 &&
            strcmp(ws->w[i] + k, "=profile") == 0) {
            profile = 1;
            param = NAN;
            continue;
        }
        MR__TRY(ops->parse_param(&param, ws->w[i], origin, err));
        profile = 0;
    }
    s->family = v;
    s->family_param = param;
    s->family_profile = profile;
    /* no value, or NAME=estimate (NaN from parse_param): estimated */
    s->family_estimate = ops->param_estimable && isnan(param) && !profile;
    return MR_OK;
}

/* "factor COL [ref=LEVEL] [many]", the two words in either order. */
static mr_status parse_factor(mr__spec *s, const words *ws, const char *origin, mr__error *err)
{
    const char *ref = NULL;
    int many = 0, k;
    if (ws->n < 2 || ws->n > 4)
        return mr__fail(err, MR_ERR_USAGE, "%s: factor takes a column name and optionally ref=LEVEL and many",
                        origin);
    for (k = 2; k < ws->n; k++) {
        if (strcmp(ws->w[k], "many") == 0 && !many) {
            many = 1;
            continue;
        }
        if (strncmp(ws->w[k], "ref=", 4) != 0 || ref != NULL)
            return mr__fail(err, MR_ERR_USAGE, "%s: expected ref=LEVEL or many after the factor name, got '%s'",
                            origin, ws->w[k]);
        ref = ws->w[k] + 4;
        if (*ref == '\0')
            return mr__fail(err, MR_ERR_USAGE, "%s: ref= needs a level name (quote one with blanks: ref=\"a b\")",
                            origin);
    }
    MR__TRY(declare_covariate(s, ws->w[1], MR__ROLE_FACTOR, ref, origin, err));
    ((mr__covariate *)mr__spec_find(s, ws->w[1]))->many = many;
    return MR_OK;
}

/* "a,b,c": at most `max` finite numbers, in *n. */
static mr_status parse_numbers(const char *text, double *out, size_t max, size_t *n, const char *origin,
                               const char *key, mr__error *err)
{
    const char *p = text;
    *n = 0;
    for (;;) {
        char *end;
        double v;
        errno = 0;
        v = strtod(p, &end);
        if (end == p || (*end != ',' && *end != '\0') || !isfinite(v) || isspace((unsigned char)*p))
            return mr__fail(err, MR_ERR_USAGE, "%s: spline %s= takes numbers separated by commas, got '%s'", origin,
                            key, text);
        if (*n == max)
            return mr__fail(err, MR_ERR_USAGE, "%s: spline %s= takes at most %zu numbers", origin, key, max);
        out[(*n)++] = v;
        if (*end == '\0') return MR_OK;
        p = end + 1;
    }
}

static mr_status check_increasing(const double *v, size_t n, const char *what, const char *origin, mr__error *err)
{
    size_t i;
    for (i = 1; i < n; i++)
        if (!(v[i] > v[i - 1]))
            return mr__fail(err, MR_ERR_USAGE, "%s: spline %s must be strictly increasing (%.17g then %.17g)", origin,
                            what, v[i - 1], v[i]);
    return MR_OK;
}

static mr_status check_inside(const mr__spline_spec *sp, const double *knots, const char *origin, mr__error *err)
{
    size_t i;
    if (!sp->has_boundary) return MR_OK;
    for (i = 0; i < sp->nknots; i++)
        if (!(knots[i] > sp->boundary[0] && knots[i] < sp->boundary[1]))
            return mr__fail(err, MR_ERR_USAGE, "%s: spline knot %.17g is not inside the boundary knots %.17g,%.17g",
                            origin, knots[i], sp->boundary[0], sp->boundary[1]);
    return MR_OK;
}

/* One option of a spline line into sp; knots[] has MR__SPLINE_MAX_KNOTS room. */
static mr_status spline_option(mr__spline_spec *sp, const char *w, double *knots, const char *origin, mr__error *err)
{
    size_t n;
    if (strncmp(w, "df=", 3) == 0) {
        char *end;
        long df = strtol(w + 3, &end, 10);
        if (end == w + 3 || *end != '\0' || df < 1 || df > MR__SPLINE_MAX_KNOTS + 1)
            return mr__fail(err, MR_ERR_USAGE, "%s: spline df= takes a whole number from 1 to %d, got '%s'", origin,
                            MR__SPLINE_MAX_KNOTS + 1, w + 3);
        sp->df = (int)df;
        return MR_OK;
    }
    if (strncmp(w, "knots=", 6) == 0) {
        MR__TRY(parse_numbers(w + 6, knots, MR__SPLINE_MAX_KNOTS, &sp->nknots, origin, "knots", err));
        return check_increasing(knots, sp->nknots, "knots", origin, err);
    }
    if (strncmp(w, "boundary=", 9) == 0) {
        MR__TRY(parse_numbers(w + 9, sp->boundary, 2, &n, origin, "boundary", err));
        if (n != 2) return mr__fail(err, MR_ERR_USAGE, "%s: spline boundary= takes two numbers, LO,HI", origin);
        sp->has_boundary = 1;
        return check_increasing(sp->boundary, 2, "boundary knots", origin, err);
    }
    return mr__fail(err, MR_ERR_USAGE, "%s: spline takes df=N or knots=K1,K2,..., and optionally boundary=LO,HI; got '%s'",
                    origin, w);
}

static mr_status parse_spline(mr__spec *s, const words *ws, const char *origin, mr__error *err)
{
    double knots[MR__SPLINE_MAX_KNOTS];
    mr__spline_spec sp;
    mr__covariate *c;
    int k;
    memset(&sp, 0, sizeof sp);
    if (ws->n < 3 || ws->n > 4)
        return mr__fail(err, MR_ERR_USAGE, "%s: spline takes a column name, then df=N or knots=K1,K2,..., and "
                        "optionally boundary=LO,HI", origin);
    for (k = 2; k < ws->n; k++) MR__TRY(spline_option(&sp, ws->w[k], knots, origin, err));
    if ((sp.df > 0) == (sp.nknots > 0))
        return mr__fail(err, MR_ERR_USAGE, "%s: spline takes either df=N or knots=K1,K2,..., not %s", origin,
                        sp.df > 0 ? "both" : "neither");
    MR__TRY(check_inside(&sp, knots, origin, err));
    MR__TRY(declare_covariate(s, ws->w[1], MR__ROLE_SPLINE, NULL, origin, err));
    c = (mr__covariate *)mr__spec_find(s, ws->w[1]);
    if (sp.nknots > 0) {
        if ((sp.knots = mr__malloc_array(sp.nknots, sizeof *sp.knots)) == NULL)
            return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        memcpy(sp.knots, knots, sp.nknots * sizeof *knots);
    }
    c->spline = sp;
    return MR_OK;
}

static mr_status parse_choice(const words *ws, const char *a, const char *b, int *out, const char *origin,
                              mr__error *err)
{
    MR__TRY(expect_args(ws, 1, origin, err));
    if (strcmp(ws->w[1], a) == 0) *out = 1;
    else if (strcmp(ws->w[1], b) == 0) *out = 0;
    else
        return mr__fail(err, MR_ERR_USAGE, "%s: '%s' takes %s or %s, got '%s'", origin, ws->w[0], a, b, ws->w[1]);
    return MR_OK;
}

static mr_status apply_words(mr__spec *s, const words *ws, const char *origin, mr__error *err)
{
    const char *d = ws->w[0];
    int v;
    static const struct {
        const char *name;
        size_t off;
    } columns[] = {
        {"outcome", offsetof(mr__spec, outcome)}, {"trials", offsetof(mr__spec, trials)},
        {"offset", offsetof(mr__spec, offset)},   {"exposure", offsetof(mr__spec, exposure)},
        {"weight", offsetof(mr__spec, weight)},
    };
    size_t i;
    for (i = 0; i < sizeof columns / sizeof columns[0]; i++) {
        if (strcmp(d, columns[i].name) == 0) {
            MR__TRY(expect_args(ws, 1, origin, err));
            return set_string((char **)((char *)s + columns[i].off), ws->w[1], err);
        }
    }
    if (strcmp(d, "family") == 0) return parse_family(s, ws, origin, err);
    if (strcmp(d, "link") == 0) {
        MR__TRY(expect_args(ws, 1, origin, err));
        v = mr__link_from_name(ws->w[1]);
        if (v < 0)
            return mr__fail(err, MR_ERR_USAGE,
                            "%s: unknown link '%s' (identity, log, inverse, logit, probit, cloglog, sqrt, "
                            "inverse-squared)",
                            origin, ws->w[1]);
        s->link = v;
        return MR_OK;
    }
    if (strcmp(d, "numeric") == 0) {
        MR__TRY(expect_args(ws, 1, origin, err));
        return declare_covariate(s, ws->w[1], MR__ROLE_NUMERIC, NULL, origin, err);
    }
    if (strcmp(d, "factor") == 0) return parse_factor(s, ws, origin, err);
    if (strcmp(d, "spline") == 0) return parse_spline(s, ws, origin, err);
    if (strcmp(d, "interact") == 0) return add_interaction(s, ws, origin, err);
    if (strcmp(d, "intercept") == 0) return parse_choice(ws, "yes", "no", &s->intercept, origin, err);
    if (strcmp(d, "dispersion") == 0) return parse_choice(ws, "estimate", "fixed", &s->dispersion, origin, err);
    return mr__fail(err, MR_ERR_USAGE, "%s: unknown directive '%s'", origin, d);
}

/* Keeps the line as given, less its line end; the two arrays grow
 * together (caplines counts both). */
static mr_status keep_line(mr__spec *s, const char *line, const char *origin, mr__error *err)
{
    size_t n = strlen(line), cap = s->caplines;
    char *text, *from = NULL;
    if (n > 0 && line[n - 1] == '\n') n--;
    if (n > 0 && line[n - 1] == '\r') n--;
    if (mr__reserve((void **)&s->line, &cap, s->nlines + 1, sizeof *s->line) != 0 ||
        mr__reserve((void **)&s->line_origin, &s->caplines, s->nlines + 1, sizeof *s->line_origin) != 0)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    text = mr__strndup(line, n);
    if (origin != NULL) from = mr__strdup(origin);
    if (text == NULL || (origin != NULL && from == NULL)) {
        mr__free(text);
        mr__free(from);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    s->line[s->nlines] = text;
    s->line_origin[s->nlines++] = from;
    return MR_OK;
}

mr_status mr__spec_line(mr__spec *s, const char *line, const char *origin, mr__error *err)
{
    words ws;
    const char *where = origin != NULL ? origin : "model";
    MR__TRY(split_words(line, &ws, where, err));
    if (ws.n > 0) MR__TRY(apply_words(s, &ws, where, err));
    return keep_line(s, line, origin, err);
}

mr_status mr__spec_file(mr__spec *s, const char *path, mr__error *err)
{
    char line[MAX_LINE + 2], origin[512];
    unsigned long lineno = 0;
    mr_status st = MR_OK;
    FILE *fp = fopen(path, "r");
    if (fp == NULL) return mr__fail(err, MR_ERR_IO, "%s: cannot open model file: %s", path, strerror(errno));
    while (st == MR_OK && fgets(line, sizeof line, fp) != NULL) {
        lineno++;
        mr__utf8_mend_cut(origin, sizeof origin, snprintf(origin, sizeof origin, "%s:%lu", path, lineno));
        if (strlen(line) > MAX_LINE) {
            st = mr__fail(err, MR_ERR_USAGE, "%s: line too long", origin);
            break;
        }
        st = mr__spec_line(s, line, origin, err);
    }
    if (st == MR_OK && ferror(fp)) st = mr__fail(err, MR_ERR_IO, "%s: cannot read model file: %s", path, strerror(errno));
    fclose(fp);
    return st;
}

int mr__spec_link(const mr__spec *s)
{
    return s->link >= 0 ? s->link : (int)mr__canonical_link((mr_family)s->family);
}

int mr__spec_dispersion_estimated(const mr__spec *s)
{
    if (s->dispersion >= 0) return s->dispersion;
    return mr__family_ops_of((mr_family)s->family)->dispersion_estimated;
}

mr__family mr__spec_family(const mr__spec *s)
{
    mr__family fam = {mr__family_ops_of((mr_family)s->family), s->family_param, s->family_estimate, NAN};
    return fam;
}

static mr_status validate_interactions(const mr__spec *s, mr__error *err)
{
    size_t i;
    int k;
    for (i = 0; i < s->ninter; i++) {
        int splines = 0;
        for (k = 0; k < s->inter[i].n; k++) {
            const mr__covariate *c = mr__spec_find(s, s->inter[i].name[k]);
            if (c == NULL)
                return mr__fail(err, MR_ERR_USAGE,
                                "model: interact names '%s', which is not declared with numeric, factor or spline",
                                s->inter[i].name[k]);
            if (c->role == MR__ROLE_SPLINE && ++splines > 1)
                return mr__fail(err, MR_ERR_USAGE, "model: interact names two splines ('%s' is the second); an "
                                "interaction takes at most one", s->inter[i].name[k]);
        }
    }
    return MR_OK;
}

mr_status mr__spec_validate(const mr__spec *s, mr__error *err)
{
    int link = mr__spec_link(s);
    const mr__family_ops *ops = mr__family_ops_of((mr_family)s->family);
    if (s->outcome == NULL) return mr__fail(err, MR_ERR_USAGE, "model: no outcome column (outcome COL)");
    if (!mr__link_allowed((mr_family)s->family, (mr_link)link))
        return mr__fail(err, MR_ERR_USAGE, "model: the %s family does not take the %s link",
                        mr__family_name((mr_family)s->family), mr__link_name((mr_link)link));
    if (s->family_estimate && s->dispersion == 1)
        return mr__fail(err, MR_ERR_USAGE,
                        "model: the %s family's %s is estimated by its likelihood, which 'dispersion estimate' (a "
                        "quasi family) does not have: give %s=VALUE",
                        ops->name, ops->param_name, ops->param_name);
    if (ops->param_name != NULL && isnan(s->family_param) && !s->family_estimate && !s->family_profile)
        return mr__fail(err, MR_ERR_USAGE, "model: the %s family needs its %s (family %s %s=VALUE)", ops->name,
                        ops->param_name, ops->name, ops->param_name);
    if (s->trials != NULL && !ops->takes_trials)
        return mr__fail(err, MR_ERR_USAGE, "model: trials is for the binomial family only");
    if (s->offset != NULL && s->exposure != NULL && strcmp(s->offset, s->exposure) == 0)
        return mr__fail(err, MR_ERR_USAGE, "model: '%s' is both offset and exposure", s->offset);
    if (s->exposure != NULL && link != MR_LOG)
        return mr__fail(err, MR_ERR_USAGE,
                        "model: exposure adds log(%s) to the linear predictor, which is a rate only under "
                        "the log link (use offset for other links)",
                        s->exposure);
    if (!s->intercept && s->ncov == 0)
        return mr__fail(err, MR_ERR_USAGE, "model: no intercept and no covariates: nothing to fit");
    MR__TRY(mr__spec_validate_many(s, err));
    return validate_interactions(s, err);
}

/* A copy made by replaying the lines: the same directives, in the same
 * order, so the copy is the model as given (lines included). */
mr_status mr__spec_copy(mr__spec *dst, const mr__spec *src, mr__error *err)
{
    size_t i;
    mr__spec_init(dst);
    for (i = 0; i < src->nlines; i++) {
        mr_status st = mr__spec_line(dst, src->line[i], src->line_origin[i], err);
        if (st != MR_OK) {
            mr__spec_release(dst);
            return st;
        }
    }
    return MR_OK;
}

/* Term t as the design numbers them: covariates in order, then
 * interactions.  The lines stay as given: the copy no longer rebuilds
 * from them, which is why only a comparison's own fits use this. */
int mr__spec_drop_term(mr__spec *s, size_t t)
{
    int k;
    if (t < s->ncov) {
        release_covariate(&s->cov[t]);
        memmove(&s->cov[t], &s->cov[t + 1], (s->ncov - t - 1) * sizeof *s->cov);
        s->ncov--;
        return 1;
    }
    t -= s->ncov;
    if (t >= s->ninter) return 0;
    for (k = 0; k < s->inter[t].n; k++) mr__free(s->inter[t].name[k]);
    mr__free(s->inter[t].origin);
    memmove(&s->inter[t], &s->inter[t + 1], (s->ninter - t - 1) * sizeof *s->inter);
    s->ninter--;
    return 1;
}
