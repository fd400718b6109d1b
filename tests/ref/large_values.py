#!/usr/bin/python3
"""Numeric columns far from zero or with one huge cell, against statsmodels.

The first pass measures each numeric's spread for internal centring.  As
the mean of squares minus the squared mean it cancelled for x = 1e12 + k
(k small), giving a zero spread, and overflowed for a cell of 1e200: the
column was left raw and reported aliased.

Oracle: statsmodels GLM (Debian python3-statsmodels), on a design built with
numpy, plus two analytic identities that let it work on well-scaled numbers:
  - shifting a column by a constant c changes only the intercept:
    b0 = b0' - c * b_x, the slope and the other coefficients are unchanged
    (1e10, 1e12 and the shifted values are exact in binary, so X - c is
    exactly what statsmodels sees);
  - dividing a column by a constant s multiplies its coefficient and its
    standard error by s (1/1e200 is not exact: 1e-16 relative).
Coefficients and standard errors (except the shifted intercept's, whose
mapped-back reference would itself cancel) must agree within 1e-8
relative, the bound of tests/ref/compare_reference.py, at that file's
tolerance (1e-14) and with its polished statsmodels fit.  The files have
40000 rows, three blocks of 16384, so that blocks' spreads are merged;
each is fitted with 1 and 3 threads and tiny reads, which must give the
same bits.

Prints "ok <case>" / "FAIL <case>: ..." and "N passed, M failed".
"""
import json
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from compare_reference import run_checks  # noqa: E402

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.environ.get("MILLRACE", os.path.join(ROOT, "build", "millrace"))
REL_TOL = 1e-8
ROWS = 40000


def write_csv(path, y, x, z):
    with open(path, "w") as f:
        f.write("y,x,z\n")
        f.writelines("%r,%r,%r\n" % (float(a), float(b), float(c)) for a, b, c in zip(y, x, z))


def millrace(path, family, *options):
    out = path + ".%d.json" % abs(hash(options))
    cmd = [MILLRACE, "fit", "--quiet", "--json", out, "--tolerance", "1e-14", "--max-passes", "200",
           "--outcome", "y", "--family", family,
           "--numeric", "x", "--numeric", "z"] + list(options) + [path]
    proc = subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    if proc.returncode != 0:
        raise RuntimeError("exit %d: %s" % (proc.returncode, proc.stderr.strip()))
    return json.load(open(out))


def reference(y, X, family):
    fam = sm.families.Poisson() if family == "poisson" else sm.families.Gaussian()
    model = sm.GLM(y, X, family=fam)
    # polished as in compare_reference.py: the covariance at the estimates
    res = model.fit(tol=1e-14, maxiter=200)
    res = model.fit(start_params=res.params, tol_criterion="params", atol=0.0, rtol=1e-15, maxiter=100)
    return np.array(res.params), np.array(res.bse)


def rel(a, b):
    return abs(a - b) / max(abs(b), 1e-300)


def compare(js, beta, se, se_skip=()):
    problems = []
    for j, c in enumerate(js["coefficients"]):
        if c["aliased"]:
            problems.append("%s reported aliased" % c["name"])
            continue
        if rel(c["estimate"], beta[j]) > REL_TOL:
            problems.append("%s estimate %.17g, statsmodels %.17g" % (c["name"], c["estimate"], beta[j]))
        if j not in se_skip and rel(c["standard_error"], se[j]) > REL_TOL:
            problems.append("%s std error %.17g, statsmodels %.17g" % (c["name"], c["standard_error"], se[j]))
    return problems


def same_bits(path, family, js):
    """1 thread and 3 threads with 100-byte reads: the same coefficients."""
    other = millrace(path, family, "--threads", "3", "--buffer-size", "100", "--no-cache")
    a = [(c["estimate"], c["standard_error"]) for c in js["coefficients"]]
    b = [(c["estimate"], c["standard_error"]) for c in other["coefficients"]]
    return [] if a == b else ["3 threads, 100-byte reads differ from 1 thread: %r vs %r" % (b, a)]


def shifted_case(tmp, name, family, shift, k, rng, options=()):
    z = np.round(rng.normal(size=ROWS), 4)
    x = shift + k
    if family == "poisson":
        y = rng.poisson(np.exp(0.5 + 0.2 * z + 0.02 * (k - k.mean()) / k.std()))
    else:
        y = np.round(1 + 0.5 * z + 0.3 * (k - k.mean()) / k.std() + rng.normal(size=ROWS), 6)
    path = os.path.join(tmp, name + ".csv")
    write_csv(path, y, x, z)
    js = millrace(path, family, "--threads", "1", *options)
    beta, se = reference(y, np.column_stack([np.ones(ROWS), x - shift, z]), family)
    beta[0] -= shift * beta[1]  # shift identity
    return compare(js, beta, se, se_skip=(0,)) + same_bits(path, family, js)


def huge_cell_case(tmp, rng):
    z = np.round(rng.normal(size=ROWS), 4)
    x = np.round(rng.normal(size=ROWS), 4)
    x[1234] = 1e200
    y = np.round(1 + 0.5 * z + rng.normal(size=ROWS), 6)
    path = os.path.join(tmp, "huge.csv")
    write_csv(path, y, x, z)
    js = millrace(path, "gaussian", "--threads", "1")
    s = 1e200
    beta, se = reference(y, np.column_stack([np.ones(ROWS), x / s, z]), "gaussian")
    beta[1] /= s  # scale identity
    se[1] /= s
    problems = compare(js, beta, se)
    if not any("variance of 'x' is below the range" in w for w in js["warnings"]):
        problems.append("no warning that the covariances of 'x' underflow: %r" % js["warnings"])
    return problems + same_bits(path, "gaussian", js)


def main():
    rng = np.random.default_rng(20261204)
    tmp = tempfile.mkdtemp(prefix="millrace-large-")
    k = np.arange(ROWS, dtype=float)
    checks = [
        ("poisson_x_1e12_plus_k_mod_7", lambda: shifted_case(tmp, "p7", "poisson", 1e12, k % 7, rng)),
        ("poisson_x_1e12_plus_k_mod_7_rows", lambda: shifted_case(tmp, "p7r", "poisson", 1e12, k % 7, rng,
                                                                  ("--no-collapse",))),
        ("poisson_x_1e10_plus_k", lambda: shifted_case(tmp, "pk", "poisson", 1e10, k, rng)),
        ("gaussian_x_1e10_plus_k_mod_50", lambda: shifted_case(tmp, "g50", "gaussian", 1e10, k % 50, rng)),
        ("gaussian_one_cell_1e200", lambda: huge_cell_case(tmp, rng)),
    ]
    rc = run_checks(checks)
    shutil.rmtree(tmp, ignore_errors=True)
    return rc


if __name__ == "__main__":
    sys.exit(main())
