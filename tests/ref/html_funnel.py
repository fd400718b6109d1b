#!/usr/bin/python3
"""The funnel plot of `millrace report --html --groups` against scipy and R.

The control limits at expected count E are exact Poisson quantiles: the
smallest k with P(X <= k) >= p, X ~ Poisson(E), over E, for p = 0.025,
0.975 (95 %) and 0.001, 0.999 (99.8 %); a group is outside the limits at a
level when P(X <= O) or P(X >= O) is below half of 1 - level.
  reference: scipy.stats.poisson.ppf / cdf / sf (Debian python3-scipy), and
  R's qpois (Debian r-base) for the same quantiles.
Two tables are checked: a scoring run's groups of the bundled falls sample,
and a group table written here with expected counts from 0.02 to 2e6 (the
quantile search far into both tails).  Numbers are read from the plot's
data table (page written with --digits 17).
"""
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile

from scipy.stats import poisson

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
MILLRACE = os.path.join(ROOT, "build", "millrace")
LEVELS = ((0.025, 0.975), (0.001, 0.999))

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


def main():
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
    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


sys.exit(main())
