/* probability.h - the few distribution functions a coefficient table needs:
 * normal and Student t tail areas and quantiles (Wald tests and intervals),
 * and the chi-square and F upper tails (deviance goodness of fit, joint
 * Wald tests). */
#ifndef MR_PROBABILITY_H
#define MR_PROBABILITY_H

double mr__normal_cdf(double x);            /* P(Z <= x) */
double mr__normal_sf(double x);             /* P(Z > x), accurate far in the tail */
double mr__normal_quantile(double p);       /* inverse cdf, 0<p<1; NaN outside */
double mr__t_sf(double t, double df);       /* P(T > t), df > 0 (may be non-integer) */
double mr__t_quantile(double p, double df); /* inverse cdf of T, 0<p<1 */
double mr__chisq_sf(double x, double df);   /* P(X > x) */
/* P(F > f) for Snedecor's F with df1 and df2 degrees of freedom (joint Wald
 * tests with an estimated dispersion); df1 = 1 gives 2 P(T > sqrt f). */
double mr__f_sf(double f, double df1, double df2);

/* log |Gamma(x)|, thread safe: the one log-gamma of the library (each
 * family's data-only log-likelihood, the gamma fit's, the t and beta
 * functions here).  Inline because the first pass takes it for every row:
 * the small whole numbers that make up most registry counts come from a
 * table of glibc's own lgamma(1..21) (the same bits, so the table changes
 * no result), the rest from lgamma_r. */
extern const double mr__log_factorial[21];
double mr__log_gamma_libm(double x);
static inline double mr__log_gamma(double x)
{
    if (x >= 1 && x <= 21 && x == (double)(int)x) return mr__log_factorial[(int)x - 1];
    return mr__log_gamma_libm(x);
}

/* The digamma and trigamma functions, d/dx and d2/dx2 of log Gamma(x),
 * for x > 0 (NaN otherwise): a negative binomial's theta is estimated by
 * its score and information, which are sums of their values. */
double mr__digamma(double x);
double mr__trigamma(double x);
/* For x > 0 and a >= 0: log Gamma(x + a) - log Gamma(x), psi(x + a) -
 * psi(x) and psi'(x) - psi'(x + a), each to about its own relative
 * precision however large x is against a (src/common/polygamma.c); 0 for
 * a = 0, and below x = 10 the plain differences, bit for bit. */
double mr__log_gamma_ratio(double x, double a);
double mr__digamma_diff(double x, double a);
double mr__trigamma_diff(double x, double a);

/* Regularized incomplete beta I_x(a, b) and regularized upper incomplete
 * gamma Q(a, x), exposed for tests. */
double mr__incbeta(double a, double b, double x);
double mr__gamma_q(double a, double x);

#endif
