#!/usr/bin/python3
"""Two builds of millrace timed side by side on the same files, in one run.

  bench/compare_builds.py OLD_MILLRACE NEW_MILLRACE

Cases A, B and C of bench/run.py at BENCH_ROWS (default 1e6,1e7) rows; the
runs alternate old, new, old, new... and each build keeps its best of
BENCH_REPEATS (default 5), so that a burst of load on a shared machine hits
both.  Prints a Markdown table of the new / old ratios and whether every
coefficient, standard error and the deviance are the same bits.  Not a test:
nothing fails on a time.  Run it on a quiet machine.
"""
import json
import os
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import run as bench  # noqa: E402  (the cases, the data and the timer)


def one(binary, model, data, out):
    wall, _ = bench.timed([binary, "fit", "--quiet", "--json", out, "-m", model, data])
    with open(out) as f:
        return wall, json.load(f)


def numbers(fit):
    coefs = [(c.get("estimate"), c.get("std_error", c.get("standard_error"))) for c in fit["coefficients"]]
    return coefs, fit["fit"]["deviance"], fit.get("covariance")


def main():
    old, new = sys.argv[1], sys.argv[2]
    repeats = int(os.environ.get("BENCH_REPEATS", "5"))
    print("| case | rows | old s | new s | new / old | passes old/new | same bits |")
    print("|---|---|---|---|---|---|---|")
    for rows in bench.rows_list():
        data = bench.data_file(rows)
        for name, (_, lines) in bench.CASES.items():
            model = bench.model_file(name, lines)
            best = {old: None, new: None}
            fits = {}
            for _ in range(repeats):
                for binary, tag in ((old, "old"), (new, "new")):
                    wall, fit = one(binary, model, data, os.path.join(bench.DATA, "cmp-%s.json" % tag))
                    fits[binary] = fit
                    if best[binary] is None or wall < best[binary]:
                        best[binary] = wall
            same = numbers(fits[old]) == numbers(fits[new])
            # the stopping rule changed after the seams: passes can differ
            passes = "%s/%s" % (fits[old]["convergence"]["passes"], fits[new]["convergence"]["passes"])
            print("| %s | %.0e | %.3f | %.3f | %.3f | %s | %s |" % (
                name, rows, best[old], best[new], best[new] / best[old], passes, "yes" if same else "no"))
            sys.stdout.flush()
    print("\nMeasured %s; best of %d alternated runs each." % (time.strftime("%Y-%m-%d"), repeats))


if __name__ == "__main__":
    main()
