#!/usr/bin/python3
"""Compares what millrace estimates or sums beyond the IRLS coefficients for
its families with a parameter of their own, on small simulated data sets
(fixed seed).

negative-binomial, theta estimated by maximum likelihood ("family
negative-binomial" with no theta):
  reference: R MASS::glm.nb (Debian r-cran-mass), run with
             glm.control(epsilon = 1e-13, maxit = 200)
Coefficients, standard errors, theta, its standard error (glm.nb's
SE.theta), 2 x log-likelihood (glm.nb's twologlik), AIC (theta counted),
deviance, null deviance (glm.fit of the intercept alone with
MASS::negative.binomial at glm.nb's theta), with and without an exposure and with a prior weight, to
NB_TOL = 1e-9 relative (an estimate on the scale of its standard error
where that is larger).  Why that tolerance: glm.nb alternates a full glm
fit at fixed theta with theta.ml's Newton steps (whose own stopping rule is
a step below .Machine$double.eps^0.25), and stops when the change of the
log-likelihood and of theta falls below its epsilon; millrace stops when
the coefficients' step is below the tolerance in standard errors and
theta's Newton step below sqrt(tolerance) of its own (the two converge
together, linearly: each pass's coefficient step is taken at the theta
before, so by the time the coefficients' rule is met theta's step is far
below its own bound; DEVELOPERS.md, "Theta and the coefficients").  At
glm.nb's epsilon 1e-13 and millrace's tolerance 1e-14 the two agree to
3e-12 at worst on these cases (theta to 3e-13, 2026-12-05; 1e-11 at
millrace's default tolerance); 1e-9 leaves room for both convergences and
for another R build without hiding a wrong formula, which moves theta or
its SE by far more.
glm.nb's own SE.theta is theta.ml's 1/sqrt(information) at the value one
Newton step before its final theta (a step of up to
.Machine$double.eps^0.25), so it is held to SE_THETA_TOL = 1e-5 only; the
same formula (theta.ml's info) evaluated in R at glm.nb's final theta and
means is held to NB_TOL.
The fits with 1 and 2 worker threads must give the same bits.
Among the cases, a rate model with a 500-level factor as ordinary columns
(tests/ref/many_factor.py's shape, counts gamma-mixed to theta 10, estimated
near 19: the gamma functions' differences past 10 taken within their series,
src/common/polygamma.c), where glm.nb converges; its coefficients near 0 are
compared on the scale of their standard errors.  The same shape with poisson
counts (no overdispersion: theta's maximum at infinity, where glm.nb stops on
its alternation limit, warning, with theta near 1e16 and a NaN SE) must give
theta at its bound 1e8 with the warning, and R glm's poisson fit (reference:
R glm, family poisson) to AT_BOUND_TOL = 1e-6: the weights differ by about
mu/theta = 1e-7.  Such counts once failed with "IRLS found no valid
coefficients": the log-likelihood's and score's differences of gamma
functions, taken apart, had lost their digits by theta 10^6, and the noise
read as an overshoot.

tweedie, power p fixed (1.2, 1.5, 1.8), log link: the log-likelihood and AIC
  reference: the compound Poisson-gamma density summed over the number of
             gamma summands with scipy.stats (Debian python3-scipy):
             f(y) = sum_N Poisson(N; lambda) Gamma(y; N a, s) for y > 0,
             f(0) = exp(-lambda), lambda = mu^(2-p) / (phi (2-p)),
             a = (2-p)/(p-1), s = phi (p-1) mu^(p-1)
             (the definition of the distribution, not the series formula
             millrace evaluates), at millrace's fitted means and the
             deviance-based dispersion deviance / sum of weights, each row's
             log density times its prior weight; AIC counts the
             dispersion.  To 1e-9 relative.
  Not usable as oracles here: Debian's r-cran-statmod 1.5.0 has no dtweedie
  (that is in the separate tweedie package, not among the project's
  oracles), and statsmodels 0.13.5's Tweedie.loglike is NaN unless its
  extended quasi-likelihood is asked for, which is not the density.

Prints "ok <case>" / "FAIL <case>: ..." and the closing count; exits 1 if
anything failed.
"""
import math
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np
from scipy import special, stats

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import compare_reference as cr  # noqa: E402
from families import nb_draw, tweedie_draw  # noqa: E402  (the same simulations)

NB_TOL = 1e-9
AT_BOUND_TOL = 1e-6
SE_THETA_TOL = 1e-5
TWEEDIE_TOL = 1e-9

GLM_NB_PROGRAM = r"""
# reference: R MASS::glm.nb (r-cran-mass).
suppressMessages(library(MASS))
a <- commandArgs(TRUE)
d <- a[1]; n <- as.integer(a[2]); p <- as.integer(a[3])
rd <- function(f, k) readBin(file.path(d, f), "double", n = k, size = 8, endian = "little")
X <- matrix(rd("X.bin", n * p), n, p); y <- rd("y.bin", n); w <- rd("w.bin", n); off <- rd("off.bin", n)
fit <- glm.nb(y ~ X - 1 + offset(off), weights = w, control = glm.control(epsilon = 1e-13, maxit = 200))
se <- sqrt(diag(vcov(fit)))
out <- file.path(d, "r_out.txt")
cat(sprintf("coef %.17g %.17g\n", coef(fit), se), sep = "", file = out)
# theta.ml's information formula at glm.nb's final theta and means: its own
# SE.theta is taken one Newton step (up to eps^0.25 in theta) before the end
th <- fit$theta; mu <- fitted(fit)
info <- sum(w * (-trigamma(th + y) + trigamma(th) - 1/th + 2/(mu + th) - (y + th)/(mu + th)^2))
# the intercept-only model at the final theta (the design above has its
# intercept as a column of X, so glm.nb's own null.deviance has none)
null_dev <- glm.fit(x = matrix(1, n, 1), y = y, weights = w, offset = off, family = negative.binomial(th),
                    control = glm.control(epsilon = 1e-13, maxit = 200))$deviance
vals <- c(theta = fit$theta, theta_se = fit$SE.theta, theta_se_final = 1 / sqrt(info),
          twologlik = fit$twologlik, aic = fit$aic, deviance = fit$deviance, null_deviance = null_dev)
cat(sprintf("%s %.17g\n", names(vals), vals), sep = "", file = out, append = TRUE)
"""


def nb_cases(rng):
    ind = cr.ind
    cases = []
    n = 1500
    d = cr.sim_common(rng, n, year=False)
    d["py"] = np.round(rng.uniform(0.5, 3.0, n), 3)
    mu = d["py"] * np.exp(0.4 + 0.3 * ind(d["sex"], "M") - 0.2 * ind(d["region"], "R02") + 0.25 * d["x1"])
    d["y"] = nb_draw(rng, mu, 2.0)
    cases.append(cr.Case("nb_theta_exposure", "negative-binomial", "log", d, "y",
                         factors=[("sex", None), ("region", None)], numerics=["x1"], exposure="py"))
    n = 2000
    d = cr.sim_common(rng, n, year=False)
    mu = np.exp(1.0 + 0.5 * ind(d["age_band"], "50-54") - 0.3 * ind(d["sex"], "F"))
    d["y"] = nb_draw(rng, mu, 0.8)
    cases.append(cr.Case("nb_theta_factors", "negative-binomial theta=estimate", "log", d, "y",
                         factors=[("age_band", None), ("sex", None)], use_model_file=True))
    n = 1200
    d = cr.sim_common(rng, n, year=False)
    mu = np.exp(0.7 + 0.4 * ind(d["sex"], "M") + 0.3 * d["x2"])
    d["y"] = nb_draw(rng, mu, 5.0)
    d["w"] = rng.choice([1.0, 2.0, 3.0], n)
    cases.append(cr.Case("nb_theta_weighted", "negative-binomial", "log", d, "y",
                         factors=[("sex", None)], numerics=["x2"], weight="w"))
    return cases


def many_level_counts(seed, theta):
    """A rate model with a 500-level factor (area), age, sex and an exposure
    (py), as tests/ref/many_factor.py simulates it, each level with an
    event; the counts poisson (theta 0) or gamma-mixed poisson, a negative
    binomial with shape theta.  Its own generator: the cases above keep
    their data."""
    rng = np.random.default_rng(seed)
    nlev, n = 500, 2500
    eff = rng.normal(0, 0.4, nlev)
    area = np.concatenate([np.arange(nlev), rng.integers(0, nlev, n - nlev)])
    age = np.round(rng.uniform(20, 80, n), 3)
    sex = rng.choice(["F", "M"], n)
    py = np.round(rng.uniform(500, 2000, n), 2)
    mu = py * np.exp(-5.5 + eff[area] + 0.02 * (age - 50) + 0.3 * (sex == "M"))
    y = rng.poisson(mu * rng.gamma(theta, 1 / theta, n) if theta > 0 else mu)
    for lev in np.flatnonzero(np.bincount(area, weights=y, minlength=nlev) == 0):
        y[lev] = 1
    d = {"y": y, "area": np.array(["L%05d" % a for a in area]), "age": age, "sex": sex, "py": py}
    return cr.Case("many_levels_theta%g" % theta, "negative-binomial", "log", d, "y",
                   factors=[("area", None), ("sex", None)], numerics=["age"], exposure="py")


def glm_nb(X, y, w, off, tmp):
    """reference: R MASS::glm.nb."""
    rdir = tempfile.mkdtemp(dir=tmp)
    n, p = X.shape
    for name, arr in (("X.bin", X.T), ("y.bin", y), ("w.bin", w), ("off.bin", off)):
        np.asarray(arr, dtype="<f8").tofile(os.path.join(rdir, name))
    prog = os.path.join(tmp, "glm_nb.R")
    with open(prog, "w") as fh:
        fh.write(GLM_NB_PROGRAM)
    return cr.run_r([cr.RSCRIPT, "--vanilla", prog, rdir, str(n), str(p)], rdir)


def close(label, got, want, tol, problems):
    r = cr.rel_diff(got, want, 1e-300)
    if r > tol:
        problems.append("%s %r vs %r (rel %.2g)" % (label, got, want, r))


def check_nb(case, tmp):
    js = cr.millrace_for_case(case, tmp)
    names = [c["name"] for c in js["coefficients"]]
    problems = []
    if not js["convergence"]["converged"]:
        problems.append("not converged")
    fp = js["model"].get("family_parameter") or {}
    if fp.get("name") != "theta" or "estimated" not in fp:
        problems.append("family_parameter %r" % fp)
    if js["convergence"]["collapsed_patterns"] is not None:
        problems.append("rows collapsed: the likelihood in theta needs each row")
    _, X, y, w, off, _ = cr.reference_inputs(case, names)
    got = cr.millrace_values(js, names)
    ref = glm_nb(X, y, w, off, tmp)
    for j, nm in enumerate(names):
        # an estimate near 0 (one of many levels') on the scale of its SE
        if abs(got["coef"][j] - ref["coef"][j]) > NB_TOL * max(abs(ref["coef"][j]), ref["se"][j]):
            problems.append("coef[%s] %r vs %r (SE %r)" % (nm, got["coef"][j], ref["coef"][j], ref["se"][j]))
        close("se[%s]" % nm, got["se"][j], ref["se"][j], NB_TOL, problems)
    close("theta", fp.get("value"), ref["theta"], NB_TOL, problems)
    se = (fp.get("estimated") or {}).get("standard_error")
    close("theta SE vs glm.nb's SE.theta", se, ref["theta_se"], SE_THETA_TOL, problems)
    close("theta SE vs theta.ml's information at the end", se, ref["theta_se_final"], NB_TOL, problems)
    close("2 x log-likelihood", 2 * js["fit"]["log_likelihood"], ref["twologlik"], NB_TOL, problems)
    close("AIC", js["fit"]["aic"], ref["aic"], NB_TOL, problems)
    close("deviance", js["fit"]["deviance"], ref["deviance"], NB_TOL, problems)
    close("null deviance", js["fit"]["null_deviance"], ref["null_deviance"], NB_TOL, problems)
    # the same bits on 1 and 2 worker threads
    data_path = os.path.join(tmp, case.name + ".csv")
    opts = (["--model", os.path.join(tmp, case.name + ".model")] if case.use_model_file
            else case.cli_options())
    one = cr.run_millrace(tmp, data_path, opts + ["--threads", "1"], "t1.json")
    two = cr.run_millrace(tmp, data_path, opts + ["--threads", "2"], "t2.json")
    if one["coefficients"] != two["coefficients"] or one["model"] != two["model"] or one["fit"] != two["fit"]:
        problems.append("1 and 2 threads differ")
    return problems


GLM_POISSON_PROGRAM = r"""
# reference: R glm (r-base-core), family poisson.
a <- commandArgs(TRUE)
d <- a[1]; n <- as.integer(a[2]); p <- as.integer(a[3])
rd <- function(f, k) readBin(file.path(d, f), "double", n = k, size = 8, endian = "little")
X <- matrix(rd("X.bin", n * p), n, p); y <- rd("y.bin", n); off <- rd("off.bin", n)
fit <- glm(y ~ X - 1 + offset(off), family = poisson(), control = glm.control(epsilon = 1e-14, maxit = 100))
s <- summary(fit)$coefficients
out <- file.path(d, "r_out.txt")
cat(sprintf("coef %.17g %.17g\n", s[, 1], s[, 2]), sep = "", file = out)
cat(sprintf("loglik %.17g\n", as.numeric(logLik(fit))), file = out, append = TRUE)
"""


def check_nb_at_bound(case, tmp):
    """Counts with no overdispersion (poisson draws): theta's maximum is at
    infinity, where MASS::glm.nb stops on its alternation limit with theta
    near 10^16 and NaN for its SE, so it cannot be the oracle here.  What
    millrace documents: theta held at its bound 1e8 with a warning, and the
    poisson fit.  reference: R glm with family poisson; a negative binomial
    at theta 1e8 differs from it by about mu/theta = 1e-7 in its weights, so
    to AT_BOUND_TOL."""
    js = cr.millrace_for_case(case, tmp)
    names = [c["name"] for c in js["coefficients"]]
    problems = [] if js["convergence"]["converged"] else ["not converged"]
    fp = js["model"].get("family_parameter") or {}
    if fp.get("value") != 1e8:
        problems.append("theta %r, not at its bound 1e8" % fp.get("value"))
    if not any(w.startswith("theta reached 1e+08") for w in js.get("warnings", [])):
        problems.append("no warning of theta at its bound: %r" % js.get("warnings"))
    _, X, y, w, off, _ = cr.reference_inputs(case, names)
    rdir = tempfile.mkdtemp(dir=tmp)
    for name, arr in (("X.bin", X.T), ("y.bin", y), ("off.bin", off)):
        np.asarray(arr, dtype="<f8").tofile(os.path.join(rdir, name))
    prog = os.path.join(tmp, "glm_poisson.R")
    with open(prog, "w") as fh:
        fh.write(GLM_POISSON_PROGRAM)
    ref = cr.run_r([cr.RSCRIPT, "--vanilla", prog, rdir, str(X.shape[0]), str(X.shape[1])], rdir)
    got = cr.millrace_values(js, names)
    for j, nm in enumerate(names):
        if abs(got["coef"][j] - ref["coef"][j]) > AT_BOUND_TOL * max(abs(ref["coef"][j]), ref["se"][j]):
            problems.append("coef[%s] %r vs %r (SE %r)" % (nm, got["coef"][j], ref["coef"][j], ref["se"][j]))
        close("se[%s]" % nm, got["se"][j], ref["se"][j], AT_BOUND_TOL, problems)
    close("log-likelihood", js["fit"]["log_likelihood"], ref["loglik"], AT_BOUND_TOL, problems)
    return problems


def compound_log_density(y, mu, phi, p):
    """reference: log f(y) of the compound Poisson-gamma distribution, by
    its definition, summed over N = 1..N_max with scipy.stats."""
    lam = mu ** (2 - p) / (phi * (2 - p))
    a = (2 - p) / (p - 1)
    s = phi * (p - 1) * mu ** (p - 1)
    if y == 0:
        return -lam
    top = int(max(lam, 1) * 20 + 200)
    N = np.arange(1, top + 1)
    terms = stats.poisson.logpmf(N, lam) + stats.gamma.logpdf(y, N * a, scale=s)
    return float(special.logsumexp(terms))


def tweedie_cases(rng):
    ind = cr.ind
    cases = []
    for p, phi, weighted in ((1.2, 1.5, False), (1.5, 2.0, True), (1.8, 0.8, False)):
        n = 800
        d = cr.sim_common(rng, n, year=False)
        d["py"] = np.round(rng.uniform(0.5, 2.0, n), 3)
        mu = d["py"] * np.exp(1.0 + 0.4 * ind(d["sex"], "M") - 0.3 * ind(d["region"], "R03") + 0.2 * d["x1"])
        d["y"] = tweedie_draw(rng, mu, p, phi)
        if weighted:
            d["w"] = rng.choice([1.0, 2.0, 0.5], n)
        cases.append((cr.Case("tweedie_loglik_p%s" % p, "tweedie power=%r" % p, "log", d, "y",
                              factors=[("sex", None), ("region", None)], numerics=["x1"], exposure="py",
                              weight="w" if weighted else None), p))
    return cases


def check_tweedie(case, p, tmp):
    js = cr.millrace_for_case(case, tmp)
    names = [c["name"] for c in js["coefficients"]]
    problems = []
    if not js["convergence"]["converged"]:
        problems.append("not converged")
    _, X, y, w, off, _ = cr.reference_inputs(case, names)
    got = cr.millrace_values(js, names)
    mu = np.exp(X @ np.asarray(got["coef"], dtype=float) + off)
    phi = js["fit"]["deviance"] / w.sum()
    ll = sum(wi * compound_log_density(yi, mi, phi, p) for yi, mi, wi in zip(y, mu, w))
    k = js["fit"]["rank"] + 1
    close("log-likelihood", js["fit"]["log_likelihood"], ll, TWEEDIE_TOL, problems)
    close("AIC", js["fit"]["aic"], -2 * ll + 2 * k, TWEEDIE_TOL, problems)
    return problems


def main():
    if not os.access(cr.MILLRACE, os.X_OK):
        print("FAIL setup: %s not found (run make first)" % cr.MILLRACE)
        print("0 passed, 1 failed")
        return 1
    rng = np.random.default_rng(20261205)
    tmp = tempfile.mkdtemp(prefix="millrace-ref-estimated-")
    try:
        checks = []
        if os.path.exists(cr.RSCRIPT):
            checks += [(c.name, (lambda c=c: check_nb(c, tmp))) for c in nb_cases(rng)]
            checks.append(("many_levels_theta10", lambda: check_nb(many_level_counts(3, 10.0), tmp)))
            checks.append(("many_levels_poisson", lambda: check_nb_at_bound(many_level_counts(7, 0), tmp)))
        else:
            print("note: /usr/bin/Rscript not found: the glm.nb comparisons are skipped")
        checks += [(c.name, (lambda c=c, p=p: check_tweedie(c, p, tmp))) for c, p in tweedie_cases(rng)]
        return cr.run_checks(checks)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
