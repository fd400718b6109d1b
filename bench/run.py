#!/usr/bin/python3
"""millrace benchmarks: timings and ratios measured side by side in one run.

Not a test: nothing here fails on a time.  Writes bench/results/latest.json
and bench/results/latest.md (the table the README shows).

  bench/run.py                   cases A, B, C at 1e6 and 1e7 rows
  BENCH_ROWS=1e5 bench/run.py    a quick smoke (what CI may run)
  BENCH_ROWS=1e6,1e7,1e8 ...     add 1e8 (about 1.1 GB of zstd input in $BENCH_DIR)
  BENCH_CASES=A BENCH_TAG=large  only case A, results in bench/results/large.{json,md}

Data come from tools/synth.c (invented, seeded) in $BENCH_DIR (default
/tmp/millrace-bench); they are never committed.
"""
import json
import os
import platform
import re
import shutil
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
MILLRACE = os.path.join(ROOT, "build", "millrace")
SYNTH = os.path.join(ROOT, "build", "synth")
DATA = os.environ.get("BENCH_DIR", "/tmp/millrace-bench")
RESULTS = os.path.join(ROOT, "bench", "results")
RSCRIPT = "/usr/bin/Rscript"

COMMON = ["outcome events", "family poisson", "exposure followup", "factor age_band ref=00-04",
          "factor sex ref=F", "factor region ref=R01"]
CASES = {
    "A": ("poisson rate model, factors and small-integer numerics",
          COMMON + ["numeric deprivation", "numeric year"]),
    "B": ("A plus continuous age and bmi, age x sex",
          COMMON + ["numeric deprivation", "numeric year", "numeric age", "numeric bmi", "interact age sex"]),
    "C": ("logistic: age, sex, deprivation, bmi",
          ["outcome flag", "family binomial", "numeric age", "factor sex ref=F", "numeric deprivation",
           "numeric bmi"]),
}


def rows_list():
    spec = os.environ.get("BENCH_ROWS", "1e6,1e7")
    return [int(float(x)) for x in spec.split(",") if x]


def timed(cmd, stdout=subprocess.DEVNULL):
    """Wall seconds and peak RSS (kB) of a command, via GNU time."""
    with tempfile.NamedTemporaryFile("r", suffix=".time") as tf:
        t0 = time.monotonic()
        proc = subprocess.run(["/usr/bin/time", "-f", "%M", "-o", tf.name] + cmd, stdout=stdout,
                              stderr=subprocess.PIPE, text=True)
        wall = time.monotonic() - t0
        lines = [ln for ln in open(tf.name).read().split("\n") if ln.strip().isdigit()]
        rss = int(lines[-1]) if lines else 0
    if proc.returncode not in (0, 7):
        raise RuntimeError("%s failed: %s" % (cmd[0], proc.stderr.strip()[-400:]))
    return wall, rss


def data_file(rows):
    os.makedirs(DATA, exist_ok=True)
    path = os.path.join(DATA, "synth-%d.csv.zst" % rows)
    if not os.path.exists(path):
        subprocess.run([SYNTH, "--rows", str(rows), "--seed", "1", "--out", path], check=True)
    return path


def model_file(name, lines, extra=()):
    path = os.path.join(DATA, "case%s.model" % name)
    with open(path, "w") as f:
        f.write("\n".join(list(lines) + list(extra)) + "\n")
    return path


def fit(model, data, *opts, repeats=1):
    """The best wall time of `repeats` runs (shared machines are noisy; the
    zstd baseline is a best of 3 too), with that run's peak RSS and JSON."""
    out = os.path.join(DATA, "fit.json")
    best = None
    for _ in range(repeats):
        wall, rss = timed([MILLRACE, "fit", "--quiet", "--json", out, "-m", model] + list(opts) + [data])
        if best is None or wall < best[0]:
            with open(out) as f:
                best = (wall, rss, json.load(f))
    return best


def coef_diff(a, b):
    """Largest |difference| relative to max(|estimate|, std. error)."""
    m = 0.0
    for x, y in zip(a["coefficients"], b["coefficients"]):
        if x["estimate"] is None or y["estimate"] is None:
            continue
        scale = max(abs(y["estimate"]), y["standard_error"] or 0.0, 1e-300)
        m = max(m, abs(x["estimate"] - y["estimate"]) / scale)
    return m


R_PROGRAM = r"""
args <- commandArgs(trailingOnly = TRUE)
d <- read.csv(args[1], colClasses = "character")
names_ <- readLines(args[2]); fam <- args[3]
col <- function(nm) {
  if (nm == "intercept") return(rep(1, nrow(d)))
  v <- rep(1, nrow(d))
  for (p in strsplit(nm, " & ", fixed = TRUE)[[1]]) {
    kv <- strsplit(p, "=", fixed = TRUE)[[1]]
    if (length(kv) == 2) v <- v * (d[[kv[1]]] == kv[2]) else v <- v * as.numeric(d[[p]])
  }
  v
}
x <- sapply(names_, col)
keep <- complete.cases(x)
if (fam == "poisson") {
  f <- glm.fit(x[keep, ], as.numeric(d$events[keep]), offset = log(as.numeric(d$followup[keep])),
               family = poisson(), control = glm.control(epsilon = 1e-10, maxit = 50))
} else {
  f <- glm.fit(x[keep, ], as.numeric(d$flag[keep]), family = binomial(),
               control = glm.control(epsilon = 1e-10, maxit = 50))
}
cat(format(f$coefficients, digits = 17), sep = "\n")
"""


def r_reference(case, data, names):
    """Same model in R's glm.fit on the decompressed file (design built from
    the coefficient names, no model formula)."""
    tmp = tempfile.mkdtemp(dir=DATA)
    try:
        plain = os.path.join(tmp, "d.csv")
        with open(plain, "w") as f:
            subprocess.run(["zstd", "-dc", data], stdout=f, check=True)
        with open(os.path.join(tmp, "names"), "w") as f:
            f.write("\n".join(names) + "\n")
        with open(os.path.join(tmp, "ref.R"), "w") as f:
            f.write(R_PROGRAM)
        out = os.path.join(tmp, "coef")
        with open(out, "w") as fo:
            wall, rss = timed([RSCRIPT, os.path.join(tmp, "ref.R"), plain, os.path.join(tmp, "names"),
                               "poisson" if case != "C" else "binomial"], stdout=fo)
        coef = [float(x) for x in open(out).read().split()]
        return wall, rss, coef
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def run_case(name, rows):
    desc, lines = CASES[name]
    data = data_file(rows)
    model = model_file(name, lines)
    zwall = min(timed(["zstd", "-dc", data])[0] for _ in range(3))  # best of 3: page cache warm
    repeats = 3 if rows <= 10000000 else 1
    wall, rss, j = fit(model, data, repeats=repeats)
    mwall, mrss, jm = fit(model, data, "--in-memory", repeats=repeats)
    res = {
        "case": name, "description": desc, "rows": rows, "input_bytes": os.path.getsize(data),
        "seconds": wall, "peak_rss_kb": rss, "passes": j["convergence"]["passes"],
        "iterations": j["convergence"]["iterations"],
        "pass_seconds": j["convergence"]["pass_seconds"],
        "rows_per_second": rows / wall, "zstd_seconds": zwall, "ratio_to_zstd": wall / zwall,
        "in_memory_seconds": mwall, "in_memory_peak_rss_kb": mrss, "ratio_to_in_memory": wall / mwall,
        "in_memory_max_coef_diff": coef_diff(j, jm), "collapsed": j["convergence"]["passes"] == 1,
    }
    if os.path.exists(RSCRIPT) and rows <= 1000000:
        names = [c["name"] for c in j["coefficients"]]
        try:
            rw, rr, rc = r_reference(name, data, names)
            diff = max(abs(a["estimate"] - b) / max(abs(b), a["standard_error"]) for a, b in zip(j["coefficients"], rc))
            res.update({"r_seconds": rw, "r_peak_rss_kb": rr, "r_max_coef_diff": diff})
        except Exception as e:  # the benchmark reports, it does not fail
            res["r_error"] = str(e)[-300:]
    return res


def plain_file(rows):
    """The decompressed copy of the rows file (generated, never committed)."""
    path = os.path.join(DATA, "synth-%d.csv" % rows)
    if not os.path.exists(path):
        with open(path + ".tmp", "w") as f:
            subprocess.run(["zstd", "-dc", data_file(rows)], stdout=f, check=True)
        os.rename(path + ".tmp", path)
    return path


def threads_ratio(rows):
    """Passes that read and parse every row (no cache, no collapsing), case
    B: 1 worker against 2, on the plain CSV (parse-bound: later passes have
    no reader thread) and on the zstd file (one core also decompresses).
    Runs alternate between 1 and 2 workers, five of each, and each keeps
    its best: this machine's two cores are not always equally fast, and
    which one a single worker lands on is chance."""
    model = model_file("B", CASES["B"][1])
    out = {"rows": rows}
    for label, data in (("plain", plain_file(rows)), ("zstd", data_file(rows))):
        best = {}
        for _ in range(5):
            for n in (1, 2):
                _, _, j = fit(model, data, "--no-cache", "--no-collapse", "--threads", str(n))
                ps = j["convergence"]["pass_seconds"]
                t = (sum(ps) / len(ps), ps[0], sum(ps[1:]) / max(len(ps) - 1, 1))
                if n not in best or t[0] < best[n][0]:
                    best[n] = t
        out[label] = {"pass_seconds_1": best[1][0], "pass_seconds_2": best[2][0],
                      "speedup": best[1][0] / best[2][0],
                      "first_pass_speedup": best[1][1] / best[2][1],
                      "later_passes_speedup": best[1][2] / best[2][2]}
    return out


FACTOR_PROBES = (("5 levels", "factor deprivation"), ("~390 levels", "factor bmi"), ("~900 levels", "factor age"))


def factor_cost(rows):
    """Seconds per pass per million rows used (from the cache, so
    accumulation dominates) with a 5-level factor (deprivation), a
    ~390-level one (bmi, which also drops its missing rows) and a ~900-level
    one (age)."""
    data = data_file(rows)
    out = {}
    for label, extra in FACTOR_PROBES:
        model = model_file("F", COMMON[:3] + ["factor sex ref=F"], [extra])
        _, _, j = fit(model, data, "--no-collapse")
        ps = j["convergence"]["pass_seconds"][2:] or j["convergence"]["pass_seconds"]
        out[label] = {"pass_seconds": sum(ps) / len(ps), "rows_used": j["rows"]["used"],
                      "coefficients": len(j["coefficients"])}
        out[label]["seconds_per_mrow"] = out[label]["pass_seconds"] / out[label]["rows_used"] * 1e6
    base = out["5 levels"]["seconds_per_mrow"]
    out["ratio_390"] = out["~390 levels"]["seconds_per_mrow"] / base
    out["ratio"] = out["~900 levels"]["seconds_per_mrow"] / base
    return out


def machine():
    cpu = "unknown"
    try:
        for ln in open("/proc/cpuinfo"):
            if ln.startswith("model name"):
                cpu = ln.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    return "%s, %d cores, %.0f GiB, %s" % (cpu, os.cpu_count(), mem, platform.platform())


def targets(report):
    """The speed goals (README), each as (what, measured, met): case A at
    10^7 rows within 2x `zstd -dc` and at 10^8 under 30 s, cases B and C
    at 10^7 within 4x, every peak RSS under 128 MiB, 2 workers 1.6x one,
    factors of ~390 and ~900 levels (the probes nearest 300) within 2x a
    narrow one, both at 2e6 rows.  Goals whose size was not run are left
    out."""
    out = []
    for r in report["cases"]:
        if r["rows"] == 10000000:
            goal = 2.0 if r["case"] == "A" else 4.0
            out.append(("case %s at 1e7: fit / zstd -dc <= %.0f" % (r["case"], goal), "%.2f" % r["ratio_to_zstd"],
                        r["ratio_to_zstd"] <= goal))
        if r["rows"] == 100000000 and r["case"] == "A":
            out.append(("case A at 1e8: under 30 s", "%.1f s" % r["seconds"], r["seconds"] < 30))
    rss = max(r["peak_rss_kb"] for r in report["cases"]) / 1024
    out.append(("peak RSS < 128 MiB, every case", "%.0f MiB" % rss, rss < 128))
    if report["threads"]["rows"] < 2000000:  # fixed costs would dominate: not what the goals are about
        return out
    sp = report["threads"]["plain"]["speedup"]
    out.append(("2 workers / 1 on parse-bound passes >= 1.6", "%.2f" % sp, sp >= 1.6))
    fr = max(report["factor_cost"]["ratio_390"], report["factor_cost"]["ratio"])
    out.append(("~390- and ~900-level factor / 5-level, per row <= 2", "%.2f" % fr, fr <= 2))
    return out


def markdown(report):
    out = ["Measured %s on %s." % (report["date"], report["machine"]), "",
           "| case | rows | fit s | passes | rows/s | peak RSS MiB | zstd -dc s | fit / zstd | fit / in-memory |"
           " R glm.fit s | R peak MiB | max coef diff vs R |",
           "|---|---|---|---|---|---|---|---|---|---|---|---|"]
    for r in report["cases"]:
        rcols = ("%.1f | %.0f | %.1e" % (r["r_seconds"], r["r_peak_rss_kb"] / 1024, r["r_max_coef_diff"])
                 if "r_seconds" in r else "- | - | -")
        out.append("| %s | %.0e | %.2f | %d | %.2e | %.0f | %.2f | %.2f | %.2f | %s |" % (
            r["case"], r["rows"], r["seconds"], r["passes"], r["rows_per_second"], r["peak_rss_kb"] / 1024,
            r["zstd_seconds"], r["ratio_to_zstd"], r["ratio_to_in_memory"], rcols))
    t = report["threads"]
    f = report["factor_cost"]
    out += ["", "Threads (case B, passes that parse every row, %.0e rows, best of 5 alternated runs): plain CSV "
            "(parse-bound) 1 worker %.3f s/pass, 2 workers %.3f s/pass, speed-up %.2fx (first pass %.2fx, later "
            "passes %.2fx); zstd input %.3f, %.3f, %.2fx (one decompressor)." % (
                t["rows"], t["plain"]["pass_seconds_1"], t["plain"]["pass_seconds_2"], t["plain"]["speedup"],
                t["plain"]["first_pass_speedup"], t["plain"]["later_passes_speedup"],
                t["zstd"]["pass_seconds_1"], t["zstd"]["pass_seconds_2"], t["zstd"]["speedup"]),
            "Factor cost (cached passes, %.0e rows, seconds per pass per 10^6 rows used): 5-level factor %.4f, "
            "~390-level %.4f (ratio %.2f), ~900-level %.4f (ratio %.2f)." % (
                report["factor_rows"], f["5 levels"]["seconds_per_mrow"], f["~390 levels"]["seconds_per_mrow"],
                f["ratio_390"], f["~900 levels"]["seconds_per_mrow"], f["ratio"]),
            "", "Goals: " + "; ".join("%s: %s (%s)" % (what, value, "met" if ok else "NOT met")
                                      for what, value, ok in targets(report)) + ".",
            "", "Ratios are of wall times measured in the same run (each time the best of 3 at up to 10^7 rows, "
            "the machine being shared); max coef diff is relative to max(|estimate|, standard error). Passes "
            "counts reads of the data (1 = collapsed to covariate patterns)."]
    return "\n".join(out) + "\n"


def main():
    for tool in (MILLRACE, SYNTH, "/usr/bin/time"):
        if not os.path.exists(tool):
            sys.exit("bench: %s is missing (run make, and apt-get install time)" % tool)
    rows = rows_list()
    report = {"date": time.strftime("%Y-%m-%d"), "machine": machine(), "cases": []}
    cases = [c for c in os.environ.get("BENCH_CASES", ",".join(CASES)).split(",") if c in CASES]
    for n in rows:
        for name in cases:
            r = run_case(name, n)
            print("case %s, %.0e rows: %.2f s (%.2fx zstd -dc, %.2fx in-memory), %d passes, %.0f MiB" % (
                name, n, r["seconds"], r["ratio_to_zstd"], r["ratio_to_in_memory"], r["passes"],
                r["peak_rss_kb"] / 1024), flush=True)
            report["cases"].append(r)
    report["threads"] = threads_ratio(min(rows[-1], 2000000))
    report["factor_rows"] = min(rows[-1], 2000000)
    report["factor_cost"] = factor_cost(report["factor_rows"])
    os.makedirs(RESULTS, exist_ok=True)
    tag = os.environ.get("BENCH_TAG", "latest")
    with open(os.path.join(RESULTS, tag + ".json"), "w") as f:
        json.dump(report, f, indent=1)
    md = markdown(report)
    with open(os.path.join(RESULTS, tag + ".md"), "w") as f:
        f.write(md)
    print(md)


if __name__ == "__main__":
    main()
