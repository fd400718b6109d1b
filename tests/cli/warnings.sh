#!/usr/bin/env bash
# Fits that succeed but must say what is wrong with them.  Sources of
# truth: the data are built so that the answer is known by construction
# (perfect separation, an exactly collinear column, a pass limit too low).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# y = 1 exactly when x > 50: the maximum likelihood estimate does not exist.
{ echo "y,x"; for i in $(seq 1 100); do echo "$((i > 50)),$i"; done; } > "$tmp/sep.csv"
# b = 2 a: b is aliased with a.
printf 'y,a,b\n1,1,2\n2,2,4\n3,3,6\n5,4,8\n4,5,10\n' > "$tmp/alias.csv"

$bin fit --outcome y --family binomial --numeric x --quiet "$tmp/sep.csv" > "$tmp/sep.out"
rc=$?
if [ $rc = 0 ] && grep -q "possible separation" "$tmp/sep.out"; then ok separation_warned; else fail separation_warned "exit $rc"; fi

$bin fit --outcome y --family binomial --numeric x --max-passes 3 --quiet --json "$tmp/nc.json" "$tmp/sep.csv" \
    > "$tmp/nc.out" 2> "$tmp/nc.err"
rc=$?
if [ $rc = 7 ] && grep -q "NOT CONVERGED" "$tmp/nc.out" && grep -q '"converged": false' "$tmp/nc.json"; then
    ok not_converged_flagged
else
    fail not_converged_flagged "exit $rc"
fi

$bin fit --outcome y --numeric a --numeric b --quiet --json "$tmp/al.json" "$tmp/alias.csv" > "$tmp/al.out"
rc=$?
if [ $rc = 0 ] && grep -qE '^  b +aliased' "$tmp/al.out" && grep -q '"aliased": true' "$tmp/al.json" &&
    /usr/bin/python3 -c '
import json, sys
j = json.load(open(sys.argv[1]))
b = {c["name"]: c for c in j["coefficients"]}
# Least squares on the five points by hand: slope 9/10, intercept 3 - 2.7 = 0.3.
assert b["b"]["estimate"] is None and j["fit"]["rank"] == 2
assert abs(b["a"]["estimate"] - 0.9) < 1e-12 and abs(b["(intercept)"]["estimate"] - 0.3) < 1e-12, b
' "$tmp/al.json"; then
    ok aliased_reported
else
    fail aliased_reported "exit $rc"
fi
finish
