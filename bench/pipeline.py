#!/usr/bin/python3
"""millrace benchmarks of the commands around a fit: reruns, scoring,
several models in one read, robust standard errors.  Every figure is a
ratio of two costs measured in the same run.  Not a test: nothing here
fails on a cost, and CI never runs it.

  bench/pipeline.py                  wall-clock seconds at 10^7 rows (a quiet
                                     machine only: what `make bench` runs);
                                     bench/results/pipeline.{json,md}
  bench/pipeline.py --instructions   instructions counted by valgrind's
                                     callgrind at 3 x 10^5 rows: the same on a busy
                                     machine; bench/results/pipeline-instructions.{json,md}
  BENCH_ROWS=N                       another row count for either mode
  MILLRACE=PATH                      the binary measured (default build/millrace)

The cost of "one pass" is the difference between a fit allowed three IRLS
passes and one allowed two (--max-passes; both stop unconverged), with the
cache (a later pass replays decoded blocks) and with --no-cache (it reads
and parses the file again, as scoring does); in wall-clock mode also the
fit's own pass_seconds.  Data come from build/synth (invented, seeded) in
$BENCH_DIR/pipeline (default /tmp/millrace-bench/pipeline), never committed.
"""
import json
import os
import re
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import run as bench  # noqa: E402  (the cases, the synth data, the timer)

INSTRUCTIONS = "--instructions" in sys.argv[1:]
# MILLRACE=PATH: another binary (a copy, so that a rebuild cannot change it mid-run)
bench.MILLRACE = os.environ.get("MILLRACE", bench.MILLRACE)
DATA = os.path.join(bench.DATA, "pipeline")
# 3 x 10^5 rows: past the 16 blocks (262,144 rows) from which a fit takes
# its warm start, as fits of 10^7 rows do; below it every fit takes the
# cold path and about twice the passes, which skews ratios to one fit
ROWS = int(float(os.environ.get("BENCH_ROWS", "3e5" if INSTRUCTIONS else "1e7")))
REPEATS = 1 if INSTRUCTIONS else 3

CASE_B = bench.CASES["B"][1]
# four nested models for `millrace compare`, the largest being case B
MODELS = {
    "b_full": CASE_B,
    "b_no_interaction": [x for x in CASE_B if not x.startswith("interact")],
    "b_no_bmi": [x for x in CASE_B if not x.startswith("interact") and x != "numeric bmi"],
    "a_rates": bench.CASES["A"][1],
}
# scoring's groups: every cell of three factors (18 x 40 x 2 possible)
GROUPS = ["region", "age_band", "sex"]


def model(name, lines):
    path = os.path.join(DATA, name + ".model")
    with open(path, "w") as f:
        f.write("\n".join(lines) + "\n")
    return path


def hot_functions(out, n=6):
    """The n functions of most instructions of their own (callgrind_annotate)."""
    text = subprocess.run(["callgrind_annotate", "--inclusive=no", out], stdout=subprocess.PIPE,
                          stderr=subprocess.DEVNULL, text=True).stdout
    hot = []
    for line in text.splitlines():
        m = re.match(r"\s*([\d,]+)\s+\(\s*([\d.]+)%\)\s+(\S+)", line)
        if m and not line.strip().endswith("PROGRAM TOTALS"):
            hot.append((float(m.group(2)), m.group(3).split(":")[-1]))
        if len(hot) == n:
            break
    return hot


def callgrind(cmd, hot=None):
    """Instructions executed by every thread of the command, by callgrind
    (its log's `Collected` total); the command's exit code must be 0 or 7
    (not converged: the --max-passes probes).  hot: a list to receive the
    functions of most instructions."""
    with tempfile.TemporaryDirectory(dir=DATA) as tmp:
        log = os.path.join(tmp, "log")
        proc = subprocess.run(["valgrind", "--tool=callgrind", "--log-file=" + log,
                               "--callgrind-out-file=" + os.path.join(tmp, "out")] + cmd,
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        if proc.returncode not in (0, 7):
            raise RuntimeError("%s failed (exit %d): %s" % (" ".join(cmd[:2]), proc.returncode,
                                                             proc.stderr.strip()[-400:]))
        m = re.search(r"Collected\s*:\s*(\d+)", open(log).read())
        if not m:
            raise RuntimeError("no instruction count in callgrind's log for %s" % " ".join(cmd[:2]))
        if hot is not None:
            hot.extend(hot_functions(os.path.join(tmp, "out")))
        return int(m.group(1))


def cost(cmd, fresh=(), hot=None):
    """The command's cost (instructions, or the best wall seconds of
    REPEATS runs) and its peak RSS in kB (a plain run: a peak does not
    depend on the load).  `fresh`: files removed before each run (a
    checkpoint must not be taken up)."""
    best = None
    for _ in range(REPEATS):
        for p in fresh:
            if os.path.exists(p):
                os.unlink(p)
        wall, rss = bench.timed(cmd)
        if INSTRUCTIONS:
            for p in fresh:
                if os.path.exists(p):
                    os.unlink(p)
            wall = callgrind(cmd, hot)
        best = wall if best is None else min(best, wall)
    return {"cost": best, "peak_rss_kb": rss}


def fit_cmd(model_path, data, *opts, json_out=None):
    out = json_out or os.path.join(DATA, "fit.json")
    return [bench.MILLRACE, "fit", "--quiet", "--json", out, "-m", model_path] + list(opts) + [data]


def fit(model_path, data, *opts, fresh=()):
    """A fit's cost, with its JSON's passes and pass_seconds."""
    out = os.path.join(DATA, "fit.json")
    r = cost(fit_cmd(model_path, data, *opts, json_out=out), fresh)
    with open(out) as f:
        j = json.load(f)
    r["passes"] = j["convergence"]["passes"]
    r["pass_seconds"] = j["convergence"].get("pass_seconds")
    r["json"] = j
    return r


def one_pass(model_path, data, cached):
    """The cost of one IRLS pass: a fit of three IRLS passes less one of
    two (--max-passes is at least 2; every other step the same), cached
    or read from the file."""
    opts = [] if cached else ["--no-cache"]
    two = fit(model_path, data, "--max-passes", "3", *opts)
    one = fit(model_path, data, "--max-passes", "2", *opts)
    if two["passes"] != one["passes"] + 1:
        raise RuntimeError("--max-passes 2 and 3 made %d and %d passes" % (one["passes"], two["passes"]))
    return two["cost"] - one["cost"]


def refresh_files(rows):
    """v1: `rows` synth rows (seed 1); v2: v1 and 10% more (seed 2), the
    new rows of region R07 put in a region v1 never had, R41."""
    v1 = os.path.join(DATA, "v1-%d.csv" % rows)
    v2 = os.path.join(DATA, "v2-%d.csv" % rows)
    if not os.path.exists(v1):
        subprocess.run([bench.SYNTH, "--rows", str(rows), "--seed", "1", "--out", v1 + ".tmp"], check=True)
        os.rename(v1 + ".tmp", v1)
    if not os.path.exists(v2):
        new = subprocess.run([bench.SYNTH, "--rows", str(rows // 10), "--seed", "2"], check=True,
                             stdout=subprocess.PIPE).stdout.decode()
        with open(v2 + ".tmp", "w") as out, open(v1) as old:
            for line in old:
                out.write(line)
            for line in new.splitlines(True)[1:]:
                out.write(line.replace(",R07,", ",R41,"))
        os.rename(v2 + ".tmp", v2)
    return v1, v2


def refresh_case(rows):
    """Issue 14: a cold fit of v2 against one started from v1's fit; the
    checkpoint's cost (a fit of v2 with --checkpoint against one without)."""
    v1, v2 = refresh_files(rows)
    m = model("case_b", CASE_B)
    v1_json = os.path.join(DATA, "v1.json")
    subprocess.run(fit_cmd(m, v1, json_out=v1_json), check=True, stdout=subprocess.DEVNULL)
    cold = fit(m, v2, "--no-collapse")
    warm = fit(m, v2, "--no-collapse", "--start-from", v1_json)
    ck = os.path.join(DATA, "fit.ckpt")
    with_ck = fit(m, v2, "--no-collapse", "--checkpoint", ck, fresh=[ck])
    extra = with_ck["cost"] - cold["cost"]
    return {
        "rows_v1": rows, "rows_v2": rows + rows // 10,
        "cold": {"cost": cold["cost"], "passes": cold["passes"], "peak_rss_kb": cold["peak_rss_kb"]},
        "started": {"cost": warm["cost"], "passes": warm["passes"], "peak_rss_kb": warm["peak_rss_kb"]},
        "started_over_cold": warm["cost"] / cold["cost"],
        "checkpoint": {"cost": with_ck["cost"], "passes": with_ck["passes"], "peak_rss_kb": with_ck["peak_rss_kb"]},
        # the checkpoints' extra cost spread over the passes, in mean passes
        "checkpoint_share_of_pass": extra / cold["cost"] * cold["passes"] / with_ck["passes"],
    }


def score_case(data, fit_json):
    """Issue 15: scoring the file with a saved fit against one pass of a
    fit over it; observed/expected by group against plain scoring."""
    out = os.path.join(DATA, "scored.csv")
    # bmi is missing in ~3% of rows: those rows written blank and counted.
    # The last run's output (1.5 GB at 10^7 rows) is removed before each
    # run: freeing it inside the rename is the file system's cost, not
    # scoring's (a third of a second here).
    hot = []
    plain = cost([bench.MILLRACE, "score", "--unseen", "blank", "--fit", fit_json, "--out", out, data], fresh=[out],
                 hot=hot)
    plain["hot"] = hot
    by_out = os.path.join(DATA, "groups.json")
    by = ["--by-out", by_out]
    for g in GROUPS:
        by += ["--by", g]
    grouped = cost([bench.MILLRACE, "score", "--unseen", "blank", "--fit", fit_json, "--out", out] + by + [data],
                   fresh=[out])
    with open(by_out) as f:
        j = json.load(f)
    os.unlink(out)
    ngroups = len(j.get("groups", [])) if isinstance(j, dict) else len(j)
    return {"plain": plain, "by_groups": grouped, "groups": ngroups, "group_columns": GROUPS,
            "by_over_plain": grouped["cost"] / plain["cost"]}


def compare_case(data, fit_b):
    """Issue 16: four models of case B's file in one read against a fit of
    the largest alone."""
    cmd = [bench.MILLRACE, "compare", "--quiet", "--json", os.path.join(DATA, "compare.json")]
    for name, lines in MODELS.items():
        cmd += ["-m", model(name, lines)]
    r = cost(cmd + [data])
    r["models"] = list(MODELS)
    r["over_one_fit"] = r["cost"] / fit_b["cost"]
    return r


def robust_case(m, data, fit_b, pass_cost):
    """Issue 16: robust standard errors' extra pass, by rows (hc1) and by
    clusters of region, in passes of the plain fit."""
    out = {}
    for label, opts in (("hc1", ["--robust", "hc1"]), ("cluster_region", ["--cluster", "region"])):
        r = fit(m, data, *opts)
        out[label] = {"cost": r["cost"], "passes": r["passes"], "peak_rss_kb": r["peak_rss_kb"],
                      "extra_in_cached_passes": (r["cost"] - fit_b["cost"]) / pass_cost["cached"],
                      "extra_in_read_passes": (r["cost"] - fit_b["cost"]) / pass_cost["read"]}
    return out


def commit():
    try:
        rev = subprocess.run(["git", "-C", bench.ROOT, "rev-parse", "--short", "HEAD"], stdout=subprocess.PIPE,
                             stderr=subprocess.DEVNULL, text=True).stdout.strip()
        dirty = subprocess.run(["git", "-C", bench.ROOT, "status", "--porcelain", "--untracked-files=no"],
                               stdout=subprocess.PIPE, text=True).stdout.strip()
        return rev + (" (with uncommitted changes)" if dirty else "")
    except OSError:
        return "unknown"


def fmt(x):
    return "{:,}".format(x) if INSTRUCTIONS else "%.3f s" % x


def goal(what, value, ok):
    return "| %s | %.3f | %s |" % (what, value, "met" if ok else "NOT met")


def markdown(rep):
    unit = "instructions (callgrind, every thread)" if INSTRUCTIONS else "wall seconds (best of %d)" % REPEATS
    rf, sc, cp, rb, pc = rep["refresh"], rep["score"], rep["compare"], rep["robust"], rep["pass_cost"]
    lines = [
        "# Pipeline benchmarks: reruns, scoring, several models, robust SEs",
        "",
        "Measured %s on %s; commit %s; %s rows of build/synth (case B of bench/run.py unless said); "
        "costs in %s." % (rep["date"], rep["machine"], rep["commit"], "{:,}".format(rep["rows"]), unit),
    ]
    if INSTRUCTIONS:
        lines += ["", "Instruction counts by `valgrind --tool=callgrind` do not depend on the machine's load, "
                  "so these ratios were taken on a shared machine. They stand in for time only roughly "
                  "(memory stalls and the threads' overlap are not counted). Wall-clock figures need a "
                  "quiet machine (`bench/pipeline.py`, `make bench`, 10^7 rows) (bench/results/pipeline.md). "
                  "Peak RSS is of a plain run of each command."]
    lines += ["", "## Goals", "", "| goal | measured | |", "|---|---|---|",
              goal("issue 14: checkpoint's cost per pass, in passes (< 0.02)", rf["checkpoint_share_of_pass"],
                   rf["checkpoint_share_of_pass"] < 0.02),
              goal("issue 15: scoring / one fit pass reading the file (<= 1.2)", sc["over_read_pass"],
                   sc["over_read_pass"] <= 1.2),
              goal("issue 15: O/E by %d groups / plain scoring (<= 1.10)" % sc["groups"], sc["by_over_plain"],
                   sc["by_over_plain"] <= 1.10),
              goal("issue 16: compare of 4 models / a fit of one (<= 2)", cp["over_one_fit"], cp["over_one_fit"] <= 2),
              "", "## Issue 14: the refresh", "",
              "v1 of %s rows; v2 = v1 and %s new rows, with one region level v1 never had. "
              "Fits with --no-collapse." % ("{:,}".format(rf["rows_v1"]), "{:,}".format(rf["rows_v2"] - rf["rows_v1"])),
              "", "| fit of v2 | passes | cost | / cold | peak RSS MiB |", "|---|---|---|---|---|",
              "| cold | %d | %s | 1 | %.0f |" % (rf["cold"]["passes"], fmt(rf["cold"]["cost"]),
                                               rf["cold"]["peak_rss_kb"] / 1024),
              "| --start-from v1's fit | %d | %s | %.3f | %.0f |" % (
                  rf["started"]["passes"], fmt(rf["started"]["cost"]), rf["started_over_cold"],
                  rf["started"]["peak_rss_kb"] / 1024),
              "| cold, --checkpoint | %d | %s | %.4f | %.0f |" % (
                  rf["checkpoint"]["passes"], fmt(rf["checkpoint"]["cost"]),
                  rf["checkpoint"]["cost"] / rf["cold"]["cost"], rf["checkpoint"]["peak_rss_kb"] / 1024),
              "", "The checkpoint's cost per pass: (with - without) / passes, in mean passes of the fit "
              "without: %.4f." % rf["checkpoint_share_of_pass"],
              "", "## Issue 15: scoring", "",
              "One IRLS pass of the fit (a fit of three IRLS passes less one of two): %s replaying the cache, %s reading "
              "and parsing the file (--no-cache)." % (fmt(pc["cached"]), fmt(pc["read"])),
              "", "| | cost | peak RSS MiB | ratio |", "|---|---|---|---|",
              "| score | %s | %.0f | %.3f of a pass reading the file, %.3f of a cached pass |" % (
                  fmt(sc["plain"]["cost"]), sc["plain"]["peak_rss_kb"] / 1024, sc["over_read_pass"],
                  sc["over_cached_pass"]),
              "| score --by %s (%d groups) | %s | %.0f | %.3f of plain scoring |" % (
                  " --by ".join(sc["group_columns"]), sc["groups"], fmt(sc["by_groups"]["cost"]),
                  sc["by_groups"]["peak_rss_kb"] / 1024, sc["by_over_plain"])]
    if sc["plain"].get("hot"):
        lines += ["", "Scoring's instructions by function (their own, callgrind_annotate): " +
                  ", ".join("%s %.1f%%" % (name, share) for share, name in sc["plain"]["hot"]) + "."]
    lines += [
              "", "## Issue 16: several models, robust standard errors", "",
              "| | cost | passes | peak RSS MiB | ratio |", "|---|---|---|---|---|",
              "| fit of b_full alone | %s | %d | %.0f | 1 |" % (fmt(rep["fit_b"]["cost"]), rep["fit_b"]["passes"],
                                                             rep["fit_b"]["peak_rss_kb"] / 1024),
              "| compare %s | %s | | %.0f | %.3f of the fit |" % (
                  ", ".join(cp["models"]), fmt(cp["cost"]), cp["peak_rss_kb"] / 1024, cp["over_one_fit"])]
    for label, r in rb.items():
        lines.append("| fit --%s | %s | %d | %.0f | extra: %.2f cached passes, %.2f passes reading the file |" % (
            "robust hc1" if label == "hc1" else "cluster region", fmt(r["cost"]), r["passes"],
            r["peak_rss_kb"] / 1024, r["extra_in_cached_passes"], r["extra_in_read_passes"]))
    if not INSTRUCTIONS and rep.get("later_pass_seconds"):
        lines += ["", "The fit's own later passes (pass_seconds, mean): %.3f s." % rep["later_pass_seconds"]]
    lines += ["", "Not a test: nothing fails on these figures. Passes count reads of the data (the first "
              "included); the robust fits' passes include the final pass at the coefficients."]
    return "\n".join(lines) + "\n"


def write_results(tag, rep, md):
    """bench/results/TAG.json and TAG.md; the markdown printed."""
    os.makedirs(bench.RESULTS, exist_ok=True)
    with open(os.path.join(bench.RESULTS, tag + ".json"), "w") as f:
        json.dump(rep, f, indent=1)
    with open(os.path.join(bench.RESULTS, tag + ".md"), "w") as f:
        f.write(md)
    print(md)


def require_tools():
    """The binaries measured and measuring, and DATA made."""
    tools = [bench.MILLRACE, bench.SYNTH, "/usr/bin/time"] + (["/usr/bin/valgrind"] if INSTRUCTIONS else [])
    for tool in tools:
        if not os.path.exists(tool):
            sys.exit("bench: %s is missing (run make; apt-get install time valgrind)" % tool)
    os.makedirs(DATA, exist_ok=True)


def main():
    require_tools()
    rep = {"date": time.strftime("%Y-%m-%d"), "machine": bench.machine(), "commit": commit(), "rows": ROWS,
           "mode": "instructions" if INSTRUCTIONS else "wall seconds"}
    print("refresh case...", flush=True)
    rep["refresh"] = refresh_case(ROWS)
    data = bench.data_file(ROWS)
    m = model("case_b", CASE_B)
    fit_json = os.path.join(DATA, "case_b.json")
    print("fit, passes...", flush=True)
    fb = fit(m, data)
    subprocess.run(fit_cmd(m, data, json_out=fit_json), check=True, stdout=subprocess.DEVNULL)
    rep["fit_b"] = {"cost": fb["cost"], "passes": fb["passes"], "peak_rss_kb": fb["peak_rss_kb"]}
    if fb["pass_seconds"] and len(fb["pass_seconds"]) > 1:
        rep["later_pass_seconds"] = sum(fb["pass_seconds"][1:]) / (len(fb["pass_seconds"]) - 1)
    pc = {"cached": one_pass(m, data, True), "read": one_pass(m, data, False)}
    rep["pass_cost"] = pc
    print("score...", flush=True)
    sc = score_case(data, fit_json)
    sc["over_read_pass"] = sc["plain"]["cost"] / pc["read"]
    sc["over_cached_pass"] = sc["plain"]["cost"] / pc["cached"]
    rep["score"] = sc
    print("compare...", flush=True)
    rep["compare"] = compare_case(data, fb)
    print("robust...", flush=True)
    rep["robust"] = robust_case(m, data, fb, pc)
    tag = os.environ.get("BENCH_TAG", "pipeline-instructions" if INSTRUCTIONS else "pipeline")
    write_results(tag, rep, markdown(rep))


if __name__ == "__main__":
    main()
