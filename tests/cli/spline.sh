#!/usr/bin/env bash
# Spline terms from the command line: bad spline lines and data that
# cannot carry the spline asked for exit 2 with one clear line; the knots
# and the fit are the same bits for any thread count, read size and
# cache mode, collapsed or not where the documented bound allows.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin} # a sanitizer build may be given

data="$tmp/ages.csv"
/usr/bin/python3 - "$data" <<'PY'
import random, sys
rng = random.Random(5)
with open(sys.argv[1], "w") as f:
    f.write("deaths,py,age,sex,flat\n")
    for i in range(70000):  # five blocks of rows
        age = rng.randrange(40, 180) / 2.0
        f.write("%d,%.1f,%r,%s,%d\n" % (rng.randrange(0, 4), rng.uniform(20, 400), age, rng.choice("FM"), i % 3))
PY
model=(--outcome deaths --family poisson --exposure py --factor sex)

# refuse NAME 'needle' -- options: exit 2, one line on stderr naming it, no JSON
refuse() {
    local name=$1 needle=$2
    shift 3
    "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "$@" "$data" > /dev/null 2> "$tmp/$name.err"
    local rc=$?
    if [ "$rc" -ne 2 ]; then fail "$name" "exit $rc, not 2: $(head -c 300 "$tmp/$name.err")"
    elif ! grep -qF -- "$needle" "$tmp/$name.err"; then fail "$name" "message lacks '$needle': $(cat "$tmp/$name.err")"
    elif [ "$(wc -l < "$tmp/$name.err")" -ne 1 ]; then fail "$name" "more than one line: $(cat "$tmp/$name.err")"
    elif [ -e "$tmp/$name.json" ]; then fail "$name" "JSON written"
    else ok "$name"; fi
}

refuse df-zero "df= takes a whole number from 1" -- --spline "age df=0"
refuse knots-unsorted "strictly increasing" -- --spline "age knots=60,45"
refuse knots-outside-boundary "not inside the boundary knots" -- --spline "age knots=20,50 boundary=30,80"
refuse knots-outside-data "not inside the boundary knots" -- --spline "age knots=20,50,95"
refuse few-distinct "needs at least 5 distinct values" -- --spline "flat df=4"
refuse two-splines "two splines" -- --spline "age df=3" --spline "flat knots=1" --interact "age flat"
printf 'spline age df=x\n' > "$tmp/spl.model"
refuse model-file "spl.model:1: spline df= takes" -- --model "$tmp/spl.model"

spline=(--spline "age df=5" --interact "age sex")
"$bin" fit --quiet --threads 1 --json "$tmp/base.json" "${model[@]}" "${spline[@]}" --no-collapse "$data" \
    > /dev/null 2> "$tmp/base.err" || fail base "$(cat "$tmp/base.err")"
fit_values "$tmp/base.json" > "$tmp/base.values"
run() {
    local name=$1
    shift
    "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "${spline[@]}" --no-collapse "$@" "$data" \
        > /dev/null 2> "$tmp/$name.err"
    same_as_base "$name" $?
}
run threads-3 --threads 3
run small-reads --threads 2 --buffer-size 4099
run no-cache --threads 3 --no-cache
run in-memory --threads 2 --in-memory
"$bin" fit --quiet --threads 3 --json "$tmp/stdin.json" "${model[@]}" "${spline[@]}" --no-collapse - < "$data" \
    > /dev/null 2> "$tmp/stdin.err"
same_as_base stdin $?

knots() {
    /usr/bin/python3 -c 'import json, sys
print([t["spline"] for t in json.load(open(sys.argv[1]))["model"]["terms"] if "spline" in t])' "$1"
}
"$bin" fit --quiet --threads 3 --json "$tmp/collapsed.json" "${model[@]}" "${spline[@]}" "$data" > /dev/null 2>&1
if [ "$(knots "$tmp/collapsed.json")" = "$(knots "$tmp/base.json")" ]; then ok collapsed-knots
else fail collapsed-knots "$(knots "$tmp/collapsed.json") vs $(knots "$tmp/base.json")"; fi
if /usr/bin/python3 - "$tmp/collapsed.json" "$tmp/base.json" <<'PY'
import json, sys
a, b = (json.load(open(p)) for p in sys.argv[1:])
assert a["convergence"]["collapsed_patterns"], "did not collapse"
for x, y in zip(a["coefficients"], b["coefficients"]):  # DEVELOPERS.md: the collapsed bound
    assert abs(x["estimate"] - y["estimate"]) <= 1e-7 * abs(y["estimate"]) + 1e-10, x["name"]
    assert abs(x["standard_error"] - y["standard_error"]) <= 1e-6 * y["standard_error"], x["name"]
PY
then ok collapsed-agrees; else fail collapsed-agrees "collapsed fit outside the documented bound"; fi

"$bin" fit "${model[@]}" --spline "age knots=50 boundary=20,90" "$data" 2>&1 | grep -q "spline age: 2 columns, knots 50, boundary 20 and 90" &&
    ok report-knots || fail report-knots "the report does not show the knots"

finish
