/* irls.c - the IRLS state machine (irls.h): what a pass's sums mean for
 * the next point, step halving, the null model alongside, when to stop. */
#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "common/bytes.h"
#include "family/family.h"
#include "fit/irls.h"
#include "solve/absorb.h"
#include "solve/normal_eq.h"

static double relative_change(double now, double before) { return fabs(now - before) / (fabs(now) + 0.1); }

static mr_status allocate(mr__irls *s, size_t p, mr__error *err)
{
    s->beta = mr__calloc(p + 1, sizeof *s->beta);
    s->prev = mr__calloc(p + 1, sizeof *s->prev);
    s->next = mr__calloc(p + 1, sizeof *s->next);
    s->aliased = mr__calloc(p + 1, sizeof *s->aliased);
    s->se_prev = mr__calloc(p + 1, sizeof *s->se_prev);
    s->growing = mr__calloc(p + 1, sizeof *s->growing);
    s->se_min = mr__calloc(p + 1, sizeof *s->se_min);
    if (s->beta && s->prev && s->next && s->aliased && s->se_prev && s->growing && s->se_min) return MR_OK;
    mr__irls_release(s);
    return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
}

mr_status mr__irls_init(mr__irls *s, const mr__irls_cfg *cfg, mr__error *err)
{
    memset(s, 0, sizeof *s);
    MR__TRY(allocate(s, cfg->p, err));
    s->p = cfg->p;
    s->tolerance = cfg->tolerance;
    s->dispersion_rows = cfg->dispersion_rows;
    s->newton = cfg->newton;
    s->rest_only = cfg->rest_only;
    s->threads = cfg->threads;
    s->step = s->step_before = INFINITY;
    s->by_step = 1; /* the rule in force, until the boundary's ends the fit */
    s->max_iterations = cfg->max_iterations;
    s->step_at_end = cfg->step_at_end;
    s->null_intercept = cfg->null_intercept;
    s->family = cfg->family;
    s->from_start = cfg->start != NULL;
    s->null_b0 = cfg->null_b0;
    s->null_dev_prev = INFINITY;
    s->null_done = !cfg->null_intercept || cfg->null_exact;
    s->param_estimate = cfg->param_estimate;
    s->param = s->param_prev = cfg->param_estimate ? cfg->param_start : NAN;
    s->param_phase = cfg->param_known;
    s->param_step = INFINITY;
    if (cfg->start) {
        memcpy(s->beta, cfg->start, cfg->p * sizeof *s->beta);
        s->have_beta = 1;
    }
    return MR_OK;
}

void mr__irls_release(mr__irls *s)
{
    mr__free(s->beta);
    mr__free(s->prev);
    mr__free(s->next);
    mr__free(s->aliased);
    mr__free(s->se_prev);
    mr__free(s->growing);
    mr__free(s->se_min);
    mr__free(s->inverse);
    mr__free(s->history);
    memset(s, 0, sizeof *s);
}

const double *mr__irls_beta(const mr__irls *s) { return s->have_beta ? s->beta : NULL; }

double mr__irls_param(const mr__irls *s) { return s->param_estimate ? s->param : NAN; }

/* What step halving and convergence judge: the deviance, or with the
 * family's parameter estimated -2 log-likelihood (the deviance is
 * measured from a saturated model that moves with the parameter). */
static double objective(const mr__irls *s, const mr__block_sums *sums)
{
    return s->param_estimate ? -2.0 * sums->fam[MR__PS_LOGLIK] : sums->dev;
}

/* The parameter's Newton step at this pass is below sqrt(tolerance) of
 * its standard error (|score| / sqrt(information) below sqrt(tolerance)):
 * known to a vanishing share of its own uncertainty.  A share of the
 * value itself would never be reached where the likelihood is flat in it
 * (a large theta, counts barely overdispersed). */
static int param_settled(const mr__irls *s, const mr__block_sums *sums)
{
    double info = sums->fam[MR__PS_INFO];
    if (!s->param_estimate) return 1;
    if (s->param_phase == 1 && s->param >= MR__IRLS_PARAM_MAX && !(sums->fam[MR__PS_SCORE] < 0)) return 1;
    return s->param_phase == 1 && info > 0 && fabs(sums->fam[MR__PS_SCORE]) < sqrt(s->tolerance * info);
}

/* The first value at the data's own means: the moment estimate
 * sum w mu^2 / sum w ((y - mu)^2 - y), or 1000 (nearly poisson) when the
 * counts show no overdispersion there.  A parameter at
 * MR__IRLS_PARAM_MAX whose score still rises is settled there. */
static double moment_param(const mr__block_sums *sums, double th)
{
    const double *f = sums->fam;
    if (!(f[MR__PS_WEIGHT] > 0)) return th;
    return f[MR__PS_MOMENT] > 0 ? f[MR__PS_WEIGHT] / f[MR__PS_MOMENT] : 1000.0;
}

/* The next value of the parameter from the pass's sums: the first time
 * at the data's own means moment_param (a start far off would cost
 * passes), then a Newton step in a = 1/theta, in which the log-likelihood
 * of counts near poisson is far closer to a parabola than in theta or
 * log(theta) (a step from theta 23 reached 55 of 58 where one in
 * log(theta) reached 34).  With S and I theta's score and information,
 * dl/da = -theta^2 S and -d2l/da2 = theta^4 I - 2 theta^3 S; where that is
 * not positive (far from the maximum) theta^4 I stands for it, and the
 * step is kept within a factor of 10.  The step holds the means fixed,
 * as the coefficient step beside it holds theta: on many rows the two
 * barely interact (the expected cross information is zero), but on few
 * rows the observed information couples them and theta swings about its
 * maximum, each swing 0.55 to 0.8 of the last (12 rows: 29 passes; 10^5
 * rows: 11, the errors falling 0.05 a pass without a swing). */
static void next_param(mr__irls *s, const mr__block_sums *sums)
{
    double th = s->param, score = sums->fam[MR__PS_SCORE], info = sums->fam[MR__PS_INFO], next, g, h, d, a;
    if (s->param_phase == 0) {
        next = moment_param(sums, th);
        s->param_phase = 1;
        s->param_jump = 1;
    } else {
        g = -th * th * score;
        h = th * th * th * (th * info - 2 * score);
        if (!(h > 0)) h = th * th * th * th * info;
        d = h > 0 ? g / h : 0.0;
        a = fmin(fmax(1 / th + d, 0.1 / th), 10 / th);
        next = 1 / a;
    }
    s->param_prev = th;
    if (!(isfinite(next) && next > 0)) next = th;
    next = fmin(next, MR__IRLS_PARAM_MAX);
    s->param_step = fabs(next - th) / th;
    s->param = next;
}

/* Once the null model has converged its deviance no longer changes, and
 * a pass leaves its per-row work (a mean, a variance and a log each) out. */
const double *mr__irls_null_deviance(const mr__irls *s) { return s->null_known ? &s->null_dev : NULL; }

void mr__irls_coefficients(const mr__irls *s, double *out)
{
    if (s->have_beta) memcpy(out, s->beta, s->p * sizeof *out);
    else memset(out, 0, s->p * sizeof *out);
}

static int bad_point(const mr__block_sums *sums, const mr__irls *s)
{
    double obj = objective(s, sums);
    if (sums->invalid > 0 || !isfinite(sums->dev) || !isfinite(obj)) return 1;
    /* A rise beyond rounding noise means the Newton step overshot (a
     * parameter's jump to its moment estimate may raise it rightly). */
    return s->have_prev && !s->param_jump && obj > s->dev_prev + 1e-9 * (fabs(s->dev_prev) + 0.1);
}

static void halve_step(mr__irls *s)
{
    size_t j;
    for (j = 0; j < s->p; j++) s->beta[j] = 0.5 * (s->beta[j] + s->prev[j]);
    if (s->param_estimate) s->param = 0.5 * (s->param + s->param_prev);
}

/* d' X'WX d, d = b_next - b, on the dense system. */
static double dense_quadratic(const mr__irls *s, const mr__block_sums *sums)
{
    size_t p = s->p, i, j;
    double q = 0;
    for (j = 0; j < p; j++) {
        double dj = s->next[j] - s->beta[j], u = 0;
        if (dj == 0) continue;
        for (i = 0; i < p; i++) u += sums->xtwx[i <= j ? j * p + i : i * p + j] * (s->next[i] - s->beta[i]);
        q += dj * u;
    }
    return q;
}

/* The step from b to b_next in standard errors: sqrt(d' G d / phi), d =
 * b_next - b, G = X'WX, phi the dispersion (Pearson chi-square over the
 * residual degrees of freedom when estimated, else 1).  It is the largest
 * |c'd| / SE(c'b) over every linear combination c, so it bounds each
 * coefficient's step in its own standard errors in any parametrisation
 * (the raw columns' as well as the centred ones the fit works in), and it
 * does not grow or shrink with the rows.  Computed from d itself, not as
 * (v - G b)'d, which cancels to noise near the maximum. */
static double step_in_se(const mr__irls *s, const mr__block_sums *sums, double q, size_t rank)
{
    double phi = 1;
    if (s->dispersion_rows > (double)rank && sums->pearson > 0)
        phi = sums->pearson / (s->dispersion_rows - (double)rank);
    return sqrt(fmax(q, 0) / phi);
}

/* A coefficient heading for infinity (separation, quasi-separation by a
 * covariate, a level with no events) shows as a standard error that grows
 * at every pass: growing[j] counts the passes in a row where coefficient
 * j's grew by more than a tenth (the diagonal of (X'WX)^-1, whose inverse
 * costs about twice the solve; the dispersion only scales it). */
static void note_growth(mr__irls *s, const double *var, size_t stride)
{
    size_t j, p = s->p;
    for (j = 0; j < p; j++) {
        double se = !s->aliased[j] ? sqrt(fmax(var[j * stride], 0)) : 0;
        if (se > 1.1 * s->se_prev[j] && s->se_prev[j] > 0) s->growing[j]++;
        else s->growing[j] = 0;
        s->se_prev[j] = se;
        if (se > 0 && (s->se_min[j] == 0 || se < s->se_min[j])) s->se_min[j] = se;
    }
}

/* Scratch of n doubles in s->inverse (the mode, dense or eliminated,
 * stays for the whole fit, so the size does too). */
static mr_status scratch(mr__irls *s, size_t n, mr__error *err)
{
    if (s->inverse == NULL && (s->inverse = mr__malloc_array(n + 1, sizeof *s->inverse)) == NULL)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* A level's Newton step in a poisson log-link model (the family's
 * level_step_by_mean) moves its mean by
 * the factor 1 + t, t = sum (y - mu) / sum mu over its rows when the
 * other coefficients stay: taking log(1 + t) instead of t lands on that
 * mean, the level's own maximum, where t overshoots or falls short by
 * much (a level of a few events started a standard error or two away:
 * from t = e^2 - 1, Newton walks down about a unit a pass).  The fixed
 * point is the same (t = 0), and near it log(1 + t) - t is of the order
 * of t^2, so convergence stays quadratic; a step that would take the
 * mean to zero or below stays Newton's (a level with no events, on its
 * way to infinity). */
static void level_steps_by_mean(mr__irls *s, size_t first_level)
{
    size_t j;
    for (j = first_level; j < s->p; j++) {
        double t = s->next[j] - s->beta[j];
        if (!s->aliased[j] && t > MR__IRLS_LEVEL_MEAN_FLOOR - 1) s->next[j] = s->beta[j] + log1p(t);
    }
}

/* The largest step of a column other than the levels', in its own
 * standard errors, squared (the step's size where the levels are not
 * judged: see mr__irls_cfg's rest_only). */
static double rest_quadratic(const mr__irls *s, const double *d, const double *var, size_t pr)
{
    double most = 0;
    size_t j;
    for (j = 0; j < pr; j++)
        if (!s->aliased[j] && var[j] > 0) most = fmax(most, d[j] * d[j] / var[j]);
    return most;
}

/* With an eliminated factor the coefficients are the columns', then its
 * levels' (solve/absorb.h): the variances the runaway check follows are
 * the inverse's diagonal for the columns and each level's own, 1/d_l (a
 * level running off loses its weight: d_l falls as fast as the whole
 * variance rises), at O(L) a pass; d'Hd is taken by blocks, so the step
 * is measured in the whole system's standard errors. */
static mr_status absorb_step(mr__irls *s, const mr__block_sums *sums, mr__error *err)
{
    size_t p = s->p, j, rank, pr = p - sums->nlev;
    double *var, *d;
    mr__absorb_sums a = {sums->nlev, pr, sums->lev, sums->xtwx, sums->xtwz, mr__sums_reference_row(sums, pr),
                         s->threads};
    MR__TRY(scratch(s, 2 * p, err));
    var = s->inverse;
    d = s->inverse + p;
    MR__TRY(mr__absorb_step(&a, s->next, s->aliased, var, &rank, err));
    note_growth(s, var, 1);
    s->step_before = s->step;
    if (!s->have_beta) s->step = INFINITY;
    else {
        const mr__family_ops *ops = mr__family_ops_of((mr_family)s->family);
        if (s->newton && ops != NULL && ops->level_step_by_mean) level_steps_by_mean(s, pr);
        for (j = 0; j < p; j++) d[j] = s->next[j] - s->beta[j];
        s->step = step_in_se(s, sums, s->rest_only ? rest_quadratic(s, d, var, pr) : mr__absorb_quadratic(&a, d), rank);
    }
    return MR_OK;
}

static mr_status solve_step(mr__irls *s, const mr__block_sums *sums, mr__error *err)
{
    size_t p = s->p, rank;
    if (sums->lev != NULL) return absorb_step(s, sums, err);
    MR__TRY(scratch(s, p * p, err));
    MR__TRY(mr__solve_normal(sums->xtwx, sums->xtwz, p, s->next, s->aliased, &rank, s->inverse, err));
    note_growth(s, s->inverse, p + 1);
    s->step_before = s->step;
    s->step = s->have_beta ? step_in_se(s, sums, dense_quadratic(s, sums), rank) : INFINITY;
    return MR_OK;
}

static mr_status next_point(mr__irls *s, const mr__block_sums *sums, mr__error *err)
{
    double *t;
    MR__TRY(solve_step(s, sums, err));
    t = s->prev;
    s->prev = s->beta;
    s->beta = s->next;
    s->next = t;
    s->have_prev = s->have_beta;
    s->have_beta = 1;
    s->have_dev = 1;
    s->dev_prev = objective(s, sums);
    if (s->param_estimate && s->have_prev) next_param(s, sums);
    if (s->null_intercept && sums->null_sw > 0) {
        double b0 = sums->null_swz / sums->null_sw;
        /* One parameter converges fast, and its deviance repeats only to
         * rounding (~1e-13 with an offset): a tighter test might never pass.
         * With the family's parameter estimated the null deviance moves
         * with that parameter, which is settled to sqrt(tolerance) of its
         * standard error: the same share serves here.  Its intercept goes
         * on moving with the parameter whatever this says, and the last
         * pass evaluates it at the parameter reported. */
        double tol = s->param_estimate ? sqrt(s->tolerance) : 0;
        s->null_done = s->null_done ||
                       relative_change(sums->null_dev, s->null_dev_prev) < fmax(tol, MR__IRLS_NULL_TOLERANCE);
        s->null_dev_prev = sums->null_dev;
        /* with the parameter moving, the null model's maximum moves too */
        if (!s->null_done || s->param_estimate) s->null_b0 = b0;
    }
    return MR_OK;
}

/* Whether to go on from the pass just made; if not, the pass is redone at
 * a halved step (or, from a given start outside the range, from the
 * family's starting means). */
static mr_status accept_point(mr__irls *s, const mr__block_sums *sums, const char *display, int *accepted,
                              mr__error *err)
{
    *accepted = 0;
    if (s->have_beta && bad_point(sums, s)) {
        if (!s->have_prev && s->from_start && !s->cold_restart) {
            s->have_beta = 0;
            s->cold_restart = 1;
            s->restarted = 1;
            return MR_OK;
        }
        if (!s->have_prev || ++s->halving_run > MR__IRLS_MAX_HALVINGS)
            return mr__fail(err, MR_ERR_NUMERIC,
                            "%s: IRLS found no valid coefficients (fitted means outside the %s family's range even "
                            "after step halving); check the link and the data",
                            display, mr__family_name((mr_family)s->family));
        halve_step(s);
        s->halvings++;
        return MR_OK;
    }
    if (!s->have_beta && sums->invalid > 0)
        return mr__fail(err, MR_ERR_NUMERIC, "%s: the starting values are outside the model's range", display);
    *accepted = 1;
    return MR_OK;
}

static mr_status note_deviance(mr__irls *s, double dev, mr__error *err)
{
    void *grown = s->history;
    if (mr__reserve(&grown, &s->history_cap, s->nhistory + 1, sizeof *s->history) != MR_OK)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->history = grown;
    s->history[s->nhistory++] = dev;
    return MR_OK;
}

/* Whether the fit is done after the pass just made: its step, s_k, is
 * taken without a pass to check it (as the usual IRLS codes do, whose
 * coefficients are one step ahead of their weights) and the statistics
 * are those of that pass, made s_k standard errors from the maximum.
 *
 * s_k <= tolerance: the step itself is that small.  Near the maximum the
 * distance left after it is about s_k times the rate of convergence (well
 * below 1 with the rows this rule is for), and the standard errors, from
 * weights s_k away, differ from those at the maximum by about s_k times
 * the change of the information per standard error (below 1), relative.
 *
 * Under a canonical link IRLS is Newton's method: s_k+1 ~ C s_k^2, with C
 * ~ s_k / s_k-1^2 from the last two steps, so with q = s_k / s_k-1 the
 * distance left after the step is about s_k q^2 and the standard errors
 * drift by about C s_k = q^2.  The fit then also stops when 10 q^2 (ten
 * for a C measured on one direction) is at most the tolerance and
 * s_k-1 <= 1 (near the maximum, where s_k-1 tells C; a first step of
 * thousands of standard errors would make any q small): the pass that
 * would confirm a step of a ten-thousandth of a standard error is saved.
 *
 * With the family's parameter estimated (a negative binomial's theta) the
 * fit is done only when the parameter is settled as well (param_settled:
 * its own Newton step, also taken without a pass to check it, below
 * sqrt(tolerance) of its standard error); the coefficients' rule holds
 * them at each pass's theta, and theta's step, linear in its convergence
 * (each pass holds the means fixed), would take many passes to reach the
 * tolerance itself, for a change in the coefficients' estimates that the
 * cross information keeps small (its expectation is zero).  The boundary
 * rule below judges -2 log-likelihood then, and asks the same of theta. */
/* A coefficient on its way to infinity (fitted means numerically at the
 * edge of the range, or a standard error grown pass after pass) takes
 * steps that shrink only slowly in standard errors: the fit then ends, at
 * the point of this pass, when the deviance no longer changes (relative
 * change below MR__IRLS_BOUNDARY_TOLERANCE), and the report says which
 * coefficients ran off. */
static int converged_at_boundary(mr__irls *s, const mr__block_sums *sums)
{
    double change;
    size_t j;
    int running = sums->boundary > 0;
    for (j = 0; j < s->p && !running; j++) running = s->growing[j] >= MR__IRLS_GROWTH_PASSES;
    if (!running || !s->have_dev || !s->null_done || !param_settled(s, sums)) return 0;
    change = relative_change(objective(s, sums), s->dev_prev);
    if (!(change < MR__IRLS_BOUNDARY_TOLERANCE)) return 0;
    s->rel_change = change;
    s->by_step = 0;
    return 1;
}

static int converged_by_step(mr__irls *s, const mr__block_sums *sums)
{
    double q = s->step / s->step_before;
    int newton = s->newton && s->step_before <= 1 && q < 1 && 10 * q * q <= s->tolerance;
    /* rounding in the sums sets a floor to the steps (about 1e-12 standard
     * errors at 3e5 rows, growing with them): once a step is no smaller
     * than the one before, one within MR__IRLS_FLOOR_SLACK times the
     * tolerance is as small as it gets */
    int floor = s->step >= s->step_before && s->step <= MR__IRLS_FLOOR_SLACK * s->tolerance;
    return s->null_done && (s->step <= s->tolerance || newton || floor) && param_settled(s, sums);
}

/* A coefficient ran off to infinity: its standard error grew at each of
 * the last MR__IRLS_GROWTH_PASSES passes, or to MR__IRLS_GROWTH_FACTOR
 * times its smallest over the fit (separation drives every fitted weight
 * to 0; a sound fit's standard errors move by a few times at most). */
int mr__irls_ran_off(const mr__irls *s, size_t j)
{
    return s->growing[j] >= MR__IRLS_GROWTH_PASSES ||
           (s->se_min[j] > 0 && s->se_prev[j] > MR__IRLS_GROWTH_FACTOR * s->se_min[j]);
}

mr_status mr__irls_step(mr__irls *s, const mr__block_sums *sums, const char *display, int *done, mr__error *err)
{
    int accepted;
    *done = 0;
    s->passes++;
    MR__TRY(accept_point(s, sums, display, &accepted, err));
    if (!accepted) return MR_OK;
    s->halving_run = 0;
    s->param_jump = 0;
    s->iterations++;
    MR__TRY(note_deviance(s, sums->dev, err));
    if (converged_at_boundary(s, sums)) {
        s->converged = *done = 1;
        return MR_OK;
    }
    if (s->iterations >= s->max_iterations && !s->step_at_end) {
        *done = 1;
        return MR_OK;
    }
    MR__TRY(next_point(s, sums, err));
    if (s->null_done && !s->null_known && !s->param_estimate) {
        /* This pass evaluated the null model at its final b0: later
         * passes leave its per-row work out. */
        s->null_dev = sums->null_dev;
        s->null_known = 1;
    }
    s->rel_change = s->step;
    if (converged_by_step(s, sums)) s->converged = *done = 1;
    else if (s->iterations >= s->max_iterations) *done = 1;
    return MR_OK;
}

/* ---- the encoding ------------------------------------------------------ */

#define IRLS_INTS(X)                                                                                              \
    X(max_iterations) X(step_at_end) X(null_intercept) X(family) X(from_start) X(have_beta) X(have_prev)        \
    X(have_dev) X(cold_restart) X(null_done) X(null_known) X(halving_run) X(iterations) X(halvings) X(passes) \
    X(converged) X(by_step) X(restarted) X(newton) X(param_estimate) X(param_phase) X(param_jump)
#define IRLS_DOUBLES(X)                                                                                          \
    X(tolerance) X(dispersion_rows) X(dev_prev) X(rel_change) X(step) X(step_before) X(null_b0) X(null_dev)     \
    X(null_dev_prev) X(param) X(param_prev) X(param_step)
#define COUNT(f) +1
enum { NINTS = 0 IRLS_INTS(COUNT), NDOUBLES = 0 IRLS_DOUBLES(COUNT), HEAD = 8 + 8 + 8 };

size_t mr__irls_encoded_size(const mr__irls *s)
{
    return HEAD + 8 * (NINTS + NDOUBLES + 5 * s->p + s->nhistory);
}

void mr__irls_encode(const mr__irls *s, unsigned char *out)
{
    unsigned char *at = mr__put_head(out, "MRIS", MR__IRLS_VERSION);
    size_t j;
    at = mr__put_u64(at, s->p);
    at = mr__put_u64(at, s->nhistory);
#define PUT_INT(f) at = mr__put_u64(at, (uint64_t)(int64_t)s->f);
#define PUT_DOUBLE(f) at = mr__put_f64(at, s->f);
    IRLS_INTS(PUT_INT)
    IRLS_DOUBLES(PUT_DOUBLE)
    for (j = 0; j < s->p; j++) at = mr__put_f64(at, s->beta[j]);
    for (j = 0; j < s->p; j++) at = mr__put_f64(at, s->prev[j]);
    for (j = 0; j < s->p; j++) at = mr__put_f64(at, s->se_prev[j]);
    for (j = 0; j < s->p; j++) at = mr__put_f64(at, s->se_min[j]);
    for (j = 0; j < s->p; j++) at = mr__put_u64(at, (uint64_t)(int64_t)s->growing[j]);
    for (j = 0; j < s->nhistory; j++) at = mr__put_f64(at, s->history[j]);
}

static mr_status decode_head(const unsigned char *in, size_t len, uint64_t *p, uint64_t *nhistory, mr__error *err)
{
    uint32_t version;
    if (len < HEAD || !mr__get_head(in, "MRIS", &version))
        return mr__fail(err, MR_ERR_IO, "IRLS state: not an encoded state");
    if (version != MR__IRLS_VERSION)
        return mr__fail(err, MR_ERR_IO, "IRLS state: version %u, not %u", (unsigned)version, MR__IRLS_VERSION);
    (void)mr__get_u64(mr__get_u64(in + 8, p), nhistory);
    /* each counted value takes 8 bytes: counts past the length are refused
     * before any size is computed from them */
    if (*p > len / 40 || *nhistory > len / 8 || len != HEAD + 8 * (NINTS + NDOUBLES + 5 * *p + *nhistory))
        return mr__fail(err, MR_ERR_IO, "IRLS state: %zu bytes do not hold the state they describe", len);
    return MR_OK;
}

mr_status mr__irls_decode(const unsigned char *in, size_t len, mr__irls *s, mr__error *err)
{
    const unsigned char *at = in + HEAD;
    uint64_t p = 0, nhistory = 0, v;
    void *history = NULL;
    size_t j;
    memset(s, 0, sizeof *s);
    MR__TRY(decode_head(in, len, &p, &nhistory, err));
    MR__TRY(allocate(s, (size_t)p, err));
    if (nhistory > 0 && mr__reserve(&history, &s->history_cap, (size_t)nhistory, sizeof *s->history) != MR_OK) {
        mr__irls_release(s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    s->history = history;
    s->p = p;
    s->nhistory = (size_t)nhistory;
#define GET_INT(f) at = mr__get_u64(at, &v), s->f = (int32_t)(int64_t)v;
#define GET_DOUBLE(f) at = mr__get_f64(at, &s->f);
    IRLS_INTS(GET_INT)
    IRLS_DOUBLES(GET_DOUBLE)
    for (j = 0; j < s->p; j++) at = mr__get_f64(at, &s->beta[j]);
    for (j = 0; j < s->p; j++) at = mr__get_f64(at, &s->prev[j]);
    for (j = 0; j < s->p; j++) at = mr__get_f64(at, &s->se_prev[j]);
    for (j = 0; j < s->p; j++) at = mr__get_f64(at, &s->se_min[j]);
    for (j = 0; j < s->p; j++) at = mr__get_u64(at, &v), s->growing[j] = (int32_t)(int64_t)v;
    for (j = 0; j < s->nhistory; j++) at = mr__get_f64(at, &s->history[j]);
    return MR_OK;
}
