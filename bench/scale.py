#!/usr/bin/python3
"""millrace benchmarks of reading at scale: several zstd frames, gzip, MPI,
and 10^9 rows.  Every figure is a ratio of two costs measured in the same
run, on the same files.  Not a test: nothing fails on a time, CI never runs
it, and only a quiet machine gives figures worth keeping.

  bench/scale.py                  cases A and B at BENCH_ROWS (default 1e7):
                                  a single-frame zstd file, its twin in many
                                  frames (pzstd) read with --threads 1 and 2,
                                  its gzip twin; 2 MPI ranks against one
                                  process of 2 threads (when build/millrace-mpi
                                  and mpirun exist)
  BENCH_BIG=F.zst[,G.zst] ...     also case A on each of these files (10^9
                                  rows: made by build/synth --rows 1000000000
                                  --zstd, and its pzstd twin), against
                                  `zstd -dc` of the same file

Writes bench/results/scale.{json,md}.  Data come from build/synth (invented,
seeded) in $BENCH_DIR; they are never committed.
"""
import json
import os
import shutil
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import run as bench  # noqa: E402  (the cases, the synth data, the timer)

MPI = os.path.join(bench.ROOT, "build", "millrace-mpi")
ROOT_ENV = {"OMPI_ALLOW_RUN_AS_ROOT": "1", "OMPI_ALLOW_RUN_AS_ROOT_CONFIRM": "1"}


def twin(src, suffix, make):
    """A file of the same rows in another container, made once."""
    path = src.replace(".csv.zst", suffix)
    if not os.path.exists(path):
        tmp = path + ".part"
        make(src, tmp)
        os.rename(tmp, path)
    return path


def to_frames(src, out):
    subprocess.run("zstd -dc -q '%s' | pzstd -q -p 2 -o '%s'" % (src, out), shell=True, check=True)


def to_gzip(src, out):
    subprocess.run("zstd -dc -q '%s' | gzip -6 > '%s'" % (src, out), shell=True, check=True)


def baseline(cmd_of, path, repeats):
    return min(bench.timed(cmd_of(path))[0] for _ in range(repeats))


def zstd_dc(path):
    return ["zstd", "-dc", "-q", path]


def numbers(fit):
    return [(c["estimate"], c["standard_error"]) for c in fit["coefficients"]], fit["fit"]["deviance"]


def readers(rows, repeats):
    """Cases A and B: one frame, many frames (1 and 2 threads), gzip."""
    single = bench.data_file(rows)
    frames = twin(single, "-frames.csv.zst", to_frames)
    gz = twin(single, ".csv.gz", to_gzip)
    out = {"zstd -dc (one frame)": baseline(zstd_dc, single, repeats),
           "zstd -dc (frames)": baseline(zstd_dc, frames, repeats),
           "gzip -dc": baseline(lambda p: ["gzip", "-dc", p], gz, repeats)}
    rows_out = []
    for name in ("A", "B"):
        model = bench.model_file(name, bench.CASES[name][1])
        runs = [("one frame, --threads 2", single, "2"), ("frames, --threads 1", frames, "1"),
                ("frames, --threads 2", frames, "2"), ("gzip, --threads 2", gz, "2")]
        ref = None
        for label, data, threads in runs:
            wall, rss, fit = bench.fit(model, data, "--threads", threads, repeats=repeats)
            same = ref is None or numbers(fit) == ref
            ref = ref or numbers(fit)
            rows_out.append({"case": name, "input": label, "seconds": wall, "peak_rss_kb": rss,
                             "passes": fit["convergence"]["passes"], "same_bits": same})
    return out, rows_out


def mpi_run(rows, repeats):
    """Case B: 2 ranks of one thread against one process of 2 threads."""
    if not (os.path.exists(MPI) and shutil.which("mpirun")):
        return {"skipped": "build/millrace-mpi or mpirun missing (make mpi)"}
    data = bench.data_file(rows)
    model = bench.model_file("B", bench.CASES["B"][1])
    one = bench.fit(model, data, "--threads", "2", repeats=repeats)
    out = os.path.join(bench.DATA, "mpi.json")
    cmd = ["mpirun", "--oversubscribe", "-np", "2", MPI, "fit", "--quiet", "--threads", "1", "--json", out, "-m",
           model, data]
    env = dict(os.environ, **ROOT_ENV)
    best = None
    for _ in range(repeats):
        t0 = time.monotonic()
        subprocess.run(cmd, check=True, env=env, stdout=subprocess.DEVNULL)
        wall = time.monotonic() - t0
        best = wall if best is None else min(best, wall)
    with open(out) as f:
        same = numbers(json.load(f)) == numbers(one[2])
    return {"one_process_2_threads": one[0], "mpi_2_ranks_1_thread": best, "ratio": best / one[0],
            "same_bits": same}


def big(paths):
    """Case A on each big file against `zstd -dc` of it (one run each)."""
    model = bench.model_file("A", bench.CASES["A"][1])
    out = []
    for path in paths:
        dc = bench.timed(zstd_dc(path))[0]
        wall, rss, fit = bench.fit(model, path, "--threads", "2")
        out.append({"file": os.path.basename(path), "bytes": os.path.getsize(path), "rows": fit["rows"]["read"],
                    "zstd_dc_seconds": dc, "fit_seconds": wall, "ratio": wall / dc, "peak_rss_kb": rss,
                    "passes": fit["convergence"]["passes"]})
    return out


def markdown(rep):
    lines = ["# Reading at scale (bench/scale.py)", "",
             "Measured %s on %s; best of %d runs each (the 10^9 rows: one run each)." % (
                 rep["date"], rep["machine"], rep["repeats"]), "",
             "Baselines at %s rows: %s." % (rep["rows"], ", ".join(
                 "%s %.2f s" % (k, v) for k, v in rep["baselines"].items())), "",
             "| case | input | seconds | / zstd -dc (one frame) | peak RSS MB | passes | same bits |",
             "|---|---|---|---|---|---|---|"]
    base = rep["baselines"]["zstd -dc (one frame)"]
    for r in rep["readers"]:
        lines.append("| %s | %s | %.2f | %.2f | %.0f | %d | %s |" % (
            r["case"], r["input"], r["seconds"], r["seconds"] / base, r["peak_rss_kb"] / 1024, r["passes"],
            "yes" if r["same_bits"] else "NO"))
    m = rep["mpi"]
    lines += ["", "MPI, case B: " + (m["skipped"] if "skipped" in m else
              "2 ranks of 1 thread %.2f s, one process of 2 threads %.2f s: %.2fx; same bits: %s" % (
                  m["mpi_2_ranks_1_thread"], m["one_process_2_threads"], m["ratio"],
                  "yes" if m["same_bits"] else "NO"))]
    for b in rep["big"]:
        lines.append("")
        lines.append("Case A on %s (%d rows, %.1f GB): fit %.1f s, zstd -dc %.1f s: %.2fx; peak RSS %.0f MB; "
                     "%d pass(es)." % (b["file"], b["rows"], b["bytes"] / 1e9, b["fit_seconds"],
                                        b["zstd_dc_seconds"], b["ratio"], b["peak_rss_kb"] / 1024, b["passes"]))
    return "\n".join(lines) + "\n"


def main():
    rows = int(float(os.environ.get("BENCH_ROWS", "1e7")))
    repeats = int(os.environ.get("BENCH_REPEATS", "3"))
    big_paths = [p for p in os.environ.get("BENCH_BIG", "").split(",") if p]
    baselines, reader_rows = readers(rows, repeats)
    rep = {"date": time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime()), "machine": bench.machine(),
           "rows": rows, "repeats": repeats, "baselines": baselines, "readers": reader_rows,
           "mpi": mpi_run(rows, repeats), "big": big(big_paths)}
    os.makedirs(bench.RESULTS, exist_ok=True)
    with open(os.path.join(bench.RESULTS, "scale.json"), "w") as f:
        json.dump(rep, f, indent=1)
    text = markdown(rep)
    with open(os.path.join(bench.RESULTS, "scale.md"), "w") as f:
        f.write(text)
    sys.stdout.write(text)


if __name__ == "__main__":
    main()
