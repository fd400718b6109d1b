#!/usr/bin/env bash
# millrace drift: two saved fits of one model compared, and the audit
# trail a scheduled rerun leaves (the fit's "run" object, --run-log).
#
# The refresh scenario is invented: v1 is a Poisson rate extract (region
# A/B/C, a numeric x, person-years); v2 is v1 with 10% more rows, a new
# region D among them, and region B's log rate ratio moved by +0.25 (its
# rows' counts drawn again at the new rate).  Oracles: the generator's
# known shift; the z values recomputed in Python from the two fits' JSON
# (z = change / max(se_old, se_new), the rule README states); Python's json
# and csv modules for the outputs.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin} # make asan-check runs it on the ASan build
py=/usr/bin/python3
cd "$tmp" || exit 1

"$py" - <<'PY'
import math, random

def poisson(rng, mu):  # inversion: small means only, stable across Python versions
    k, p = 0, math.exp(-mu)
    s, u = p, rng.random()
    while u > s and k < 1000:
        k += 1
        p *= mu / k
        s += p
    return k

effect = {"A": 0.0, "B": 0.2, "C": -0.3, "D": 0.1}
rng = random.Random(20261204)
rows = []
for i in range(22000):
    region = rng.choice("ABC") if i < 20000 else rng.choice("ABCD")
    x = round(rng.uniform(-1, 1), 3)
    py_ = round(rng.uniform(0.5, 2.0), 3)
    rows.append((region, x, py_))
def mu(region, x, py_, shift):
    return py_ * math.exp(0.5 + effect[region] + (shift if region == "B" else 0.0) + 0.4 * x)
old = [poisson(rng, mu(*r, 0.0)) for r in rows[:20000]]
redraw = random.Random(7)
new = [poisson(redraw, mu(*r, 0.25)) if r[0] == "B" else old[i] for i, r in enumerate(rows[:20000])]
new += [poisson(redraw, mu(*r, 0.25)) for r in rows[20000:]]
for name, events, n in (("v1.csv", old, 20000), ("v2.csv", new, 22000)):
    with open(name, "w") as fh:
        fh.write("region,x,person_years,events\n")
        for (region, x, py_), y in zip(rows[:n], events):
            fh.write(f"{region},{x},{py_},{y}\n")
PY
cat > rate.model <<'M'
outcome events
family poisson
factor region ref=A
numeric x
exposure person_years
M

# expect NAME WANT_RC command...: the exit code, stderr kept in NAME.err
expect() {
    local name=$1 want=$2 rc
    shift 2
    "$@" > "$name.out" 2> "$name.err"
    rc=$?
    if [ "$rc" = "$want" ]; then ok "$name"; else fail "$name" "exit $rc, wanted $want: $(head -c 300 "$name.err")"; fi
}

expect fit_v1 0 "$bin" fit --quiet -m rate.model --json v1.json --run-log runs.log v1.csv
expect fit_v2 0 "$bin" fit --quiet -m rate.model --json v2.json --run-log runs.log v2.csv
expect drift_v1_v2_flags 12 "$bin" drift --json drift.json --csv drift.csv v1.json v2.json
grep -q 'FLAGGED' drift_v1_v2_flags.out && ok drift_text_says_flagged || fail drift_text_says_flagged "$(head -c 300 drift_v1_v2_flags.out)"

check "drift JSON: the shift, the new level, nothing else" "$py" - <<'PY'
import json, math
d = json.load(open("drift.json"))
v1, v2 = json.load(open("v1.json")), json.load(open("v2.json"))
assert d["format"] == "millrace-drift" and d["threshold"] == 3, d["format"]
c = {x["name"]: x for x in d["coefficients"]}
assert c["region=B"]["flagged"] and c["region=B"]["status"] == "both", c["region=B"]
# the generator's shift is +0.25; the estimate of it lies within 4 of its SEs
b = c["region=B"]
assert abs(b["change"] - 0.25) < 4 * b["standard_error_used"], b
assert c["region=D"]["status"] == "new" and c["region=D"]["flagged"], c["region=D"]
for name in ("intercept", "region=C", "x"):
    assert not c[name]["flagged"], c[name]
assert d["levels"] == [{"factor": "region", "level": "D", "status": "new"}], d["levels"]
assert d["flagged"] == 3, d["flagged"]  # region=B, region=D, level D
assert d["input_changed"] is True
assert d["rows"]["read"] == {"old": 20000, "new": 22000, "change": 2000}, d["rows"]["read"]
# oracle: z recomputed from the two fits' own estimates and SEs
old = {x["name"]: x for x in v1["coefficients"]}
new = {x["name"]: x for x in v2["coefficients"]}
for name in old:
    o, n = old[name], new[name]
    change = n["estimate"] - o["estimate"]
    se = max(o["standard_error"], n["standard_error"])
    z, zi = change / se, change / math.hypot(o["standard_error"], n["standard_error"])
    assert abs(c[name]["z"] - z) <= 1e-12 * abs(z), (name, c[name]["z"], z)
    assert abs(c[name]["z_independent"] - zi) <= 1e-12 * abs(zi), (name, c[name]["z_independent"], zi)
    assert c[name]["flagged"] == (abs(z) >= 3), name
dev = lambda f: f["fit"]["deviance"] / f["rows"]["used"]
assert abs(d["deviance_per_row"]["change"] - (dev(v2) - dev(v1))) <= 1e-12 * abs(dev(v1))
PY

check "drift CSV: RFC 4180, the JSON's numbers" "$py" - <<'PY'
import csv, json
d = {x["name"]: x for x in json.load(open("drift.json"))["coefficients"]}
rows = list(csv.DictReader(open("drift.csv", newline="")))
assert [r["name"] for r in rows] == list(d), [r["name"] for r in rows]
for r in rows:
    j = d[r["name"]]
    assert r["status"] == j["status"] and r["flagged"] == str(int(j["flagged"])), r
    for k in ("old_estimate", "new_estimate", "change", "z", "z_independent"):
        assert (r[k] == "" and j[k] is None) or float(r[k]) == j[k], (k, r[k], j[k])
PY

expect drift_self_nothing 0 "$bin" drift --json self.json v1.json v1.json
check "drift of a fit with itself: nothing flagged, input unchanged" "$py" -c '
import json; d = json.load(open("self.json"))
assert d["flagged"] == 0 and d["input_changed"] is False and d["levels"] == []
assert all(c["change"] == 0 and not c["flagged"] for c in d["coefficients"])'
grep -q 'nothing flagged' drift_self_nothing.out && ok drift_self_text || fail drift_self_text "$(tail -3 drift_self_nothing.out)"

# a low threshold flags every change, but a change of 0 never
expect zero_change_never_flagged 0 "$bin" drift --threshold 1e-300 v1.json v1.json
expect tiny_threshold_flags 12 "$bin" drift --threshold 1e-9 --csv tiny.csv v1.json v2.json
check "every coefficient flagged at a tiny threshold" "$py" -c '
import csv; rows = list(csv.DictReader(open("tiny.csv", newline="")))
assert rows and all(r["flagged"] == "1" for r in rows), rows'

# models that differ are refused, naming the difference
plain=(--outcome events --family poisson --factor 'region ref=A' --numeric x)
expect fit_log_link 0 "$bin" fit --quiet "${plain[@]}" --json log.json v1.csv
expect fit_sqrt_link 0 "$bin" fit --quiet "${plain[@]}" --link sqrt --json sqrt.json v1.csv
expect fit_other_family 0 "$bin" fit --quiet "${plain[@]}" --family gaussian --link identity --json gauss.json v1.csv
expect fit_other_terms 0 "$bin" fit --quiet -m rate.model --factor 'region ref=B' --json ref.json v1.csv
"$bin" fit --quiet --outcome events --family poisson --factor 'region ref=A' --exposure person_years --json noterm.json v1.csv > /dev/null
expect refuse_family 2 "$bin" drift gauss.json log.json
expect refuse_link 2 "$bin" drift log.json sqrt.json
grep -q "different models: link 'log' in the old, 'sqrt' in the new" refuse_link.err && ok refuse_link_says ||
    fail refuse_link_says "$(cat refuse_link.err)"
expect refuse_reference 2 "$bin" drift v1.json ref.json
expect refuse_terms 2 "$bin" drift v1.json noterm.json
grep -q "term 'x' in the old, '(none)' in the new" refuse_terms.err && ok refuse_terms_says || fail refuse_terms_says "$(cat refuse_terms.err)"

expect drift_usage 2 "$bin" drift v1.json
expect drift_bad_threshold 2 "$bin" drift --threshold -1 v1.json v2.json
expect drift_unknown_option 2 "$bin" drift --outcome y v1.json v2.json
expect drift_absent_fit 3 "$bin" drift v1.json absent.json
expect drift_csv_onto_input 2 "$bin" drift --csv v1.json v1.json v2.json
mkdir adir
expect drift_json_onto_directory 3 "$bin" drift --json adir v1.json v2.json
[ -z "$(ls adir)" ] && ok no_output_left || fail no_output_left "$(ls adir)"

# the audit trail
check "fit JSON: command line, start, end, host" "$py" - "$bin" <<'PY'
import json, re, sys
run = json.load(open("v1.json"))["run"]
assert run["command_line"] == [sys.argv[1], "fit", "--quiet", "-m", "rate.model", "--json", "v1.json", "--run-log",
                               "runs.log", "v1.csv"], run["command_line"]
iso = r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{9}Z$"
assert re.match(iso, run["started"]) and re.match(iso, run["ended"]) and run["started"] <= run["ended"], run
assert run["host"] != ""
PY
expect fit_fails_logged 2 "$bin" fit --quiet --outcome nosuch --run-log runs.log v1.csv
check "run log: one JSON line per run, exit codes and rows" "$py" - <<'PY'
import json
lines = open("runs.log").read().splitlines()
assert len(lines) == 3, lines
runs = [json.loads(l) for l in lines]
assert [r["exit"] for r in runs] == [0, 0, 2], runs
assert [r["rows_read"] for r in runs] == [20000, 22000, None], runs
assert runs[0]["input"] == "v1.csv" and runs[0]["error"] is None and runs[0]["passes"] >= 1
assert "nosuch" in runs[2]["error"] and runs[2]["flags"] is None
assert runs[1]["command_line"][1:3] == ["fit", "--quiet"]
PY
expect run_log_device 3 "$bin" fit --quiet -m rate.model --run-log /dev/null v1.csv
expect run_log_onto_data 2 "$bin" fit --quiet -m rate.model --run-log v1.csv v1.csv
ln -s runs.log link.log
expect run_log_through_link 0 "$bin" fit --quiet -m rate.model --run-log link.log v1.csv
[ -L link.log ] && [ "$(wc -l < runs.log)" = 4 ] && ok run_log_link_followed || fail run_log_link_followed "$(wc -l < runs.log)"

# a fit written before the audit trail (no "run") still compares
"$py" -c 'import json; j = json.load(open("v1.json")); del j["run"]; json.dump(j, open("older.json", "w"), indent=1)'
expect drift_older_fit 0 "$bin" drift older.json v1.json

finish
