/* report_calib.c - observed against expected by tenths of the fitted
 * mean, as a short table of the fit report (fit/calibrate.c made it). */
#include <math.h>
#include <string.h>

#include "output/report_calib.h"

void mr__report_calibration(mr__strbuf *b, const mr_fit *f, int digits)
{
    int w = digits + 6, rate;
    size_t i;
    if (!f->calib_known || f->ncalib == 0) return;
    rate = strstr(f->calib_basis, MR__CALIB_RATE_WORDS) != NULL; /* bins of rates: fit/calibrate.c */
    mr__strbuf_printf(b, "\ncalibration: observed and expected by tenths of the %s (%s)\n",
                      rate ? MR__CALIB_RATE_WORDS : "fitted mean",
                      strncmp(f->calib_basis, "fitted means at the coefficients reported", 41) == 0
                          ? "at the coefficients reported"
                          : "at the last pass's coefficients, one step before those reported");
    mr__strbuf_printf(b, "  %5s %10s %*s %*s %*s %*s %8s\n", "group", "rows", w, rate ? "rate from" : "mean from", w, "to", w, "observed",
                      w, "expected", "O/E");
    for (i = 0; i < f->ncalib; i++) {
        const mr__calib_group *g = &f->calib[i];
        mr__strbuf_printf(b, "  %5zu %10llu %*.*g %*.*g %*.*g %*.*g", i + 1, (unsigned long long)g->rows, w, digits,
                          g->mean_low, w, digits, g->mean_high, w, digits, g->observed, w, digits, g->expected);
        if (g->expected > 0) mr__strbuf_printf(b, " %8.4f\n", g->observed / g->expected);
        else mr__strbuf_printf(b, " %8s\n", "-");
    }
    mr__strbuf_printf(b,
                      "  groups are whole bins of the fitted %s (about 6%% wide), so each holds about a tenth of "
                      "the rows; sums are exact. A hint of misfit along the %s, not a test.\n",
                      rate ? "rate" : "mean", rate ? "rate" : "mean");
}
