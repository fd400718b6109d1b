#!/usr/bin/python3
"""Checks `millrace compare`: the tests between nested models and the
drop-one tests, against base R (Debian r-base-core, /usr/bin/Rscript):
  reference: R anova.glm of two glm fits, test = "Chisq" (fixed dispersion:
             the deviance drop on its df; estimated: scaled by the larger
             model's Pearson dispersion) and test = "F" (quasi-poisson);
  reference: R drop1.glm, test = "Chisq": each reduced model's deviance and
             AIC, the likelihood-ratio statistic and its p-value (poisson and
             binomial, where drop1's scale is the fixed dispersion 1);
  reference: R anova.glm of each reduced model against the full one, test
             = "F", for the quasi-poisson drop-one tests (drop1's own F
             scales by deviance / residual df, not by the Pearson dispersion
             millrace and anova.glm use; millrace.h says which);
  reference: R glm deviance, residual df, AIC and BIC of each model.
The R program builds its models with reformulate() from column names; the
models given to millrace are model files.  Cases (simulated, fixed seed):
a poisson rate model with an exposure (a nested sequence of three models,
drop-one of the largest), a logistic model with a factor interaction
(drop-one keeps the interaction's factors, as drop1 does), and a
quasi-poisson model (dispersion estimate) with F tests.

Prints "ok <case>" or "FAIL <case>: <details>" and "N passed, M failed";
exits 1 if anything failed.  Skips (saying so) without Rscript.
"""
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
RSCRIPT = "/usr/bin/Rscript"
# millrace runs at --tolerance 1e-14 (R's glm at epsilon 1e-14): the deviance
# is stationary at the maximum and agrees at the default 1e-10 already, but
# the Pearson dispersion that scales the F tests is not, and at 1e-10 it
# (and so F) differed from R's by about 2e-7 relative.  Deviances then agree
# to about 1e-12 relative, a difference of deviances to that times the
# larger deviance.
TOL = 1e-8

R_PROGRAM = r"""
args <- commandArgs(TRUE)
spec <- read.table(args[2], header = TRUE, stringsAsFactors = FALSE)
d <- read.csv(args[1], stringsAsFactors = FALSE)
for (col in strsplit(args[4], ",")[[1]]) d[[col]] <- factor(d[[col]])
fam <- switch(args[3], poisson = poisson(), binomial = binomial(), quasipoisson = quasipoisson())
fitone <- function(terms) {
  f <- reformulate(strsplit(terms, ",")[[1]], response = "y")
  if (args[5] == "py") glm(f, family = fam, data = d, offset = log(py), control = glm.control(epsilon = 1e-14, maxit = 100))
  else glm(f, family = fam, data = d, control = glm.control(epsilon = 1e-14, maxit = 100))
}
out <- file(args[6], "w")
put <- function(...) writeLines(paste(...), out)
g <- function(x) sprintf("%.17g", x)
fits <- lapply(spec$terms, fitone)
names(fits) <- spec$name
for (n in spec$name) {
  m <- fits[[n]]
  put("model", n, g(deviance(m)), g(df.residual(m)), g(AIC(m)), g(BIC(m)))
}
test <- if (args[3] == "quasipoisson") "F" else "Chisq"
for (i in seq_along(fits)) for (j in seq_along(fits)) if (i < j) {
  a <- anova(fits[[i]], fits[[j]], test = "Chisq")
  put("chisq", spec$name[i], spec$name[j], g(a$Df[2]), g(a$Deviance[2]), g(a[2, "Pr(>Chi)"]))
  if (test == "F") {
    a <- anova(fits[[i]], fits[[j]], test = "F")
    put("F", spec$name[i], spec$name[j], g(a$F[2]), g(a[2, "Pr(>F)"]))
  }
}
full <- fits[[length(fits)]]
if (test == "Chisq") {
  dr <- drop1(full, test = "Chisq")
  for (k in 2:nrow(dr))
    put("drop", rownames(dr)[k], g(dr$Df[k]), g(dr$Deviance[k]), g(dr$AIC[k]), g(dr$LRT[k]), g(dr[k, "Pr(>Chi)"]))
} else {
  for (t in drop.scope(full)) {
    r <- update(full, as.formula(paste(". ~ . -", t)))
    a <- anova(r, full, test = "F")
    put("dropF", t, g(a$Df[2]), g(deviance(r)), g(a$F[2]), g(a[2, "Pr(>F)"]))
  }
}
close(out)
"""

passed = failed = 0


def report(case, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print("ok", case)
    else:
        failed += 1
        print("FAIL %s: %s" % (case, detail))


def close(a, b, scale=1.0, tol=TOL):
    if a is None or b is None:
        return a is None and (b is None or not math.isfinite(b))
    return abs(a - b) <= tol * max(abs(b), scale, 1e-300)


def close_p(a, b):
    """p-values: relative where they are large enough to mean anything."""
    return abs(a - b) <= 1e-7 * max(b, 1e-12) or (a < 1e-15 and b < 1e-15)


def simulate(rng, n, kind):
    region = rng.choice(["north", "south", "east", "west"], n)
    band = rng.choice(["young", "middle", "old"], n)
    x = np.round(rng.normal(0, 1, n), 3)
    eff = {"north": 0, "south": 0.2, "east": -0.1, "west": 0.05}
    beff = {"young": -0.3, "middle": 0, "old": 0.4}
    eta = np.array([eff[r] + beff[b] for r, b in zip(region, band)]) + 0.15 * x
    if kind == "binomial":
        p = 1 / (1 + np.exp(-(eta - 0.2 + 0.3 * (band == "old") * (region == "east"))))
        y = (rng.random(n) < p).astype(int)
        py = np.ones(n)
    else:
        py = np.round(rng.uniform(50, 500, n), 1)
        mu = py * np.exp(eta - 4)
        if kind == "quasipoisson":  # overdispersed counts: a gamma-mixed poisson
            mu = mu * rng.gamma(2.0, 0.5, n)
        y = rng.poisson(mu)
    return {"region": region, "band": band, "x": x, "py": py, "y": y}


def write_csv(path, cols):
    names = list(cols)
    with open(path, "w") as fh:
        fh.write(",".join(names) + "\n")
        for i in range(len(cols[names[0]])):
            fh.write(",".join(str(cols[c][i]) for c in names) + "\n")


def model_file(path, family, terms, factors, exposure, quasi):
    with open(path, "w") as fh:
        fh.write("outcome y\nfamily %s\n" % family)
        if exposure:
            fh.write("exposure py\n")
        if quasi:
            fh.write("dispersion estimate\n")
        for t in terms:
            if ":" in t:
                fh.write("interact %s\n" % " ".join(t.split(":")))
            else:
                fh.write("%s %s\n" % ("factor" if t in factors else "numeric", t))


def run_case(case, tmp, kind, models, factors, exposure):
    family = "binomial" if kind == "binomial" else "poisson"
    data = os.path.join(tmp, case + ".csv")
    write_csv(data, simulate(np.random.default_rng(20261205), 3000, kind))
    paths = []
    for name, terms in models:
        paths.append(os.path.join(tmp, name + ".model"))
        model_file(paths[-1], family, terms, factors, exposure, kind == "quasipoisson")
    out = os.path.join(tmp, case + ".json")
    cmd = [MILLRACE, "compare", "--quiet", "--tolerance", "1e-14", "--json", out, "--drop-one", models[-1][0]]
    for p in paths:
        cmd += ["-m", p]
    proc = subprocess.run(cmd + [data], capture_output=True, text=True)
    if proc.returncode != 0:
        report(case, False, "millrace compare: " + proc.stderr.strip())
        return
    ours = json.load(open(out))
    spec = os.path.join(tmp, case + ".spec")
    with open(spec, "w") as fh:
        fh.write("name terms\n")
        for name, terms in models:
            fh.write("%s %s\n" % (name, ",".join(terms)))
    rprog = os.path.join(tmp, "nested.R")
    with open(rprog, "w") as fh:
        fh.write(R_PROGRAM)
    rout = os.path.join(tmp, case + ".r.txt")
    r = subprocess.run([RSCRIPT, "--vanilla", rprog, data, spec, kind, ",".join(factors),
                        "py" if exposure else "-", rout], capture_output=True, text=True)
    if r.returncode != 0:
        report(case, False, "Rscript: " + r.stderr.strip()[-400:])
        return
    compare_lines(case, ours, [line.split() for line in open(rout)])


def num(s):
    return math.nan if s == "NA" else float(s)


def term_label(t):
    return " & ".join(t.split(":"))


def compare_lines(case, ours, lines):
    models = {m["name"]: m for m in ours["models"]}
    nested = {(t["smaller"], t["larger"]): t for t in ours["nested"]}
    drops = {t["without"]: t for t in ours["drop_one"]}
    for w in lines:
        if w[0] == "model":
            m = models[w[1]]
            dev, df, aic, bic = map(num, w[2:6])
            ok = close(m["deviance"], dev) and m["residual_df"] == df
            if math.isfinite(aic):
                ok = ok and close(m["aic"], aic) and close(m["bic"], bic)
            else:  # a quasi family has no likelihood
                ok = ok and m["aic"] is None and m["bic"] is None
            report("%s model %s: deviance, residual df, AIC, BIC (R glm)" % (case, w[1]), ok,
                   "%s vs R %s" % ([m["deviance"], m["residual_df"], m["aic"], m["bic"]], w[2:]))
        elif w[0] == "chisq":
            t = nested.get((w[1], w[2]))
            df, dev, p = map(num, w[3:6])
            big = models[w[2]]["deviance"]
            ok = t is not None and t["df"] == df and close(t["deviance_change"], dev, big)
            if ok:
                ok = close_p(t["chi_square_p"], p)
            report("%s %s < %s: LR chi-square (R anova.glm, test Chisq)" % (case, w[1], w[2]), ok,
                   "%s vs R df %s deviance %s p %s" % (t, df, dev, p))
        elif w[0] == "F":
            t = nested.get((w[1], w[2]))
            f, p = map(num, w[3:5])
            ok = t is not None and close(t["f"], f, 1.0, 1e-7) and close_p(t["f_p"], p)
            report("%s %s < %s: F (R anova.glm, test F)" % (case, w[1], w[2]), ok,
                   "%s vs R F %s p %s" % (t, f, p))
        elif w[0] == "drop":
            t = drops.get(term_label(w[1]))
            df, dev, aic, lrt, p = map(num, w[2:7])
            ok = (t is not None and t["df"] == df and close(t["deviance"], dev) and close(t["aic"], aic)
                  and close(t["chi_square"], lrt, dev) and close_p(t["chi_square_p"], p))
            report("%s drop-one %s (R drop1, test Chisq)" % (case, w[1]), ok, "%s vs R %s" % (t, w[2:]))
        elif w[0] == "dropF":
            t = drops.get(term_label(w[1]))
            df, dev, f, p = map(num, w[2:6])
            ok = (t is not None and t["df"] == df and close(t["deviance"], dev)
                  and close(t["f"], f, 1.0, 1e-7) and close_p(t["f_p"], p))
            report("%s drop-one %s (R anova.glm of the reduced model, test F)" % (case, w[1]), ok,
                   "%s vs R %s" % (t, w[2:]))
    # Nothing left out on either side: every drop-one test has R's.
    named = {term_label(w[1]) for w in lines if w[0] in ("drop", "dropF")}
    report("%s drop-one terms are drop1's (marginality)" % case, named == set(drops),
           "%s vs R %s" % (sorted(drops), sorted(named)))


def main():
    if not os.path.exists(RSCRIPT):
        print("skipped: no %s (the oracle of these tests)" % RSCRIPT)
        print("0 passed, 0 failed")
        return 0
    tmp = tempfile.mkdtemp(prefix="millrace-nested-")
    try:
        run_case("poisson-rate", tmp, "poisson",
                 [("bands", ["band"]), ("regions", ["band", "region"]), ("full", ["band", "region", "x"])],
                 ["band", "region"], True)
        run_case("logistic", tmp, "binomial",
                 [("main", ["band", "region"]), ("slope", ["band", "region", "x"]),
                  ("inter", ["band", "region", "x", "band:region"])],
                 ["band", "region"], False)
        run_case("quasi-poisson", tmp, "quasipoisson",
                 [("bands", ["band"]), ("regions", ["band", "region"]), ("full", ["band", "region", "x"])],
                 ["band", "region"], True)
    finally:
        shutil.rmtree(tmp)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
