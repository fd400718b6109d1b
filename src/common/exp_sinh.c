/* exp_sinh.c - the exp-sinh rule (exp_sinh.h).
 *
 * h = scale e^(pi/2 sinh tau) maps the real line onto (0, inf) with doubly
 * exponential decay at both ends, so the trapezoid rule in tau converges
 * about as fast as the step shrinks.  The nodes lie on a fixed grid (tau
 * from -5 to 5, steps 1/2 halved up to 10 times: every tau a multiple of
 * 2^-11, exact in a double), so their factors that do not depend on the
 * integrand, e^(pi/2 sinh tau) and cosh tau, are the same numbers at every
 * call: each level's are computed once, at its first use, and shared.  A
 * chi-square quantile by bisection takes about 60 integrals, each of up to
 * thousands of nodes; this saves two thirds of each node's work and gives
 * the very bits a computation at each node would. */
#include "common/exp_sinh.h"

#include <math.h>
#include <pthread.h>

static const double PI = 3.14159265358979323846264338327950288;

enum {
    GRID = 2048,           /* grid points per unit of tau: 2^11 */
    TAU_MAX = 5,           /* nodes beyond carry < 1e-40 of the mass */
    NODES = 2 * TAU_MAX * GRID + 1,
    HALVINGS = 10,
    FIRST_STRIDE = GRID / 2 /* the first sum's step, 1/2 */
};

static double grow_at[NODES], cosh_at[NODES];

/* Level 0: the first sum's nodes; level l > 0: those the l-th halving
 * adds, the odd multiples of its step. */
static void fill(int level)
{
    int stride = level ? FIRST_STRIDE >> level : FIRST_STRIDE, j;
    for (j = level ? stride : 0; j < NODES; j += level ? 2 * stride : stride) {
        double tau = -(double)TAU_MAX + (double)j / GRID;
        grow_at[j] = exp(0.5 * PI * sinh(tau));
        cosh_at[j] = cosh(tau);
    }
}

#define FILL_LEVEL(l) \
    static void fill_##l(void) { fill(l); }
FILL_LEVEL(0)
FILL_LEVEL(1)
FILL_LEVEL(2)
FILL_LEVEL(3)
FILL_LEVEL(4)
FILL_LEVEL(5)
FILL_LEVEL(6)
FILL_LEVEL(7)
FILL_LEVEL(8)
FILL_LEVEL(9)
FILL_LEVEL(10)

static void (*const filler[HALVINGS + 1])(void) = {fill_0, fill_1, fill_2, fill_3, fill_4, fill_5,
                                                    fill_6, fill_7, fill_8, fill_9, fill_10};
static pthread_once_t filled[HALVINGS + 1] = {PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT,
                                              PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT,
                                              PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT,
                                              PTHREAD_ONCE_INIT, PTHREAD_ONCE_INIT};

/* The integrand at grid point j, its factor in tau included. */
static double node(mr__exponent_fn phi, const void *ctx, double scale, int j)
{
    double h = scale * grow_at[j];
    if (!(h < INFINITY))
        return 0.0;
    return h * 0.5 * PI * cosh_at[j] * exp(-phi(h, ctx));
}

/* Steps are halved until two estimates agree to 1e-10, after which the
 * next one is accurate to rounding (the error squares with each halving). */
double mr__exp_sinh_integral(mr__exponent_fn phi, const void *ctx, double scale)
{
    double step = 0.5, sum = 0.0, estimate;
    int j, stride = FIRST_STRIDE;
    pthread_once(&filled[0], filler[0]);
    for (j = 0; j < NODES; j += stride)
        sum += node(phi, ctx, scale, j);
    estimate = sum * step;
    for (int level = 0; level < HALVINGS; level++) {
        step *= 0.5;
        stride /= 2;
        pthread_once(&filled[level + 1], filler[level + 1]);
        for (j = stride; j < NODES - 1; j += 2 * stride)
            sum += node(phi, ctx, scale, j);
        double refined = sum * step;
        int agreed = fabs(refined - estimate) <= 1e-10 * refined;
        estimate = refined;
        if (agreed && level > 0)
            break;
    }
    return estimate;
}
