/* many.h - a fit's factor declared `many` (model/design.h): its levels
 * solved for by the Schur complement (solve/absorb.h) into the fit. */
#ifndef MR_MANY_H
#define MR_MANY_H

#include "fit/fit.h"
#include "fit/run.h"

/* The last pass's system solved with its covariance: cov_s (p x p, the
 * design's columns, internal scale) as mr__solve_normal gives it,
 * fit->aliased and fit->rank (the columns kept plus the levels with
 * information), and the levels' estimates, variances (before the
 * dispersion) and information into the fit's many_ arrays. */
mr_status mr__many_solve(mr_fit *fit, const mr__run *r, double *cov_s, mr__error *err);

/* The levels' variances times the dispersion, as standard errors. */
void mr__many_scale(mr_fit *fit);

#endif
