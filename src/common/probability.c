/* probability.c - normal, Student t and chi-square tail areas and quantiles.
 *
 * Accuracy: a few ulp for the normal functions; about 1e-14 relative for t
 * and chi-square, growing like |log p| * DBL_EPSILON in far tails (the
 * exponent of the density cannot be held more exactly in a double).  Far
 * tails matter: a p-value of 1e-200 should print as that, not as 0.
 */
#ifndef _DEFAULT_SOURCE
#define _DEFAULT_SOURCE /* lgamma_r: plain lgamma writes the global signgam */
#endif

#include "common/exp_sinh.h"
#include "common/mathx.h"
#include "common/probability.h"

#include <float.h>
#include <math.h>

static const double PI = 3.14159265358979323846264338327950288;
static const double SQRT1_2 = 0.70710678118654752440084436210485;
/* 1/sqrt(2) minus its double: (1 - 2 s^2) / (4 s) with s = SQRT1_2, the
 * residual taken with fma.  Lets erfc see the argument x/sqrt(2) to better
 * than one ulp, which matters in the tail where erfc'/erfc ~ -2z. */
static const double SQRT1_2_LO = -4.8336466567264561e-17;
static const double TWO_OVER_SQRTPI = 1.12837916709551257389615890312154517;
static const double SQRT_2PI = 2.50662827463100050241576528481104525;
static const double LN_SQRT_2PI = 0.918938533204672741780329736405617640;

/* Shapes (df/2 for t and chi-square) above this are handled by quadrature:
 * the continued fractions lose about shape * DBL_EPSILON to cancellation
 * there, and the gamma series needs O(sqrt(shape)) terms. */
static const double LARGE_SHAPE = 100.0;

/* Continued fractions and series below LARGE_SHAPE converge in a few
 * hundred terms; this only bounds the work for extreme parameters. */
enum { MAX_TERMS = 100000 };

/* ------------------------------------------------------------------ */
/* Normal distribution                                                  */

double mr__normal_sf(double x)
{
    double z = x * SQRT1_2;
    double r = erfc(z);
    if (fabs(x) > 1.0 && isfinite(x)) {
        /* First-order correction for the rounding of z; below |x| = 1 the
         * relative effect (about 2 z^2 ulp) is negligible. */
        double dz = fma(x, SQRT1_2, -z) + x * SQRT1_2_LO;
        r -= TWO_OVER_SQRTPI * exp(-z * z) * dz;
    }
    return 0.5 * r;
}

double mr__normal_cdf(double x)
{
    return mr__normal_sf(-x);
}

/* Acklam's rational approximation of the lower-tail quantile (relative
 * error about 1.2e-9), used only as the start of a Halley step. */
static const double ACKLAM_A[6] = {-3.969683028665376e+01, 2.209460984245205e+02,
                                   -2.759285104469687e+02, 1.383577518672690e+02,
                                   -3.066479806614716e+01, 2.506628277459239e+00};
static const double ACKLAM_B[5] = {-5.447609879822406e+01, 1.615858368580409e+02,
                                   -1.556989798598866e+02, 6.680131188771972e+01,
                                   -1.328068155288572e+01};
static const double ACKLAM_C[6] = {-7.784894002430293e-03, -3.223964580411365e-01,
                                   -2.400758277161838e+00, -2.549732539343734e+00,
                                   4.374664141464968e+00, 2.938163982698783e+00};
static const double ACKLAM_D[4] = {7.784695709041462e-03, 3.224671290700398e-01,
                                   2.445134137142996e+00, 3.754408661907416e+00};
static const double ACKLAM_P_LOW = 0.02425;

static double polyval(const double *c, int n, double x)
{
    double s = c[0];
    for (int i = 1; i < n; i++)
        s = s * x + c[i];
    return s;
}

static double acklam_lower(double q)
{
    if (q < ACKLAM_P_LOW) {
        double t = sqrt(-2.0 * log(q));
        return polyval(ACKLAM_C, 6, t) / (polyval(ACKLAM_D, 4, t) * t + 1.0);
    }
    double r = q - 0.5;
    double s = r * r;
    return polyval(ACKLAM_A, 6, s) * r / (polyval(ACKLAM_B, 5, s) * s + 1.0);
}

/* One Halley step for Phi(z) = q, z <= 0.  Away from the tail the residual
 * is formed from erf and q - 0.5 (exact for q >= 0.25, which covers the
 * tiny z) so that it keeps its relative accuracy as z goes to 0.  In the
 * tail the ratio q / phi(z) is taken through logarithms because phi(z)
 * underflows before q does. */
static double halley_lower(double z, double q)
{
    double u;
    if (q >= ACKLAM_P_LOW) {
        double e = 0.5 * erf(z * SQRT1_2) - (q - 0.5);
        u = e * SQRT_2PI * exp(0.5 * z * z);
    } else {
        double e = mr__normal_sf(-z) - q;
        u = (e / q) * exp(log(q) + 0.5 * z * z + LN_SQRT_2PI);
    }
    return z - u / (1.0 + 0.5 * z * u);
}

/* Endpoints give -inf / +inf (the limits); NaN strictly outside [0, 1]. */
double mr__normal_quantile(double p)
{
    if (!(p >= 0.0 && p <= 1.0))
        return NAN;
    if (p == 0.0)
        return -INFINITY;
    if (p == 1.0)
        return INFINITY;
    /* Work on the lower tail: 1 - p is exact for p >= 0.5, and the result
     * is then exactly antisymmetric. */
    double q = p < 0.5 ? p : 1.0 - p;
    /* Halley's step is cubic: 1.2e-9 becomes rounding error. */
    double z = halley_lower(acklam_lower(q), q);
    return p < 0.5 ? z : -z;
}

/* ------------------------------------------------------------------ */
/* Log-gamma helpers                                                    */

/* glibc's own lgamma(1..21), bit for bit (tests/check_probability.c). */
const double mr__log_factorial[21] = {0, 0, 0.69314718055994529, 1.791759469228055, 3.1780538303479458, 4.7874917427820458, 6.5792512120101012, 8.5251613610654129, 10.604602902745251, 12.801827480081471, 15.104412573075518, 17.502307845873887, 19.987214495661888, 22.552163853123421, 25.19122118273868, 27.89927138384089, 30.671860106080675, 33.505073450136891, 36.395445208033053, 39.339884187199495, 42.335616460753485};

double mr__log_gamma_libm(double x)
{
    int sign;
    return lgamma_r(x, &sign);
}

static double log_beta(double a, double b)
{
    double p = fmin(a, b), q = fmax(a, b), pq = p + q;
    if (p >= 10.0) {
        double corr = mr__stirling_corr(p) + mr__stirling_corr(q) - mr__stirling_corr(pq);
        return LN_SQRT_2PI - 0.5 * log(pq) + (p - 0.5) * log(p / pq) +
               (q - 0.5) * log1p(-p / pq) + corr;
    }
    if (q >= 10.0) {
        /* lgamma(q) - lgamma(p + q) expanded so that no large terms cancel. */
        double corr = mr__stirling_corr(q) - mr__stirling_corr(pq);
        return mr__log_gamma(p) + (q - 0.5) * log1p(-p / pq) - p * log(pq) + p + corr;
    }
    return mr__log_gamma(p) + mr__log_gamma(q) - mr__log_gamma(pq);
}


/* a * (log(x/a) - (x - a)/a), the exponent of x^a e^-x relative to its
 * maximum at x = a. */
static double a_log_ratio_minus(double a, double x)
{
    double d = x - a;
    if (fabs(d) <= 0.25 * a)
        return a * mr__log1pmx_small(d / a);
    return a * log(x / a) - d;
}

/* ------------------------------------------------------------------ */
/* Quadrature for large shapes (the rule: exp_sinh.c)                  */

/* Width of exp(-phi) at 0 from phi'(0) and phi''(0). */
static double integrand_scale(double slope, double curvature)
{
    return 1.0 / (fabs(slope) + sqrt(fabs(curvature)));
}

/* One step of the modified Lentz method for a continued fraction
 * b0 + a1/(b1 + a2/(b2 + ...)): the term a/b folded into c and d, the
 * value f multiplied by the step's factor.  Returns 1 once that factor is
 * 1 to the last bit (the fraction has converged). */
static int lentz_step(double a, double b, double *c, double *d, double *f)
{
    const double tiny = 1e-300;
    double delta;
    *d = b + a * *d;
    *c = b + a / *c;
    if (fabs(*d) < tiny)
        *d = tiny;
    if (fabs(*c) < tiny)
        *c = tiny;
    *d = 1.0 / *d;
    delta = *c * *d;
    *f *= delta;
    return fabs(delta - 1.0) <= DBL_EPSILON;
}

/* ------------------------------------------------------------------ */
/* Regularized incomplete beta                                          */

/* Continued fraction 1 + d1/(1 + d2/(1 + ...)) of I_x(a, b), with
 * d_2m+1 = -(a+m)(a+b+m)x / ((a+2m)(a+2m+1)) and
 * d_2m   = m(b-m)x / ((a+2m-1)(a+2m)), by the modified Lentz method.
 * Converges fast for x < (a+1)/(a+b+2). */
static double beta_cf(double a, double b, double x)
{
    double f = 1.0, c = 1.0, d = 0.0;
    for (long j = 1; j <= MAX_TERMS; j++) {
        double m = (double)(j / 2), coef;
        if (j % 2 == 1)
            coef = -(a + m) * (a + b + m) * x / ((a + 2 * m) * (a + 2 * m + 1));
        else
            coef = m * (b - m) * x / ((a + 2 * m - 1) * (a + 2 * m));
        if (lentz_step(coef, 1.0, &c, &d, &f))
            break;
    }
    return f;
}

/* I_x(a, b) directly, for x below the switch point.  log_x and log_y are
 * log(x) and log(1 - x), passed in so callers can supply them without
 * cancellation or underflow. */
static double beta_lower_direct(double a, double b, double x, double log_x, double log_y)
{
    double front = exp(a * log_x + b * log_y - log_beta(a, b));
    if (front == 0.0)
        return 0.0;
    return front / (a * beta_cf(a, b, x));
}

/* I_x(a, b) and 1 - I_x(a, b).  Whichever is evaluated directly (the one
 * whose fraction converges) has full relative accuracy; that one is also
 * the smaller or at worst moderate, so the complement loses nothing.  The
 * switch x > (a+1)/(a+b+2) is tested on y = 1 - x, which keeps its digits
 * when both sides round to 1. */
static void beta_split(double a, double b, double x, double y, double log_x, double log_y,
                       double *lower, double *upper)
{
    if (y < (b + 1.0) / (a + b + 2.0)) {
        *upper = beta_lower_direct(b, a, y, log_y, log_x);
        *lower = 1.0 - *upper;
    } else {
        *lower = beta_lower_direct(a, b, x, log_x, log_y);
        *upper = 1.0 - *lower;
    }
}

double mr__incbeta(double a, double b, double x)
{
    if (!(a > 0.0 && b > 0.0 && x >= 0.0 && x <= 1.0))
        return NAN;
    if (x == 0.0 || x == 1.0)
        return x;
    double lower, upper;
    beta_split(a, b, x, 1.0 - x, log(x), log1p(-x), &lower, &upper);
    return lower;
}

/* ------------------------------------------------------------------ */
/* Student t                                                            */

/* Beyond this the t and normal tails differ by less than t^4 / (4 df),
 * below 1e-16 relative wherever the normal tail is representable (|t| < 39). */
static const double T_NORMAL_DF = 1e25;

/* log(sqrt(df) B(df/2, 1/2)), the log of the density's normalizer.  For
 * large df the Stirling form avoids the cancellation between
 * log B(df/2, 1/2) ~ -log(df)/2 and log(sqrt(df)). */
static double t_log_norm(double df)
{
    double a = 0.5 * df;
    if (a < 10.0)
        return 0.5 * log(df) + log_beta(a, 0.5);
    double corr = mr__stirling_corr(a) - mr__stirling_corr(a + 0.5);
    return mr__log_gamma(0.5) + (a - 0.5) * log1p(-0.5 / (a + 0.5)) - 0.5 * log1p(0.5 / a) +
           0.5 + 0.5 * log(2.0) + corr;
}

/* log(1 + s^2/df) without overflow for huge s. */
static double t_log_kernel(double s, double df)
{
    double r = s / sqrt(df);
    if (r > 1e8)
        return 2.0 * log(r) + log1p(1.0 / (r * r));
    return log1p(s * s / df);
}

static double t_log_density(double s, double df)
{
    return -0.5 * (df + 1.0) * t_log_kernel(s, df) - t_log_norm(df);
}

/* P(T > t) = I_x(df/2, 1/2) / 2 with x = df / (df + t^2) for t > 0.  The
 * beta arguments are formed from whichever of t^2/df and df/t^2 is below
 * one, so neither x, 1 - x nor their logarithms cancel or overflow. */
typedef struct t_beta_args {
    double x, y, log_x, log_y;
} t_beta_args;

static t_beta_args t_to_beta(double abs_t, double df)
{
    t_beta_args r;
    if (abs_t <= sqrt(df)) {
        double v = abs_t * abs_t / df;
        r.x = 1.0 / (1.0 + v);
        r.y = v / (1.0 + v);
        r.log_x = -log1p(v);
        r.log_y = log(v) - log1p(v);
    } else {
        double v = df / abs_t / abs_t;
        r.x = v / (1.0 + v);
        r.y = 1.0 / (1.0 + v);
        r.log_x = log(df) - 2.0 * log(abs_t) - log1p(v);
        r.log_y = -log1p(v);
    }
    return r;
}

/* The tail as density(t) times the integral over h > 0 of
 * density(t + h) / density(t) = exp(-(df+1)/2 log1p(h (2t + h) / (df + t^2))). */
typedef struct t_tail_ctx {
    double half_df1, t, denom;
} t_tail_ctx;

static double t_tail_exponent(double h, const void *vctx)
{
    const t_tail_ctx *c = vctx;
    return c->half_df1 * log1p(h * (2.0 * c->t + h) / c->denom);
}

static double t_tail_quadrature(double s, double df)
{
    t_tail_ctx c = {0.5 * (df + 1.0), s, df + s * s};
    double slope = (df + 1.0) * s / c.denom;
    double curvature = (df + 1.0) * (df - s * s) / (c.denom * c.denom);
    double integral = mr__exp_sinh_integral(t_tail_exponent, &c, integrand_scale(slope, curvature));
    return exp(t_log_density(s, df)) * integral;
}

/* Tail P(T > s) and centre P(0 < T < s) for s >= 0; they add to 1/2 and
 * each is accurate relative to itself.  For large df and s >= 1 the beta
 * fraction would be evaluated next to x = 1, where it cancels. */
static void t_tail_centre(double s, double df, double *tail, double *centre)
{
    if (0.5 * df > LARGE_SHAPE && s >= 1.0) {
        *tail = t_tail_quadrature(s, df);
        *centre = 0.5 - *tail;
        return;
    }
    t_beta_args r = t_to_beta(s, df);
    double lower, upper;
    beta_split(0.5 * df, 0.5, r.x, r.y, r.log_x, r.log_y, &lower, &upper);
    *tail = 0.5 * lower;
    *centre = 0.5 * upper;
}

double mr__t_sf(double t, double df)
{
    if (isnan(t) || !(df > 0.0))
        return NAN;
    if (df > T_NORMAL_DF)
        return mr__normal_sf(t);
    if (t == 0.0)
        return 0.5;
    if (isinf(t))
        return t > 0.0 ? 0.0 : 1.0;
    double tail, centre;
    t_tail_centre(fabs(t), df, &tail, &centre);
    return t > 0.0 ? tail : 0.5 + centre;
}

/* Starting point for the positive quantile with upper tail q: the
 * Cornish-Fisher expansion about the normal quantile, or, where the tail is
 * polynomial, the inverse of its leading term
 * P(T > s) ~ df^(df/2 - 1) s^-df / B(df/2, 1/2). */
static double t_quantile_start(double q, double df)
{
    double z = -mr__normal_quantile(q);
    double z2 = z * z;
    double cornish_fisher = z + z * (z2 + 1.0) / (4.0 * df) +
                            z * ((5.0 * z2 + 16.0) * z2 + 3.0) / (96.0 * df * df);
    double log_power = 0.5 * log(df) - (log(q) + 0.5 * log(df) + t_log_norm(df)) / df;
    double power = exp(log_power);
    if (z2 > df && power > cornish_fisher)
        return power;
    return cornish_fisher;
}

/* Solves for s > 0 with P(T > s) = q, q < 1/2.  Newton's method on
 * log(probability) as a function of log(s), where the t tail is close to a
 * straight line, safeguarded by a bracket and bisection.  For q near 1/2
 * the centre probability 1/2 - q (exact) is matched instead, so a small s
 * keeps its relative accuracy. */
static double t_upper_quantile(double q, double df)
{
    int use_centre = q > 0.25;
    double target = use_centre ? log(0.5 - q) : log(q);
    double u = log(t_quantile_start(q, df));
    double lo = -INFINITY, hi = INFINITY;
    for (int it = 0; it < 200; it++) {
        double s = exp(u), tail, centre;
        t_tail_centre(s, df, &tail, &centre);
        double prob = use_centre ? centre : tail;
        double g = log(prob) - target;
        if (g == 0.0)
            return s;
        /* Tail decreases in s, centre increases: keep the root bracketed. */
        if ((g > 0.0) == use_centre)
            hi = fmin(hi, u);
        else
            lo = fmax(lo, u);
        double slope = exp(t_log_density(s, df) + u) / prob;
        double next = u + (use_centre ? -g : g) / slope;
        if (!(next > lo && next < hi))
            next = isfinite(lo) && isfinite(hi) ? 0.5 * (lo + hi)
                                                : (isfinite(lo) ? lo + 1.0 : hi - 1.0);
        if (fabs(next - u) <= 4.0 * DBL_EPSILON * fmax(1.0, fabs(u)))
            return exp(next);
        u = next;
    }
    return exp(u);
}

double mr__t_quantile(double p, double df)
{
    if (!(p >= 0.0 && p <= 1.0) || !(df > 0.0))
        return NAN;
    if (p == 0.0)
        return -INFINITY;
    if (p == 1.0)
        return INFINITY;
    if (p == 0.5)
        return 0.0;
    if (df > T_NORMAL_DF)
        return mr__normal_quantile(p);
    double q = p < 0.5 ? p : 1.0 - p;
    double s;
    if (df == 1.0) /* Cauchy: exact inverse; 1/2 - q is exact for q > 1/4 */
        s = q < 0.25 ? 1.0 / tan(PI * q) : tan(PI * (0.5 - q));
    else
        s = t_upper_quantile(q, df);
    return p < 0.5 ? -s : s;
}

/* ------------------------------------------------------------------ */
/* Regularized incomplete gamma and chi-square                          */

/* log(x^a e^-x / Gamma(a)); for large a through the Stirling correction so
 * the leading terms (each ~ a log a) never cancel. */
static double log_gamma_front(double a, double x)
{
    if (a >= 10.0)
        return a_log_ratio_minus(a, x) + 0.5 * log(a) - LN_SQRT_2PI - mr__stirling_corr(a);
    return a * log(x) - x - mr__log_gamma(a);
}

/* P(a, x) = front / a * sum_n x^n / ((a+1)...(a+n)), for x < a + 1. */
static double gamma_p_series(double a, double x)
{
    double term = 1.0, sum = 1.0;
    for (long n = 1; n <= MAX_TERMS; n++) {
        term *= x / (a + n);
        sum += term;
        if (term <= sum * DBL_EPSILON)
            break;
    }
    return exp(log_gamma_front(a, x)) / a * sum;
}

/* Q(a, x) = front / (x + 1 - a - 1(1-a)/(x + 3 - a - 2(2-a)/(x + 5 - a - ...)))
 * by the modified Lentz method, for x >= a + 1. */
static double gamma_q_cf(double a, double x)
{
    const double tiny = 1e-300;
    double b = x + 1.0 - a;
    double c = 1.0 / tiny, d = 1.0 / b, f = d;
    for (long n = 1; n <= MAX_TERMS; n++) {
        b += 2.0;
        if (lentz_step(-n * (n - a), b, &c, &d, &f))
            break;
    }
    return exp(log_gamma_front(a, x)) * f;
}

/* For large a: with the density t^(a-1) e^-t / Gamma(a) written relative to
 * its value at x, Q is that value times the integral over h > 0 of
 * exp(-(h - (a-1) log1p(h/x))), and P the same with h -> -h, the integrand
 * vanishing at h = x (it is negligible long before for a > LARGE_SHAPE). */
typedef struct gamma_ctx {
    double a1, x;
} gamma_ctx;

static double gamma_upper_exponent(double h, const void *vctx)
{
    const gamma_ctx *c = vctx;
    return h - c->a1 * log1p(h / c->x);
}

static double gamma_lower_exponent(double h, const void *vctx)
{
    const gamma_ctx *c = vctx;
    if (h >= c->x)
        return INFINITY;
    return -h - c->a1 * log1p(-h / c->x);
}

static double gamma_q_quadrature(double a, double x)
{
    gamma_ctx c = {a - 1.0, x};
    double density = exp(log_gamma_front(a, x)) / x;
    double curvature = c.a1 / (x * x);
    if (x >= c.a1) {
        double slope = 1.0 - c.a1 / x;
        return density * mr__exp_sinh_integral(gamma_upper_exponent, &c,
                                           integrand_scale(slope, curvature));
    }
    double slope = c.a1 / x - 1.0;
    return 1.0 - density * mr__exp_sinh_integral(gamma_lower_exponent, &c,
                                             integrand_scale(slope, curvature));
}

double mr__gamma_q(double a, double x)
{
    if (!(a > 0.0 && x >= 0.0))
        return NAN;
    if (x == 0.0)
        return 1.0;
    if (isinf(x))
        return 0.0;
    if (a > LARGE_SHAPE)
        return gamma_q_quadrature(a, x);
    if (x < a + 1.0)
        return 1.0 - gamma_p_series(a, x);
    return gamma_q_cf(a, x);
}

double mr__chisq_sf(double x, double df)
{
    if (isnan(x) || !(df > 0.0))
        return NAN;
    if (x <= 0.0)
        return 1.0;
    return mr__gamma_q(0.5 * df, 0.5 * x);
}

/* ------------------------------------------------------------------ */
/* F                                                                    */

/* P(F > f) = I_x(a, df1/2), a = df2/2, x = df2 / (df2 + df1 f), y = 1 - x.
 * A joint Wald test's df1 is a whole number: then, by
 * I_x(a, b + 1) = I_x(a, b) + x^a y^b / (b B(a, b)), the tail is
 * I_x(a, 1/2) (the t tail: F(1, n) is T^2) or I_x(a, 1) = x^a, plus
 * df1/2 - 1/2 or df1/2 - 1 positive terms, each from its logarithm:
 * nothing cancels and nothing underflows early, whatever df2 (the beta
 * fraction loses about df2/2 ulp when df2 is large, 4e-12 relative at
 * df2 = 1e6).  One numerator df is exactly the t tail, so a
 * one-coefficient term gets its coefficient's p-value.  x, y and their
 * logarithms are formed from whichever of df1 f / df2 and its inverse is
 * below one, as for t.  Other df1 (not whole, or above 1e6) take the
 * fraction. */
static const double F_SUM_MAX_DF1 = 1e6;

double mr__f_sf(double f, double df1, double df2)
{
    if (isnan(f) || !(df1 > 0.0) || !(df2 > 0.0))
        return NAN;
    if (f <= 0.0)
        return 1.0;
    if (isinf(f))
        return 0.0;
    double v = df1 * f / df2, a = 0.5 * df2, x, y, log_x, log_y, lower, upper;
    if (v <= 1.0) {
        x = 1.0 / (1.0 + v);
        y = v / (1.0 + v);
        log_x = -log1p(v);
        log_y = log(v) - log1p(v);
    } else {
        double w = 1.0 / v;
        x = w / (1.0 + w);
        y = 1.0 / (1.0 + w);
        log_x = log(w) - log1p(w);
        log_y = -log1p(w);
    }
    if (df1 != floor(df1) || df1 > F_SUM_MAX_DF1) {
        beta_split(a, 0.5 * df1, x, y, log_x, log_y, &lower, &upper);
        return lower;
    }
    int odd = fmod(df1, 2.0) == 1.0;
    double sum = odd ? 2.0 * mr__t_sf(sqrt(df1 * f), df2) : exp(a * log_x);
    for (double b = odd ? 0.5 : 1.0; b < 0.5 * df1; b += 1.0)
        sum += exp(a * log_x + b * log_y - log(b) - log_beta(a, b));
    return fmin(sum, 1.0);
}
