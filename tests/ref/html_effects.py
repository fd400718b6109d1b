#!/usr/bin/python3
"""The effect plots of `millrace report --html` against statsmodels.

Each effect plot shows, for every level of a factor, the fitted value with
the other factors at their reference levels and numeric covariates at the
values given with --at, and an interval computed on the link scale from the
covariance (delta method) and transformed by the inverse link.
  reference: statsmodels GLM (Debian python3-statsmodels) fitted to the
  bundled samples, GLMResults.get_prediction(...).summary_frame(), whose
  mean interval is the transformed interval of the linear predictor.
The numbers are read from each plot's data table (the page written with
--digits 17).  Prints "ok ..." / "FAIL ..." and "N passed, M failed".
"""
import csv
import math
import os
import re
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
TOL = 1e-6  # relative: millrace's coefficients agree with statsmodels' to about 1e-8

passed = failed = 0


def report(name, ok, detail=""):
    global passed, failed
    if ok:
        passed += 1
        print(f"ok {name}")
    else:
        failed += 1
        print(f"FAIL {name}: {detail}")


def page_tables(path):
    """{figure id: (axis label, [(level, est, lo, hi)])} of the effect plots."""
    text = open(path, encoding="utf-8").read()
    out = {}
    for fid, body in re.findall(r'<figure id="(effect-[^"]+)">(.*?)</figure>', text, re.S):
        axis = re.search(r'class="axis">([^<]*)<', body).group(1)
        rows = []
        for cells in re.findall(r"<tr><td>(.*?)</td></tr>", body, re.S):
            level, *nums = re.split(r"</td><td>", cells)
            rows.append((level, *[float(v.replace("&#8722;", "-")) for v in nums]))
        out[fid] = (axis, rows)
    return out


def millrace_page(tmp, name, model, data, at):
    js, page = os.path.join(tmp, name + ".json"), os.path.join(tmp, name + ".html")
    subprocess.run([MILLRACE, "fit", "--quiet", "-m", model, "--json", js, data], check=True, stdout=subprocess.DEVNULL)
    args = [MILLRACE, "report", "--html", page, "--digits", "17"]
    for a in at:
        args += ["--at", a]
    subprocess.run(args + [js], check=True)
    return page_tables(page)


def design(rows, factors, numerics, order):
    """Columns in millrace's order: intercept, then each term (order: list of
    ('f', name) / ('n', name) / ('fx', a, b) for a factor x factor term)."""
    cols = [np.ones(len(rows))]
    for term in order:
        if term[0] == "n":
            cols.append(np.array([float(r[term[1]]) for r in rows]))
        elif term[0] == "f":
            levels, ref = factors[term[1]]
            cols += [np.array([r[term[1]] == l for r in rows], float) for l in levels if l != ref]
        else:
            (la, ra), (lb, rb) = factors[term[1]], factors[term[2]]
            cols += [np.array([r[term[1]] == a and r[term[2]] == b for r in rows], float)
                     for a in la if a != ra for b in lb if b != rb]
    return np.column_stack(cols)


def profile(factors, numerics_at, order, fac, level):
    row = {f: ref for f, (levels, ref) in factors.items()}
    row[fac] = level
    row.update({k: str(v) for k, v in numerics_at.items()})
    return design([row], factors, None, order)


def compare(name, got, fit, factors, at, order, scale, offset_name=None):
    for fac, (levels, ref) in factors.items():
        fid = [k for k, (axis, rows) in got.items() if [r[0] for r in rows] == levels]
        if not fid:
            report(f"{name}: effect plot of {fac}", False, "not found")
            continue
        axis, rows = got[fid[0]]
        X = np.vstack([profile(factors, at, order, fac, l) for l in levels])
        kw = {"offset": np.zeros(len(levels))} if offset_name else {}
        frame = fit.get_prediction(X, **kw).summary_frame(alpha=0.05)
        want = np.column_stack([frame["mean"], frame["mean_ci_lower"], frame["mean_ci_upper"]]) * scale
        have = np.array([r[1:] for r in rows])
        worst = float(np.max(np.abs(have - want) / np.abs(want)))
        report(f"{name}: effect plot of {fac} ({axis}), worst relative difference {worst:.1e}", worst < TOL,
               f"\nmillrace {have}\nstatsmodels {want}")


def falls(tmp):
    rows = list(csv.DictReader(open(os.path.join(ROOT, "samples", "falls.csv"))))
    factors = {f: (sorted({r[f] for r in rows}), ref) for f, ref in
               (("age_band", "40-44"), ("sex", "F"), ("region", "Brindlemarch"))}
    order = [("f", "age_band"), ("f", "sex"), ("f", "region"), ("n", "year"), ("fx", "age_band", "sex")]
    X = design(rows, factors, None, order)
    y = np.array([float(r["admissions"]) for r in rows])
    off = np.log([float(r["person_years"]) for r in rows])
    fit = sm.GLM(y, X, family=sm.families.Poisson(), offset=off).fit(tol=1e-12)
    got = millrace_page(tmp, "falls", os.path.join(ROOT, "samples", "falls.model"),
                        os.path.join(ROOT, "samples", "falls.csv.zst"), ["year=2020"])
    # the page gives the rate per a power of ten of person-years; its axis says which
    scale = float(re.search(r"per ([0-9,]+) person_years", next(iter(got.values()))[0]).group(1).replace(",", ""))
    compare("falls (poisson, log, exposure)", got, fit, factors, {"year": 2020}, order, scale, "person_years")


def screening(tmp):
    rows = [r for r in csv.DictReader(open(os.path.join(ROOT, "samples", "screening.csv")))
            if r["bmi"] not in ("", "NA")]
    factors = {"sex": (["F", "M"], "F"), "smoker": (sorted({r["smoker"] for r in rows}), "never")}
    order = [("n", "age"), ("f", "sex"), ("n", "deprivation"), ("f", "smoker"), ("n", "bmi")]
    X = design(rows, factors, None, order)
    y = np.array([float(r["attended"]) for r in rows])
    fit = sm.GLM(y, X, family=sm.families.Binomial()).fit(tol=1e-12)
    at = {"age": 60, "deprivation": 3, "bmi": 27.5}
    got = millrace_page(tmp, "screening", os.path.join(ROOT, "samples", "screening.model"),
                        os.path.join(ROOT, "samples", "screening.csv"), [f"{k}={v}" for k, v in at.items()])
    compare("screening (binomial, logit)", got, fit, factors, at, order, 100.0)


def main():
    with tempfile.TemporaryDirectory() as tmp:
        falls(tmp)
        screening(tmp)
    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


sys.exit(main())
