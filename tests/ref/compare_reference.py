#!/usr/bin/python3
"""Compares millrace fits with independent GLM implementations.

Every family/link pair millrace supports is fitted to a small simulated data
set (fixed seed) by build/millrace and by two outside implementations:
  reference: statsmodels GLM (Debian python3-statsmodels)
  reference: R glm.fit (Debian r-base-core), when /usr/bin/Rscript exists
plus a few analytic identities and one published textbook example.

The design matrices for the references are built explicitly with numpy from
millrace's coefficient names, so no model-formula language is involved.

Prints "ok <case>" or "FAIL <case>: <details>" per case and a closing
"N passed, M failed" line (read by CI); exits 1 if anything failed.
"""
import itertools
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import warnings

import numpy as np
import scipy.stats
import statsmodels.api as sm

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
DATA_DIR = os.path.join(ROOT, "tests", "ref", "data")
RSCRIPT = "/usr/bin/Rscript"

REL_TOL = 1e-8      # coefficients, SEs and fit statistics vs the references
COEF_FLOOR = 1e-10  # absolute floor for coefficients that are about 0
# Non-canonical links converge linearly, and the stopping rule of the contract
# (relative deviance change below the tolerance) cannot resolve estimates
# closer than about sqrt(machine epsilon) standard errors: the deviance is
# quadratic at its minimum, so 1e-8 SE moves it by about 1e-16 relative.  R's
# glm.fit with epsilon 1e-14 stops at the same distance (up to 8e-8 SE here),
# so for those links an estimate also passes within 1e-6 standard errors.
SE_ALLOW_NONCANONICAL = 1e-6
CANONICAL = {"gaussian": "identity", "binomial": "logit", "poisson": "log",
             "gamma": "inverse", "inverse-gaussian": "inverse-squared"}
REF_AGREE = 1e-9    # statsmodels vs R: guards against mistakes in this script

LINKS = sm.families.links
SM_LINK = {
    "identity": LINKS.identity, "log": LINKS.log, "inverse": LINKS.inverse_power,
    "logit": LINKS.logit, "probit": LINKS.probit, "cloglog": LINKS.cloglog,
    "sqrt": LINKS.sqrt, "inverse-squared": LINKS.inverse_squared,
}
SM_FAMILY = {
    "gaussian": sm.families.Gaussian, "binomial": sm.families.Binomial,
    "poisson": sm.families.Poisson, "gamma": sm.families.Gamma,
    "inverse-gaussian": sm.families.InverseGaussian,
}
R_LINK = {"inverse-squared": "1/mu^2"}
SCALE_FAMILIES = ("gaussian", "gamma", "inverse-gaussian")


# ---------------------------------------------------------------- cases

class Case:
    """One model: the data columns and the millrace model directives."""

    def __init__(self, name, family, link, data, outcome, factors=(), numerics=(),
                 interactions=(), trials=None, weight=None, offset=None,
                 exposure=None, intercept=True, dispersion=None, missing=None,
                 layout="csv", use_model_file=False):
        self.name, self.family, self.link = name, family, link
        self.data, self.outcome = data, outcome
        self.factors = list(factors)          # [(column, reference or None)]
        self.numerics = list(numerics)
        self.interactions = list(interactions)
        self.trials, self.weight = trials, weight
        self.offset, self.exposure = offset, exposure
        self.intercept, self.dispersion = intercept, dispersion
        self.missing = missing or {}          # column -> (row mask, token)
        self.layout = layout                  # csv tsv semicolon quoted zst
        self.use_model_file = use_model_file

    def model_lines(self):
        lines = ["outcome " + self.outcome, "family " + self.family, "link " + self.link]
        for col, ref in self.factors:
            lines.append("factor %s%s" % (col, " ref=" + ref if ref else ""))
        lines += ["numeric " + c for c in self.numerics]
        lines += ["interact " + " ".join(t) for t in self.interactions]
        for key in ("trials", "weight", "offset", "exposure"):
            if getattr(self, key):
                lines.append("%s %s" % (key, getattr(self, key)))
        if not self.intercept:
            lines.append("intercept no")
        if self.dispersion:
            lines.append("dispersion " + self.dispersion)
        return lines

    def cli_options(self):
        opts = ["--outcome", self.outcome, "--family", self.family, "--link", self.link]
        for col, ref in self.factors:
            opts += ["--factor", col + (" ref=" + ref if ref else "")]
        for c in self.numerics:
            opts += ["--numeric", c]
        for t in self.interactions:
            opts += ["--interact", " ".join(t)]
        for key in ("trials", "weight", "offset", "exposure"):
            if getattr(self, key):
                opts += ["--" + key, getattr(self, key)]
        if not self.intercept:
            opts.append("--no-intercept")
        if self.dispersion:
            opts += ["--dispersion", self.dispersion]
        return opts

    def model_columns(self):
        cols = [self.outcome] + [c for c, _ in self.factors] + self.numerics
        cols += [c for c in (self.trials, self.weight, self.offset, self.exposure) if c]
        return cols

    def used_rows(self):
        n = len(self.data[self.outcome])
        keep = np.ones(n, dtype=bool)
        for col in self.model_columns():
            if col in self.missing:
                keep &= np.logical_not(self.missing[col][0])
        return keep


def format_cell(value):
    if isinstance(value, (str, np.str_)):
        return str(value)
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return repr(float(value))  # shortest text that reads back to the same double


def write_table(case, path):
    delim = {"tsv": "\t", "semicolon": ";"}.get(case.layout, ",")
    quote = case.layout == "quoted"
    cols = list(case.data)
    n = len(case.data[cols[0]])
    cells = {c: [format_cell(v) for v in case.data[c]] for c in cols}
    for col, (mask, token) in case.missing.items():
        for i in np.flatnonzero(mask):
            cells[col][i] = token
    wrap = (lambda s: '"' + s + '"') if quote else (lambda s: s)
    with open(path, "w", newline="") as fh:
        fh.write(delim.join(wrap(c) for c in cols) + "\n")
        for i in range(n):
            fh.write(delim.join(wrap(cells[c][i]) for c in cols) + "\n")


def columns_arrays(case, keep):
    return {c: (v[keep] if isinstance(v, np.ndarray) else np.asarray(v)[keep])
            for c, v in case.data.items()}


def factor_levels(case, data):
    """Non-reference levels per factor, in byte-wise sorted order."""
    out = {}
    for col, ref in case.factors:
        levels = sorted(set(str(v) for v in data[col]), key=lambda s: s.encode())
        ref = ref if ref else levels[0]
        out[col] = [lev for lev in levels if lev != ref]
    return out


def expected_names(case, data):
    """Coefficient names per the CLI contract: treatment coding, interactions
    of the declared columns using non-reference factor levels."""
    levels = factor_levels(case, data)

    def parts(col):
        return ["%s=%s" % (col, lev) for lev in levels[col]] if col in levels else [col]

    names = ["intercept"] if case.intercept else []
    for col, _ in case.factors:
        names += parts(col)
    names += list(case.numerics)
    for term in case.interactions:
        names += [" & ".join(combo) for combo in itertools.product(*(parts(c) for c in term))]
    return names


def design_column(name, data, n):
    col = np.ones(n)
    if name == "intercept":
        return col
    for part in name.split(" & "):
        if "=" in part:
            var, lev = part.split("=", 1)
            col = col * (np.asarray([str(v) for v in data[var]]) == lev)
        else:
            col = col * np.asarray(data[part], dtype=float)
    return col


# ---------------------------------------------------------------- data sets

def sim_common(rng, n, year=True):
    d = {
        "sex": rng.choice(["F", "M"], n),
        "region": rng.choice(["R01", "R02", "R03", "R04"], n),
        "age_band": rng.choice(["35-39", "40-44", "45-49", "50-54"], n),
        "x1": np.round(rng.normal(0.0, 1.0, n), 6),
        "x2": np.round(rng.uniform(0.0, 3.0, n), 6),
    }
    if year:
        d["year"] = rng.integers(2000, 2025, n)
    return d


def ind(arr, level):
    return (np.asarray(arr) == level).astype(float)


def check_domain(name, mu, lo=None, hi=None):
    if lo is not None and not np.all(mu > lo):
        raise RuntimeError("%s: simulated mean leaves the domain" % name)
    if hi is not None and not np.all(mu < hi):
        raise RuntimeError("%s: simulated mean leaves the domain" % name)


def build_cases(rng):
    cases = []
    add = cases.append

    # gaussian identity: raw calendar year, region x year slope, missing cells
    n = 1500
    d = sim_common(rng, n)
    mu = (3 + 0.5 * ind(d["sex"], "F") + 0.4 * ind(d["region"], "R01") - 0.3 * ind(d["region"], "R04")
          + 0.04 * (d["year"] - 2012) + 0.02 * ind(d["region"], "R02") * (d["year"] - 2012)
          + 1.2 * d["x1"])
    d["y"] = np.round(mu + rng.normal(0, 1, n), 6)
    miss_x1 = np.zeros(n, dtype=bool)
    miss_x1[[7, 300, 911]] = True
    miss_y = np.zeros(n, dtype=bool)
    miss_y[[55, 1200]] = True
    add(Case("gaussian_identity", "gaussian", "identity", d, "y",
             factors=[("sex", "M"), ("region", "R03")], numerics=["year", "x1"],
             interactions=[("region", "year")],
             missing={"x1": (miss_x1, "NA"), "y": (miss_y, "")}))

    # gaussian log: factor x numeric interaction
    n = 1000
    d = sim_common(rng, n)
    mu = np.exp(1.5 + 0.2 * ind(d["age_band"], "40-44") + 0.35 * ind(d["age_band"], "50-54")
                + 0.15 * d["x1"] + 0.1 * ind(d["sex"], "M") * d["x1"])
    check_domain("gaussian_log", mu, lo=1.0)
    d["y"] = np.round(mu + rng.normal(0, 0.3, n), 6)
    add(Case("gaussian_log", "gaussian", "log", d, "y",
             factors=[("age_band", None), ("sex", None)], numerics=["x1"],
             interactions=[("sex", "x1")]))

    # gaussian inverse: factor x factor interaction, raw year
    n = 800
    d = sim_common(rng, n)
    eta = (0.1 + 0.03 * ind(d["sex"], "M") + 0.02 * ind(d["region"], "R02")
           + 0.01 * ind(d["sex"], "M") * ind(d["region"], "R04") + 0.002 * (d["year"] - 2000))
    mu = 1 / eta
    check_domain("gaussian_inverse", mu, lo=4.0)
    d["y"] = np.round(mu + rng.normal(0, 0.3, n), 6)
    add(Case("gaussian_inverse", "gaussian", "inverse", d, "y",
             factors=[("sex", None), ("region", None)], numerics=["year"],
             interactions=[("sex", "region")]))

    # gaussian identity with prior weights, tab-separated
    n = 600
    d = sim_common(rng, n, year=False)
    d["w"] = np.round(rng.uniform(0.5, 3.0, n), 4)
    d["y"] = np.round(2 + 0.7 * d["x1"] - 0.4 * d["x2"] + 0.3 * ind(d["sex"], "M")
                      + rng.normal(0, 1, n) / np.sqrt(d["w"]), 6)
    add(Case("gaussian_identity_weights_tsv", "gaussian", "identity", d, "y",
             factors=[("sex", None)], numerics=["x1", "x2"], weight="w", layout="tsv"))

    # gaussian identity without intercept
    n = 400
    d = sim_common(rng, n, year=False)
    d["y"] = np.round(2 * d["x1"] + 3 * d["x2"] + rng.normal(0, 1, n), 6)
    add(Case("gaussian_identity_no_intercept", "gaussian", "identity", d, "y",
             numerics=["x1", "x2"], intercept=False))

    # binomial, 0/1 outcome
    n = 2000
    d = sim_common(rng, n)
    eta = (-0.5 + 0.4 * ind(d["sex"], "M") + 0.3 * ind(d["age_band"], "45-49")
           + 0.6 * ind(d["age_band"], "50-54") + 0.03 * (d["year"] - 2012)
           + 0.3 * ind(d["sex"], "M") * ind(d["age_band"], "40-44"))
    d["y"] = rng.binomial(1, 1 / (1 + np.exp(-eta)))
    add(Case("binomial_logit_01", "binomial", "logit", d, "y",
             factors=[("sex", None), ("age_band", "35-39")], numerics=["year"],
             interactions=[("age_band", "sex")]))

    n = 1500
    d = sim_common(rng, n)
    eta = -0.3 + 0.3 * ind(d["sex"], "M") + 0.4 * d["x1"] + 0.02 * (d["year"] - 2012)
    d["y"] = rng.binomial(1, scipy.stats.norm.cdf(eta))
    add(Case("binomial_probit_01", "binomial", "probit", d, "y",
             factors=[("sex", None)], numerics=["x1", "year"]))

    n = 1500
    d = sim_common(rng, n)
    eta = -1.0 + 0.3 * ind(d["region"], "R02") - 0.2 * ind(d["region"], "R04") + 0.3 * d["x1"]
    d["y"] = rng.binomial(1, 1 - np.exp(-np.exp(eta)))
    add(Case("binomial_cloglog_01", "binomial", "cloglog", d, "y",
             factors=[("region", "R01")], numerics=["x1"]))

    n = 2000
    d = sim_common(rng, n)
    p = np.exp(-2.0 + 0.3 * ind(d["sex"], "M") + 0.1 * d["x2"])
    check_domain("binomial_log_01", p, hi=0.3)
    d["y"] = rng.binomial(1, p)
    add(Case("binomial_log_01", "binomial", "log", d, "y",
             factors=[("sex", None)], numerics=["x2"]))

    # binomial, grouped: successes/trials and proportion + weight
    binom_links = {
        "logit": lambda e: 1 / (1 + np.exp(-e)),
        "probit": scipy.stats.norm.cdf,
        "cloglog": lambda e: 1 - np.exp(-np.exp(e)),
        "log": np.exp,
    }
    for link, inv in binom_links.items():
        n = 300
        d = sim_common(rng, n)
        if link == "log":
            eta = -1.8 + 0.25 * ind(d["sex"], "M") + 0.15 * d["x2"] - 0.1 * ind(d["region"], "R03")
        else:
            eta = (-0.4 + 0.35 * ind(d["sex"], "M") + 0.3 * d["x1"] - 0.2 * ind(d["region"], "R03")
                   + 0.02 * (d["year"] - 2012))
        p = inv(eta)
        check_domain("binomial_" + link, p, lo=0.0, hi=0.6 if link == "log" else 1.0)
        d["t"] = rng.integers(1, 41, n)
        d["s"] = rng.binomial(d["t"], p)
        numerics = ["x2"] if link == "log" else ["x1", "year"]
        layout = "semicolon" if link == "logit" else "csv"
        add(Case("binomial_%s_trials" % link, "binomial", link, dict(d), "s",
                 factors=[("sex", None), ("region", None)], numerics=numerics,
                 trials="t", layout=layout))
        d2 = dict(d)
        d2["prop"] = d["s"] / d["t"]
        add(Case("binomial_%s_proportion_weight" % link, "binomial", link, d2, "prop",
                 factors=[("sex", None), ("region", None)], numerics=numerics, weight="t"))

    # poisson log: zstd input, raw year, region x year
    n = 2000
    d = sim_common(rng, n)
    eta = (1.0 + 0.3 * ind(d["sex"], "M") + 0.2 * ind(d["age_band"], "50-54") - 0.2 * ind(d["region"], "R02")
           + 0.02 * (d["year"] - 2012) + 0.01 * ind(d["region"], "R03") * (d["year"] - 2012))
    d["y"] = rng.poisson(np.exp(eta))
    add(Case("poisson_log_zst", "poisson", "log", d, "y",
             factors=[("sex", None), ("age_band", None), ("region", "R01")], numerics=["year"],
             interactions=[("region", "year")], layout="zst"))

    n = 1500
    d = sim_common(rng, n)
    d["pyears"] = np.round(rng.uniform(0.5, 50, n), 3)
    rate = np.exp(-3 + 0.4 * ind(d["sex"], "M") + 0.25 * ind(d["age_band"], "45-49") + 0.015 * (d["year"] - 2012))
    d["y"] = rng.poisson(rate * d["pyears"])
    add(Case("poisson_log_exposure", "poisson", "log", d, "y",
             factors=[("sex", None), ("age_band", None)], numerics=["year"], exposure="pyears"))

    n = 1200
    d = sim_common(rng, n)
    d["off"] = np.round(rng.uniform(-1, 2, n), 6)
    d["y"] = rng.poisson(np.exp(0.5 + d["off"] + 0.3 * ind(d["region"], "R04") + 0.2 * d["x1"]))
    add(Case("poisson_log_offset", "poisson", "log", d, "y",
             factors=[("region", None)], numerics=["x1"], offset="off"))

    n = 1000
    d = sim_common(rng, n)
    d["w"] = np.round(rng.uniform(0.2, 4.0, n), 4)
    d["y"] = rng.poisson(np.exp(1.2 + 0.3 * ind(d["sex"], "M") - 0.2 * d["x2"]))
    add(Case("poisson_log_weights_quoted", "poisson", "log", d, "y",
             factors=[("sex", None)], numerics=["x2"], weight="w", layout="quoted"))

    n = 1000
    d = sim_common(rng, n)
    mu = 5 + 2 * ind(d["sex"], "M") + 1.5 * d["x2"] + 1.0 * ind(d["region"], "R02")
    d["y"] = rng.poisson(mu)
    add(Case("poisson_identity", "poisson", "identity", d, "y",
             factors=[("sex", None), ("region", None)], numerics=["x2"]))

    n = 1000
    d = sim_common(rng, n)
    eta = 2 + 0.5 * ind(d["sex"], "M") + 0.3 * d["x2"] + 0.01 * (d["year"] - 2000)
    d["y"] = rng.poisson(eta ** 2)
    add(Case("poisson_sqrt", "poisson", "sqrt", d, "y",
             factors=[("sex", None)], numerics=["x2", "year"]))

    n = 1000
    d = sim_common(rng, n)
    mu = np.exp(1.5 + 0.3 * ind(d["age_band"], "40-44") + 0.2 * d["x1"])
    d["y"] = rng.negative_binomial(3, 3 / (3 + mu))  # overdispersed counts
    add(Case("poisson_log_dispersion_estimate", "poisson", "log", d, "y",
             factors=[("age_band", None)], numerics=["x1"], dispersion="estimate"))

    # gamma
    shape = 5.0
    n = 1000
    d = sim_common(rng, n)
    eta = 0.2 + 0.05 * ind(d["sex"], "M") + 0.02 * d["x2"] + 0.03 * ind(d["region"], "R03")
    d["y"] = np.round(rng.gamma(shape, (1 / eta) / shape), 8)
    add(Case("gamma_inverse", "gamma", "inverse", d, "y",
             factors=[("sex", None), ("region", None)], numerics=["x2"]))

    n = 1000
    d = sim_common(rng, n)
    mu = 10 + 2 * ind(d["sex"], "M") + 0.3 * (d["year"] - 2000) + 1.5 * ind(d["region"], "R02")
    d["y"] = np.round(rng.gamma(shape, mu / shape), 8)
    add(Case("gamma_identity", "gamma", "identity", d, "y",
             factors=[("sex", None), ("region", None)], numerics=["year"]))

    n = 1200
    d = sim_common(rng, n)
    mu = np.exp(1 + 0.2 * ind(d["age_band"], "45-49") + 0.1 * d["x1"] + 0.1 * ind(d["sex"], "M") * d["x1"]
                + 0.01 * (d["year"] - 2012))
    d["y"] = np.round(rng.gamma(shape, mu / shape), 8)
    add(Case("gamma_log_model_file", "gamma", "log", d, "y",
             factors=[("age_band", "40-44"), ("sex", None)], numerics=["x1", "year"],
             interactions=[("sex", "x1")], use_model_file=True))

    # inverse gaussian (numpy's wald: mean mu, shape lambda; Var = mu^3 / lambda)
    lam = 20.0
    n = 1000
    d = sim_common(rng, n)
    eta = 0.05 + 0.02 * ind(d["sex"], "M") + 0.005 * d["x2"]
    d["y"] = np.round(rng.wald(1 / np.sqrt(eta), lam), 8)
    add(Case("inverse_gaussian_inverse_squared", "inverse-gaussian", "inverse-squared", d, "y",
             factors=[("sex", None)], numerics=["x2"]))

    n = 1000
    d = sim_common(rng, n)
    eta = 0.2 + 0.05 * ind(d["sex"], "M") + 0.02 * d["x2"] + 0.002 * (d["year"] - 2000)
    d["y"] = np.round(rng.wald(1 / eta, lam), 8)
    add(Case("inverse_gaussian_inverse", "inverse-gaussian", "inverse", d, "y",
             factors=[("sex", None)], numerics=["x2", "year"]))

    n = 1000
    d = sim_common(rng, n)
    mu = 3 + 1 * ind(d["sex"], "M") + 0.2 * d["x2"] + 0.5 * ind(d["region"], "R04")
    d["y"] = np.round(rng.wald(mu, lam), 8)
    add(Case("inverse_gaussian_identity", "inverse-gaussian", "identity", d, "y",
             factors=[("sex", None), ("region", None)], numerics=["x2"]))

    n = 1000
    d = sim_common(rng, n)
    mu = np.exp(1 + 0.2 * ind(d["sex"], "M") + 0.1 * d["x1"] + 0.1 * ind(d["region"], "R02")
                + 0.05 * ind(d["sex"], "M") * ind(d["region"], "R03"))
    d["y"] = np.round(rng.wald(mu, lam), 8)
    add(Case("inverse_gaussian_log", "inverse-gaussian", "log", d, "y",
             factors=[("sex", None), ("region", None)], numerics=["x1"],
             interactions=[("region", "sex")]))

    return cases


def doll_hill_case():
    """Published example (see tests/ref/data/README.md)."""
    path = os.path.join(DATA_DIR, "doll_hill_smoking.csv")
    rows = [line.rstrip("\n").split(",") for line in open(path)]
    header, body = rows[0], rows[1:]
    d = {}
    for j, col in enumerate(header):
        vals = [r[j] for r in body]
        d[col] = np.asarray(vals) if col in ("age_band", "smoker") else np.asarray([float(v) for v in vals])
    return Case("published_doll_hill", "poisson", "log", d, "deaths",
                factors=[("smoker", "no")], numerics=["agecat", "agesq"],
                interactions=[("smoker", "agecat")], exposure="person_years"), path


# ---------------------------------------------------------------- running

def run_millrace(tmp, data_path, options, json_name="out.json"):
    out = os.path.join(tmp, json_name)
    if os.path.exists(out):
        os.remove(out)
    cmd = [MILLRACE, "fit", "--json", out, "--tolerance", "1e-14", "--max-passes", "200",
           "--quiet"] + options + [data_path]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    if proc.returncode != 0:
        raise RuntimeError("exit %d from %s: %s" % (proc.returncode, " ".join(cmd), proc.stderr.strip()))
    with open(out) as fh:
        return json.load(fh)


def millrace_for_case(case, tmp, data_path=None):
    if data_path is None:
        data_path = os.path.join(tmp, case.name + (".tsv" if case.layout == "tsv" else ".csv"))
        write_table(case, data_path)
        if case.layout == "zst":
            subprocess.run(["zstd", "-q", "-f", "--rm", data_path, "-o", data_path + ".zst"], check=True)
            data_path += ".zst"
    if case.use_model_file:
        model_path = os.path.join(tmp, case.name + ".model")
        with open(model_path, "w") as fh:
            fh.write("# written by compare_reference.py\n\n")
            fh.write("\n".join(case.model_lines()) + "\n")
        options = ["--model", model_path]
    else:
        options = case.cli_options()
    return run_millrace(tmp, data_path, options)


def reference_inputs(case, names):
    keep = case.used_rows()
    data = columns_arrays(case, keep)
    n = int(keep.sum())
    X = np.column_stack([design_column(nm, data, n) for nm in names])
    y = np.asarray(data[case.outcome], dtype=float)
    w = np.asarray(data[case.weight], dtype=float) if case.weight else np.ones(n)
    off = np.zeros(n)
    if case.offset:
        off += np.asarray(data[case.offset], dtype=float)
    if case.exposure:
        off += np.log(np.asarray(data[case.exposure], dtype=float))
    trials = np.asarray(data[case.trials], dtype=float) if case.trials else None
    return data, X, y, w, off, trials


def stats_from_ll(ll, k, n):
    return {"log_likelihood": ll, "aic": -2 * ll + 2 * k, "bic": -2 * ll + math.log(n) * k}


def polished_sm_fit(model, scale):
    """The fit as asked (tolerance 1e-14, at most 200 iterations), then more
    iterations from its estimates until the coefficients stop changing.  Why: a relative
    deviance change of 1e-14 still leaves the linearly converging
    non-canonical links about 1e-7 (relative) short of the maximum, and the
    covariance is computed from the weights of the previous iteration; both
    errors would eat most of the 1e-8 budget of the comparison."""
    res = model.fit(tol=1e-14, rtol=1e-14, maxiter=200, scale=scale)
    return model.fit(start_params=res.params, tol_criterion="params", atol=0.0, rtol=1e-15,
                     maxiter=100, scale=scale)


def fit_statsmodels(case, X, y, w, off, trials):
    """reference: statsmodels GLM (Debian python3-statsmodels).
    GLM prior weights are statsmodels' var_weights; successes/trials become a
    two-column [successes, failures] endog."""
    family = SM_FAMILY[case.family](link=SM_LINK[case.link]())
    endog = np.column_stack([y, trials - y]) if trials is not None else y
    kw = dict(family=family, offset=off, var_weights=w)
    scale = "X2" if case.dispersion == "estimate" else None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = polished_sm_fit(sm.GLM(endog, X, **kw), scale)
        if case.intercept:
            null_dev = polished_sm_fit(sm.GLM(endog, np.ones((len(y), 1)), **kw), None).deviance
        else:
            null_dev = family.deviance(res.model.endog, family.fitted(off), w)
    n, p = X.shape
    out = {"coef": np.asarray(res.params), "se": np.asarray(res.bse), "deviance": res.deviance,
           "null_deviance": null_dev, "pearson_chi2": res.pearson_chi2, "dispersion": res.scale,
           "residual_df": n - p, "rank": p, "n": n}
    # R's logLik definition (what millrace promises): scale families use the
    # deviance-based dispersion dev/n.  statsmodels' per-observation formula
    # matches R's only for unit weights (gamma, inverse gaussian), for
    # gaussian with weights, and for the discrete families with integer data.
    proportion_weighted = case.family == "binomial" and trials is None and case.weight
    if case.family in SCALE_FAMILIES:
        if case.family == "gaussian" or not case.weight:
            ll = family.loglike(res.model.endog, res.mu, w, 1.0, scale=res.deviance / n)
            out.update(stats_from_ll(ll, p + 1, n))
    elif not proportion_weighted:
        ll = family.loglike(res.model.endog, res.mu, w, 1.0, scale=1.0)
        out.update(stats_from_ll(ll, p, n))
    return out


R_PROGRAM = r"""
# reference: R glm.fit (Debian r-base-core); no model formula involved.
a <- commandArgs(TRUE)
d <- a[1]; n <- as.integer(a[2]); p <- as.integer(a[3]); fam <- a[4]; lnk <- a[5]
two_col <- a[6] == "1"; intercept <- a[7] == "1"; estdisp <- a[8] == "1"
rd <- function(f, k) readBin(file.path(d, f), "double", n = k, size = 8, endian = "little")
X <- matrix(rd("X.bin", n * p), n, p)
y <- if (two_col) matrix(rd("y.bin", 2 * n), n, 2) else rd("y.bin", n)
w <- rd("w.bin", n); off <- rd("off.bin", n)
family <- switch(fam, gaussian = gaussian(link = lnk), binomial = binomial(link = lnk),
                 poisson = poisson(link = lnk), gamma = Gamma(link = lnk),
                 "inverse-gaussian" = inverse.gaussian(link = lnk))
ctrl <- glm.control(epsilon = 1e-14, maxit = 200)
# Polish: single iterations from the estimates until the coefficients stop
# changing.  Why: a relative deviance change of 1e-14 leaves linearly
# converging (non-canonical) fits up to about 1e-7 short of the maximum (the
# deviance is flat there) and the QR one iteration behind.
polished <- function(x) {
  f <- glm.fit(x = x, y = y, weights = w, offset = off, family = family,
               control = ctrl, intercept = intercept)
  if (!f$converged) stop("glm.fit did not converge")
  for (i in 1:100) {
    prev <- f$coefficients
    f <- suppressWarnings(glm.fit(x = x, y = y, weights = w, offset = off, family = family,
                                  start = prev, intercept = intercept,
                                  control = glm.control(maxit = 1)))
    if (max(abs(f$coefficients - prev) / pmax(abs(prev), 1e-300)) < 1e-15 && i > 1) break
  }
  f
}
fit <- polished(X)
nulldev <- fit$null.deviance
# as glm() does: with an offset the null model is refitted and keeps it
if (intercept && any(off != 0)) nulldev <- polished(matrix(1, n, 1))$deviance
mu <- fit$fitted.values
pearson <- sum(fit$prior.weights * (fit$y - mu)^2 / family$variance(mu))
fixed <- fam %in% c("binomial", "poisson") && !estdisp
disp <- if (fixed) 1 else pearson / fit$df.residual
r <- fit$rank
cu <- chol2inv(fit$qr$qr[1:r, 1:r, drop = FALSE])
piv <- fit$qr$pivot[1:r]
cov <- matrix(NA_real_, p, p)
cov[piv, piv] <- cu * disp
k <- r + if (fam %in% c("gaussian", "gamma", "inverse-gaussian")) 1 else 0
ll <- k - fit$aic / 2
nobs <- sum(fit$prior.weights != 0)
out <- file.path(d, "r_out.txt")
cat(sprintf("coef %.17g %.17g\n", fit$coefficients, sqrt(diag(cov))), sep = "", file = out)
vals <- c(deviance = fit$deviance, null_deviance = nulldev, pearson_chi2 = pearson,
          dispersion = disp, log_likelihood = ll, aic = -2 * ll + 2 * k,
          bic = -2 * ll + log(nobs) * k, residual_df = fit$df.residual, rank = r,
          n = nobs)
cat(sprintf("%s %.17g\n", names(vals), vals), sep = "", file = out, append = TRUE)
"""


def fit_r(case, X, y, w, off, trials, tmp):
    """reference: R glm.fit (Debian r-base-core)."""
    rdir = tempfile.mkdtemp(dir=tmp)
    n, p = X.shape
    np.asarray(X, dtype="<f8").T.tofile(os.path.join(rdir, "X.bin"))   # column-major
    yy = np.column_stack([y, trials - y]) if trials is not None else y
    np.asarray(yy, dtype="<f8").T.tofile(os.path.join(rdir, "y.bin"))
    np.asarray(w, dtype="<f8").tofile(os.path.join(rdir, "w.bin"))
    np.asarray(off, dtype="<f8").tofile(os.path.join(rdir, "off.bin"))
    prog = os.path.join(tmp, "glm_fit_reference.R")
    if not os.path.exists(prog):
        with open(prog, "w") as fh:
            fh.write(R_PROGRAM)
    args = [RSCRIPT, "--vanilla", prog, rdir, str(n), str(p), case.family,
            R_LINK.get(case.link, case.link), "1" if trials is not None else "0",
            "1" if case.intercept else "0", "1" if case.dispersion == "estimate" else "0"]
    return run_r(args, rdir)


def run_r(args, rdir):
    """Runs an R reference program that writes rdir/r_out.txt: "coef EST SE"
    lines, then "NAME VALUE" lines; returns them in the comparison layout."""
    proc = subprocess.run(args, capture_output=True, text=True, timeout=120)
    if proc.returncode != 0:
        raise RuntimeError("Rscript failed: " + proc.stderr.strip()[-500:])
    coef, se, out = [], [], {}
    for line in open(os.path.join(rdir, "r_out.txt")):
        parts = line.split()
        if parts[0] == "coef":
            coef.append(float(parts[1]))
            se.append(float(parts[2]))
        else:
            out[parts[0]] = float(parts[1])
    out["coef"], out["se"] = np.asarray(coef), np.asarray(se)
    return out


# ---------------------------------------------------------------- comparing

def rel_diff(a, b, floor):
    if a is None or b is None or not (math.isfinite(a) and math.isfinite(b)):
        return math.inf if a != b else 0.0
    return abs(a - b) / max(abs(b), floor)


SCALAR_KEYS = ("deviance", "null_deviance", "pearson_chi2", "dispersion",
               "log_likelihood", "aic", "bic")
INTEGER_KEYS = ("residual_df", "rank", "n")


def no_likelihood_if_quasi(case, ref):
    """Binomial or poisson with the dispersion estimated is a quasi family:
    no likelihood, so millrace writes null log-likelihood, AIC and BIC.  The
    references' numbers there are those of the plain family; R's own
    quasipoisson() and quasibinomial() families give an AIC of NA (recalled
    from R's documentation of family objects, not checked here)."""
    if case.family in ("binomial", "poisson") and case.dispersion == "estimate":
        for key in ("log_likelihood", "aic", "bic"):
            if key in ref:
                ref[key] = None
    return ref


def compare(label, got, ref, names, tol, se_allow=0.0):
    """Problems found comparing `got` (millrace layout) with a reference;
    an estimate within se_allow reference standard errors also passes."""
    problems = []
    for key, floor in (("coef", COEF_FLOOR), ("se", 1e-300)):
        def excess(j):
            r = rel_diff(got[key][j], ref[key][j], floor)
            if key == "coef" and got[key][j] is not None and se_allow > 0:
                r = min(r, tol * abs(got[key][j] - ref[key][j]) / (se_allow * ref["se"][j]))
            return r
        worst = max(range(len(names)), key=excess)
        r = rel_diff(got[key][worst], ref[key][worst], floor)
        if excess(worst) > tol:
            problems.append("%s %s[%s] %r vs %r (rel %.2g)" % (label, key, names[worst],
                                                              got[key][worst], ref[key][worst], r))
    for key in SCALAR_KEYS:
        if key in ref and key in got:
            r = rel_diff(got[key], ref[key], 1e-300)
            if r > tol:
                problems.append("%s %s %r vs %r (rel %.2g)" % (label, key, got[key], ref[key], r))
    for key in INTEGER_KEYS:
        if key in ref and key in got and got[key] != ref[key]:
            problems.append("%s %s %r vs %r" % (label, key, got[key], ref[key]))
    return problems


def millrace_values(js, names):
    coefs = {c["name"]: c for c in js["coefficients"]}
    fit = js["fit"]
    got = {k: fit.get(k) for k in SCALAR_KEYS + INTEGER_KEYS}
    got["coef"] = [coefs[nm]["estimate"] for nm in names]
    got["se"] = [coefs[nm]["standard_error"] for nm in names]
    return got


def check_inference(case, js):
    """Test statistics, p-values and intervals from millrace's own estimates,
    recomputed with scipy.stats (reference: scipy, Debian python3-scipy)."""
    problems = []
    fixed = case.family in ("binomial", "poisson") and case.dispersion != "estimate"
    if js.get("statistic") != ("z" if fixed else "t"):
        problems.append("statistic label %r" % js.get("statistic"))
    level = js["options"]["level"]
    df = js["fit"]["residual_df"]
    dist = scipy.stats.norm() if fixed else scipy.stats.t(df)
    q = dist.ppf(0.5 + level / 2)
    for c in js["coefficients"]:
        est, se = c["estimate"], c["standard_error"]
        stat = est / se
        expect = {"statistic": stat, "p_value": 2 * dist.sf(abs(stat)),
                  "ci_low": est - q * se, "ci_high": est + q * se}
        if case.link in ("log", "logit"):
            expect.update(ratio=math.exp(est), ratio_ci_low=math.exp(est - q * se),
                          ratio_ci_high=math.exp(est + q * se))
        for key, val in expect.items():
            tol = 1e-7 if key == "p_value" else 1e-9
            floor = 1e-15 if key == "p_value" else 1e-12
            if c.get(key) is None or rel_diff(c[key], val, floor) > tol:
                problems.append("%s %s %r vs scipy %r" % (c["name"], key, c.get(key), val))
                break
    return problems[:3]


def check_case(case, tmp, data_path=None):
    js = millrace_for_case(case, tmp, data_path)
    keep = case.used_rows()
    data = columns_arrays(case, keep)
    expect = expected_names(case, data)
    names = [c["name"] for c in js["coefficients"]]
    if sorted(names) != sorted(expect):
        return ["coefficient names %r, expected (any order) %r" % (names, expect)]
    problems = []
    if not js["convergence"]["converged"]:
        problems.append("not converged")
    if js["rows"]["used"] != int(keep.sum()):
        problems.append("rows used %r, expected %d" % (js["rows"]["used"], keep.sum()))
    _, X, y, w, off, trials = reference_inputs(case, names)
    got = millrace_values(js, names)
    sm_ref = no_likelihood_if_quasi(case, fit_statsmodels(case, X, y, w, off, trials))
    se_allow = 0.0 if CANONICAL[case.family] == case.link else SE_ALLOW_NONCANONICAL
    problems += compare("vs statsmodels:", got, sm_ref, names, REL_TOL, se_allow)
    if os.path.exists(RSCRIPT):
        r_ref = no_likelihood_if_quasi(case, fit_r(case, X, y, w, off, trials, tmp))
        problems += compare("vs R:", got, r_ref, names, REL_TOL, se_allow)
        # the two references must agree, else this script is wrong
        problems += compare("statsmodels vs R (harness):", sm_ref, r_ref, names, REF_AGREE)
    problems += check_inference(case, js)
    return problems


# ---------------------------------------------------------------- identities

def identity_rate_ratio(rng, tmp):
    """Poisson, one binary factor, exposure: the MLE is the crude rates.
    reference: analytic identity (the score equations of a saturated
    two-group rate model give mu-hat = y-bar rates per group)."""
    n = 3000
    g = rng.choice(["A", "B"], n)
    e = np.round(rng.uniform(0.1, 10, n), 4)
    y = rng.poisson(e * np.where(g == "B", 0.7, 0.3))
    case = Case("identity_rate_ratio", "poisson", "log", {"g": g, "e": e, "y": y}, "y",
                factors=[("g", None)], exposure="e")
    js = millrace_for_case(case, tmp)
    coefs = {c["name"]: c["estimate"] for c in js["coefficients"]}
    rate_a = y[g == "A"].sum() / e[g == "A"].sum()
    rate_b = y[g == "B"].sum() / e[g == "B"].sum()
    problems = []
    if rel_diff(math.exp(coefs["intercept"]), rate_a, 1e-300) > 1e-10:
        problems.append("expintercept %r vs crude rate %r" % (math.exp(coefs["intercept"]), rate_a))
    if rel_diff(math.exp(coefs["g=B"]), rate_b / rate_a, 1e-300) > 1e-10:
        problems.append("exp(g=B) %r vs crude rate ratio %r" % (math.exp(coefs["g=B"]), rate_b / rate_a))
    return problems


def identity_saturated(rng, tmp):
    """A saturated Poisson model reproduces the observed counts, so its
    deviance is 0 and expintercept is the reference cell's count.
    reference: analytic identity (saturated model)."""
    a_levels, b_levels = ["a1", "a2", "a3"], ["b1", "b2", "b3", "b4"]
    cells = list(itertools.product(a_levels, b_levels))
    a = np.asarray([c[0] for c in cells])
    b = np.asarray([c[1] for c in cells])
    y = rng.integers(5, 200, len(cells))
    cell = np.asarray(["%s_%s" % c for c in cells])
    problems = []
    models = [
        Case("saturated_cells", "poisson", "log", {"cell": cell, "a": a, "b": b, "y": y}, "y",
             factors=[("cell", None)]),
        Case("saturated_interaction", "poisson", "log", {"cell": cell, "a": a, "b": b, "y": y}, "y",
             factors=[("a", None), ("b", None)], interactions=[("a", "b")]),
    ]
    for case in models:
        js = millrace_for_case(case, tmp)
        dev = js["fit"]["deviance"]
        if not (dev is not None and abs(dev) < 1e-8):
            problems.append("%s deviance %r, expected 0" % (case.name, dev))
        b0 = math.exp([c["estimate"] for c in js["coefficients"] if c["name"] == "intercept"][0])
        if rel_diff(b0, float(y[0]), 1e-300) > 1e-10:
            problems.append("%s expintercept %r vs count %r" % (case.name, b0, y[0]))
    return problems


def identity_least_squares(rng, tmp):
    """Gaussian identity with numerics only is ordinary least squares.
    reference: numpy.linalg.lstsq (Debian python3-numpy); sigma^2 = RSS/(n-p)."""
    n = 500
    x1 = np.round(rng.normal(0, 2, n), 6)
    x2 = np.round(rng.uniform(-1, 1, n), 6)
    year = rng.integers(2000, 2025, n)
    y = np.round(1 + 0.5 * x1 - 2 * x2 + 0.05 * (year - 2010) + rng.normal(0, 0.5, n), 6)
    case = Case("identity_least_squares", "gaussian", "identity",
                {"x1": x1, "x2": x2, "year": year, "y": y}, "y", numerics=["x1", "x2", "year"])
    js = millrace_for_case(case, tmp)
    names = ["intercept", "x1", "x2", "year"]
    X = np.column_stack([np.ones(n), x1, x2, year.astype(float)])
    beta, rss, _, _ = np.linalg.lstsq(X, y, rcond=None)
    sigma2 = float(rss[0]) / (n - 4)
    got = millrace_values(js, names)
    problems = []
    for j, nm in enumerate(names):
        if rel_diff(got["coef"][j], beta[j], COEF_FLOOR) > REL_TOL:
            problems.append("%s %r vs lstsq %r" % (nm, got["coef"][j], beta[j]))
    if rel_diff(got["dispersion"], sigma2, 1e-300) > REL_TOL:
        problems.append("dispersion %r vs RSS/(n-p) %r" % (got["dispersion"], sigma2))
    if rel_diff(got["deviance"], float(rss[0]), 1e-300) > REL_TOL:
        problems.append("deviance %r vs RSS %r" % (got["deviance"], float(rss[0])))
    return problems


# Dobson & Barnett, "An Introduction to Generalized Linear Models" (3rd ed.),
# chapter 9, Poisson regression of coronary deaths among British doctors on
# smoking and age (Doll & Hill data): estimates and standard errors as printed
# to 4 decimals, deviance and Pearson chi-squared to 3 (recalled from memory).
PUBLISHED_DOLL_HILL = {
    "intercept": (-10.7918, 0.4501),
    "smoker=yes": (1.4410, 0.3722),
    "agecat": (2.3765, 0.2079),
    "agesq": (-0.1977, 0.0274),
    "smoker=yes & agecat": (-0.3075, 0.0970),
}
PUBLISHED_DOLL_HILL_DEVIANCE = 1.635       # (recalled from memory)
PUBLISHED_DOLL_HILL_PEARSON = 1.550        # (recalled from memory)


def published_doll_hill(tmp):
    case, path = doll_hill_case()
    problems = check_case(case, tmp, data_path=path)
    js = run_millrace(tmp, path, case.cli_options(), "published.json")
    coefs = {c["name"]: c for c in js["coefficients"]}
    for name, (est, se) in PUBLISHED_DOLL_HILL.items():
        c = coefs.get(name)
        if c is None:
            problems.append("missing coefficient " + name)
            continue
        # printed to 4 decimals: allow half a unit in the last place
        if abs(c["estimate"] - est) > 0.5e-4 + 1e-12 or abs(c["standard_error"] - se) > 0.5e-4 + 1e-12:
            problems.append("%s %r (%r) vs published %r (%r)" % (name, c["estimate"], c["standard_error"], est, se))
    if abs(js["fit"]["deviance"] - PUBLISHED_DOLL_HILL_DEVIANCE) > 0.5e-3:
        problems.append("deviance %r vs published %r" % (js["fit"]["deviance"], PUBLISHED_DOLL_HILL_DEVIANCE))
    if abs(js["fit"]["pearson_chi2"] - PUBLISHED_DOLL_HILL_PEARSON) > 0.5e-3:
        problems.append("Pearson %r vs published %r" % (js["fit"]["pearson_chi2"], PUBLISHED_DOLL_HILL_PEARSON))
    return problems


# ---------------------------------------------------------------- main

def run_checks(checks):
    """Runs (name, fn) checks, fn returning a list of problems; prints a line
    each and the closing count; 0 when all passed, else 1."""
    passed = failed = 0
    for name, fn in checks:
        try:
            problems = fn()
        except Exception as exc:  # one broken case must not hide the others
            problems = ["%s: %s" % (type(exc).__name__, exc)]
        if problems:
            failed += 1
            print("FAIL %s: %s" % (name, "; ".join(problems)))
        else:
            passed += 1
            print("ok %s" % name)
        sys.stdout.flush()
    print("%d passed, %d failed" % (passed, failed))
    return 1 if failed else 0


def main():
    if not os.access(MILLRACE, os.X_OK):
        print("FAIL setup: %s not found (run make first)" % MILLRACE)
        print("0 passed, 1 failed")
        return 1
    rng = np.random.default_rng(20240517)
    tmp = tempfile.mkdtemp(prefix="millrace-ref-")
    try:
        checks = [(c.name, (lambda c=c: check_case(c, tmp))) for c in build_cases(rng)]
        checks += [
            ("identity_rate_ratio", lambda: identity_rate_ratio(rng, tmp)),
            ("identity_saturated", lambda: identity_saturated(rng, tmp)),
            ("identity_least_squares", lambda: identity_least_squares(rng, tmp)),
            ("published_doll_hill", lambda: published_doll_hill(tmp)),
        ]
        return run_checks(checks)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
