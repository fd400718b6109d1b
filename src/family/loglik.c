/* loglik.c - the part of each family's log-likelihood that depends on the
 * data alone.  The first pass sums it once, so that the log-likelihood of
 * any fit is that constant minus deviance / 2 (poisson, binomial) or a
 * closed form in the deviance (the others), with no per-row special
 * functions in later passes. */
#include <math.h>

#include "common/probability.h"
#include "family/family.h"

static double xlogy(double x, double y) { return x == 0 ? 0.0 : x * log(y); }

double mr__loglik_constant(mr_family family, double y, double w, double t, int has_trials)
{
    double prior = w * t, m, c, k;
    switch (family) {
    case MR_GAUSSIAN: return prior > 0 ? log(prior) : 0.0;
    case MR_POISSON: return prior * (xlogy(y, y) - y - mr__log_gamma(y + 1));
    case MR_GAMMA:
    case MR_INVERSE_GAUSSIAN: return prior * log(y);
    case MR_BINOMIAL:
        m = has_trials ? t : w;
        c = has_trials ? w : 1.0;
        if (m <= 0) return 0.0;
        /* one binary trial: every term is an exact zero */
        if (m == 1 && c == 1 && (y == 0 || y == 1)) return 0.0;
        k = m * y;
        return c * (mr__log_gamma(m + 1) - mr__log_gamma(k + 1) - mr__log_gamma(m - k + 1) + xlogy(k, y) + xlogy(m - k, 1 - y));
    }
    return 0.0;
}
