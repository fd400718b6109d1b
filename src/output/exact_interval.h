/* exact_interval.h - exact intervals for a count and for events out of
 * trials, shared by scoring's group table (score_groups.c) and the
 * calibration plot of the page (html_calibration.c).
 *
 * Both take the edge cases the same way: at O = 0 (and O = n for the
 * binomial) the bound that exists is the one-sided bound of level P, the
 * other is the edge itself (0, or 1 for a proportion). */
#ifndef MR_EXACT_INTERVAL_H
#define MR_EXACT_INTERVAL_H

/* The chi-square quantile, P(X <= x) = p, and the beta quantile,
 * I_x(a, b) = p, by bisection to the last bits the tail functions of
 * common/probability.h give. */
double mr__chisq_quantile(double p, double df);
double mr__beta_quantile(double p, double a, double b);

/* Garwood's exact interval at `level` for the mean of a Poisson count o
 * (o >= 0, may be a weighted total): chi-square quantiles of 2o and 2o + 2
 * degrees of freedom, halved. */
void mr__garwood_interval(double o, double level, double *lo, double *hi);

/* Clopper-Pearson's exact interval at `level` for the probability of o
 * events out of n trials (0 <= o <= n; o above n, a rounding of sums, is
 * taken as n): beta quantiles. */
void mr__clopper_pearson_interval(double o, double n, double level, double *lo, double *hi);

#endif
