#!/usr/bin/env bash
# --progress: with standard error not a terminal (here a file), a line as
# each pass ends ("pass N done: R rows in S s"), one per pass the fit's
# JSON counts, the first pass's rows those read, the later passes' those
# used (the JSON's own counts are the oracle); --quiet wins; without
# --progress a non-terminal gets no progress at all.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
py=/usr/bin/python3
"$bin" fit --progress --no-collapse -m samples/falls.model --json "$tmp/f.json" samples/falls.csv >/dev/null 2>"$tmp/err"
check "fit --progress: exit 0" test $? = 0
check "a line as each pass ends, as the JSON counts them" $py - "$tmp/f.json" "$tmp/err" <<'PY'
import json, re, sys
fit = json.load(open(sys.argv[1]))
done = [re.fullmatch(r"pass (\d+) done: (\d+) rows in [0-9.]+ s", l) for l in open(sys.argv[2]).read().splitlines()]
assert all(done), "unexpected line"
passes = [int(m.group(1)) for m in done]
rows = [int(m.group(2)) for m in done]
assert passes == list(range(1, fit["convergence"]["passes"] + 1)), passes
assert rows[0] == fit["rows"]["read"] and all(r == fit["rows"]["used"] for r in rows[1:]), rows
PY
"$bin" fit --progress --quiet -m samples/falls.model samples/falls.csv >/dev/null 2>"$tmp/quiet"
check "--quiet wins over --progress" test ! -s "$tmp/quiet"
"$bin" fit -m samples/falls.model samples/falls.csv >/dev/null 2>"$tmp/plain"
check "no --progress, no terminal: no progress" test ! -s "$tmp/plain"
finish
