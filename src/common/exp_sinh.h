/* exp_sinh.h - the exp-sinh rule for integrals over (0, inf) (exp_sinh.c),
 * for the tail areas of large shapes (probability.c). */
#ifndef MR_EXP_SINH_H
#define MR_EXP_SINH_H

typedef double (*mr__exponent_fn)(double h, const void *ctx);

/* Integral over (0, inf) of exp(-phi(h)) for increasing phi with
 * phi(0) = 0 and exp(-phi) decaying at least like a high power of h;
 * `scale` is the width of the integrand near h = 0.  Thread-safe. */
double mr__exp_sinh_integral(mr__exponent_fn phi, const void *ctx, double scale);

#endif
