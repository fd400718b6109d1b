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
--digits 17).
The effect curves (numeric and spline columns: the fitted value along the
column's range, factors at reference, other numerics at their means, the
band the transformed Wald interval of x'b):
  reference: the design row built here from the JSON's terms, with the
  natural spline basis from R's splines::ns (Debian r-base) at the JSON's
  knots; b and V from the JSON; q and the inverse link from scipy.stats
  (Debian python3-scipy).  The recorded range, mean and sd of each numeric
  column against the CSV itself (numpy).
The funnel plot's control limits (--groups): at expected count E the
smallest k with P(X <= k) >= p, X ~ Poisson(E), over E, for p = 0.025,
0.975, 0.001, 0.999; a group outside when P(X <= O) or P(X >= O) is below
half of 1 - level.
  reference: scipy.stats.poisson.ppf / cdf / sf, and R's qpois, on a
  scoring run's groups of the falls sample and on a table with expected
  counts from 0.02 to 2e6.
  Prints "ok ..." / "FAIL ..." and "N passed, M failed".
"""
import csv
import json
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm
from scipy.special import expit
from scipy.stats import norm, poisson

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
DATA = os.path.join(ROOT, "samples", "screening.csv")
LEVELS = ((0.025, 0.975), (0.001, 0.999))
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


NS_CACHE = {}


def ns_basis(x, spline):
    """R's splines::ns at x, the fit's knots and boundary knots (one
    Rscript run for the points not asked before)."""
    key = (tuple(spline["knots"]), tuple(spline["boundary_knots"]))
    todo = sorted({v for v in x if (key, v) not in NS_CACHE})
    if todo:
        for v, row in zip(todo, ns_basis_r(todo, spline)):
            NS_CACHE[(key, v)] = row
    return np.array([NS_CACHE[(key, v)] for v in x])


def ns_basis_r(x, spline):
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
        for t in fit["model"]["terms"]:
            if t["kind"] == "spline":
                ns_basis(list(have[:, 0]) + [at[t["spline"]["column"]]], t["spline"])
        X = np.array([design_row(fit, col, x, at) for x in have[:, 0]])
        eta = X @ beta
        se = np.sqrt(np.einsum("ij,jk,ik->i", X, cov, X))
        want = 100 * np.column_stack([expit(eta), expit(eta - q * se), expit(eta + q * se)])
        worst = float(np.max(np.abs(have[:, 1:] - want) / np.abs(want)))
        span = have[0, 0] == summary[col]["min"] and have[-1, 0] == summary[col]["max"]
        report(f"{name}: curve of {col} over [{have[0, 0]:g}, {have[-1, 0]:g}], {len(have)} points, worst relative "
               f"difference {worst:.1e}", worst < 1e-9 and span, f"\nmillrace {have[:3]}\nhere {want[:3]}")


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
           worst < 1e-9, f"\nmillrace {have}\nhere {want}")


def funnel_rows(page):
    text = open(page, encoding="utf-8").read()
    body = re.search(r'<figure id="funnel">(.*?)</figure>', text, re.S).group(1)
    rows = []
    for cells in re.findall(r"<tr><td>(.*?)</td></tr>", body, re.S):
        c = re.split(r"</td><td>", cells)
        rows.append((c[0], num(c[1]), num(c[2]), [num(v) for v in c[4:8]], c[8]))
    return rows


def check_page(name, page, r_quantiles):
    rows = funnel_rows(page)
    worst, wrong_side, r_worst = 0.0, [], 0.0
    for label, o, e, limits, where in rows:
        want = [poisson.ppf(p, e) for pair in LEVELS for p in pair]
        got = [v * e for v in limits]
        worst = max(worst, max(abs(g - w) for g, w in zip(got, want)))
        out = ["no", "95%", "99.8%"][max([0] + [i + 1 for i, (a, _) in enumerate(LEVELS)
                                            if poisson.cdf(o, e) < a or poisson.sf(o - 1, e) < a])]
        if out != where:
            wrong_side.append((label, o, e, where, out))
        if r_quantiles is not None:
            r_worst = max(r_worst, max(abs(g - w) for g, w in zip(got, r_quantiles[(label, e)])))
    report(f"{name}: {len(rows)} groups' control limits x E are scipy's Poisson quantiles (worst {worst:.1e})",
           len(rows) > 0 and worst < 1e-6 * max(1.0, max(r[2] for r in rows)) and worst < 0.5)
    report(f"{name}: groups outside the limits as scipy's exact tail areas say", not wrong_side, str(wrong_side[:3]))
    if r_quantiles is not None:
        report(f"{name}: the same quantiles as R's qpois (worst {r_worst:.1e})", r_worst < 0.5)


def r_qpois(rows):
    """{(label, E): [qpois(p, E) ...]} from Rscript, or None without R."""
    if shutil.which("Rscript") is None:
        print("note: no Rscript here, R's qpois not compared")
        return None
    es = ",".join(repr(e) for _, _, e, _, _ in rows)
    ps = ",".join(str(p) for pair in LEVELS for p in pair)
    out = subprocess.run(["Rscript", "-e", f"e <- c({es}); for (x in e) cat(qpois(c({ps}), x), '\\n')"],
                         check=True, capture_output=True, text=True).stdout.split("\n")
    return {(r[0], r[2]): [float(v) for v in line.split()] for r, line in zip(rows, out)}


def curves_tests():
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


def funnel_tests():
    with tempfile.TemporaryDirectory() as tmp:
        fit, page = os.path.join(tmp, "falls.json"), os.path.join(tmp, "falls.html")
        groups = os.path.join(tmp, "groups.json")
        data = os.path.join(ROOT, "samples", "falls.csv.zst")
        subprocess.run([MILLRACE, "fit", "--quiet", "-m", os.path.join(ROOT, "samples", "falls.model"), "--json",
                        fit, data], check=True, stdout=subprocess.DEVNULL)
        subprocess.run([MILLRACE, "score", "--quiet", "--fit", fit, "--out", os.path.join(tmp, "s.csv"), "--by",
                        "region", "--by", "age_band", "--by-out", groups, data], check=True)
        subprocess.run([MILLRACE, "report", "--html", page, "--digits", "17", "--groups", groups, fit], check=True)
        check_page("falls by region and age band", page, r_qpois(funnel_rows(page)))

        wide = {"level": 0.95, "by": ["unit"], "groups": []}
        for i, e in enumerate([0.02, 0.3, 1, 2.5, 7, 19.5, 60, 333.3, 4000, 52000, 2e6]):
            for j, o in enumerate([0, e * 0.5, e, e * 1.4 + 3]):
                wide["groups"].append({"key": {"unit": f"u{i}-{j}"}, "rows": 1, "exposure": 1.0,
                                       "observed": float(round(o)), "expected": e, "o_e": round(o) / e,
                                       "o_e_low": None, "o_e_high": None})
        groups2, page2 = os.path.join(tmp, "wide.json"), os.path.join(tmp, "wide.html")
        json.dump(wide, open(groups2, "w"))
        subprocess.run([MILLRACE, "report", "--html", page2, "--digits", "17", "--groups", groups2, fit], check=True)
        check_page("expected counts 0.02 to 2e6", page2, r_qpois(funnel_rows(page2)))


def main():
    with tempfile.TemporaryDirectory() as tmp:
        falls(tmp)
        screening(tmp)
    curves_tests()
    funnel_tests()
    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


sys.exit(main())
