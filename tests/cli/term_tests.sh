#!/usr/bin/env bash
# The joint Wald test per term in the report, the JSON and a fit read back.
# Sources of truth: the contract in README ("The report", "JSON output") for
# terms with no test (all coefficients aliased; a factor of one level), and
# the data built so that the answer is known: an aliased interaction cell
# (an empty cell) leaves the term one df short.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# k has one level (no column); c is g renamed (all its columns aliased);
# the cell g=c & s=m is empty (its column aliased).
{
    echo "y,g,c,s,k"
    for i in $(seq 0 239); do
        g=$(printf 'abc' | cut -c$((i % 3 + 1))); s=$(printf 'fm' | cut -c$((i / 3 % 2 + 1)))
        [ "$g$s" = cm ] && continue
        echo "$(( (i * 7) % 11 + (i % 3) )),$g,x$g,$s,only"
    done
} > "$tmp/terms.csv"

$bin fit --outcome y --family poisson --factor g --factor c --factor s --factor k --interact 'g s' \
    --json "$tmp/t.json" "$tmp/terms.csv" > "$tmp/t.out" 2> "$tmp/t.err"
rc=$?
sed -n '/^terms:/,/^$/p' "$tmp/t.out" > "$tmp/t.section"
if [ $rc = 0 ] &&
    grep -qE '^  c +0   no test: every coefficient of the term is aliased$' "$tmp/t.section" &&
    grep -qE '^  k +0   no test: the term has no coefficient$' "$tmp/t.section" &&
    grep -qE '^  g & s +1 .*   1 aliased coefficient left out$' "$tmp/t.section" &&
    grep -qE '^  g +2 +[0-9.e+-]+ +[0-9.e<+-]+$' "$tmp/t.section"; then
    ok report_term_lines
else
    fail report_term_lines "exit $rc: $(cat "$tmp/t.section" "$tmp/t.err")"
fi

check json_term_tests /usr/bin/python3 -c '
import json, sys
t = {x["label"]: x["test"] for x in json.load(open(sys.argv[1]))["model"]["terms"]}
assert t["c"] is None and t["k"] is None, t
assert t["g & s"]["df"] == 1 and t["g"]["df"] == 2 and t["s"]["df"] == 1, t
assert t["g"]["distribution"] == "chi-square" and t["g"]["denominator_df"] is None, t
assert t["g"]["statistic"] == t["g"]["chi2"] and 0 < t["g"]["p_value"] < 1, t
' "$tmp/t.json"

# read back: the tests are recomputed, the same report and the same bytes
$bin show "$tmp/t.json" > "$tmp/show.out" 2>&1
sed -n '/^terms:/,/^$/p' "$tmp/show.out" > "$tmp/show.section"
if cmp -s "$tmp/t.section" "$tmp/show.section"; then ok show_term_lines; else fail show_term_lines "$(diff "$tmp/t.section" "$tmp/show.section" | head -5)"; fi

# an estimated dispersion: F against the residual df
$bin fit --outcome y --family poisson --factor g --factor s --dispersion estimate --quiet \
    --json "$tmp/f.json" "$tmp/terms.csv" > "$tmp/f.out"
if grep -qE '^terms: joint Wald F = chi-square / df, against F\(df, [0-9]+\)$' "$tmp/f.out"; then
    ok report_f_header
else
    fail report_f_header "$(grep -A3 '^terms' "$tmp/f.out")"
fi
check json_f_test /usr/bin/python3 -c '
import json, sys
j = json.load(open(sys.argv[1]))
t = j["model"]["terms"][0]["test"]
assert t["distribution"] == "F" and t["denominator_df"] == j["fit"]["residual_df"], t
assert abs(t["statistic"] * t["df"] - t["chi2"]) <= 1e-15 * t["chi2"], t
' "$tmp/f.json"

# no residual df: the dispersion cannot be estimated, so there is no test
printf 'y,g\n1,a\n3,b\n' > "$tmp/df0.csv"
$bin fit --outcome y --family gamma --factor g --quiet --json "$tmp/df0.json" "$tmp/df0.csv" > "$tmp/df0.out"
if grep -qE '^  g +1 +- +-   no test: the dispersion could not be estimated$' "$tmp/df0.out" &&
    /usr/bin/python3 -c '
import json, sys
t = json.load(open(sys.argv[1]))["model"]["terms"][0]["test"]
assert t["df"] == 1 and t["statistic"] is None and t["chi2"] is None and t["p_value"] is None, t
' "$tmp/df0.json"; then
    ok no_residual_df
else
    fail no_residual_df "$(grep -A3 '^terms' "$tmp/df0.out")"
fi
finish
