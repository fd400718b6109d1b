#!/usr/bin/python3
"""`millrace score` on the samples against statsmodels and identities.

Oracles:
  - statsmodels GLM (Debian python3-statsmodels): a GLMResults made from the
    saved fit's own coefficients and covariance, on a design built with
    numpy from the fit's coefficient names; get_prediction gives the mean,
    its interval and (its linpred) eta and its standard error, and
    resid_response / resid_pearson / resid_deviance the residuals.  Same
    coefficients on both sides, so they must agree to 1e-10 relative
    (residuals near 0 relative to the size of what they difference).
    The falls sample (poisson log link, exposure, interaction) and the
    screening sample (binomial logit, numerics, missing cells left empty).
  - analytic identity: for a poisson log-link model with an intercept the
    score equation of the intercept is sum(y - mu) = 0 at the maximum, so
    the sum of the fitted means over the fitting data equals the sum of the
    outcomes (to 1e-9 relative: the fit's convergence tolerance is far
    tighter in deviance than this).
  - observed/expected by group (--by): for each level of a factor of such
    a model, the score equation of its indicator gives sum(y - mu) = 0 over
    the level's rows, so O = E per region (1e-9 relative); the Garwood
    interval against scipy.stats.chi2.ppf (1e-9 relative), with the
    one-sided upper bound where O = 0; rows and exposure against sums taken
    here.
  - determinism: 1 and 3 threads, plain and zstd input, give the same bytes;
    a .zst output decompresses (zstd -dc) to the plain output's bytes.

Prints "ok <case>" / "FAIL <case>: ..." and exits 1 on any failure.
"""
import csv
import json
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm
from scipy.stats import chi2
from statsmodels.genmod.generalized_linear_model import GLMResults

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.path.join(ROOT, "build", "millrace")
failures = 0


def check(name, ok, detail=""):
    global failures
    print(("ok " if ok else "FAIL ") + name + ("" if ok else ": " + detail))
    failures += 0 if ok else 1


def run(*args):
    subprocess.run([BIN, *args], check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)


def design(names, rows):
    """The design matrix from coefficient names: 'intercept', 'col',
    'col=level', parts joined by ' & '."""
    X = np.ones((len(rows), len(names)))
    for j, name in enumerate(names):
        if name == "intercept":
            continue
        for part in name.split(" & "):
            if "=" in part:
                col, level = part.split("=", 1)
                X[:, j] *= np.array([r[col] == level for r in rows], dtype=float)
            else:
                X[:, j] *= np.array([float(r[part]) for r in rows])
    return X


def rel_close(a, b, tol, floor):
    """Relative to |b|, or to `floor` where |b| is smaller: a residual near 0
    is a difference of near-equal numbers, good only to eps times their size."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    err = np.abs(a - b) / np.maximum(np.abs(b), floor)
    return bool(np.all(err <= tol)), float(np.max(err))


def garwood(o, e, level):
    a = 1 - level
    low = chi2.ppf(a / 2, 2 * o) / 2 / e if o > 0 else 0.0
    high = (chi2.ppf(1 - a / 2, 2 * (o + 1)) if o > 0 else chi2.ppf(1 - a, 2)) / 2 / e
    return low, high


def check_groups(fit, plain, rows, tmp):
    table = os.path.join(tmp, "groups.json")
    run("score", "--fit", fit, "--out", os.path.join(tmp, "g.csv"), "--by", "region", "--by-out", table,
        "--quiet", plain)
    groups = json.load(open(table))["groups"]
    want_rows = {}
    for r in rows:
        g = want_rows.setdefault(r["region"], [0, 0.0])
        g[0] += 1
        g[1] += float(r["person_years"])
    ok = all(g["rows"] == want_rows[g["key"]["region"]][0] and
             abs(g["exposure"] - want_rows[g["key"]["region"]][1]) <= 1e-12 * g["exposure"] for g in groups)
    check("groups: rows and exposure", ok and len(groups) == len(want_rows))
    worst = max(abs(g["observed"] - g["expected"]) / g["observed"] for g in groups)
    check("groups by a factor of the model: O = E (score equations)", worst <= 1e-9, f"worst {worst:.3g}")
    worst = 0.0
    for g in groups:
        low, high = garwood(g["observed"], g["expected"], 0.95)
        worst = max(worst, abs(g["o_e_low"] - low) / low, abs(g["o_e_high"] - high) / high)
    check("groups: Garwood interval against scipy chi2.ppf", worst <= 1e-9, f"worst {worst:.3g}")
    # O = 0 and small O: rows of one region with the outcome set to 0 or 1.
    small = os.path.join(tmp, "small.csv")
    with open(small, "w") as f:
        f.write("age_band,sex,region,year,person_years,admissions\n")
        f.write("00-04,F,Eastmoor,2015,1000,0\n00-04,F,Highcairn,2015,1000,1\n00-04,M,Highcairn,2016,900,2\n")
    run("score", "--fit", fit, "--out", os.path.join(tmp, "s.csv"), "--by", "region", "--level", "0.9",
        "--by-out", table, "--quiet", small)
    worst = 0.0
    for g in json.load(open(table))["groups"]:
        low, high = garwood(g["observed"], g["expected"], 0.9)
        worst = max(worst, abs(g["o_e_low"] - low) / max(low, 1e-300), abs(g["o_e_high"] - high) / high)
    check("groups: O = 0 (one-sided upper bound) and O = 1, 2 at level 0.9", worst <= 1e-9, f"worst {worst:.3g}")


def check_screening(tmp):
    """The logistic sample: a binomial logit fit with numerics and factors,
    scored with --unseen blank (rows with a missing bmi are left empty),
    against statsmodels on the rows with predictions."""
    fit = os.path.join(tmp, "screening.json")
    data = os.path.join(ROOT, "samples/screening.csv")
    out = os.path.join(tmp, "screening-scored.csv")
    run("fit", "-m", os.path.join(ROOT, "samples/screening.model"), "--quiet", "--json", fit, data)
    run("score", "--fit", fit, "--out", out, "--unseen", "blank", "--keep", "id", "--quiet", data)
    f = json.load(open(fit))
    names = [c["name"] for c in f["coefficients"]]
    beta = np.array([c["estimate"] for c in f["coefficients"]])
    cov = np.array(f["covariance"], float)
    rows = [r for r in csv.DictReader(open(data)) if r["bmi"] not in ("", "NA")]
    got = [r for r in csv.DictReader(open(out)) if r["eta"] != ""]
    check("screening: the rows with predictions are the complete rows",
          [r["id"] for r in got] == [r["id"] for r in rows])
    X = design(names, rows)
    y = np.array([float(r["attended"]) for r in rows])
    res = GLMResults(sm.GLM(y, X, family=sm.families.Binomial()), beta, cov, 1.0)
    pred = res.get_prediction(X)
    mu, ci = pred.predicted_mean, pred.conf_int(alpha=0.05)
    col = lambda k: np.array([float(r[k]) for r in got])
    worst = 0.0
    for key, ref, floor in [("eta", pred.linpred.predicted_mean, 1e-300), ("se_eta", pred.linpred.se_mean, 1e-300),
                            ("mean", mu, 1e-300), ("mean_low", ci[:, 0], 1e-300), ("mean_high", ci[:, 1], 1e-300),
                            ("resid_response", res.resid_response, 1.0), ("resid_pearson", res.resid_pearson, 1.0),
                            ("resid_deviance", res.resid_deviance, 1.0)]:
        worst = max(worst, rel_close(col(key), ref, 1e-10, floor)[1])
    check("screening (binomial logit): every column against statsmodels to 1e-10", worst <= 1e-10, f"worst {worst:.3g}")


def main():
    tmp = tempfile.mkdtemp(prefix="millrace-score-")
    fit = os.path.join(tmp, "falls.json")
    plain = os.path.join(tmp, "falls.csv")
    run("fit", "-m", os.path.join(ROOT, "samples/falls.model"), "--quiet", "--tolerance", "1e-13",
        "--json", fit, os.path.join(ROOT, "samples/falls.csv.zst"))
    subprocess.run(["zstd", "-q", "-d", "-f", "-o", plain, os.path.join(ROOT, "samples/falls.csv.zst")], check=True)
    outs = {}
    for label, data, threads, out in [("zst-1", "samples/falls.csv.zst", "1", "a.csv"),
                                      ("zst-3", "samples/falls.csv.zst", "3", "b.csv"),
                                      ("plain-3", plain, "3", "c.csv"),
                                      ("zst-out", "samples/falls.csv.zst", "2", "d.csv.zst")]:
        path = os.path.join(tmp, out)
        run("score", "--fit", fit, "--out", path, "--threads", threads, "--quiet",
            os.path.join(ROOT, data) if not os.path.isabs(data) else data)
        outs[label] = open(path, "rb").read() if not path.endswith(".zst") else subprocess.run(
            ["zstd", "-dc", path], check=True, stdout=subprocess.PIPE).stdout
    check("1 and 3 threads give the same bytes", outs["zst-1"] == outs["zst-3"])
    check("plain and zstd input give the same bytes", outs["zst-1"] == outs["plain-3"])
    check(".zst output decompresses to the plain output", outs["zst-1"] == outs["zst-out"])

    f = json.load(open(fit))
    names = [c["name"] for c in f["coefficients"]]
    beta = np.array([c["estimate"] for c in f["coefficients"]])
    cov = np.array(f["covariance"]["matrix"] if isinstance(f["covariance"], dict) else f["covariance"], float)
    rows = list(csv.DictReader(open(plain)))
    X = design(names, rows)
    y = np.array([float(r["admissions"]) for r in rows])
    py = np.array([float(r["person_years"]) for r in rows])
    model = sm.GLM(y, X, family=sm.families.Poisson(), exposure=py)
    res = GLMResults(model, beta, cov, 1.0)
    mean = res.get_prediction(X, exposure=py)
    lin = mean.linpred  # the linear predictor's prediction (statsmodels 0.13)
    ci = mean.conf_int(alpha=0.05)
    got = list(csv.DictReader(outs["zst-1"].decode().splitlines()))
    col = lambda k: np.array([float(r[k]) for r in got])
    mu = mean.predicted_mean
    # residuals: relative to their size, or to that of the mean (response)
    # or of sqrt(mean) (pearson, deviance) where they are smaller
    for key, ref, floor in [("eta", lin.predicted_mean, 1e-300), ("se_eta", lin.se_mean, 1e-300),
                            ("mean", mu, 1e-300), ("mean_low", ci[:, 0], 1e-300), ("mean_high", ci[:, 1], 1e-300),
                            ("resid_response", res.resid_response, mu),
                            ("resid_pearson", res.resid_pearson, np.sqrt(mu)),
                            ("resid_deviance", res.resid_deviance, np.sqrt(mu))]:
        ok, worst = rel_close(col(key), ref, 1e-10, floor)
        check(f"{key} against statsmodels to 1e-10 relative", ok, f"worst {worst:.3g}")
    s_mu, s_y = col("mean").sum(), y.sum()
    check("sum of fitted means = sum of outcomes (poisson log link, intercept)",
          abs(s_mu - s_y) <= 1e-9 * s_y, f"{s_mu!r} vs {s_y!r}")
    check_groups(fit, plain, rows, tmp)
    check_screening(tmp)
    shutil.rmtree(tmp)
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
