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
    double s = u / (2.0 + u);
    double w = s * s;
    double poly = 1.0 / 23.0;
    for (int k = 10; k >= 1; k--) poly = poly * w + 1.0 / (2 * k + 1);
    return s * (2.0 * w * poly - u);
}

#endif
