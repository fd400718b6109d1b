/* family.c - the registry of families, names, the supported pairs and the
 * checks that read a family's and a link's ranges. */
#include "family/family.h"

#include <math.h>
#include <string.h>

#include "input/numparse.h"

/* The registry: one line per family, its mr_family value and the
 * mr__family_ops its file defines. */
#define FAMILY_LIST(X)                                                                              \
    X(MR_GAUSSIAN, mr__gaussian_family)                                                             \
    X(MR_BINOMIAL, mr__binomial_family)                                                             \
    X(MR_POISSON, mr__poisson_family)                                                               \
    X(MR_GAMMA, mr__gamma_family)                                                                   \
    X(MR_INVERSE_GAUSSIAN, mr__inverse_gaussian_family)                                             \
    X(MR_NEGATIVE_BINOMIAL, mr__negative_binomial_family)                                           \
    X(MR_TWEEDIE, mr__tweedie_family)

#define DECLARE(value, ops) extern const mr__family_ops ops;
FAMILY_LIST(DECLARE)
#undef DECLARE

#define ENTRY(value, ops) [value] = &ops,
static const mr__family_ops *const FAMILIES[] = {FAMILY_LIST(ENTRY)};
#undef ENTRY

enum { N_FAMILIES = sizeof FAMILIES / sizeof FAMILIES[0], N_LINKS = MR_INVERSE_SQUARED + 1 };

const mr__family_ops *mr__family_ops_of(mr_family f)
{
    return (unsigned)f < N_FAMILIES ? FAMILIES[f] : NULL;
}

mr__family mr__family_plain(mr_family f)
{
    mr__family fam = {mr__family_ops_of(f), NAN, 0, NAN};
    return fam;
}

int mr__family_from_name(const char *name)
{
    if (name == NULL)
        return -1;
    for (int i = 0; i < N_FAMILIES; i++)
        if (FAMILIES[i] != NULL && strcmp(FAMILIES[i]->name, name) == 0)
            return i;
    return -1;
}

int mr__link_from_name(const char *name)
{
    if (name == NULL)
        return -1;
    for (int i = 0; i < N_LINKS; i++)
        if (strcmp(mr__link_ops_of((mr_link)i)->name, name) == 0)
            return i;
    return -1;
}

/* "unknown" rather than NULL for an out-of-range value, so that a message
 * built from it stays printable. */
const char *mr__family_name(mr_family f)
{
    const mr__family_ops *ops = mr__family_ops_of(f);
    return ops ? ops->name : "unknown";
}

const char *mr__link_name(mr_link l)
{
    const mr__link_ops *ops = mr__link_ops_of(l);
    return ops ? ops->name : "unknown";
}

mr_link mr__canonical_link(mr_family f)
{
    const mr__family_ops *ops = mr__family_ops_of(f);
    return ops ? ops->canonical_link : MR_IDENTITY;
}

int mr__link_allowed(mr_family f, mr_link l)
{
    const mr__family_ops *ops = mr__family_ops_of(f);
    return ops != NULL && mr__link_ops_of(l) != NULL && (ops->links >> l & 1u);
}

int mr__family_y_valid(const mr__family_ops *f, double y)
{
    return isfinite(y) && mr__outcome_problem(&f->outcome, y) == NULL;
}

int mr__family_mu_valid(const mr__family_ops *f, double mu)
{
    return isfinite(mu) && mu > f->mu_lo && mu < f->mu_hi;
}

int mr__link_eta_valid(const mr__link_ops *l, double eta)
{
    return isfinite(eta) && !(l->eta_positive && !(eta > 0.0)) && !(l->eta_nonzero && eta == 0.0);
}

/* The family's range as an open interval, the link's needs as two flags,
 * so the loop carries no switch. */
size_t mr__count_invalid_n(const mr__family_ops *f, const mr__link_ops *l, const double *eta, const double *mu,
                           size_t n)
{
    const double lo = f->mu_lo, hi = f->mu_hi;
    const int positive_eta = l->eta_positive, nonzero_eta = l->eta_nonzero;
    size_t i, bad = 0;
    for (i = 0; i < n; i++) {
        int ok = isfinite(mu[i]) && mu[i] > lo && mu[i] < hi && isfinite(eta[i]);
        if (positive_eta) ok = ok && eta[i] > 0.0;
        if (nonzero_eta) ok = ok && eta[i] != 0.0;
        bad += !ok;
    }
    return bad;
}

/* The number is read as the data's are (exact, whatever the locale). */
mr_status mr__family_param_value(const char *family, const char *name, const char *word, double *value,
                                 const char *origin, mr__error *err)
{
    size_t n = strlen(name);
    mr__numparser *np;
    int ok;
    if (strncmp(word, name, n) != 0 || word[n] != '=')
        return mr__fail(err, MR_ERR_USAGE, "%s: the %s family takes %s=VALUE, got '%s'", origin, family, name, word);
    if ((np = mr__numparser_new()) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    ok = mr__parse_double(np, word + n + 1, strlen(word + n + 1), value);
    mr__numparser_free(np);
    if (!ok) return mr__fail(err, MR_ERR_USAGE, "%s: %s takes a number, got '%s'", origin, name, word + n + 1);
    return MR_OK;
}
