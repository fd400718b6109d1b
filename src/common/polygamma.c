/* polygamma.c - digamma and trigamma, and the differences of log Gamma,
 * digamma and trigamma between x and x + a that a negative binomial's
 * theta is estimated by (its log-likelihood, score and information sum
 * them over rows, x = theta, a = the count).
 *
 * Why the differences have their own functions: for a large x and a
 * small a, log Gamma(x + a) - log Gamma(x) is a difference of two numbers
 * of the size of x log x, and psi(x + a) - psi(x) of two of the size of
 * log x, while the result is of the size of a log x and a / x.  Taken
 * apart, at theta = 10^7 each row's log-likelihood lost about 1e-7 and
 * its score all of its digits: -2 log-likelihood then rose and fell by
 * 1e-3 from pass to pass at the same point, and step halving, which reads
 * a rise as an overshoot, gave up.  From x = 10 on the differences are
 * taken within the asymptotic series, each term a difference that does
 * not cancel; below 10 the plain difference of the two values, which
 * there are no larger than the result's scale.
 */
#include "common/mathx.h"
#include "common/probability.h"

#include <math.h>

/* Where the asymptotic series take over from the recurrences. */
#define SERIES_FROM 10.0

/* log x - 1/(2x) - psi(x) for x >= 10: Abramowitz and Stegun 6.3.18's
 * series in the Bernoulli numbers through x^-14, whose next term is below
 * 1e-17 relative there. */
static double digamma_tail(double x)
{
    double x2 = 1 / (x * x);
    return x2 * (1.0 / 12 - x2 * (1.0 / 120 - x2 * (1.0 / 252 - x2 * (1.0 / 240 - x2 * (1.0 / 132 - x2 * (691.0 / 32760 - x2 / 12))))));
}

/* psi'(x) - 1/x - 1/(2 x^2) for x >= 10: 6.4.12's series through x^-15. */
static double trigamma_tail(double x)
{
    double x2 = 1 / (x * x);
    return x2 / x * (1.0 / 6 - x2 * (1.0 / 30 - x2 * (1.0 / 42 - x2 * (1.0 / 30 - x2 * (5.0 / 66 - x2 * (691.0 / 2730 - x2 * 7.0 / 6))))));
}

/* Below 10 the recurrences psi(x) = psi(x + 1) - 1/x and psi'(x) =
 * psi'(x + 1) + 1/x^2 move the argument up; from 10 on the series above. */
double mr__digamma(double x)
{
    double r = 0;
    if (!(x > 0) || isinf(x)) return x == INFINITY ? INFINITY : NAN;
    while (x < SERIES_FROM) r -= 1 / x, x += 1;
    return r + log(x) - 0.5 / x - digamma_tail(x);
}

double mr__trigamma(double x)
{
    double r = 0, x2;
    if (!(x > 0) || isinf(x)) return x == INFINITY ? 0.0 : NAN;
    while (x < SERIES_FROM) r += 1 / (x * x), x += 1;
    x2 = 1 / (x * x);
    return r + 1 / x + 0.5 * x2 + trigamma_tail(x);
}

/* log1p(u) - u, for any u > -1. */
static double log1pmx(double u)
{
    return fabs(u) <= 0.25 ? mr__log1pmx_small(u) : log1p(u) - u;
}

/* With u = a/x, Stirling's lgamma(z) = (z - 1/2) log z - z + log sqrt(2 pi)
 * + corr(z) at z = x + a less at z = x is
 * a log x + x (log1p(u) - u) + (a - 1/2) log1p(u) + corr(x + a) - corr(x). */
double mr__log_gamma_ratio(double x, double a)
{
    double u;
    if (a == 0) return 0.0;
    if (!(x >= SERIES_FROM)) return mr__log_gamma(x + a) - mr__log_gamma(x);
    u = a / x;
    return a * log(x) + x * log1pmx(u) + (a - 0.5) * log1p(u) + (mr__stirling_corr(x + a) - mr__stirling_corr(x));
}

/* log1p(u) + a / (2 x (x + a)) - (tail(x + a) - tail(x)). */
double mr__digamma_diff(double x, double a)
{
    if (a == 0) return 0.0;
    if (!(x >= SERIES_FROM)) return mr__digamma(x + a) - mr__digamma(x);
    return log1p(a / x) + 0.5 * a / (x * (x + a)) - (digamma_tail(x + a) - digamma_tail(x));
}

/* a / (x (x + a)) + a (2x + a) / (2 x^2 (x + a)^2) + tail(x) - tail(x + a). */
double mr__trigamma_diff(double x, double a)
{
    double xa = x + a;
    if (a == 0) return 0.0;
    if (!(x >= SERIES_FROM)) return mr__trigamma(x) - mr__trigamma(xa);
    return a / (x * xa) + 0.5 * a * (x + xa) / (x * x * xa * xa) + (trigamma_tail(x) - trigamma_tail(xa));
}
