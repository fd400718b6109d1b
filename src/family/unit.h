/* unit.h - pieces several families' formulas share (family files only).
 *
 * Each family writes one inline function per formula and builds its array
 * kernels from them with MR__FAMILY_KERNELS, so a kernel over n rows and
 * over one row do the same operations and give the same bits.
 */
#ifndef MR_FAMILY_UNIT_H
#define MR_FAMILY_UNIT_H

#include <float.h>
#include <math.h>

#include "common/mathx.h"
#include "family/family.h"

#define MR__LINK_BIT(l) (1u << (l))

static inline double mr__xlogx(double x) { return x > 0 ? x * log(x) : 0.0; }

static inline double mr__xlogy(double x, double y) { return x == 0 ? 0.0 : x * log(y); }

/* y log(y/mu) - (y - mu) >= 0, with 0 log 0 = 0.  Written in this form the
 * poisson and binomial deviances are sums of non-negative terms, so they
 * cannot come out negative, and near y = mu (the converged fit) they keep
 * their relative accuracy instead of being the difference of two nearly
 * equal logs. */
static inline double mr__half_poisson(double y, double mu)
{
    if (y == 0.0)
        return mu;
    double d = mu - y;
    if (fabs(d) <= 0.25 * y)
        return -y * mr__log1pmx_small(d / y);
    return y * log(y / mu) + d;
}

/* Where a fitted mean counts as on the edge of its range: common practice,
 * where fitted values stop being informative. */
#define MR__BOUNDARY_EDGE (10 * DBL_EPSILON)

/* Families with the dispersion fixed at 1: the data-only constant less
 * half the deviance. */
static inline double mr__loglik_fixed_dispersion(const mr__family *f, double dev, double llc, double n, double sw)
{
    (void)f;
    (void)n;
    (void)sw;
    return llc - dev / 2;
}

/* Gamma and inverse-gaussian: each row's prior weight times log y. */
static inline double mr__loglik_row_log_y(const mr__family *f, double y, double w, double t, int has_trials)
{
    (void)f;
    (void)has_trials;
    return w * t * log(y);
}

/* The null start's mean for families whose means are > 0. */
static inline double mr__clamp_positive_mean(double mu) { return !(mu > 0) ? 1e-8 : mu; }

/* The kernels of a family without a parameter, from its inline
 * PREFIX_variance(mu) and PREFIX_deviance(y, mu). */
#define MR__FAMILY_KERNELS(prefix)                                                                         \
    static void prefix##_variance_n(const mr__family *f, const double *mu, size_t n, double *var)          \
    {                                                                                                      \
        (void)f;                                                                                           \
        for (size_t i = 0; i < n; i++)                                                                     \
            var[i] = prefix##_variance(mu[i]);                                                             \
    }                                                                                                      \
    static void prefix##_unit_deviance_n(const mr__family *f, const double *y, const double *mu, size_t n, \
                                         double *dev)                                                      \
    {                                                                                                      \
        (void)f;                                                                                           \
        for (size_t i = 0; i < n; i++)                                                                     \
            dev[i] = prefix##_deviance(y[i], mu[i]);                                                       \
    }

/* The kernels of a family with a parameter, from its inline
 * PREFIX_variance(param, mu) and PREFIX_deviance(param, y, mu). */
#define MR__FAMILY_PARAM_KERNELS(prefix)                                                                   \
    static void prefix##_variance_n(const mr__family *f, const double *mu, size_t n, double *var)          \
    {                                                                                                      \
        const double param = f->param;                                                                     \
        for (size_t i = 0; i < n; i++)                                                                     \
            var[i] = prefix##_variance(param, mu[i]);                                                      \
    }                                                                                                      \
    static void prefix##_unit_deviance_n(const mr__family *f, const double *y, const double *mu, size_t n, \
                                         double *dev)                                                      \
    {                                                                                                      \
        const double param = f->param;                                                                     \
        for (size_t i = 0; i < n; i++)                                                                     \
            dev[i] = prefix##_deviance(param, y[i], mu[i]);                                                \
    }

/* Counts (outcomes >= 0 whose mean may be 0): y + 0.1, a finite log at
 * y = 0. */
static inline void mr__mustart_count(const mr__family *f, const double *y, const double *prior, size_t n, double *mu)
{
    (void)f;
    (void)prior;
    for (size_t i = 0; i < n; i++)
        mu[i] = y[i] + 0.1;
}

/* Means that count as 0: on the lower edge of a count family's range. */
static inline size_t mr__count_zero_means(const mr__family *f, const double *mu, size_t n)
{
    size_t bad = 0;
    (void)f;
    for (size_t i = 0; i < n; i++)
        bad += mu[i] <= MR__BOUNDARY_EDGE;
    return bad;
}

/* Families whose starting mean is y itself. */
static inline void mr__mustart_y(const mr__family *f, const double *y, const double *prior, size_t n, double *mu)
{
    (void)f;
    (void)prior;
    for (size_t i = 0; i < n; i++)
        mu[i] = y[i];
}

#endif
