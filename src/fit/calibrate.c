/* calibrate.c - the published fit's calibration table: the last pass's
 * bins (accum/calibration.h) cut into tenths of the rows, and what the
 * numbers are. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/strbuf.h"
#include "fit/fit.h"
#include "fit/run.h"

/* Where the means were taken: a fit ended by the size of its step took
 * that step without a pass (irls.c), so a fit over the rows has the last
 * pass's means, one step of at most the tolerance in standard errors
 * before the coefficients reported. */
static void where(mr__strbuf *sb, const mr__run *r)
{
    if (r->calib_at_reported) {
        mr__strbuf_printf(sb, "fitted means at the coefficients reported");
        return;
    }
    mr__strbuf_printf(sb,
                      "fitted means at the last pass's coefficients, one IRLS step before those reported (the fit "
                      "ended as that step was %.3g standard errors)",
                      r->step);
}

int mr__calib_by_rate(const mr__run *r) { return r->f->spec.offset != NULL || r->f->spec.exposure != NULL; }

/* With an offset the rows are binned by their rate (accum/accumulate.c):
 * the text says so in the words output/ looks for (MR__CALIB_RATE_WORDS). */
static void grouping(mr__strbuf *sb, const mr__run *r, int rate)
{
    const char *scale = r->family.ops->mu_hi == 1.0 ? "min(mu, 1 - mu), mirrored at 1/2" : "|mu|, by sign";
    if (!rate) {
        mr__strbuf_printf(sb, "groups are whole bins of the mean on a fixed grid (width 2^-4 relative, on %s)", scale);
        return;
    }
    mr__strbuf_printf(sb,
                      "groups are whole bins of the %s, the inverse link of the linear predictor without the "
                      "offset (mu / exp(offset) with a log link; a collapsed pattern's rate is its rows' rate, "
                      "its mean their total), on a fixed grid (width 2^-4 relative, on %s with mu the rate)",
                      MR__CALIB_RATE_WORDS, scale);
}

static char *basis_text(const mr__run *r)
{
    int rate = mr__calib_by_rate(r);
    mr__strbuf sb;
    mr__strbuf_init(&sb);
    where(&sb, r);
    mr__strbuf_printf(&sb,
                      "; rows of positive weight; observed = sum of w y, expected = sum of w mu, weight = sum of w "
                      "(w: prior weight%s); ",
                      r->family.ops->takes_trials ? " times trials" : "");
    grouping(&sb, r, rate);
    mr__strbuf_printf(&sb,
                      ", cut where the rows reach each tenth, so a group holds a tenth of the rows only to within a "
                      "bin; mean_low and mean_high are the least and greatest fitted %s in the group; the sums are "
                      "exact, added in block order",
                      rate ? "rate" : "mean");
    return mr__strbuf_take(&sb);
}

mr_status mr__fit_calibration(mr_fit *fit, const mr__run *r, mr__error *err)
{
    mr__calib_group g[MR__CALIB_GROUPS];
    size_t n = mr__calib_groups(&r->last.sums.calib, g);
    fit->calib = mr__calloc(n + 1, sizeof *fit->calib);
    fit->calib_basis = basis_text(r);
    if (fit->calib == NULL || fit->calib_basis == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    memcpy(fit->calib, g, n * sizeof *g);
    fit->ncalib = n;
    fit->calib_known = 1;
    return MR_OK;
}

int mr_fit_calibration_groups(const mr_fit *fit) { return fit->calib_known ? (int)fit->ncalib : -1; }

const char *mr_fit_calibration_basis(const mr_fit *fit) { return fit->calib_known ? fit->calib_basis : NULL; }

mr_status mr_fit_calibration_group(const mr_fit *fit, size_t i, mr_calibration_group *out)
{
    const mr__calib_group *g;
    if (!fit->calib_known || i >= fit->ncalib || out == NULL) return MR_ERR_USAGE;
    g = &fit->calib[i];
    out->rows = g->rows;
    out->weight = g->weight;
    out->mean_low = g->mean_low;
    out->mean_high = g->mean_high;
    out->observed = g->observed;
    out->expected = g->expected;
    return MR_OK;
}
