#!/usr/bin/python3
"""Compares millrace's families with a parameter of their own against
independent GLM implementations, on small simulated data sets (fixed seed).

negative-binomial, theta fixed:
  reference: statsmodels GLM, sm.families.NegativeBinomial(alpha=1/theta)
             (Debian python3-statsmodels; its alpha is 1/theta)
  reference: R glm.fit with MASS::negative.binomial(theta) (Debian
             r-cran-mass), when /usr/bin/Rscript and MASS are there
Coefficients, standard errors, deviance, null deviance, Pearson chi-square,
log-likelihood, AIC and BIC to 1e-8 relative (the AIC counts the
coefficients only: theta is fixed, not estimated, as in MASS's family).

tweedie, power p fixed, 1 < p < 2, log link:
  reference: statsmodels GLM, sm.families.Tweedie(var_power=p, link=log)
Coefficients, standard errors (Pearson dispersion, statsmodels' default
for this family), deviance, null deviance, Pearson chi-square and
dispersion to 1e-8 (its log-likelihood, a series, is checked in
estimated_parameters.py; rows never collapse).

The harness (case layout, design columns, polishing, comparison) is
compare_reference.py's.  Prints "ok <case>" / "FAIL <case>: ..." and the
closing count; exits 1 if anything failed.
"""
import os
import shutil
import subprocess
import sys
import tempfile
import warnings

import numpy as np
import statsmodels.api as sm

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import compare_reference as cr  # noqa: E402

NB_R_PROGRAM = r"""
# reference: R glm.fit with MASS's negative.binomial family (r-cran-mass).
suppressMessages(library(MASS))
a <- commandArgs(TRUE)
d <- a[1]; n <- as.integer(a[2]); p <- as.integer(a[3]); theta <- as.numeric(a[4]); lnk <- a[5]
rd <- function(f, k) readBin(file.path(d, f), "double", n = k, size = 8, endian = "little")
X <- matrix(rd("X.bin", n * p), n, p); y <- rd("y.bin", n); w <- rd("w.bin", n); off <- rd("off.bin", n)
family <- negative.binomial(theta, link = lnk)
polished <- function(x) {
  f <- glm.fit(x = x, y = y, weights = w, offset = off, family = family,
               control = glm.control(epsilon = 1e-14, maxit = 200))
  for (i in 1:100) {
    prev <- f$coefficients
    f <- suppressWarnings(glm.fit(x = x, y = y, weights = w, offset = off, family = family,
                                  start = prev, control = glm.control(maxit = 1)))
    if (max(abs(f$coefficients - prev) / pmax(abs(prev), 1e-300)) < 1e-15 && i > 1) break
  }
  f
}
fit <- polished(X)
nulldev <- polished(matrix(1, n, 1))$deviance
mu <- fit$fitted.values
pearson <- sum(w * (y - mu)^2 / family$variance(mu))
cu <- chol2inv(fit$qr$qr[1:p, 1:p, drop = FALSE])
cov <- matrix(NA_real_, p, p)
cov[fit$qr$pivot, fit$qr$pivot] <- cu
ll <- fit$rank - fit$aic / 2
nobs <- sum(w != 0)
out <- file.path(d, "r_out.txt")
cat(sprintf("coef %.17g %.17g\n", fit$coefficients, sqrt(diag(cov))), sep = "", file = out)
vals <- c(deviance = fit$deviance, null_deviance = nulldev, pearson_chi2 = pearson, dispersion = 1,
          log_likelihood = ll, aic = fit$aic, bic = -2 * ll + log(nobs) * fit$rank,
          residual_df = fit$df.residual, rank = fit$rank, n = nobs)
cat(sprintf("%s %.17g\n", names(vals), vals), sep = "", file = out, append = TRUE)
"""


def r_has_mass():
    if not os.path.exists(cr.RSCRIPT):
        return False
    proc = subprocess.run([cr.RSCRIPT, "--vanilla", "-e", "library(MASS)"], capture_output=True, timeout=60)
    return proc.returncode == 0


def nb_statsmodels(theta, link, X, y, w, off):
    """reference: statsmodels GLM NegativeBinomial(alpha = 1/theta)."""
    family = sm.families.NegativeBinomial(alpha=1.0 / theta, link=cr.SM_LINK[link]())
    kw = dict(family=family, offset=off, var_weights=w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = cr.polished_sm_fit(sm.GLM(y, X, **kw), None)
        null_dev = cr.polished_sm_fit(sm.GLM(y, np.ones((len(y), 1)), **kw), None).deviance
    n, p = X.shape
    out = {"coef": np.asarray(res.params), "se": np.asarray(res.bse), "deviance": res.deviance,
           "null_deviance": null_dev, "pearson_chi2": res.pearson_chi2, "dispersion": res.scale,
           "residual_df": n - p, "rank": p, "n": n}
    if np.all(w == 1):  # statsmodels' density takes no prior weights
        out.update(cr.stats_from_ll(res.llf, p, n))
    return out


def nb_r(theta, link, X, y, w, off, tmp):
    """reference: R glm.fit, MASS::negative.binomial(theta)."""
    rdir = tempfile.mkdtemp(dir=tmp)
    n, p = X.shape
    for name, arr in (("X.bin", X.T), ("y.bin", y), ("w.bin", w), ("off.bin", off)):
        np.asarray(arr, dtype="<f8").tofile(os.path.join(rdir, name))
    prog = os.path.join(tmp, "nb_reference.R")
    with open(prog, "w") as fh:
        fh.write(NB_R_PROGRAM)
    return cr.run_r([cr.RSCRIPT, "--vanilla", prog, rdir, str(n), str(p), repr(theta), link], rdir)


def check_nb(case, theta, tmp, with_r, collapsed):
    js = cr.millrace_for_case(case, tmp)
    names = [c["name"] for c in js["coefficients"]]
    problems = []
    if not js["convergence"]["converged"]:
        problems.append("not converged")
    if js["model"].get("family_parameter") != {"name": "theta", "value": theta}:
        problems.append("family_parameter %r" % js["model"].get("family_parameter"))
    if (js["convergence"]["collapsed_patterns"] is not None) != collapsed:
        problems.append("collapsed_patterns %r" % js["convergence"]["collapsed_patterns"])
    _, X, y, w, off, _ = cr.reference_inputs(case, names)
    got = cr.millrace_values(js, names)
    se_allow = cr.SE_ALLOW_NONCANONICAL  # no link of this family is its canonical one
    sm_ref = nb_statsmodels(theta, case.link, X, y, w, off)
    problems += cr.compare("vs statsmodels:", got, sm_ref, names, cr.REL_TOL, se_allow)
    if with_r:
        r_ref = nb_r(theta, case.link, X, y, w, off, tmp)
        problems += cr.compare("vs R MASS:", got, r_ref, names, cr.REL_TOL, se_allow)
        problems += cr.compare("statsmodels vs R (harness):", sm_ref, r_ref, names, cr.REF_AGREE)
    return problems


def nb_draw(rng, mu, theta):
    return rng.negative_binomial(theta, theta / (theta + mu)).astype(float)


def nb_cases(rng):
    ind = cr.ind
    cases = []
    # log link, exposure, factors and a numeric (no collapsing: an offset)
    n, theta = 1500, 2.0
    d = cr.sim_common(rng, n, year=False)
    d["py"] = np.round(rng.uniform(0.5, 3.0, n), 3)
    mu = d["py"] * np.exp(0.4 + 0.3 * ind(d["sex"], "M") - 0.2 * ind(d["region"], "R02") + 0.25 * d["x1"])
    d["y"] = nb_draw(rng, mu, theta)
    cases.append((cr.Case("nb_log_exposure", "negative-binomial theta=2", "log", d, "y",
                          factors=[("sex", None), ("region", None)], numerics=["x1"], exposure="py"),
                  theta, False))
    # log link, factors only: rows collapse into patterns
    n, theta = 2000, 0.8
    d = cr.sim_common(rng, n, year=False)
    mu = np.exp(1.0 + 0.5 * ind(d["age_band"], "50-54") - 0.3 * ind(d["sex"], "F"))
    d["y"] = nb_draw(rng, mu, theta)
    cases.append((cr.Case("nb_log_patterns", "negative-binomial theta=0.8", "log", d, "y",
                          factors=[("age_band", None), ("sex", None)], use_model_file=True), theta, True))
    # identity and sqrt links, a prior weight
    for link, theta in (("identity", 5.0), ("sqrt", 3.5)):
        n = 1200
        d = cr.sim_common(rng, n, year=False)
        mu = 2.0 + 1.0 * ind(d["sex"], "M") + 0.8 * d["x2"]
        if link == "sqrt":
            mu = mu ** 2 / 3
        d["y"] = nb_draw(rng, mu, theta)
        d["w"] = rng.choice([1.0, 2.0, 0.5], n)
        cases.append((cr.Case("nb_%s_weighted" % link, "negative-binomial theta=%r" % theta, link, d, "y",
                              factors=[("sex", None)], numerics=["x2"], weight="w"), theta, False))
    return cases


def tweedie_statsmodels(p_power, X, y, w, off):
    """reference: statsmodels GLM Tweedie(var_power=p, link=log), Pearson scale."""
    family = sm.families.Tweedie(var_power=p_power, link=cr.SM_LINK["log"]())
    kw = dict(family=family, offset=off, var_weights=w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = cr.polished_sm_fit(sm.GLM(y, X, **kw), "X2")
        null_dev = cr.polished_sm_fit(sm.GLM(y, np.ones((len(y), 1)), **kw), "X2").deviance
    n, p = X.shape
    return {"coef": np.asarray(res.params), "se": np.asarray(res.bse), "deviance": res.deviance,
            "null_deviance": null_dev, "pearson_chi2": res.pearson_chi2, "dispersion": res.scale,
            "residual_df": n - p, "rank": p, "n": n}


def check_tweedie(case, p_power, tmp, collapsed):
    js = cr.millrace_for_case(case, tmp)
    names = [c["name"] for c in js["coefficients"]]
    problems = []
    if not js["convergence"]["converged"]:
        problems.append("not converged")
    if js["model"].get("family_parameter") != {"name": "power", "value": p_power}:
        problems.append("family_parameter %r" % js["model"].get("family_parameter"))
    if (js["convergence"]["collapsed_patterns"] is not None) != collapsed:
        problems.append("collapsed_patterns %r" % js["convergence"]["collapsed_patterns"])
    if js.get("statistic") != "t":
        problems.append("statistic %r" % js.get("statistic"))
    _, X, y, w, off, _ = cr.reference_inputs(case, names)
    got = cr.millrace_values(js, names)
    ref = tweedie_statsmodels(p_power, X, y, w, off)
    problems += cr.compare("vs statsmodels:", got, ref, names, cr.REL_TOL, cr.SE_ALLOW_NONCANONICAL)
    return problems


def tweedie_draw(rng, mu, p, phi):
    """Compound Poisson-gamma with mean mu, variance phi mu^p."""
    lam = mu ** (2 - p) / (phi * (2 - p))
    shape = (2 - p) / (p - 1)
    scale = phi * (p - 1) * mu ** (p - 1)
    count = rng.poisson(lam)
    y = np.where(count > 0, rng.gamma(np.maximum(count, 1) * shape, scale), 0.0)
    return np.round(y, 6)


def tweedie_cases(rng):
    ind = cr.ind
    cases = []
    n = 1500
    d = cr.sim_common(rng, n, year=False)
    d["py"] = np.round(rng.uniform(0.5, 2.0, n), 3)
    mu = d["py"] * np.exp(1.0 + 0.4 * ind(d["sex"], "M") - 0.3 * ind(d["region"], "R03") + 0.2 * d["x1"])
    d["y"] = tweedie_draw(rng, mu, 1.5, 2.0)
    cases.append((cr.Case("tweedie_log_exposure", "tweedie power=1.5", "log", d, "y",
                          factors=[("sex", None), ("region", None)], numerics=["x1"], exposure="py"),
                  1.5, False))
    n = 1500
    d = cr.sim_common(rng, n, year=False)
    mu = np.exp(0.5 + 0.6 * ind(d["age_band"], "45-49") + 0.2 * ind(d["sex"], "F"))
    d["y"] = tweedie_draw(rng, mu, 1.3, 1.0)
    d["w"] = rng.choice([1.0, 2.0, 0.5], n)
    cases.append((cr.Case("tweedie_factors_weighted", "tweedie power=1.3", "log", d, "y",
                          factors=[("age_band", None), ("sex", None)], weight="w"), 1.3, False))
    return cases


def main():
    if not os.access(cr.MILLRACE, os.X_OK):
        print("FAIL setup: %s not found (run make first)" % cr.MILLRACE)
        print("0 passed, 1 failed")
        return 1
    rng = np.random.default_rng(20261204)
    with_r = r_has_mass()
    if not with_r:
        print("note: R with MASS not found: statsmodels alone")
    tmp = tempfile.mkdtemp(prefix="millrace-ref-families-")
    try:
        checks = [(c.name, (lambda c=c, t=t, col=col: check_nb(c, t, tmp, with_r, col)))
                  for c, t, col in nb_cases(rng)]
        checks += [(c.name, (lambda c=c, t=t, col=col: check_tweedie(c, t, tmp, col)))
                   for c, t, col in tweedie_cases(rng)]
        return cr.run_checks(checks)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
