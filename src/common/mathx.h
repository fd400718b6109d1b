/* mathx.h - small numerical kernels shared by the families and the
 * distribution functions. */
#ifndef MR_MATHX_H
#define MR_MATHX_H

/* log1p(u) - u for |u| <= 0.25 without cancellation: with s = u / (2 + u),
 * log1p(u) = 2 atanh(s) and u - 2s = u s, so the result is
 * -u s + 2 s^3 (1/3 + s^2/5 + ...); s^2 <= 0.021 and the terms through
 * s^20/23 reach full precision. */
static inline double mr__log1pmx_small(double u)
{
    /* 1/(2k+1) as constants: the compiler left the divisions in the loop,
     * ten per call, and the table holds the same correctly rounded values */
    static const double inv_odd[12] = {1.0,        1.0 / 3.0,  1.0 / 5.0,  1.0 / 7.0,  1.0 / 9.0,  1.0 / 11.0,
                                       1.0 / 13.0, 1.0 / 15.0, 1.0 / 17.0, 1.0 / 19.0, 1.0 / 21.0, 1.0 / 23.0};
    double s = u / (2.0 + u);
    double w = s * s;
    double poly = inv_odd[11];
    for (int k = 10; k >= 1; k--) poly = poly * w + inv_odd[k];
    return s * (2.0 * w * poly - u);
}

/* lgamma(x) - [(x - 1/2) log x - x + log sqrt(2 pi)] for x >= 10: the
 * Stirling series B_2k / (2k (2k-1) x^(2k-1)) through k = 7, whose next
 * term is below 4e-17 at x = 10.  Keeps large-argument differences of
 * lgamma free of cancellation. */
static inline double mr__stirling_corr(double x)
{
    double w = 1.0 / (x * x);
    double s = 1.0 / 156.0;
    s = s * w - 691.0 / 360360.0;
    s = s * w + 1.0 / 1188.0;
    s = s * w - 1.0 / 1680.0;
    s = s * w + 1.0 / 1260.0;
    s = s * w - 1.0 / 360.0;
    s = s * w + 1.0 / 12.0;
    return s / x;
}

#endif
