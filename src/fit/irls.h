/* irls.h - IRLS as a state machine: one struct holds everything the
 * iterations carry from pass to pass (the coefficients and the previous
 * point, the deviances, step halvings, the null model's intercept and
 * whether its deviance is known, convergence, counts), and one step takes
 * the sums of a pass made at mr__irls_beta and says where the next pass
 * goes, or that the fit is done.  Who makes the passes (threads, files,
 * other processes) is the caller's business: the state alone decides.
 *
 * The state serialises to a flat little-endian encoding and back, bit for
 * bit (a checkpoint; a root process driving others' passes). */
#ifndef MR_IRLS_H
#define MR_IRLS_H

#include <stddef.h>
#include <stdint.h>
#include "accum/accumulate.h"
#include "common/error.h"

/* An estimated parameter's largest value: a negative binomial's theta
 * goes there when the counts show no overdispersion (its maximum is at
 * infinity, the poisson fit), and is held there (irls.c, next_param). */
#define MR__IRLS_PARAM_MAX 1e8

/* Halvings of one step before the fit gives up. */
#define MR__IRLS_MAX_HALVINGS 30
/* The null model (one intercept) is done when its deviance changes by
 * less than this, relative: it converges fast, and with an offset its
 * deviance repeats only to rounding (~1e-13), so a tighter test might
 * never pass. */
#define MR__IRLS_NULL_TOLERANCE 1e-12
/* With fitted means at the edge of the range, the relative deviance change
 * that ends the fit (see mr__irls_step). */
#define MR__IRLS_BOUNDARY_TOLERANCE 1e-10
/* Steps that stop shrinking (rounding) end the fit within this many times
 * the tolerance (see converged_by_step in irls.c). */
#define MR__IRLS_FLOOR_SLACK 1000.0
/* Passes in a row a standard error must grow for its coefficient to be
 * taken as running off to infinity. */
#define MR__IRLS_GROWTH_PASSES 3
/* Or the growth over the fit that marks it (see mr__irls_ran_off). */
#define MR__IRLS_GROWTH_FACTOR 100.0
/* A level's step by its mean (irls.c, level_steps_by_mean) only where
 * it keeps at least this share of the level's mean. */
#define MR__IRLS_LEVEL_MEAN_FLOOR 1e-3

typedef struct mr__irls_cfg {
    size_t p;
    double tolerance;      /* the largest step, in standard errors, that ends the fit */
    double dispersion_rows; /* rows with weight when the dispersion is estimated
                             * (Pearson over rows - rank), else 0 (it is 1) */
    int newton;            /* a canonical link: IRLS is Newton's method */
    /* With an eliminated factor, the step judged by the other columns
     * alone, each in its own standard errors: a warm start's fit on a
     * sample, where levels with no events there run off, and a level's
     * value is of little use to the full passes (irls.c,
     * level_steps_by_mean).  Not kept in a checkpoint (a sample's fit
     * makes none). */
    int rest_only;
    int threads;           /* an eliminated factor's solve may use (solve/absorb.h) */
    int max_iterations;
    int step_at_end;       /* after the last pass allowed, still take its step */
    const double *start;   /* NULL: from the family's starting means; else p values */
    int null_intercept;    /* the null model has an intercept to fit */
    double null_b0;        /* its starting value */
    int null_exact;        /* that value is its maximum already */
    int family;            /* for messages */
    /* The family's parameter estimated alongside (a negative binomial's
     * theta): its start, and whether that start is a fit's already (else
     * the first pass at coefficients replaces it by a moment estimate). */
    int param_estimate, param_known;
    double param_start;
} mr__irls_cfg;

typedef struct mr__irls {
    /* what the fit was asked for */
    uint64_t p;
    double tolerance, dispersion_rows;
    int32_t max_iterations, step_at_end, null_intercept, family, from_start;
    int32_t rest_only; /* mr__irls_cfg's; not in the encoding */
    int32_t threads;   /* mr__irls_cfg's; not in the encoding (a resumed fit's
                        * solve takes the calling thread alone: the same bits) */
    /* the point: beta is where the next pass goes, prev the last accepted
     * one, next scratch for the solver (not part of the encoding) */
    double *beta, *prev, *next;
    int *aliased;          /* the solver's scratch, likewise */
    double *inverse;       /* (X'WX)^-1, scratch; with an eliminated factor its
                            * diagonal (p), then the step (p) */
    /* per coefficient: the last standard error (unit dispersion) and the
     * passes in a row it grew by more than a tenth */
    double *se_prev, *se_min; /* and the smallest so far */
    int32_t *growing;
    int32_t have_beta, have_prev, have_dev, cold_restart;
    double dev_prev, rel_change;
    double step, step_before; /* the last two steps in standard errors */
    /* the null model (intercept and offset only), fitted alongside */
    double null_b0, null_dev, null_dev_prev;
    int32_t null_done, null_known;
    /* counts and flags */
    int32_t halving_run;   /* halvings since the last accepted point */
    int32_t iterations, halvings, passes, converged, by_step, restarted, newton;
    /* the family's parameter, where estimated: the value the next pass
     * uses and the last accepted one; 0 until a moment estimate replaced
     * the start, then 1; a jump (the moment estimate) not to be judged by
     * the objective's rise; its last Newton step relative to it */
    int32_t param_estimate, param_phase, param_jump;
    double param, param_prev, param_step;
    /* the deviance of every accepted point, in order */
    double *history;
    size_t nhistory, history_cap;
} mr__irls;

mr_status mr__irls_init(mr__irls *s, const mr__irls_cfg *cfg, mr__error *err);
void mr__irls_release(mr__irls *s);

/* Where the next pass evaluates the model: NULL for the family's starting
 * means; and the null deviance once known (NULL: the pass computes it). */
const double *mr__irls_beta(const mr__irls *s);
const double *mr__irls_null_deviance(const mr__irls *s);

/* Takes the sums of a pass made at mr__irls_beta (the null deviance
 * already replaced by mr__irls_null_deviance when known) and moves on.
 * With the family's parameter estimated, the pass was made at
 * mr__irls_param too, and the step is a coefficient step at that value
 * beside a Newton step in the parameter at the pass's means (for a
 * negative binomial the two are orthogonal: the expected cross
 * information is zero); the quantity judged for step halving and
 * the boundary rule is then -2 log-likelihood, not the deviance (which
 * moves with the parameter), and the fit is done only once the
 * parameter's Newton step is below sqrt(tolerance) of its standard error
 * as well as the coefficients' step meeting their rule (irls.c).
 * *done = 1 when the fit is over (converged, or out of passes).  Fails
 * with MR_ERR_NUMERIC when no valid point can be found (`display` names
 * the input in the message) or when the solver does. */
mr_status mr__irls_step(mr__irls *s, const mr__block_sums *sums, const char *display, int *done, mr__error *err);

/* The family's parameter where the next pass evaluates the model (the
 * value reached once done); NaN when it is not estimated. */
double mr__irls_param(const mr__irls *s);

/* Whether coefficient j ran off to infinity, by its standard errors. */
int mr__irls_ran_off(const mr__irls *s, size_t j);

/* The coefficients reached (zeros when no point was ever accepted). */
void mr__irls_coefficients(const mr__irls *s, double *out);

/* THE ENCODING (version 3; 1 stopped on the deviance, 2 had either the
 * step rule or the family's parameter, not both), little-endian: "MRIS",
 * u32 version, then every field above but the scratch in declaration
 * order (integers as u64, doubles as their bits), then beta, prev,
 * se_prev, se_min and growing (p each, growing as u64) and the history.
 * Older versions are refused. */
#define MR__IRLS_VERSION 3u
size_t mr__irls_encoded_size(const mr__irls *s);
void mr__irls_encode(const mr__irls *s, unsigned char *out);
/* A fresh state from the bytes (released with mr__irls_release): MR_ERR_IO
 * on bytes that are not a version-3 state, MR_ERR_NO_MEMORY. */
mr_status mr__irls_decode(const unsigned char *in, size_t len, mr__irls *s, mr__error *err);

#endif
