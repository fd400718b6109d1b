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
assert abs(b["a"]["estimate"] - 0.9) < 1e-12 and abs(b["intercept"]["estimate"] - 0.3) < 1e-12, b
' "$tmp/al.json"; then
    ok aliased_reported
else
    fail aliased_reported "exit $rc"
fi
# Outcomes the first pass can tell are trouble, though the fit runs.
# Binomial proportions with no weight or trials column: each row is taken
# as one trial (by construction: y = 0.5 has no meaning as one trial).
{ echo "y,x,w"; for i in $(seq 1 30); do echo "0.$((i % 3 * 3 + 1)),$i,4"; done; } > "$tmp/prop.csv"
{ echo "y,x"; for i in $(seq 1 30); do echo "$(( (i * 7) % 3 == 0 )),$i"; done; } > "$tmp/binary.csv"
# Poisson with every count 0: the maximum is at minus infinity.
{ echo "y,x"; for i in $(seq 1 30); do echo "0,$((i % 5))"; done; } > "$tmp/zeros.csv"
prop_warning="outcome values between 0 and 1 with no weight or trials column: treated as proportions of one trial"
zero_warning="every outcome is 0: estimates are at the boundary and their standard errors meaningless"
# warned NAME EXPECTED(1/0) TEXT -- fit options and file
warned() {
    local name=$1 want=$2 text=$3
    shift 4
    $bin fit --quiet --json "$tmp/$name.json" "$@" > "$tmp/$name.out" 2> "$tmp/$name.err"
    local rc=$? got=0
    grep -qF -- "$text" "$tmp/$name.out" && grep -qF -- "$text" "$tmp/$name.json" && got=1
    if [ $rc = 0 ] && [ $got = "$want" ]; then ok "$name"; else fail "$name" "exit $rc, warned $got, expected $want"; fi
}
warned proportions_without_weight_warned 1 "$prop_warning" -- --outcome y --family binomial --numeric x "$tmp/prop.csv"
warned proportions_with_weight_not_warned 0 "$prop_warning" -- --outcome y --family binomial --numeric x \
    --weight w "$tmp/prop.csv"
warned binary_outcome_not_warned 0 "$prop_warning" -- --outcome y --family binomial --numeric x "$tmp/binary.csv"
warned all_zero_counts_warned 1 "$zero_warning" -- --outcome y --family poisson --numeric x "$tmp/zeros.csv"
warned all_zero_counts_no_collapse_warned 1 "$zero_warning" -- --outcome y --family poisson --numeric x \
    --no-collapse --threads 3 "$tmp/zeros.csv"
warned some_counts_not_warned 0 "$zero_warning" -- --outcome x --family poisson --numeric y "$tmp/zeros.csv"
finish
