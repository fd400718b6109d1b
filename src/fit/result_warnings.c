/* result_warnings.c - the warnings a published fit carries, which an
 * analyst must see beside its estimates: the outcome's values, an
 * estimated parameter's, no convergence, aliased columns, rows at the
 * family's boundary, the cache and thread notes, skipped rows, variances
 * below a double's range and single-level factors.  Apart from result.c,
 * which computes what they speak of. */
#include <float.h>

#include "common/strbuf.h"
#include "family/family.h"
#include "fit/fit.h"
#include "fit/irls.h"
#include "fit/run.h"

/* An estimated parameter: the counts it is a likelihood of, and a theta
 * at its bound (fit/irls.h, MR__IRLS_PARAM_MAX). */
static void param_warnings(mr_fit *fit, const mr__run *r)
{
    if (!r->family.estimate) return;
    if (r->first.scan.nnonint > 0)
        mr__fit_warn(fit, "%llu outcome values are not whole numbers: the negative binomial is a distribution of "
                          "counts; theta and the log-likelihood use its gamma-function form, which such values "
                          "fit but which is not their distribution",
                     (unsigned long long)r->first.scan.nnonint);
    if (r->family.param >= MR__IRLS_PARAM_MAX)
        mr__fit_warn(fit, "theta reached %g, its largest value: the counts show no overdispersion beyond poisson's "
                          "(theta's maximum is at infinity), so this is the poisson fit, and theta's standard error "
                          "means nothing",
                     MR__IRLS_PARAM_MAX);
}

void mr__result_warnings(mr_fit *fit, const mr__run *r)
{
    size_t j, n = 0;
    mr__strbuf sb;
    const char *outcome[MR__SCAN_OUTCOME_WARNINGS];
    size_t noutcome = mr__scan_outcome_warnings(&r->first.scan, fit->family, r->bind.has_weight || r->bind.has_trials,
                                                outcome);
    for (j = 0; j < noutcome; j++) mr__fit_warn(fit, "%s", outcome[j]);
    param_warnings(fit, r);
    if (!fit->converged)
        mr__fit_warn(fit, "NOT CONVERGED after %d IRLS passes (last step %.3g standard errors, tolerance %.3g): "
                          "the estimates are not a maximum-likelihood fit",
                     fit->iterations, fit->rel_change, fit->tolerance);
    mr__strbuf_init(&sb);
    for (j = 0; j < fit->p; j++)
        if (fit->aliased[j]) mr__strbuf_printf(&sb, "%s'%s'", n++ ? ", " : "", fit->name[j]);
    if (n)
        mr__fit_warn(fit, "%zu coefficient%s aliased (a linear combination of earlier columns, not estimated): %s", n,
                     n == 1 ? "" : "s", sb.data ? sb.data : "");
    mr__strbuf_release(&sb);
    if (r->last.sums.boundary && r->family.ops->boundary_what)
        mr__fit_warn(fit, "%s for %llu rows: %s", r->family.ops->boundary_what,
                     (unsigned long long)r->last.sums.boundary, r->family.ops->boundary_why);
    if (r->cache_note[0]) mr__fit_warn(fit, "%s", r->cache_note);
    if (r->threads_note[0]) mr__fit_warn(fit, "%s", r->threads_note);
    if (fit->rows_bad)
        mr__fit_warn(fit, "%llu malformed rows were skipped (--on-bad-row skip)", (unsigned long long)fit->rows_bad);
    for (j = 0; j < fit->p; j++)
        if (!fit->aliased[j] && fit->se[j] > 0 && !(fit->cov[j * fit->p + j] >= DBL_MIN))
            mr__fit_warn(fit, "the variance of '%s' is below the range of a double (its values are huge): its "
                              "standard error is computed apart, but its covariances read 0; rescale the column",
                         fit->name[j]);
    for (j = 0; j < fit->nfactors; j++)
        if (fit->factor[j].nlevels < 2)
            mr__fit_warn(fit, "factor '%s' has a single level in the rows used: it adds no column", fit->factor[j].name);
}
