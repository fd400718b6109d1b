#!/usr/bin/python3
"""Checks a factor declared `many` (its levels eliminated by their Schur
complement instead of being columns of the design):
  reference: base R (Debian r-base-core, /usr/bin/Rscript) glm with the
             factor as an ordinary treatment-coded factor, a poisson rate
             model (offset log(exposure)) with 500 levels, each with at
             least one event (R's dense glm grows as the cube of the
             levels: 500 keeps it to seconds; tests/cli/many_factor.sh
             fits 3,000 levels for determinism): the other
             coefficients and their standard errors, every level's
             estimate and standard error, the deviance, to 1e-8 relative
             (R at epsilon 1e-14, then refitted from its own estimates so
             that its standard errors come from the converged point's
             weights; millrace at --tolerance 1e-14);
  identity:  block elimination is exact algebra, so the same model fitted
             by millrace with the factor as ordinary columns (200 levels,
             small enough for the dense design) gives the same estimates,
             standard errors, covariance of the other coefficients,
             deviance and rank to 1e-10 relative: a poisson rate model and
             a gaussian model with a second factor and a covariate constant
             within the levels (aliased either way); and both fits score
             their rows alike (predictions, standard errors, intervals,
             residuals) to 1e-9;
  reference: R's predict.glm(se.fit = TRUE) for the 500-level fit: every
             row's linear predictor and its standard error, to 1e-8;
  reference: robust (sandwich) standard errors of the other coefficients
             (the levels' means taken out of each score), by rows and
             clustered by the factor itself: against the `sandwich`
             package for R (Debian r-cran-sandwich: vcovHC types HC0 and
             HC1, vcovCL by the factor) for the 500-level fit, to 1e-8;
             and, as an identity, against millrace's robust standard
             errors and covariance of the same model with the factor as
             ordinary columns (200 levels; poisson, by rows and clustered,
             and gaussian with an aliased covariate), to 1e-10.
Data simulated here with a fixed seed.  Prints "ok <case>" or "FAIL <case>:
<details>" and "N passed, M failed"; exits 1 if anything failed.  The R case
is skipped, saying so, without Rscript.
"""
import csv
import json
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
RSCRIPT = "/usr/bin/Rscript"

R_PROGRAM = r"""
args <- commandArgs(TRUE)
d <- read.csv(args[1], stringsAsFactors = FALSE, colClasses = c(area = "character", sex = "character"))
d$area <- factor(d$area, levels = sort(unique(d$area), method = "radix"))
d$sex <- factor(d$sex)
m <- glm(y ~ age + area + sex, family = poisson(), data = d, offset = log(py),
         control = glm.control(epsilon = 1e-14, maxit = 100))
# glm stops on the deviance, whose change a sparse level's last steps barely
# touch, and takes its standard errors from the weights before the last
# step: once more from its own estimates puts them at the converged point
m <- glm(y ~ age + area + sex, family = poisson(), data = d, offset = log(py), start = coef(m),
         control = glm.control(epsilon = 1e-14, maxit = 100))
s <- summary(m)$coefficients
out <- file(args[2], "w")
writeLines(sprintf("deviance %.17g", deviance(m)), out)
for (k in seq_len(nrow(s))) writeLines(sprintf("%s %.17g %.17g", rownames(s)[k], s[k, 1], s[k, 2]), out)
close(out)
library(sandwich)
out <- file(args[4], "w")
h0 <- sqrt(diag(vcovHC(m, type = "HC0")))
h1 <- sqrt(diag(vcovHC(m, type = "HC1")))
c0 <- sqrt(diag(vcovCL(m, cluster = ~area)))
for (k in names(h0)) writeLines(sprintf("%s %.17g %.17g %.17g", k, h0[[k]], h1[[k]], c0[[k]]), out)
close(out)
p <- predict(m, newdata = d, se.fit = TRUE)
write.table(data.frame(eta = sprintf("%.17g", p$fit), se = sprintf("%.17g", p$se.fit)), args[3],
            sep = ",", quote = FALSE, row.names = FALSE)
"""

failures = []
passed = 0


def report(case, problems):
    global passed
    if problems:
        failures.append(case)
        print("FAIL %s: %s" % (case, "; ".join(problems[:5])))
    else:
        passed += 1
        print("ok %s" % case)


def rel(a, b):
    return abs(a - b) / max(abs(b), 1e-300)


def fit(tmp, name, lines, data, extra=()):
    model = os.path.join(tmp, name + ".model")
    out = os.path.join(tmp, name + ".json")
    with open(model, "w") as f:
        f.write("\n".join(lines) + "\n")
    subprocess.run([MILLRACE, "fit", "-m", model, "--json", out, "--quiet", "--tolerance", "1e-14",
                    "--max-passes", "100"] + list(extra) + [data], check=True, stdout=subprocess.DEVNULL)
    with open(out) as f:
        return json.load(f)


def poisson_data(path, nlev, rows, seed):
    rng = np.random.default_rng(seed)
    eff = rng.normal(0, 0.4, nlev)
    # every level has rows: each level once, then the rest at random
    area = np.concatenate([np.arange(nlev), rng.integers(0, nlev, rows - nlev)])
    age = rng.uniform(20, 80, rows)
    sex = rng.choice(["F", "M"], rows)
    py = rng.uniform(500, 2000, rows)
    mu = py * np.exp(-5.5 + eff[area] + 0.02 * (age - 50) + 0.3 * (sex == "M"))
    y = rng.poisson(mu)
    # a level without events has no finite estimate (the fits only drift
    # towards -infinity, slowly): give each level at least one
    for lev in np.flatnonzero(np.bincount(area, weights=y, minlength=nlev) == 0):
        y[lev] = 1
    with open(path, "w") as f:
        f.write("y,area,age,sex,py\n")
        for i in range(rows):
            f.write("%d,L%05d,%.3f,%s,%.2f\n" % (y[i], area[i], age[i], sex[i], py[i]))


def by_name(fit_json):
    return {c["name"]: c for c in fit_json["coefficients"]}


def compare_covariance(what, many, cov, dense, dcov, tol, problems):
    """The other coefficients' covariance cov of the many fit against dcov of
    the dense fit, each entry on the scale of the dense standard errors."""
    names = [c["name"] for c in many["coefficients"]]
    dnames = [c["name"] for c in dense["coefficients"]]
    for i, a in enumerate(names):
        for j, b in enumerate(names):
            x, y = cov[i][j], dcov[dnames.index(a)][dnames.index(b)]
            if x is None or y is None:
                if (x is None) != (y is None):
                    problems.append("%s %s,%s null on one side" % (what, a, b))
                continue
            scale = (dcov[dnames.index(a)][dnames.index(a)] * dcov[dnames.index(b)][dnames.index(b)]) ** 0.5
            if abs(x - y) > tol * scale:
                problems.append("%s %s,%s %.17g, dense %.17g" % (what, a, b, x, y))


def compare_dense(case, many, dense, tol):
    problems = []
    dc = by_name(dense)
    factor = many["many_factor"]["factor"]
    for c in many["coefficients"]:
        k = dc[c["name"]]
        if c["aliased"] != k["aliased"]:
            problems.append("%s aliased %s, dense %s" % (c["name"], c["aliased"], k["aliased"]))
            continue
        if c["aliased"]:
            continue
        for key in ("estimate", "standard_error"):
            if rel(c[key], k[key]) > tol:
                problems.append("%s %s %.17g, dense %.17g" % (c["name"], key, c[key], k[key]))
    for lev in many["many_factor"]["levels"]:
        k = dc["%s=%s" % (factor, lev["level"])]
        for key in ("estimate", "standard_error"):
            if rel(lev[key], k[key]) > tol:
                problems.append("level %s %s %.17g, dense %.17g" % (lev["level"], key, lev[key], k[key]))
    compare_covariance("covariance", many, many["covariance"], dense, dense["covariance"], tol, problems)
    for key in ("deviance", "rank", "residual_df"):
        if rel(many["fit"][key], dense["fit"][key]) > tol:
            problems.append("%s %r, dense %r" % (key, many["fit"][key], dense["fit"][key]))
    report(case, problems)


def compare_robust(case, many, dense, tol):
    """Robust standard errors and covariance of the other coefficients: the
    many fit's against the dense fit's."""
    problems = []
    names = [c["name"] for c in many["coefficients"]]
    dnames = [c["name"] for c in dense["coefficients"]]
    rm, rd = many["robust"], dense["robust"]
    if rm["type"] != rd["type"] or rm["clusters"] != rd["clusters"] or rel(rm["adjustment"], rd["adjustment"]) > 1e-15:
        problems.append("type %s adjustment %r, dense %s %r" % (rm["type"], rm["adjustment"], rd["type"],
                                                              rd["adjustment"]))
    for i, a in enumerate(names):
        x, y = rm["standard_errors"][i], rd["standard_errors"][dnames.index(a)]
        if (x is None) != (y is None) or (x is not None and rel(x, y) > tol):
            problems.append("%s robust SE %r, dense %r" % (a, x, y))
    compare_covariance("robust covariance", many, rm["covariance"], dense, rd["covariance"], tol, problems)
    report(case, problems)


def case_dense_poisson(tmp):
    data = os.path.join(tmp, "p200.csv")
    poisson_data(data, 200, 6000, 3)
    base = ["outcome y", "family poisson", "exposure py", "numeric age"]
    many = fit(tmp, "p_many", base + ["factor area many", "factor sex"], data, ["--many-means"])
    dense = fit(tmp, "p_dense", base + ["factor area", "factor sex"], data)
    compare_dense("poisson rate model, 200 levels eliminated = as columns", many, dense, 1e-10)
    compare_scores(tmp, data, "p_many", "p_dense", "area",
                   "poisson: scoring with 200 levels eliminated = with them as columns, standard errors and "
                   "intervals too; O/E 1 by level")
    for opts in (["--robust", "hc0"], ["--robust", "hc1"], ["--cluster", "area"],
                 ["--cluster", "area", "--robust", "hc1"]):
        tag = "_".join(o.lstrip("-") for o in opts)
        many = fit(tmp, "p_many_" + tag, base + ["factor area many", "factor sex"], data, opts)
        dense = fit(tmp, "p_dense_" + tag, base + ["factor area", "factor sex"], data, opts)
        compare_robust("poisson, 200 levels: robust standard errors (%s) eliminated = as columns" % " ".join(opts),
                       many, dense, 1e-10)


def score(tmp, name, extra=()):
    """Scores data with fit NAME: its CSV rows."""
    out = os.path.join(tmp, name + ".scored.csv")
    subprocess.run([MILLRACE, "score", "--quiet", "--fit", os.path.join(tmp, name + ".json"), "--out", out]
                   + list(extra), check=True, stdout=subprocess.DEVNULL)
    with open(out) as f:
        return list(csv.DictReader(f))


def compare_scores(tmp, data, many_name, dense_name, by=None, case="scoring"):
    """A fit with the factor declared many scores as the dense fit does:
    the linear predictor, its standard error, the mean and its interval and
    the residuals, to 1e-9 relative (oracle: the dense fit's own scoring,
    whose prediction and residual formulas tests/ref/score_samples.py
    checks against R's predict.glm and residuals.glm).  The standard error
    of a row in level l is sqrt((x - m_l)' V (x - m_l) + dispersion / d_l),
    m_l the level's weighted column means (the block inverse in
    solve/absorb.h), so this checks those means and that formula.  With
    `by`, observed/expected by it is 1 for every level to 1e-12: a Poisson
    log-link fit's score equation for a level's indicator makes its
    observed and expected totals equal (an analytic identity)."""
    problems = []
    by_out = os.path.join(tmp, many_name + ".by.json")
    many = score(tmp, many_name, (["--by", by, "--by-out", by_out] if by else []) + [data])
    dense = score(tmp, dense_name, [data])
    for r, (a, b) in enumerate(zip(many, dense)):
        for key in ("eta", "se_eta", "mean", "mean_low", "mean_high", "resid_response", "resid_pearson",
                    "resid_deviance"):
            if not a[key] or rel(float(a[key]), float(b[key])) > 1e-9:
                problems.append("row %d %s %s, dense %s" % (r + 1, key, a[key], b[key]))
    if len(many) != len(dense):
        problems.append("%d rows scored, dense %d" % (len(many), len(dense)))
    if by:
        with open(by_out) as f:
            groups = json.load(f)["groups"]
        for g in groups:
            if abs(g["observed"] / g["expected"] - 1) > 1e-12:
                problems.append("area %s O/E %.17g" % (g["key"]["area"], g["observed"] / g["expected"]))
        if len(groups) != 200:
            problems.append("%d groups, not 200" % len(groups))
    report(case, problems[:10])


def case_dense_gaussian(tmp):
    rng = np.random.default_rng(5)
    nlev, rows = 200, 5000
    area = np.concatenate([np.arange(nlev), rng.integers(0, nlev, rows - nlev)])
    size = rng.uniform(1, 9, nlev)  # constant within a level: aliased after the levels
    x = rng.normal(0, 1, rows)
    grp = rng.choice(["a", "b", "c"], rows)
    y = 2 + rng.normal(0, 1, nlev)[area] + 0.5 * x + (grp == "b") - 0.3 * (grp == "c") + rng.normal(0, 1, rows)
    data = os.path.join(tmp, "g200.csv")
    with open(data, "w") as f:
        f.write("y,area,size,x,grp\n")
        for i in range(rows):
            f.write("%.6f,r%03d,%.4f,%.5f,%s\n" % (y[i], area[i], size[area[i]], x[i], grp[i]))
    base = ["outcome y", "family gaussian"]
    many = fit(tmp, "g_many", base + ["factor area many", "numeric x", "factor grp", "numeric size"], data,
               ["--many-means"])
    dense = fit(tmp, "g_dense", base + ["factor area", "numeric x", "factor grp", "numeric size"], data)
    problems = [] if by_name(many)["size"]["aliased"] else ["size (constant within levels) not aliased"]
    if problems:
        report("gaussian, a second factor and an aliased covariate", problems)
    else:
        compare_dense("gaussian, a second factor and an aliased covariate, eliminated = as columns", many, dense,
                      1e-10)
        compare_scores(tmp, data, "g_many", "g_dense", None,
                       "gaussian (dispersion estimated, a column aliased): scoring eliminated = as columns")
        for opts in (["--robust", "hc1"], ["--cluster", "area"]):
            tag = opts[1]
            many = fit(tmp, "g_many_" + tag, base + ["factor area many", "numeric x", "factor grp", "numeric size"],
                       data, opts)
            dense = fit(tmp, "g_dense_" + tag, base + ["factor area", "numeric x", "factor grp", "numeric size"],
                        data, opts)
            compare_robust("gaussian, an aliased covariate: robust standard errors (%s) eliminated = as columns" %
                           " ".join(opts), many, dense, 1e-10)


def case_r(tmp):
    if not os.access(RSCRIPT, os.X_OK):
        print("skip R glm reference: no %s" % RSCRIPT)
        return
    data = os.path.join(tmp, "p500.csv")
    poisson_data(data, 500, 2500, 7)
    many = fit(tmp, "r_many", ["outcome y", "family poisson", "exposure py", "numeric age", "factor area many",
                               "factor sex"], data, ["--many-means"])
    prog = os.path.join(tmp, "glm.R")
    out = os.path.join(tmp, "glm.txt")
    with open(prog, "w") as f:
        f.write(R_PROGRAM)
    pred = os.path.join(tmp, "glm_pred.csv")
    hc = os.path.join(tmp, "glm_hc.txt")
    subprocess.run([RSCRIPT, "--vanilla", prog, data, out, pred, hc], check=True, stdout=subprocess.DEVNULL)
    ref = {}
    with open(out) as f:
        for line in f:
            w = line.split()
            ref[w[0]] = [float(v) for v in w[1:]]
    problems = []
    names = {"intercept": "(Intercept)", "age": "age", "sex=M": "sexM"}
    for c in many["coefficients"]:
        est, se = ref[names[c["name"]]]
        if rel(c["estimate"], est) > 1e-8 or rel(c["standard_error"], se) > 1e-8:
            problems.append("%s %.17g (%.17g), R %.17g (%.17g)" % (c["name"], c["estimate"],
                                                                  c["standard_error"], est, se))
    levels = many["many_factor"]["levels"]
    if len(levels) != 499:
        problems.append("%d levels, not 499" % len(levels))
    for lev in levels:
        est, se = ref["area" + lev["level"]]
        # an estimate near 0 is compared on the scale of its standard error
        if abs(lev["estimate"] - est) > 1e-8 * max(abs(est), se) or rel(lev["standard_error"], se) > 1e-8:
            problems.append("level %s %.17g (%.17g), R %.17g (%.17g)" % (lev["level"], lev["estimate"],
                                                                        lev["standard_error"], est, se))
    if rel(many["fit"]["deviance"], ref["deviance"][0]) > 1e-8:
        problems.append("deviance %.17g, R %.17g" % (many["fit"]["deviance"], ref["deviance"][0]))
    report("poisson rate model, 500 levels, against R glm", problems)
    # predict.glm(se.fit = TRUE) on the fit's own rows: the linear predictor
    # (offset included) and its standard error, every row
    problems = []
    with open(pred) as f:
        r_rows = list(csv.DictReader(f))
    rows = score(tmp, "r_many", [data])
    for i, (a, b) in enumerate(zip(rows, r_rows)):
        # eta on the scale of its standard error: a level of one row with
        # one event fits it exactly, eta = log(1) = 0 up to rounding
        eta, r_eta, se = float(a["eta"]), float(b["eta"]), float(b["se"])
        if abs(eta - r_eta) > 1e-8 * max(abs(r_eta), se) or rel(float(a["se_eta"]), se) > 1e-8:
            problems.append("row %d eta %s (%s), R %s (%s)" % (i + 1, a["eta"], a["se_eta"], b["eta"], b["se"]))
    if len(rows) != len(r_rows):
        problems.append("%d rows, R %d" % (len(rows), len(r_rows)))
    report("poisson rate model, 500 levels: predictions and standard errors against R predict.glm(se.fit = TRUE)",
           problems[:10])
    # robust standard errors of the other coefficients, by rows
    with open(hc) as f:
        r_hc = {w[0]: (float(w[1]), float(w[2]), float(w[3])) for w in (line.split() for line in f)}
    problems = []
    for k, opts in enumerate((["--robust", "hc0"], ["--robust", "hc1"], ["--cluster", "area"])):
        typ = opts[1]
        rob = fit(tmp, "r_many_" + typ, ["outcome y", "family poisson", "exposure py", "numeric age",
                                         "factor area many", "factor sex"], data, opts)
        for i, c in enumerate(rob["coefficients"]):
            got, want = rob["robust"]["standard_errors"][i], r_hc[names[c["name"]]][k]
            if rel(got, want) > 1e-8:
                problems.append("%s %s %.17g, R vcovHC %.17g" % (typ, c["name"], got, want))
    report("poisson rate model, 500 levels: robust standard errors (HC0, HC1, clustered by the factor) against R "
           "sandwich::vcovHC and vcovCL", problems)


def main():
    if not os.access(MILLRACE, os.X_OK):
        print("build/millrace missing: run make first")
        return 1
    tmp = tempfile.mkdtemp(prefix="mr-many-")
    try:
        case_dense_poisson(tmp)
        case_dense_gaussian(tmp)
        case_r(tmp)
    finally:
        shutil.rmtree(tmp)
    print("%d passed, %d failed" % (passed, len(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
