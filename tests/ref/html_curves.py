#!/usr/bin/python3
"""The effect curves of `millrace report --html` against a computation from
the saved fit's own numbers.

An effect curve gives, at points along a numeric or spline column's range,
the fitted value with the factors at their reference levels and the other
numerics at their means (or --at values), and a band: the Wald interval of
the linear predictor x'b +- q sqrt(x'Vx), transformed by the inverse link.
  reference: the design row built here from the JSON's terms, with the
  natural spline basis from R's splines::ns (Debian r-base) at the JSON's
  knots and boundary knots; b and V from the JSON; q and the inverse link
  from scipy.stats (Debian python3-scipy).  The recorded range and mean of
  each numeric column against the CSV itself (numpy).
The numbers are read from each curve's data table (page written with
--digits 17).
"""
import csv
import json
import os
import re
import subprocess
import sys
import tempfile

import numpy as np
from scipy.special import expit
from scipy.stats import norm

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
DATA = os.path.join(ROOT, "samples", "screening.csv")
TOL = 1e-9

passed = failed = 0


def report(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print(f"ok {name}")
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def num(s):
    return float(s.replace("&#8722;", "-"))


def curves(page):
    """{column: array of (x, est, lo, hi)} of the page's effect curves."""
    text = open(page, encoding="utf-8").read()
    out = {}
    for body in re.findall(r'<figure id="curve-[^"]+">(.*?)</figure>', text, re.S):
        col = re.search(r"<thead><tr><th>([^<]*)</th>", body).group(1)
        rows = [[num(v) for v in re.split(r"</td><td>", c)] for c in re.findall(r"<tr><td>(.*?)</td></tr>", body, re.S)]
        out[col] = np.array(rows)
    return out


def ns_basis(x, spline):
    """R's splines::ns at x, the fit's knots and boundary knots."""
    knots = ",".join(repr(k) for k in spline["knots"])
    bound = ",".join(repr(k) for k in spline["boundary_knots"])
    xs = ",".join(repr(v) for v in x)
    code = (f"b <- splines::ns(c({xs}), knots=c({knots}), Boundary.knots=c({bound})); "
            "write.table(format(b, digits=17), quote=FALSE, row.names=FALSE, col.names=FALSE)")
    out = subprocess.run(["Rscript", "-e", code], check=True, capture_output=True, text=True).stdout
    return np.array([[float(v) for v in line.split()] for line in out.strip().split("\n")])


def design_row(fit, var, x, at):
    """The row at var = x: factors at reference, other numerics at `at`."""
    terms = fit["model"]["terms"]
    row = np.zeros(len(fit["coefficients"]))
    if fit["model"]["intercept"]:
        row[0] = 1
    for t in terms:
        first, n = t["first_coefficient"], t["coefficients"]
        if t["kind"] == "factor" or any(c["type"] == "factor" for c in t["columns"]):
            continue  # at the reference level: 0 under treatment coding
        if t["kind"] == "spline":
            col = t["spline"]["column"]
            row[first:first + n] = ns_basis([x if col == var else at[col]], t["spline"])[0]
        else:
            row[first] = np.prod([x if c["name"] == var else at[c["name"]] for c in t["columns"]])
    return row


def check(name, fit_path, page, data_rows):
    fit = json.load(open(fit_path))
    summary = fit["model"]["numeric_summary"]["columns"]
    for col, s in summary.items():
        v = np.array([float(r[col]) for r in data_rows])
        ok = s["min"] == v.min() and s["max"] == v.max() and abs(s["mean"] - v.mean()) < 1e-12 * abs(v.mean()) \
            and abs(s["sd"] - v.std()) < 1e-9 * v.std()
        report(f"{name}: recorded mean, sd, range of {col} are the data's", ok, f"{s} vs {v.min()} {v.max()} {v.mean()} {v.std()}")
    beta = np.array([c["estimate"] for c in fit["coefficients"]])
    cov = np.array(fit["covariance"])
    q = norm.ppf(0.975)
    at = {c: s["mean"] for c, s in summary.items()}
    got = curves(page)
    for col in summary:
        if col not in got:
            report(f"{name}: curve of {col}", False, "not on the page")
            continue
        have = got[col]
        X = np.array([design_row(fit, col, x, at) for x in have[:, 0]])
        eta = X @ beta
        se = np.sqrt(np.einsum("ij,jk,ik->i", X, cov, X))
        want = 100 * np.column_stack([expit(eta), expit(eta - q * se), expit(eta + q * se)])
        worst = float(np.max(np.abs(have[:, 1:] - want) / np.abs(want)))
        span = have[0, 0] == summary[col]["min"] and have[-1, 0] == summary[col]["max"]
        report(f"{name}: curve of {col} over [{have[0, 0]:g}, {have[-1, 0]:g}], {len(have)} points, worst relative "
               f"difference {worst:.1e}", worst < TOL and span, f"\nmillrace {have[:3]}\nhere {want[:3]}")


def check_sex_effect(name, fit_path, page):
    """The effect plot of sex in a fit whose spline of age interacts with
    sex: the row of sex=M takes the spline basis at age's mean times M's
    column (the basis slowest, then the factor's levels)."""
    fit = json.load(open(fit_path))
    at = {c: s["mean"] for c, s in fit["model"]["numeric_summary"]["columns"].items()}
    text = open(page, encoding="utf-8").read()
    body = re.search(r'<figure id="effect-1-1">(.*?)</figure>', text, re.S).group(1)
    have = np.array([[num(v) for v in re.split(r"</td><td>", c)[1:]]
                     for c in re.findall(r"<tr><td>(.*?)</td></tr>", body, re.S)])
    beta = np.array([c["estimate"] for c in fit["coefficients"]])
    cov = np.array(fit["covariance"])
    rows = []
    for level in ("F", "M"):
        row = design_row(fit, None, None, at)
        for t in fit["model"]["terms"]:
            if level == "M" and t["label"] == "sex":
                row[t["first_coefficient"]] = 1
            elif level == "M" and t["kind"] == "interaction":
                spline = next(u["spline"] for u in fit["model"]["terms"] if u["kind"] == "spline")
                row[t["first_coefficient"]:t["first_coefficient"] + t["coefficients"]] = ns_basis([at["age"]], spline)[0]
        rows.append(row)
    X = np.array(rows)
    eta, se, q = X @ beta, np.sqrt(np.einsum("ij,jk,ik->i", X, cov, X)), norm.ppf(0.975)
    want = 100 * np.column_stack([expit(eta), expit(eta - q * se), expit(eta + q * se)])
    worst = float(np.max(np.abs(have - want) / np.abs(want)))
    report(f"{name}: effect plot of sex through the spline interaction, worst relative difference {worst:.1e}",
           worst < TOL, f"\nmillrace {have}\nhere {want}")


def main():
    rows = [r for r in csv.DictReader(open(DATA)) if r["bmi"] not in ("", "NA")]
    with tempfile.TemporaryDirectory() as tmp:
        for name, model in (("screening", ["-m", os.path.join(ROOT, "samples", "screening.model")]),
                            ("spline of age", ["--outcome", "attended", "--family", "binomial", "--spline",
                                               "age df=4", "--factor", "sex ref=F", "--numeric", "bmi",
                                               "--interact", "age sex"])):
            fit, page = os.path.join(tmp, "fit.json"), os.path.join(tmp, "page.html")
            subprocess.run([MILLRACE, "fit", "--quiet", "--json", fit] + model + [DATA], check=True,
                           stdout=subprocess.DEVNULL)
            subprocess.run([MILLRACE, "report", "--html", page, "--digits", "17", fit], check=True)
            check(name, fit, page, rows)
            if name.startswith("spline"):
                check_sex_effect(name, fit, page)
    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


sys.exit(main())
