#!/usr/bin/python3
"""Fits at default settings (no --tolerance, no --max-passes) against R
driven to its fixed point.

Every family/link case of compare_reference.py and families.py is fitted
by build/millrace as a user would fit it, and by
  reference: R glm.fit (Debian r-base-core), control epsilon = 1e-15 and
             maxit 10000, then single iterations from its estimates until
             they stop changing (its fixed point); the negative binomial
             with MASS::negative.binomial(theta) (Debian r-cran-mass), the
             Tweedie with statmod::tweedie(var.power = p, link.power = 0)
             (Debian r-cran-statmod).
Each estimate must be within 1e-8 of R's standard errors of R's, and each
standard error within 1e-8 relative of R's: the default stopping rule
(README, `--tolerance`) promises that whatever the rows.  The largest
deviations are printed.  Skipped, saying so, without /usr/bin/Rscript.
Prints "ok <case>" / "FAIL <case>: ..." and the closing count.
"""
import json
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import compare_reference as cr  # noqa: E402
import families as fam  # noqa: E402

BOUND = 1e-8  # estimates in R's standard errors; standard errors relative

R_PROGRAM = r"""
# reference: R glm.fit at its fixed point (Debian r-base-core; MASS, statmod)
a <- commandArgs(TRUE)
d <- a[1]; n <- as.integer(a[2]); p <- as.integer(a[3]); family <- eval(parse(text = a[4]))
two_col <- a[5] == "1"; intercept <- a[6] == "1"; estdisp <- a[7] == "1"
rd <- function(f, k) readBin(file.path(d, f), "double", n = k, size = 8, endian = "little")
X <- matrix(rd("X.bin", n * p), n, p)
y <- if (two_col) matrix(rd("y.bin", 2 * n), n, 2) else rd("y.bin", n)
w <- rd("w.bin", n); off <- rd("off.bin", n)
f <- glm.fit(x = X, y = y, weights = w, offset = off, family = family, intercept = intercept,
             control = glm.control(epsilon = 1e-15, maxit = 10000))
if (!f$converged) stop("glm.fit did not converge")
# one iteration at a time from the estimates until they repeat: the QR (so
# the standard errors) is then that of the fixed point too
for (i in 1:200) {
  prev <- f$coefficients
  f <- suppressWarnings(glm.fit(x = X, y = y, weights = w, offset = off, family = family, start = prev,
                                intercept = intercept, control = glm.control(maxit = 1)))
  if (i > 2 && max(abs(f$coefficients - prev) / pmax(abs(prev), 1e-300)) < 1e-15) break
}
mu <- f$fitted.values
pearson <- sum(f$prior.weights * (f$y - mu)^2 / family$variance(mu))
disp <- if (estdisp) pearson / f$df.residual else 1
r <- f$rank
cov <- matrix(NA_real_, p, p)
cov[f$qr$pivot[1:r], f$qr$pivot[1:r]] <- chol2inv(f$qr$qr[1:r, 1:r, drop = FALSE]) * disp
cat(sprintf("coef %.17g %.17g\n", f$coefficients, sqrt(diag(cov))), sep = "", file = file.path(d, "r_out.txt"))
"""

R_LINKS = {"inverse-squared": "1/mu^2"}


def r_family(case):
    """The R family expression of a case's family and link."""
    words = case.family.split()
    link = R_LINKS.get(case.link, case.link)
    if words[0] == "negative-binomial":
        return "MASS::negative.binomial(%s, link = \"%s\")" % (words[1].split("=")[1], link)
    if words[0] == "tweedie":
        return "statmod::tweedie(var.power = %s, link.power = 0)" % words[1].split("=")[1]
    name = {"gamma": "Gamma", "inverse-gaussian": "inverse.gaussian"}.get(words[0], words[0])
    return "%s(link = \"%s\")" % (name, link)


def estimated_dispersion(case):
    if case.dispersion:
        return case.dispersion == "estimate"
    return case.family.split()[0] in ("gaussian", "gamma", "inverse-gaussian", "tweedie")


def fit_r(case, X, y, w, off, trials, tmp):
    rdir = tempfile.mkdtemp(dir=tmp)
    n, p = X.shape
    yy = np.column_stack([y, trials - y]) if trials is not None else y
    for name, arr in (("X.bin", X.T), ("y.bin", np.asarray(yy).T), ("w.bin", w), ("off.bin", off)):
        np.asarray(arr, dtype="<f8").tofile(os.path.join(rdir, name))
    prog = os.path.join(tmp, "fixed_point.R")
    with open(prog, "w") as fh:
        fh.write(R_PROGRAM)
    return cr.run_r([cr.RSCRIPT, "--vanilla", prog, rdir, str(n), str(p), r_family(case),
                     "1" if trials is not None else "0", "1" if case.intercept else "0",
                     "1" if estimated_dispersion(case) else "0"], rdir)


def millrace_default(case, tmp):
    """The case fitted as a user would: no tolerance, no pass limit given."""
    path = os.path.join(tmp, case.name + (".tsv" if case.layout == "tsv" else ".csv"))
    cr.write_table(case, path)
    if case.layout == "zst":
        subprocess.run(["zstd", "-q", "-f", "--rm", path, "-o", path + ".zst"], check=True)
        path += ".zst"
    out = os.path.join(tmp, "default.json")
    proc = subprocess.run([cr.MILLRACE, "fit", "--json", out, "--quiet"] + case.cli_options() + [path],
                          capture_output=True, text=True, timeout=120)
    if proc.returncode != 0:
        raise RuntimeError("exit %d: %s" % (proc.returncode, proc.stderr.strip()))
    with open(out) as fh:
        return json.load(fh)


WORST = {"estimate": (0.0, ""), "se": (0.0, "")}


def check(case, tmp):
    js = millrace_default(case, tmp)
    names = [c["name"] for c in js["coefficients"]]
    coefs = {c["name"]: c for c in js["coefficients"]}
    _, X, y, w, off, trials = cr.reference_inputs(case, names)
    ref = fit_r(case, X, y, w, off, trials, tmp)
    problems = [] if js["convergence"]["converged"] else ["not converged"]
    for j, nm in enumerate(names):
        est, se = coefs[nm]["estimate"], coefs[nm]["standard_error"]
        if est is None:
            continue
        d_est = abs(est - ref["coef"][j]) / ref["se"][j]
        d_se = abs(se - ref["se"][j]) / ref["se"][j]
        for key, d in (("estimate", d_est), ("se", d_se)):
            if d > WORST[key][0]:
                WORST[key] = (d, "%s %s" % (case.name, nm))
        if d_est > BOUND:
            problems.append("%s estimate %r vs R %r: %.2g of R's SE" % (nm, est, ref["coef"][j], d_est))
        if d_se > BOUND:
            problems.append("%s SE %r vs R %r: %.2g relative" % (nm, se, ref["se"][j], d_se))
    return problems


def r_has_statmod():
    proc = subprocess.run([cr.RSCRIPT, "--vanilla", "-e", "library(statmod)"], capture_output=True, timeout=60)
    return proc.returncode == 0


def main():
    cr.MILLRACE = os.environ.get("MILLRACE", cr.MILLRACE)  # another build, to compare
    if not os.access(cr.MILLRACE, os.X_OK):
        print("FAIL setup: %s not found (run make first)" % cr.MILLRACE)
        print("0 passed, 1 failed")
        return 1
    if not os.path.exists(cr.RSCRIPT) or not fam.r_has_mass():
        print("skipped: R with MASS not found (%s)" % cr.RSCRIPT)
        print("0 passed, 0 failed")
        return 0
    tmp = tempfile.mkdtemp(prefix="millrace-ref-default-")
    try:
        # the same data as the two scripts (their seeds, their order)
        cases = cr.build_cases(np.random.default_rng(20240517))
        rng = np.random.default_rng(20261204)
        cases += [c for c, _, _ in fam.nb_cases(rng)]
        tweedie = [c for c, _, _ in fam.tweedie_cases(rng)]
        if r_has_statmod():
            cases += tweedie
        else:
            print("note: R's statmod not found: the Tweedie cases are left out")
        status = cr.run_checks([(c.name, (lambda c=c: check(c, tmp))) for c in cases])
        for key, (d, where) in WORST.items():
            print("largest %s deviation from R: %.3g (%s)" % (key, d, where))
        return status
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
