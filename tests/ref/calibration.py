#!/usr/bin/python3
"""The fit's calibration table ("calibration" in the fit JSON) on the samples.

Oracles:
  - statsmodels GLM (Debian python3-statsmodels), fitted here on the same
    rows with a design built with numpy from the fit's coefficient names:
    its fitted means (fittedvalues) are put in the fit's groups (a mean
    goes to the group whose range holds it, the midpoint between two
    groups' ranges splitting them) and each group's rows, weight,
    observed (sum y) and expected (sum of statsmodels' means) are summed
    here with numpy: rows and weight exactly, observed to 1e-12, expected,
    mean_low and mean_high to 1e-7 relative (two fits, each to its own
    tolerance; 1e-6 where the means are one Newton step before the
    maximum, below).  The falls sample (poisson, log link, exposure,
    interaction) and the screening sample (binomial logit; rows with a
    missing bmi, empty or NA, left out as the fit leaves them).
  - analytic identity: for a poisson log-link model with an intercept the
    intercept's score equation is sum(y - mu) = 0 at the maximum, so the
    expected total over all groups equals the observed total (1e-12
    relative; the collapsed fit takes its means at the coefficients
    reported).  Without collapsing, the fit ends by the Newton decrement
    and its means are the last pass's: the basis says so, and the totals
    agree within the step it reports (the linear predictor's weighted root
    mean square change, times 10).
  - a model with an exposure bins its rows by the fitted rate per unit of
    exposure (mu / exposure), not by mu: the falls sample's groups are
    checked against statsmodels' means divided by person_years, and an
    invented file whose rows collapse into a few covariate patterns (prior
    weights, some 0, exposures varying within a pattern) is fitted collapsed
    and with --no-collapse: both give the same groups (rows, weight and
    observed identical; expected, mean_low and mean_high to 1e-9 relative,
    two fits ending a step apart), equal to statsmodels' (var_weights as the
    prior weights, offset log(exposure)) grouped by rate here with numpy.
  - the groups' rows add up to the rows used; at most ten groups, means
    increasing from group to group.
  - determinism: 1 and 2 threads, buffer sizes 64 KiB and 1 MiB, plain and
    zstd input give the same "calibration" bytes.

Prints "ok <case>" / "FAIL <case>: ..." and exits 1 on any failure.
"""
import csv
import json
import os
import re
import subprocess
import sys
import tempfile

import numpy as np
import statsmodels.api as sm

from score_samples import design  # the design matrix from the fit's coefficient names

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.path.join(ROOT, "build", "millrace")
SAMPLES = os.path.join(ROOT, "samples")
failures = 0


def check(name, ok, detail=""):
    global failures
    print(("ok " if ok else "FAIL ") + name + ("" if ok else ": " + detail))
    failures += 0 if ok else 1


def fit(tmp, name, *args, data=None):
    out = os.path.join(tmp, name + ".json")
    subprocess.run([BIN, "fit", "-m", os.path.join(SAMPLES, name.split("_")[0] + ".model"), "--json", out, "--quiet",
                    *args, data or os.path.join(SAMPLES, name.split("_")[0] + ".csv")],
                   check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return json.load(open(out))


def regroup(groups, mu, y, w, key=None):
    """statsmodels' means into the fit's groups by key (default: the means;
    rows of weight 0 left out); the sums of each."""
    key = mu if key is None else key
    cuts = [(a["mean_high"] + b["mean_low"]) / 2 for a, b in zip(groups, groups[1:])]
    which = np.where(w > 0, np.searchsorted(np.array(cuts), key), -1)
    return [dict(rows=int(np.sum(which == k)), weight=float(np.sum(w[which == k])),
                 observed=float(np.sum((w * y)[which == k])), expected=float(np.sum((w * mu)[which == k])),
                 mean_low=float(np.min(key[which == k])), mean_high=float(np.max(key[which == k])))
            for k in range(len(groups))]


def against_statsmodels(label, got, rows, y, family, offset=None, tol=1e-7, w=None):
    """With an offset the fit bins by the rate mu / exp(offset)."""
    names = [c["name"] for c in got["coefficients"]]
    X = design(names, rows)
    w = np.ones(len(y)) if w is None else w
    res = sm.GLM(y, X, family=family, offset=offset, var_weights=w).fit(tol=1e-13)
    groups = got["calibration"]["groups"]
    mu = np.asarray(res.fittedvalues)
    want = regroup(groups, mu, y, w, None if offset is None else mu / np.exp(offset))
    ok_rows = len(groups) == len(want) and all(g["rows"] == h["rows"] and g["weight"] == h["weight"]
                                               for g, h in zip(groups, want))
    check(f"{label}: rows and weight per group against statsmodels' means", ok_rows,
          str([(g["rows"], h["rows"]) for g, h in zip(groups, want)]))
    worst_o = max(abs(g["observed"] - h["observed"]) / max(h["observed"], 1) for g, h in zip(groups, want))
    check(f"{label}: observed per group (1e-12)", worst_o <= 1e-12, f"worst {worst_o:.3g}")
    worst = max(max(abs(g[k] - h[k]) / abs(h[k]) for k in ("expected", "mean_low", "mean_high"))
                for g, h in zip(groups, want))
    check(f"{label}: expected, mean_low, mean_high per group against statsmodels ({tol:g})", worst <= tol,
          f"worst {worst:.3g}")


def shape(label, got):
    groups = got["calibration"]["groups"]
    n = got["rows"]["used"] - got["rows"]["zero_weight"]
    check(f"{label}: rows add up to the rows used", sum(g["rows"] for g in groups) == n)
    ordered = all(a["mean_low"] <= a["mean_high"] < b["mean_low"] for a, b in zip(groups, groups[1:]))
    check(f"{label}: at most ten groups, in order of the mean", 0 < len(groups) <= 10 and ordered)


def totals(got):
    groups = got["calibration"]["groups"]
    return sum(g["observed"] for g in groups), sum(g["expected"] for g in groups)


def falls(tmp):
    rows = list(csv.DictReader(open(os.path.join(SAMPLES, "falls.csv"))))
    y = np.array([float(r["admissions"]) for r in rows])
    off = np.log(np.array([float(r["person_years"]) for r in rows]))
    got = fit(tmp, "falls")
    shape("falls", got)
    o, e = totals(got)
    check("falls (collapsed): sum expected = sum observed (score equation, 1e-12)", abs(e - o) <= 1e-12 * o,
          f"{abs(e - o) / o:.3g}")
    check("falls (collapsed): means at the coefficients reported",
          got["calibration"]["basis"].startswith("fitted means at the coefficients reported"))
    against_statsmodels("falls", got, rows, y, sm.families.Poisson(), off)
    plain = fit(tmp, "falls_plain", "--no-collapse")
    shape("falls --no-collapse", plain)
    o, e = totals(plain)
    basis = plain["calibration"]["basis"]
    step = re.search(r"that step was ([0-9.e+-]+) standard errors", basis)
    if basis.startswith("fitted means at the coefficients reported"):
        check("falls --no-collapse: sum expected = sum observed (1e-12)", abs(e - o) <= 1e-12 * o)
    else:
        check("falls --no-collapse: sum expected = sum observed within the step the basis reports",
              step is not None and abs(e - o) <= max(1e-12, 10 * float(step.group(1))) * o,
              f"{abs(e - o) / o:.3g}; {basis}")
    # one IRLS step before the maximum, a step of at most the tolerance in
    # standard errors (the basis says how large)
    against_statsmodels("falls --no-collapse", plain, rows, y, sm.families.Poisson(), off, tol=1e-6)


def rates(tmp):
    """Rows that collapse into patterns, exposures varying within each: the
    same groups collapsed and row by row, binned by rate."""
    rng = np.random.default_rng(20261205)
    data, model = os.path.join(tmp, "rates.csv"), os.path.join(tmp, "rates.model")
    with open(model, "w") as f:
        f.write("outcome events\nfamily poisson\nlink log\nexposure years\nweight w\nfactor area\nfactor band\n")
    areas, bands = ["north", "south", "east"], ["young", "mid", "old"]
    rows = []
    for i in range(600):  # invented: events in years of follow-up, by area and age band
        a, b = areas[rng.integers(3)], bands[rng.integers(3)]
        years = round(float(rng.uniform(0.5, 6.0)), 2)
        rate = {"north": 0.4, "south": 0.8, "east": 1.2}[a] * {"young": 0.5, "mid": 1.0, "old": 2.0}[b]
        w = [1, 1, 1, 2, 0.5, 0][rng.integers(6)]
        rows.append(dict(events=str(int(rng.poisson(rate * years))), years=str(years), w=str(w), area=a, band=b))
    with open(data, "w", newline="") as f:
        out = csv.DictWriter(f, fieldnames=["events", "years", "w", "area", "band"])
        out.writeheader()
        out.writerows(rows)
    runs = {}
    for extra in ([], ["--no-collapse"]):
        out = os.path.join(tmp, "rates%s.json" % len(extra))
        subprocess.run([BIN, "fit", "-m", model, "--json", out, "--quiet", *extra, data], check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        runs[tuple(extra)] = json.load(open(out))
    got, plain = runs[()], runs[("--no-collapse",)]
    check("rates: the rows collapse into patterns", (got["convergence"]["collapsed_patterns"] or 0) > 0
          and not plain["convergence"]["collapsed_patterns"])
    check("rates: the basis says the groups are of rates",
          "fitted rate per unit of exposure" in got["calibration"]["basis"]
          and "fitted rate per unit of exposure" in plain["calibration"]["basis"])
    a, b = got["calibration"]["groups"], plain["calibration"]["groups"]
    same = len(a) == len(b) and all(g[k] == h[k] for g, h in zip(a, b) for k in ("rows", "weight", "observed"))
    check("rates: collapsed and --no-collapse: the same rows, weight and observed per group", same,
          str([(g["rows"], h["rows"]) for g, h in zip(a, b)]))
    worst = max(abs(g[k] - h[k]) / abs(h[k]) for g, h in zip(a, b) for k in ("expected", "mean_low", "mean_high"))
    check("rates: collapsed and --no-collapse: expected, mean_low, mean_high (1e-9)", worst <= 1e-9,
          f"worst {worst:.3g}")
    shape("rates", got)
    y = np.array([float(r["events"]) for r in rows])
    w = np.array([float(r["w"]) for r in rows])
    off = np.log(np.array([float(r["years"]) for r in rows]))
    against_statsmodels("rates", got, rows, y, sm.families.Poisson(), off, w=w)
    against_statsmodels("rates --no-collapse", plain, rows, y, sm.families.Poisson(), off, tol=1e-6, w=w)


def screening(tmp):
    rows = [r for r in csv.DictReader(open(os.path.join(SAMPLES, "screening.csv"))) if r["bmi"] not in ("", "NA")]
    y = np.array([float(r["attended"]) for r in rows])
    got = fit(tmp, "screening")
    shape("screening", got)
    against_statsmodels("screening", got, rows, y, sm.families.Binomial())
    o, e = totals(got)
    check("screening (logit link, intercept): sum expected = sum observed (1e-12)", abs(e - o) <= 1e-12 * o,
          f"{abs(e - o) / o:.3g}")


def determinism(tmp):
    want = None
    for t in ("1", "2"):
        for b in ("65536", "1048576"):
            for data in ("falls.csv", "falls.csv.zst"):
                for extra in ([], ["--no-collapse"]):
                    got = fit(tmp, "falls_det", "--threads", t, "--buffer-size", b, *extra,
                              data=os.path.join(SAMPLES, data))
                    key = json.dumps(got["calibration"], sort_keys=True)
                    want = want or {}
                    want.setdefault(tuple(extra), key)
                    if want[tuple(extra)] != key:
                        check(f"determinism: threads {t}, buffer {b}, {data} {extra}", False, "other bytes")
                        return
    check("determinism: threads 1 and 2, buffers 64 KiB and 1 MiB, plain and zstd: the same calibration", True)


def main():
    with tempfile.TemporaryDirectory() as tmp:
        falls(tmp)
        rates(tmp)
        screening(tmp)
        determinism(tmp)
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
