/* exact_interval.c - see exact_interval.h.  References: Garwood,
 * "Fiducial limits for the Poisson distribution", Biometrika 28 (1936)
 * 437-442; Clopper and Pearson, Biometrika 26 (1934) 404-413. */
#include <math.h>

#include "common/probability.h"
#include "output/exact_interval.h"

/* The tail's relative error, with room: a few 1e-14 at most (probability.c),
 * so a tail value past q by more than 2 of these is past q whatever the
 * errors at two points. */
static const double SF_ERROR = 1e-12;

static double chisq_density(double x, double df)
{
    double k = 0.5 * df;
    return exp((k - 1) * log(x) - 0.5 * x - k * 0.69314718055994530942 - mr__log_gamma(k));
}

/* Where the tail is q, near enough for a window around it (0 when
 * Newton's method from the Wilson-Hilferty approximation does not settle). */
static double chisq_root(double p, double df)
{
    double c = 2 / (9 * df), w = 1 - c + mr__normal_quantile(p) * sqrt(c), x = df * w * w * w;
    int i;
    if (!(x > 0)) x = df;
    for (i = 0; i < 8; i++) {
        double f = chisq_density(x, df), step;
        if (!(f > 0 && isfinite(f))) return 0;
        step = (mr__chisq_sf(x, df) - (1 - p)) / f;
        x += step;
        if (!(x > 0 && isfinite(x))) return 0;
        if (fabs(step) <= 1e-8 * x) return x;
    }
    return 0;
}

/* The bisection below reads the tail at every midpoint, some sixty
 * times, though only those near the root can go either way: the tail
 * falls, so below a point where it is clearly above q (by more than its
 * error at two points) it is above q too, and past one where it is
 * clearly below, below.  Such a pair close around the root (Newton's
 * method, then checked) settles the far midpoints unread, and the
 * bisection takes the same steps and ends on the same bits.  Without the
 * pair (not found or not clear), every midpoint is read. */
typedef struct chisq_window {
    double below, above; /* the tail is > q below `below`, <= q above `above` */
} chisq_window;

static chisq_window chisq_window_around(double p, double df)
{
    chisq_window w = {0, INFINITY};
    double q = 1 - p, x = df > 0 && p > 0 && p < 1 ? chisq_root(p, df) : 0, g, d, sa, sb;
    if (x == 0) return w;
    g = x * chisq_density(x, df) / q; /* the tail's relative fall per relative step */
    d = 20 * SF_ERROR / g;
    if (!(d > 0 && d < 1e-3)) return w;
    sa = mr__chisq_sf(x * (1 - d), df);
    sb = mr__chisq_sf(x * (1 + d), df);
    if (sa > q * (1 + 2 * SF_ERROR) && sb < q * (1 - 2 * SF_ERROR)) {
        w.below = x * (1 - d);
        w.above = x * (1 + d);
    }
    return w;
}

/* 1 when the tail at x is above q: from the window when it knows. */
static int chisq_above(const chisq_window *w, double x, double df, double q)
{
    if (x < w->below) return 1;
    if (x > w->above) return 0;
    return mr__chisq_sf(x, df) > q;
}

/* Bisection on the survival function until the bracket stops shrinking
 * (monotone, so exact to the last bits the survival function gives). */
double mr__chisq_quantile(double p, double df)
{
    double lo = 0, hi = df + 10, q = 1 - p;
    chisq_window w = chisq_window_around(p, df);
    int i;
    while (chisq_above(&w, hi, df, q) && hi < 1e300) hi *= 2;
    for (i = 0; i < 2000; i++) {
        double mid = lo + (hi - lo) / 2;
        if (mid <= lo || mid >= hi) break;
        if (chisq_above(&w, mid, df, q)) lo = mid;
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
