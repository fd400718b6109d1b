#!/usr/bin/python3
"""`millrace survey` against a reading of the same file by Python's csv module.

Oracle: the csv module (RFC 4180 quoting) reads each file; per column this
script counts missing cells (the empty cell and NA), numbers (the grammar of
src/input/numparse.h as a regex: blanks, sign, digits with at most one '.',
an optional exponent; Python's float() then gives the value, as strtod
would) and integers (sign and digits), their min, max and mean (summed in
row order: on a file of one block the same additions, so the same bits;
on a file of many blocks to 1e-12 relative), the distinct cells exactly
with their counts and the five most frequent (ties: first met first), the
kind, and the rows and malformed rows (another number of fields than the
header; the first one's line).  Files: an invented one with missing cells
(empty, NA, a quoted empty), quoted commas, blanks around numbers, a
malformed row, a column past the distinct cap and an empty column; the
screening sample; a generated file of 300,000 rows (19 blocks, two groups).

Also: the same JSON for 1 and 2 threads and buffer sizes 4096 and 1 MiB,
and for the file read plain, as zstd, gzip and from standard input (the
path aside); --distinct-cap, --missing.

Prints "ok <case>" / "FAIL <case>: ..." and exits 1 on any failure.
"""
import csv
import gzip
import json
import os
import random
import re
import shutil
import subprocess
import sys
import tempfile
from collections import Counter

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
BIN = os.path.join(ROOT, "build", "millrace")
NUMBER = re.compile(r"^[ \t]*[+-]?([0-9]+\.?[0-9]*|\.[0-9]+)([eE][+-]?[0-9]+)?[ \t]*$")
INTEGER = re.compile(r"^[ \t]*[+-]?[0-9]+[ \t]*$")
failures = 0


def check(name, ok, detail=""):
    global failures
    print(("ok " if ok else "FAIL ") + name + ("" if ok else ": " + detail))
    failures += 0 if ok else 1


def survey(path, *args, stdin=None):
    out = os.path.join(os.path.dirname(path) if stdin is None else tempfile.gettempdir(), "survey-out.json")
    src = open(stdin, "rb") if stdin else None
    subprocess.run([BIN, "survey", "--quiet", "--json", out, *args, path], check=True, stdin=src,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    text = open(out).read()
    os.unlink(out)
    return text


def oracle(path, cap=1000, missing=("", "NA")):
    with open(path, newline="") as f:
        reader = csv.reader(f)
        header = next(reader)
        cols = [dict(missing=0, numbers=0, integers=0, total=0.0, lo=None, hi=None, values=Counter())
                for _ in header]
        rows = malformed = 0
        first_bad = None
        for row in reader:
            rows += 1
            if len(row) != len(header):
                malformed += 1
                first_bad = first_bad or reader.line_num
                continue
            for c, cell in zip(cols, row):
                if cell in missing:
                    c["missing"] += 1
                    continue
                if NUMBER.match(cell):
                    v = float(cell)
                    c["numbers"] += 1
                    c["integers"] += bool(INTEGER.match(cell))
                    c["total"] += v
                    c["lo"] = v if c["lo"] is None else min(c["lo"], v)
                    c["hi"] = v if c["hi"] is None else max(c["hi"], v)
                c["values"][cell] += 1
    return header, cols, rows, malformed, first_bad


def kind(c, cells):
    present = cells - c["missing"]
    if present == 0:
        return "empty"
    if c["numbers"] < present:
        return "text"
    return "integer" if c["integers"] == present else "decimal"


def compare(label, path, got, cap=1000, missing=("", "NA"), exact_mean=True):
    header, cols, rows, malformed, first_bad = oracle(path, cap, missing)
    problems = []
    if got["rows"] != {"read": rows, "malformed": malformed, "first_malformed_line": first_bad}:
        problems.append(f"rows {got['rows']} vs {rows}, {malformed}, {first_bad}")
    for name, c, g in zip(header, cols, got["columns"]):
        k = kind(c, rows - malformed)
        numeric = c["numbers"] > 0 and k != "text"
        mean = c["total"] / c["numbers"] if numeric else None
        want = {"name": name, "kind": k, "missing": c["missing"], "numbers": c["numbers"],
                "min": c["lo"] if numeric else None, "max": c["hi"] if numeric else None}
        over = len(c["values"]) > cap
        want["distinct"] = None if over else len(c["values"])
        want["distinct_more_than"] = cap if over else None
        order = {v: i for i, v in enumerate(c["values"])}
        top = sorted(c["values"].items(), key=lambda kv: (-kv[1], order[kv[0]]))[:5]
        want["most_frequent"] = [] if over else [{"value": v, "count": n} for v, n in top]
        for key, value in want.items():
            if g[key] != value:
                problems.append(f"{name}.{key}: {g[key]!r} vs {value!r}")
        if mean is None or g["mean"] is None:
            if mean != g["mean"]:
                problems.append(f"{name}.mean: {g['mean']} vs {mean}")
        elif (g["mean"] != mean) if exact_mean else abs(g["mean"] - mean) > 1e-12 * abs(mean):
            problems.append(f"{name}.mean: {g['mean']!r} vs {mean!r}")
    check(f"{label}: every column against the csv module", not problems and len(got["columns"]) == len(header),
          "; ".join(problems[:5]))


def small_file(tmp):
    path = os.path.join(tmp, "small.csv")
    lines = ["id,age,score,region,note,blank"]
    rnd = random.Random(7)
    for i in range(1, 1301):
        age = "" if i % 50 == 0 else ("NA" if i % 77 == 0 else str(rnd.randint(18, 90)))
        score = f"{rnd.uniform(-5, 5):.3f}" if i % 9 else " 2.5e1 "
        region = rnd.choice(["North", "South", '"East, upper"', '""', "West"])
        note = rnd.choice(["a", "b", "1", "x y"])
        lines.append(f"{i},{age},{score},{region},{note},")
        if i == 600:
            lines.append("601,40,1.0,North,a,,surplus")  # malformed: 7 fields
    with open(path, "w") as f:
        f.write("\n".join(lines) + "\n")
    return path


def big_file(tmp):
    path = os.path.join(tmp, "big.csv")
    rnd = random.Random(11)
    with open(path, "w") as f:
        f.write("k,x,y\n")
        for i in range(300000):
            f.write(f"{rnd.randint(0, 40)},{rnd.gauss(100, 15):.4f},{rnd.choice(['p', 'q', 'r'])}\n")
    return path


def main():
    with tempfile.TemporaryDirectory() as tmp:
        small = small_file(tmp)
        got = json.loads(survey(small, "--distinct-cap", "1000"))
        compare("invented file (missing, quotes, malformed row, past the cap)", small, got)
        got = json.loads(survey(small, "--distinct-cap", "3", "--missing", "NA"))
        compare("--distinct-cap 3 --missing NA", small, got, cap=3, missing=("NA",))
        screening = os.path.join(ROOT, "samples", "screening.csv")
        compare("screening sample", screening, json.loads(survey(screening)))
        big = big_file(tmp)
        want = survey(big, "--threads", "1", "--buffer-size", "4096")
        compare("300,000 rows (19 blocks)", big, json.loads(want), exact_mean=False)
        same = True
        for t, b in (("2", "4096"), ("1", "1048576"), ("2", "1048576")):
            same = same and survey(big, "--threads", t, "--buffer-size", b) == want
        check("threads 1 and 2, buffers 4096 and 1 MiB: the same JSON bytes", same)
        strip = lambda text: json.dumps({k: v for k, v in json.loads(text).items() if k != "path"})
        with open(big, "rb") as f, gzip.open(big + ".gz", "wb") as g:
            shutil.copyfileobj(f, g)
        subprocess.run(["zstd", "-q", "-f", big, "-o", big + ".zst"], check=True)
        forms = [survey(big + ".gz", "--threads", "2"), survey(big + ".zst", "--threads", "2"),
                 survey("-", "--threads", "2", stdin=big)]
        check("gzip, zstd and standard input: the same survey", all(strip(x) == strip(want) for x in forms))
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
