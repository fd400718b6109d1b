#!/usr/bin/python3
"""Checks millrace's joint Wald test per term (model.terms[].test in the JSON).

For every term, the test is of all its estimated (non-aliased) coefficients
being 0: chi2 = b' V^-1 b on df = their number, or F = chi2 / df against
F(df, residual df) when the dispersion is estimated.  Oracles, named beside
each check:
  reference: statsmodels GLM (Debian python3-statsmodels) fitted to the same
             design, then res.wald_test(R, scalar=True) with R selecting the
             term's columns: use_f=False for the chi-square, use_f=True for F;
  reference: numpy (Debian python3-numpy), b' V^-1 b by numpy.linalg.solve,
             from statsmodels' params and cov_params and from millrace's own
             published estimates and covariance;
  reference: scipy.stats (Debian python3-scipy) chi2.sf and f.sf of
             millrace's own statistics;
  analytic identity: with one two-level factor, the term's chi2 is the
             square of its coefficient's z (F the square of t), with the same
             p-value.
Cases: samples/falls (poisson, exposure, factors and an interaction of
factors), samples/screening (binomial, missing cells), a simulated gamma fit
with estimated dispersion whose interaction has an empty cell (one aliased
coefficient) and a factor that duplicates another (a term with no test).

Prints "ok <case>" or "FAIL <case>: <details>" and "N passed, M failed";
exits 1 if anything failed.
"""
import csv
import math
import os
import sys
import tempfile
import shutil
import warnings

import numpy as np
import scipy.stats
import statsmodels.api as sm

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import compare_reference as cr  # noqa: E402  (its design columns and fitting)

SAMPLES = os.path.join(cr.ROOT, "samples")
STAT_TOL = 1e-7     # vs statsmodels: its fit and ours agree to about 1e-8 per coefficient
OWN_TOL = 1e-10     # vs numpy on millrace's own published b and V
P_TOL = 1e-9        # p-values vs scipy on millrace's own statistic


def rel(a, b, floor=1e-300):
    if a is None or b is None:
        return math.inf if a != b else 0.0
    return abs(a - b) / max(abs(b), floor)


def read_csv(path, factors, model_columns):
    """Columns as arrays (factors as text, the rest as floats), leaving out
    rows with an empty or NA cell in a model column (millrace's default
    missing tokens)."""
    with open(path, newline="") as fh:
        rows = list(csv.DictReader(fh))
    rows = [r for r in rows if all(r[c] not in ("", "NA") for c in model_columns)]
    return {c: np.asarray([r[c] for r in rows]) if c in factors
            else np.asarray([float(r[c]) for r in rows]) for c in model_columns}


def sm_fit(family, X, y, offset, scale):
    """reference: statsmodels GLM, polished as compare_reference.py does."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return cr.polished_sm_fit(sm.GLM(y, X, family=family, offset=offset), scale)


def quad(b, V):
    """reference: numpy, b' V^-1 b."""
    return float(b @ np.linalg.solve(V, b))


def check_terms(js, res, kept, use_f):
    """Each term of millrace's JSON against the references.  `kept` lists the
    names of the non-aliased coefficients, the columns of res in order."""
    problems = []
    coefs = js["coefficients"]
    p = len(coefs)
    cov = np.asarray([[np.nan if v is None else v for v in row] for row in js["covariance"]])
    df_resid = js["fit"]["residual_df"]
    if (js["model"]["dispersion"] == "estimate") != use_f:
        problems.append("dispersion %r but use_f %r" % (js["model"]["dispersion"], use_f))
    for term in js["model"]["terms"]:
        cols = [j for j in range(term["first_coefficient"], term["first_coefficient"] + term["coefficients"])
                if not coefs[j]["aliased"]]
        test, label = term["test"], term["label"]
        if not cols:
            if test is not None:
                problems.append("%s: all aliased but test %r" % (label, test))
            continue
        if test is None or test["df"] != len(cols):
            problems.append("%s: test %r, expected df %d" % (label, test, len(cols)))
            continue
        # the contract: distribution label and denominator df
        dist = "F" if use_f else "chi-square"
        if test["distribution"] != dist or test["denominator_df"] != (df_resid if use_f else None):
            problems.append("%s: %r %r" % (label, test["distribution"], test["denominator_df"]))
        # numpy on millrace's own published estimates and covariance
        b = np.asarray([coefs[j]["estimate"] for j in cols])
        own = quad(b, cov[np.ix_(cols, cols)])
        if rel(test["chi2"], own) > OWN_TOL:
            problems.append("%s: chi2 %r vs numpy on own b, V %r" % (label, test["chi2"], own))
        # statsmodels: wald_test with a constraint matrix, and numpy on its params
        R = np.zeros((len(cols), len(kept)))
        for r, j in enumerate(cols):
            R[r, kept.index(coefs[j]["name"])] = 1.0
        sel = [kept.index(coefs[j]["name"]) for j in cols]
        sm_chi2 = quad(np.asarray(res.params)[sel], np.asarray(res.cov_params())[np.ix_(sel, sel)])
        wt_chi2 = res.wald_test(R, scalar=True, use_f=False)
        if rel(test["chi2"], sm_chi2) > STAT_TOL or rel(test["chi2"], float(wt_chi2.statistic)) > STAT_TOL:
            problems.append("%s: chi2 %r vs statsmodels %r / wald_test %r" % (label, test["chi2"], sm_chi2,
                                                                               float(wt_chi2.statistic)))
        if use_f:
            wt = res.wald_test(R, scalar=True, use_f=True)
            if int(wt.df_denom) != df_resid or int(wt.df_num) != len(cols):
                problems.append("%s: wald_test df %r, %r" % (label, wt.df_num, wt.df_denom))
            expect_p = scipy.stats.f.sf(test["statistic"], len(cols), df_resid)
            if rel(test["chi2"] / len(cols), test["statistic"]) > 1e-15:
                problems.append("%s: F %r is not chi2/df" % (label, test["statistic"]))
        else:
            wt = wt_chi2
            expect_p = scipy.stats.chi2.sf(test["statistic"], len(cols))
            if test["statistic"] != test["chi2"]:
                problems.append("%s: statistic %r is not chi2" % (label, test["statistic"]))
        if rel(test["statistic"], float(wt.statistic)) > STAT_TOL:
            problems.append("%s: statistic %r vs wald_test %r" % (label, test["statistic"], float(wt.statistic)))
        if rel(test["p_value"], expect_p, 1e-300) > P_TOL:
            problems.append("%s: p %r vs scipy %r" % (label, test["p_value"], expect_p))
        # p-values far in the tail magnify the fits' 1e-8 difference by chi2 / 2
        if float(wt.pvalue) > 1e-10 and rel(test["p_value"], float(wt.pvalue)) > 1e-5:
            problems.append("%s: p %r vs wald_test %r" % (label, test["p_value"], float(wt.pvalue)))
    return problems


def kept_design(js, data):
    names = [c["name"] for c in js["coefficients"] if not c["aliased"]]
    n = len(next(iter(data.values())))
    return names, np.column_stack([cr.design_column(nm, data, n) for nm in names])


def falls(tmp):
    """samples/falls: poisson, log(person_years) offset, factors, interaction."""
    js = cr.run_millrace(tmp, os.path.join(SAMPLES, "falls.csv"), ["--model", os.path.join(SAMPLES, "falls.model")])
    cols = ["age_band", "sex", "region", "year", "person_years", "admissions"]
    data = read_csv(os.path.join(SAMPLES, "falls.csv"), ("age_band", "sex", "region"), cols)
    names, X = kept_design(js, data)
    res = sm_fit(sm.families.Poisson(), X, data["admissions"], np.log(data["person_years"]), None)
    return check_terms(js, res, names, use_f=False)


def screening(tmp):
    """samples/screening: binomial logit, rows with a missing cell left out."""
    js = cr.run_millrace(tmp, os.path.join(SAMPLES, "screening.csv"),
                         ["--model", os.path.join(SAMPLES, "screening.model")])
    cols = ["age", "sex", "deprivation", "smoker", "bmi", "attended"]
    data = read_csv(os.path.join(SAMPLES, "screening.csv"), ("sex", "smoker"), cols)
    problems = []
    if js["rows"]["used"] != len(data["attended"]):
        problems.append("rows used %r vs %d" % (js["rows"]["used"], len(data["attended"])))
    names, X = kept_design(js, data)
    res = sm_fit(sm.families.Binomial(), X, data["attended"], np.zeros(len(data["attended"])), None)
    return problems + check_terms(js, res, names, use_f=False)


def gamma_estimated(rng, tmp):
    """Gamma log link, dispersion estimated (F tests): region x sex with the
    cell R04 & M empty (its coefficient aliased, the term's df 2 not 3), and
    a factor `zone` that is region renamed (all its coefficients aliased: no
    test)."""
    n = 1500
    d = cr.sim_common(rng, n)
    keep = ~((d["region"] == "R04") & (d["sex"] == "M"))
    d = {k: v[keep] for k, v in d.items()}
    n = int(keep.sum())
    d["zone"] = np.asarray(["Z" + r[1:] for r in d["region"]])
    mu = np.exp(1.0 + 0.2 * cr.ind(d["age_band"], "45-49") + 0.1 * d["x1"] + 0.15 * cr.ind(d["region"], "R02")
                + 0.1 * cr.ind(d["sex"], "M") * cr.ind(d["region"], "R03"))
    d["y"] = np.round(rng.gamma(5.0, mu / 5.0), 8)
    case = cr.Case("term_tests_gamma", "gamma", "log", d, "y",
                   factors=[("region", None), ("sex", None), ("age_band", None), ("zone", None)],
                   numerics=["x1"], interactions=[("region", "sex")])
    js = cr.millrace_for_case(case, tmp)
    problems = []
    terms = {t["label"]: t for t in js["model"]["terms"]}
    if terms["zone"]["test"] is not None:
        problems.append("zone: test %r, expected none (all aliased)" % terms["zone"]["test"])
    if terms["region & sex"]["test"] is None or terms["region & sex"]["test"]["df"] != 2:
        problems.append("region & sex: %r, expected df 2" % terms["region & sex"]["test"])
    names, X = kept_design(js, d)
    res = sm_fit(sm.families.Gamma(link=sm.families.links.log()), X, d["y"], np.zeros(n), "X2")
    return problems + check_terms(js, res, names, use_f=True)


def identity_two_levels(rng, tmp):
    """analytic identity: one two-level factor, its term's chi2 = z^2 (and F
    = t^2 with an estimated dispersion), with the coefficient's p-value."""
    problems = []
    n = 2000
    g = rng.choice(["A", "B"], n)
    y = rng.poisson(np.where(g == "B", 3.2, 2.9))
    for disp in (None, "estimate"):
        case = cr.Case("term_tests_two_levels", "poisson", "log", {"g": g, "y": y}, "y",
                       factors=[("g", None)], dispersion=disp)
        js = cr.millrace_for_case(case, tmp)
        c = [c for c in js["coefficients"] if c["name"] == "g=B"][0]
        t = js["model"]["terms"][0]["test"]
        z = c["estimate"] / c["standard_error"]
        if rel(t["statistic"], z * z) > 1e-13 or rel(t["chi2"], z * z) > 1e-13:
            problems.append("%s: statistic %r, chi2 %r vs z^2 %r" % (disp, t["statistic"], t["chi2"], z * z))
        if rel(t["p_value"], c["p_value"]) > 1e-12:
            problems.append("%s: p %r vs the coefficient's %r" % (disp, t["p_value"], c["p_value"]))
    return problems


def main():
    if not os.access(cr.MILLRACE, os.X_OK):
        print("FAIL setup: %s not found (run make first)" % cr.MILLRACE)
        print("0 passed, 1 failed")
        return 1
    rng = np.random.default_rng(20261204)
    tmp = tempfile.mkdtemp(prefix="millrace-terms-")
    try:
        return cr.run_checks([("term_tests_falls", lambda: falls(tmp)),
                              ("term_tests_screening", lambda: screening(tmp)),
                              ("term_tests_gamma_estimated", lambda: gamma_estimated(rng, tmp)),
                              ("term_tests_identity_two_levels", lambda: identity_two_levels(rng, tmp))])
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
