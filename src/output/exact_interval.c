/* exact_interval.c - see exact_interval.h.  References: Garwood,
 * "Fiducial limits for the Poisson distribution", Biometrika 28 (1936)
 * 437-442; Clopper and Pearson, Biometrika 26 (1934) 404-413. */
#include <math.h>

#include "common/probability.h"
#include "output/exact_interval.h"

/* Bisection on the survival function until the bracket stops shrinking
 * (monotone, so exact to the last bits the survival function gives). */
double mr__chisq_quantile(double p, double df)
{
    double lo = 0, hi = df + 10, q = 1 - p;
    int i;
    while (mr__chisq_sf(hi, df) > q && hi < 1e300) hi *= 2;
    for (i = 0; i < 2000; i++) {
        double mid = lo + (hi - lo) / 2;
        if (mid <= lo || mid >= hi) break;
        if (mr__chisq_sf(mid, df) > q) lo = mid;
        else hi = mid;
    }
    return lo + (hi - lo) / 2;
}

/* By bisection (monotone in x). */
double mr__beta_quantile(double p, double a, double b)
{
    double lo = 0, hi = 1;
    int i;
    for (i = 0; i < 2000; i++) {
        double mid = lo + (hi - lo) / 2;
        if (mid <= lo || mid >= hi) break;
        if (mr__incbeta(a, b, mid) < p) lo = mid;
        else hi = mid;
    }
    return lo + (hi - lo) / 2;
}

void mr__garwood_interval(double o, double level, double *lo, double *hi)
{
    double a = 1 - level;
    *lo = o > 0 ? mr__chisq_quantile(a / 2, 2 * o) / 2 : 0;
    *hi = (o > 0 ? mr__chisq_quantile(1 - a / 2, 2 * (o + 1)) : mr__chisq_quantile(1 - a, 2)) / 2;
}

void mr__clopper_pearson_interval(double o, double n, double level, double *lo, double *hi)
{
    double a = 1 - level;
    if (o > n) o = n;
    *lo = o <= 0 ? 0 : mr__beta_quantile(o < n ? a / 2 : a, o, n - o + 1);
    *hi = o >= n ? 1 : mr__beta_quantile(o > 0 ? 1 - a / 2 : 1 - a, o + 1, n - o);
}
