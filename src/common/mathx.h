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

#endif
