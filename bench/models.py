#!/usr/bin/python3
"""millrace benchmarks of model types: a negative binomial whose theta is
estimated, and a factor of 10^5 levels declared `many`.  Every figure is
a ratio of two costs measured in the same run, or a count.  Not a test:
nothing here fails on a cost, and CI never runs it.

  bench/models.py                  wall-clock seconds (a quiet machine only:
                                   what `make bench` runs);
                                   bench/results/models.{json,md}
  bench/models.py --instructions   instructions counted by valgrind's callgrind
                                   (the same on a busy machine), at fewer rows;
                                   bench/results/models-instructions.{json,md}
  BENCH_ROWS=N                     rows of the passes and memory figures
                                   (default 10^6)
  BENCH_INSTRUCTION_ROWS=N         rows of the negative binomial's callgrind
                                   counts (default 3 x 10^5; the `many` factor's
                                   are at BENCH_ROWS)
  BENCH_LEVELS=N                   levels of the `many` factor (default 10^5)
  BENCH_MANY_COUNT=0               --instructions without counting the `many`
                                   factor's fits (callgrind takes about an hour
                                   over them): their passes and memory only
  MILLRACE=PATH                    the binary measured (default build/millrace)

Negative binomial: cases A and B of bench/run.py with `family
negative-binomial` (theta estimated) against the same models' poisson fit,
in passes over the data (counts: the same on any machine) and in cost.  The
poisson fits of A and B collapse into covariate patterns (one pass), which a
theta still moving cannot, so they are shown with --no-collapse too.

`many` factor: case A with `factor area many` (the area column: 10^5
levels) against case A alone with --no-collapse (a `many` fit does not
collapse either), in cost, and the peak RSS of the fit with the factor (GNU
time's maximum resident set: it does not depend on the load) against 128 MiB
+ 100 bytes a level.  The area column is added to build/synth's rows by a
seeded generator here: each level is first given to a row with an event,
then the other rows draw a level at random.  A level whose outcomes are all
zero has no finite estimate under a log link and runs off to infinity, which
takes the fit to its separation stop: a different cost from the one measured.

Data (invented, seeded) go to $BENCH_DIR/models (default
/tmp/millrace-bench/models), never committed.
"""
import json
import os
import random
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import run as bench  # noqa: E402  (the cases, the synth data, the timer)
import pipeline  # noqa: E402  (callgrind, the commit)

INSTRUCTIONS = "--instructions" in sys.argv[1:]
bench.MILLRACE = os.environ.get("MILLRACE", bench.MILLRACE)
DATA = os.path.join(bench.DATA, "models")
pipeline.DATA = DATA
goal, model = pipeline.goal, pipeline.model  # the same table rows and model files
ROWS = int(float(os.environ.get("BENCH_ROWS", "1e6")))
IROWS = int(float(os.environ.get("BENCH_INSTRUCTION_ROWS", "3e5")))
LEVELS = int(float(os.environ.get("BENCH_LEVELS", "1e5")))
REPEATS = 1 if INSTRUCTIONS else 3
MIB = 1024 * 1024
SEED = 17


def plain_file(rows):
    """build/synth's rows as plain CSV (seed 1)."""
    path = os.path.join(DATA, "synth-%d.csv" % rows)
    if not os.path.exists(path):
        subprocess.run([bench.SYNTH, "--rows", str(rows), "--seed", "1", "--out", path + ".tmp"], check=True)
        os.rename(path + ".tmp", path)
    return path


def area_file(rows, levels):
    """synth's rows and an `area` column of `levels` levels (A000000...):
    level i goes to the i-th row with an event, every other row draws one
    (random.Random(17)), so that each level has an event."""
    path = os.path.join(DATA, "area-%d-%d.csv" % (rows, levels))
    if os.path.exists(path):
        return path
    rng = random.Random(SEED)
    given = 0
    with open(plain_file(rows)) as src, open(path + ".tmp", "w") as out:
        head = src.readline().rstrip("\n")
        events = head.split(",").index("events")
        out.write(head + ",area\n")
        for line in src:
            line = line.rstrip("\n")
            if given < levels and line.split(",")[events] != "0":
                level, given = given, given + 1
            else:
                level = rng.randrange(levels)
            out.write("%s,A%06d\n" % (line, level))
    if given < levels:
        os.unlink(path + ".tmp")
        raise RuntimeError("%d rows have fewer than %d rows with an event" % (rows, levels))
    os.rename(path + ".tmp", path)
    return path


def run_fit(model_path, data, *opts, measure="wall"):
    """A fit's passes and peak RSS (a plain run), and its cost: wall
    seconds (measure "wall": best of REPEATS), callgrind's instructions
    ("instructions"), or none (None)."""
    out = os.path.join(DATA, "fit.json")
    cmd = [bench.MILLRACE, "fit", "--quiet", "--json", out, "-m", model_path] + list(opts) + [data]
    best, rss = None, 0
    for _ in range(REPEATS if measure == "wall" else 1):
        wall, rss = bench.timed(cmd)
        best = wall if best is None else min(best, wall)
    with open(out) as f:
        passes = json.load(f)["convergence"]["passes"]
    best = pipeline.callgrind(cmd) if measure == "instructions" else best if measure else None
    return {"cost": best, "passes": passes, "peak_rss_kb": rss}


def ratio(a, b):
    return None if a["cost"] is None else a["cost"] / b["cost"]


def negbin_case(name, rows, measure):
    """Case `name` as poisson (collapsed, and --no-collapse) and as a
    negative binomial with theta estimated."""
    lines = bench.CASES[name][1]
    nb = [("family negative-binomial" if x == "family poisson" else x) for x in lines]
    data = bench.data_file(rows)
    pm, nm = model("case%s_poisson" % name, lines), model("case%s_negbin" % name, nb)
    r = {"case": name, "rows": rows,
         "poisson": run_fit(pm, data, measure=measure),
         "poisson_no_collapse": run_fit(pm, data, "--no-collapse", measure=measure),
         "negbin": run_fit(nm, data, measure=measure)}
    r["passes_over_poisson"] = r["negbin"]["passes"] / r["poisson"]["passes"]
    r["passes_over_no_collapse"] = r["negbin"]["passes"] / r["poisson_no_collapse"]["passes"]
    r["cost_over_no_collapse"] = ratio(r["negbin"], r["poisson_no_collapse"])
    return r


def many_case(rows, levels, measure):
    """Case A with and without `factor area many`, both --no-collapse."""
    data = area_file(rows, levels)
    plain = model("caseA", bench.CASES["A"][1])
    many = model("caseA_many", bench.CASES["A"][1] + ["factor area many"])
    r = {"rows": rows, "levels": levels,
         "without": run_fit(plain, data, "--no-collapse", measure=measure),
         "with": run_fit(many, data, measure=measure)}
    r["cost_ratio"] = ratio(r["with"], r["without"])
    r["rss_limit_kb"] = (128 * MIB + 100 * levels) / 1024
    return r


def fmt(x):
    return "-" if x is None else "{:,}".format(x) if isinstance(x, int) else "%.3f s" % x


def negbin_rows(cases):
    out = ["| case | rows | fit | passes | cost | peak RSS MiB |", "|---|---|---|---|---|---|"]
    for r in cases:
        name = r["case"]
        for label, key in (("poisson", "poisson"), ("poisson --no-collapse", "poisson_no_collapse"),
                           ("negative-binomial, theta estimated", "negbin")):
            f = r[key]
            out.append("| %s | %s | %s | %d | %s | %.0f |" % (name, "{:,}".format(r["rows"]), label, f["passes"],
                                                             fmt(f["cost"]), f["peak_rss_kb"] / 1024))
    return out


def many_rows(m):
    out = ["| fit | rows | passes | cost | peak RSS MiB |", "|---|---|---|---|---|"]
    for label, key in (("case A --no-collapse", "without"), ("case A, factor area many", "with")):
        f = m[key]
        out.append("| %s | %s | %d | %s | %.0f |" % (label, "{:,}".format(m["rows"]), f["passes"], fmt(f["cost"]),
                                                    f["peak_rss_kb"] / 1024))
    return out


def markdown(rep):
    unit = "instructions (callgrind, every thread)" if INSTRUCTIONS else "wall seconds (best of %d)" % REPEATS
    nb, mem = rep["negbin"], rep["many"]
    mc = mem
    lines = ["# Model-type benchmarks: negative binomial, a `many` factor", "",
             "Measured %s on %s; commit %s; build/synth's rows (bench/run.py's cases); costs in %s."
             % (rep["date"], rep["machine"], rep["commit"], unit)]
    if INSTRUCTIONS:
        lines += ["", "Instruction counts by `valgrind --tool=callgrind` and peak RSS do not depend on the "
                  "machine's load, so these were taken on a shared machine; the counts stand in for time only "
                  "roughly (memory stalls and the threads' overlap are not counted). Passes and memory at %s "
                  "rows; the negative binomial's instructions at %s rows (callgrind runs some fifty times "
                  "slower), the `many` factor's at %s." % (
                      "{:,}".format(rep["rows"]), "{:,}".format(rep["instruction_rows"]),
                      "{:,}".format(mc["rows"]))]
    lines += ["", "## Goals", "", "| goal | measured | |", "|---|---|---|"]
    for name, r in nb.items():
        lines.append(goal("issue 17: case %s negative binomial / poisson --no-collapse, passes (<= 1.5)" % name,
                          r["passes_over_no_collapse"], r["passes_over_no_collapse"] <= 1.5))
        lines.append(goal("case %s negative binomial / collapsed poisson, passes (<= 1.5)" % name,
                          r["passes_over_poisson"], r["passes_over_poisson"] <= 1.5))
    what = "issue 17: %s-level `many` factor / without, cost (<= 2)" % "{:,}".format(mc["levels"])
    if mc["cost_ratio"] is None:
        lines.append("| %s | not counted in this run (BENCH_MANY_COUNT=0) | |" % what)
    else:
        lines.append(goal(what, mc["cost_ratio"], mc["cost_ratio"] <= 2))
    lines.append(goal("issue 17: peak RSS MiB, %s levels, %s rows (< %.1f)" % (
        "{:,}".format(mem["levels"]), "{:,}".format(mem["rows"]), mem["rss_limit_kb"] / 1024),
        mem["with"]["peak_rss_kb"] / 1024, mem["with"]["peak_rss_kb"] < mem["rss_limit_kb"]))
    lines += ["", "## Negative binomial, theta estimated", ""] + negbin_rows(nb.values())
    if INSTRUCTIONS:
        lines += ["", "Instructions:", ""] + negbin_rows(r["instructions"] for r in nb.values())
        lines += ["", "Negative binomial / poisson --no-collapse, instructions: " +
                  ", ".join("case %s %.3f" % (name, r["cost_over_no_collapse"]) for name, r in nb.items()) + "."]
    elif nb and list(nb.values())[0]["cost_over_no_collapse"] is not None:
        lines += ["", "Negative binomial / poisson --no-collapse, wall time: " +
                  ", ".join("case %s %.3f" % (name, r["cost_over_no_collapse"]) for name, r in nb.items()) + "."]
    lines += ["", "## A factor of %s levels declared `many`" % "{:,}".format(mem["levels"]), ""] + many_rows(mem)
    lines += ["", "Not a test: nothing fails on these figures. Passes count reads of the data (the first "
              "included); peak RSS is GNU time's maximum resident set of a plain run."]
    return "\n".join(lines) + "\n"


def main():
    pipeline.require_tools()
    rep = {"date": time.strftime("%Y-%m-%d"), "machine": bench.machine(), "commit": pipeline.commit(),
           "rows": ROWS, "mode": "instructions" if INSTRUCTIONS else "wall seconds"}
    print("negative binomial...", flush=True)
    plain = None if INSTRUCTIONS else "wall"
    rep["negbin"] = {name: negbin_case(name, ROWS, plain) for name in ("A", "B")}
    if INSTRUCTIONS:
        rep["instruction_rows"] = IROWS
        for name in ("A", "B"):
            counted = negbin_case(name, IROWS, "instructions")
            rep["negbin"][name]["instructions"] = counted
            rep["negbin"][name]["cost_over_no_collapse"] = counted["cost_over_no_collapse"]
    print("many factor...", flush=True)
    count = None if os.environ.get("BENCH_MANY_COUNT") == "0" else "instructions"
    rep["many"] = many_case(ROWS, LEVELS, count if INSTRUCTIONS else "wall")
    tag = "models-instructions" if INSTRUCTIONS else "models"
    pipeline.write_results(tag, rep, markdown(rep))


if __name__ == "__main__":
    main()
