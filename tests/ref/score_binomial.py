#!/usr/bin/python3
"""`millrace score --by` on a binomial fit: the O/E interval.

Oracles:
  - statsmodels' proportion_confint(O, n, alpha, method="beta") (Debian
    python3-statsmodels: the Clopper-Pearson interval) and
    scipy.stats.beta.ppf for the one-sided bounds at O = 0 and O = n,
    times n / E: 1e-9 relative.  n (the trials) and O are summed here
    with the csv module; E is the fit's.
  - the screening sample (binomial logit) by sex and by smoker, at
    levels 0.95 and 0.9; a small file whose groups have O = 0 and O = n.
  - the JSON says "interval": "binomial-exact"; the text table's title
    names Clopper-Pearson.

Prints "ok <case>" / "FAIL <case>: ..." and exits 1 on any failure.
"""
import csv
import json
import os
import subprocess
import sys
import tempfile

from scipy.stats import beta
from statsmodels.stats.proportion import proportion_confint

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.path.join(ROOT, "build", "millrace")
SAMPLES = os.path.join(ROOT, "samples")
failures = 0


def check(name, ok, detail=""):
    global failures
    print(("ok " if ok else "FAIL ") + name + ("" if ok else ": " + detail))
    failures += 0 if ok else 1


def run(*args):
    return subprocess.run([BIN, *args], check=True, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL).stdout


def want_interval(o, n, e, level):
    a = 1 - level
    if o == 0:
        return 0.0, beta.ppf(1 - a, 1, n) * n / e
    if o == n:
        return beta.ppf(a, n, 1) * n / e, n / e
    low, high = proportion_confint(o, n, alpha=a, method="beta")
    return low * n / e, high * n / e


def rel(a, b):
    return abs(a - b) / max(abs(b), 1e-300) if b != 0 else abs(a)


def compare(label, table, data, by, level):
    got = json.load(open(table))
    check(f"{label}: the JSON names the binomial interval", got.get("interval") == "binomial-exact")
    sums = {}
    for r in csv.DictReader(open(data)):
        if r["bmi"] in ("", "NA"):
            continue
        s = sums.setdefault(r[by], [0, 0.0])
        s[0] += 1
        s[1] += float(r["attended"])
    worst = 0.0
    for g in got["groups"]:
        n, o = sums[g["key"][by]]
        if g["rows"] != n or g["observed"] != o:
            check(f"{label}: rows and observed summed with the csv module", False, f"{g}")
            return
        low, high = want_interval(o, n, g["expected"], level)
        worst = max(worst, rel(g["o_e_low"], low), rel(g["o_e_high"], high))
    check(f"{label}: Clopper-Pearson against statsmodels/scipy (1e-9)", worst <= 1e-9, f"worst {worst:.3g}")


def main():
    with tempfile.TemporaryDirectory() as tmp:
        fit = os.path.join(tmp, "screening.json")
        data = os.path.join(SAMPLES, "screening.csv")
        run("fit", "-m", os.path.join(SAMPLES, "screening.model"), "--json", fit, "--quiet", data)
        table = os.path.join(tmp, "groups.json")
        for by, level in (("sex", "0.95"), ("smoker", "0.9")):
            run("score", "--fit", fit, "--out", os.path.join(tmp, "s.csv"), "--by", by, "--level", level, "--unseen", "blank",
                "--by-out", table, "--quiet", data)
            compare(f"screening by {by} at {level}", table, data, by, float(level))
        small = os.path.join(tmp, "small.csv")
        with open(small, "w") as f:
            f.write("id,age,sex,deprivation,smoker,bmi,attended\n")
            f.write("1,50,F,1,never,25,0\n2,60,F,2,never,26,0\n3,40,M,3,current,30,1\n4,70,M,1,former,22,1\n"
                    "5,55,M,5,never,27,1\n")
        run("score", "--fit", fit, "--out", os.path.join(tmp, "t.csv"), "--by", "sex", "--by-out", table, "--quiet", "--unseen", "blank",
            small)
        compare("O = 0 (F) and O = n (M)", table, small, "sex", 0.95)
        text = run("score", "--fit", fit, "--out", os.path.join(tmp, "u.csv"), "--by", "sex", small).decode()
        check("the text table names Clopper-Pearson", "Clopper-Pearson" in text, text[:200])
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
