#!/usr/bin/python3
"""Checks millrace's robust (sandwich) standard errors (--robust, --cluster;
the JSON's "robust" object) against R's sandwich package.

Oracles, named beside each check:
  reference: R glm (Debian r-base-core) and sandwich (Debian
             r-cran-sandwich): vcovHC(fit, type="HC0"), vcovHC(fit,
             type="HC1"), vcovCL(fit, cluster=~g) (its default for a glm:
             type HC0 with the factor G/(G-1)) and vcovCL(fit, cluster=~g,
             type="HC1") (G/(G-1) x (n-1)/(n-k)); every entry of the
             covariance to 1e-8 of the diagonal's scale;
  analytic identity: the robust standard error is the square root of the
             robust covariance's diagonal, and the coefficient's statistic
             is estimate / robust standard error;
  own bits: the same file grouped by the cluster column (streamed) and
             shuffled (the table of clusters) give the same covariance to
             1e-10; --threads 1 and 2 and --buffer-size 1000 give the same
             bits; past --cluster-memory a shuffled file fails with exit
             status 13 and a message saying to group (sort) the file, while
             the grouped one fits.
Cases (data invented, numpy's seeded generator): a poisson fit with an
exposure and clustered, overdispersed counts; a logistic fit with clustered
rows (both 40000 rows: clusters straddle the 16384-row blocks); the
samples/falls fit (its rows collapse into patterns: the meat pass then reads
the file).  Skipped, saying so, without Rscript or sandwich.

Prints "ok <case>" or "FAIL <case>: <details>" and "N passed, M failed";
exits 1 if anything failed.
"""
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
TOL = 1e-8
OWN_TOL = 1e-10

passed = failed = 0


def check(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print("ok", name)
    else:
        failed += 1
        print("FAIL %s: %s" % (name, detail))


def write_csv(path, cols, order):
    names = list(cols)
    with open(path, "w") as fh:
        fh.write(",".join(names) + "\n")
        for i in order:
            fh.write(",".join(str(cols[c][i]) for c in names) + "\n")


def make_data(rng, kind, n=40000):
    """Clusters of 1 to 12 rows, in order (grouped); a cluster effect makes
    rows of one cluster alike (and counts overdispersed)."""
    sizes = []
    while sum(sizes) < n:
        sizes.append(int(rng.integers(1, 13)))
    sizes[-1] -= sum(sizes) - n
    g = np.repeat(np.arange(len(sizes)), sizes)
    u = rng.normal(0, 0.5, len(sizes))[g]
    a = rng.integers(1, 5, n)
    x = np.round(rng.normal(0, 1, n), 3)
    eta = -0.5 + 0.3 * (a == 2) - 0.2 * (a == 3) + 0.5 * (a == 4) + 0.4 * x + u
    cols = {"g": ["c%d" % v for v in g], "a": ["a%d" % v for v in a], "x": x,
            "pair": ["p%d" % (i // 2) for i in range(n)]}
    if kind == "poisson":
        t = np.round(rng.uniform(0.5, 3.0, n), 2)
        cols["t"] = t
        cols["y"] = rng.poisson(t * np.exp(eta - 1.0))
    else:
        cols["y"] = (rng.uniform(0, 1, n) < 1 / (1 + np.exp(-eta))).astype(int)
    return cols


MODELS = {
    "poisson": ("outcome y\nfamily poisson\nlink log\nexposure t\nfactor a\nnumeric x\n",
                "glm(y ~ a + x + offset(log(t)), family=poisson, data=d)"),
    "logistic": ("outcome y\nfamily binomial\nlink logit\nfactor a\nnumeric x\n",
                 "glm(y ~ a + x, family=binomial, data=d)"),
}

# millrace options and the sandwich call that is their oracle
TYPES = [
    (["--robust", "hc0"], 'vcovHC(m, type="HC0")'),
    (["--robust", "hc1"], 'vcovHC(m, type="HC1")'),
    (["--cluster", "g"], "vcovCL(m, cluster=~g)"),
    (["--cluster", "g", "--robust", "hc1"], 'vcovCL(m, cluster=~g, type="HC1")'),
]


def r_covariances(data, formula, calls, factors):
    """Each sandwich call's covariance, from R (the oracle)."""
    lines = ["suppressMessages(library(sandwich))",
             "d <- read.csv('%s', stringsAsFactors=FALSE)" % data]
    for col, ref in factors:
        lines.append("d$%s <- relevel(factor(d$%s), ref='%s')" % (col, col, ref))
    # converged far past glm's default (epsilon 1e-8), as millrace is run
    lines.append("m <- " + formula.replace("data=d)", "data=d, control=glm.control(epsilon=1e-15, maxit=100))"))
    for call in calls:
        lines.append("v <- %s; cat(format(c(v), digits=17), '\\n')" % call)
    proc = subprocess.run([RSCRIPT, "-e", "\n".join(lines)], capture_output=True, text=True)
    if proc.returncode != 0:
        raise RuntimeError(proc.stderr[-500:])
    out = []
    for line in proc.stdout.strip().splitlines():
        v = np.array([float(s) for s in line.split()])
        k = int(round(len(v) ** 0.5))
        out.append(v.reshape(k, k))
    return out


def fit(model, data, opts, tmp, tag):
    path = os.path.join(tmp, tag + ".json")
    proc = subprocess.run([MILLRACE, "fit", "-m", model, "--tolerance", "1e-13", "--json", path] + opts + [data],
                          capture_output=True, text=True)
    if proc.returncode != 0:
        raise RuntimeError("%s: exit %d: %s" % (tag, proc.returncode, proc.stderr.strip()))
    with open(path) as fh:
        text = fh.read()
    return json.loads(text), text


def robust_matrix(j):
    return np.array([[np.nan if v is None else v for v in row] for row in j["robust"]["covariance"]])


def close(ours, ref, tol):
    scale = np.sqrt(np.outer(np.diag(ref), np.diag(ref)))
    err = np.max(np.abs(ours - ref) / scale)
    return err <= tol, "max error %.3g of the diagonal's scale" % err


def check_case(kind, tmp, rng):
    cols = make_data(rng, kind)
    n = len(cols["y"])
    grouped = os.path.join(tmp, kind + ".csv")
    shuffled = os.path.join(tmp, kind + "_shuffled.csv")
    write_csv(grouped, cols, range(n))
    write_csv(shuffled, cols, rng.permutation(n))
    model = os.path.join(tmp, kind + ".model")
    with open(model, "w") as fh:
        fh.write(MODELS[kind][0])
    refs = r_covariances(grouped, MODELS[kind][1], [c for _, c in TYPES], [("a", "a1")])
    for (opts, call), ref in zip(TYPES, refs):
        j, _ = fit(model, grouped, opts, tmp, kind)
        ours = robust_matrix(j)
        ok, why = close(ours, ref, TOL)
        check("%s %s vs R sandwich %s" % (kind, " ".join(opts), call), ok, why)
        se = np.array(j["robust"]["standard_errors"])
        stat = np.array([c["statistic"] for c in j["coefficients"]])
        est = np.array([c["estimate"] for c in j["coefficients"]])
        check("%s %s: se = sqrt(diag), statistic = estimate / se (identity)" % (kind, " ".join(opts)),
              np.allclose(se, np.sqrt(np.diag(ours)), rtol=1e-15, atol=0) and
              np.allclose(stat, est / se, rtol=1e-12, atol=0))
    j1, _ = fit(model, grouped, ["--cluster", "g"], tmp, kind + "_g")
    j2, _ = fit(model, shuffled, ["--cluster", "g"], tmp, kind + "_s")
    ok, why = close(robust_matrix(j2), robust_matrix(j1), OWN_TOL)
    check("%s: grouped (streamed) and shuffled (table) files agree" % kind,
          ok and j1["robust"]["clusters"] == j2["robust"]["clusters"], why)
    base = json.dumps(j1["robust"])
    for extra in (["--threads", "1"], ["--threads", "2"], ["--threads", "2", "--buffer-size", "1000"]):
        j3, _ = fit(model, grouped, ["--cluster", "g"] + extra, tmp, kind + "_t")
        check("%s %s: the same bits" % (kind, " ".join(extra)), json.dumps(j3["robust"]) == base)
    j4, _ = fit(model, shuffled, ["--cluster", "g", "--threads", "1"], tmp, kind + "_s1")
    check("%s shuffled --threads 1 vs 2: the same bits" % kind, json.dumps(j4["robust"]) == json.dumps(j2["robust"]))
    check_limit(kind, model, grouped, shuffled, tmp)


def check_limit(kind, model, grouped, shuffled, tmp):
    """20000 clusters of two rows and 5 coefficients: shuffled, their table
    takes more than 1 MiB (56 bytes a cluster and the index); grouped,
    the set of clusters seen a quarter of it."""
    opts = ["--cluster", "pair", "--cluster-memory", "1"]
    proc = subprocess.run([MILLRACE, "fit", "-m", model] + opts + [shuffled], capture_output=True, text=True)
    check("%s: shuffled past --cluster-memory exits 13 saying to group the file" % kind,
          proc.returncode == 13 and "group the file by the cluster column" in proc.stderr,
          "exit %d: %s" % (proc.returncode, proc.stderr.strip()))
    proc = subprocess.run([MILLRACE, "fit", "-m", model] + opts + [grouped], capture_output=True, text=True)
    check("%s: grouped within --cluster-memory fits" % kind, proc.returncode == 0, proc.stderr.strip())


def check_falls(tmp):
    """samples/falls: its rows collapse into patterns, so the meat pass
    reads the file again; the coefficients align by position (checked on
    the estimates first)."""
    model = os.path.join(ROOT, "samples", "falls.model")
    data = os.path.join(ROOT, "samples", "falls.csv")
    formula = ("glm(admissions ~ age_band + sex + region + year + age_band:sex + offset(log(person_years)), "
               "family=poisson, data=d)")
    refs = r_covariances(data, formula, ['vcovHC(m, type="HC1")', "vcovCL(m, cluster=~region)"],
                         [("age_band", "40-44"), ("sex", "F")])
    for opts, ref in ((["--robust", "hc1"], refs[0]), (["--cluster", "region"], refs[1])):
        j, _ = fit(model, data, opts, tmp, "falls")
        ours = robust_matrix(j)
        ok, why = close(ours, ref, TOL)
        check("falls (collapsed) %s vs R sandwich" % " ".join(opts), ok, why)


def main():
    if not os.path.exists(RSCRIPT) or subprocess.run(
            [RSCRIPT, "-e", "library(sandwich)"], capture_output=True).returncode != 0:
        print("skipped: no Rscript with the sandwich package (Debian r-cran-sandwich)")
        return 0
    tmp = tempfile.mkdtemp(prefix="millrace-robust-")
    try:
        rng = np.random.default_rng(20261205)
        for kind in ("poisson", "logistic"):
            check_case(kind, tmp, rng)
        check_falls(tmp)
    finally:
        shutil.rmtree(tmp)
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
