#!/usr/bin/env bash
# Families with a parameter of their own on the command line and in model
# files: a missing power or a bad parameter is a usage error (exit 2, one
# line naming the line and the value; a negative binomial without theta
# estimates it: tests/cli/theta.sh); a parameter the family does not take
# is refused; the report names the parameter; collapsing rows into
# covariate patterns gives the fit of the rows one by one (the negative
# binomial's deviance is of the exponential-family form the pattern sums
# need, and its log-likelihood's data-only terms are summed row by row in
# the first pass) to within the convergence tolerance; the Tweedie's rows
# never collapse (its log-likelihood is a series in each row's y).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

data="$tmp/counts.csv"
{
    echo 'y,g,h,x'
    for i in $(seq 1 600); do
        printf '%d,%s,%s,%d.5\n' $(((i * 7919) % 11 % 6 + (i % 3 == 0 ? 4 : 0))) \
            "$([ $((i % 3)) -eq 0 ] && echo B || echo A)" "h$((i % 4))" $((i % 5))
    done
} >"$data"

# refused NAME 'needle' -- fit options...: exit 2, one line holding needle
refused() {
    local name=$1 needle=$2
    shift 3
    "$bin" fit --quiet "$@" "$data" >"$tmp/$name.out" 2>"$tmp/$name.err"
    local rc=$?
    if [ "$rc" -ne 2 ]; then
        fail "$name" "exit $rc, expected 2: $(head -c 300 "$tmp/$name.err")"
    elif [ "$(wc -l <"$tmp/$name.err")" -ne 1 ] || ! grep -qF -- "$needle" "$tmp/$name.err"; then
        fail "$name" "message '$(cat "$tmp/$name.err")' lacks '$needle'"
    else
        ok "$name"
    fi
}

base=(--outcome y --factor g --numeric x)
refused nb_theta_zero "--family: theta must be > 0, got '0'" -- "${base[@]}" --family "negative-binomial theta=0"
refused nb_theta_negative "theta must be > 0, got '-1.5'" -- "${base[@]}" --family "negative-binomial theta=-1.5"
refused nb_theta_text "theta takes a number, got 'two'" -- "${base[@]}" --family "negative-binomial theta=two"
refused nb_other_word "the negative-binomial family takes theta=VALUE, got 'power=2'" -- \
    "${base[@]}" --family "negative-binomial power=2"
refused poisson_with_theta "'family' takes 1 value, got 2" -- "${base[@]}" --family "poisson theta=2"
refused tweedie_no_power "the tweedie family needs its power (family tweedie power=VALUE)" -- \
    "${base[@]}" --family tweedie
refused tweedie_power_2 "--family: power must lie strictly between 1 and 2, got '2'" -- \
    "${base[@]}" --family "tweedie power=2"
refused tweedie_power_1 "power must lie strictly between 1 and 2, got '1.0'" -- "${base[@]}" --family "tweedie power=1.0"
refused tweedie_identity "the tweedie family does not take the identity link" -- \
    "${base[@]}" --family "tweedie power=1.5" --link identity
printf 'outcome y\nfactor g\nfamily negative-binomial theta=0.0\n' >"$tmp/bad.model"
refused nb_model_file "bad.model:3: theta must be > 0" -- --model "$tmp/bad.model"

# a later family line replaces the earlier one with its parameter
if "$bin" fit --quiet "${base[@]}" --family "negative-binomial theta=2" --family poisson --json "$tmp/p.json" \
    "$data" >/dev/null 2>"$tmp/p.err" && ! grep -q family_parameter "$tmp/p.json"; then
    ok later_family_drops_parameter
else
    fail later_family_drops_parameter "$(head -c 300 "$tmp/p.err")"
fi

report=$("$bin" fit "${base[@]}" --family "negative-binomial theta=1.25" "$data" 2>&1)
if grep -qF "model      negative-binomial family (theta 1.25, fixed), log link" <<<"$report"; then
    ok report_names_theta
else
    fail report_names_theta "$(grep '^model' <<<"$report")"
fi

# fits of different theta are fits of different models
"$bin" fit --quiet "${base[@]}" --family "negative-binomial theta=2" --json "$tmp/t2.json" "$data" >/dev/null &&
    "$bin" fit --quiet "${base[@]}" --family "negative-binomial theta=3" --json "$tmp/t3.json" "$data" >/dev/null
"$bin" drift "$tmp/t2.json" "$tmp/t3.json" >/dev/null 2>"$tmp/drift.err"
rc=$?
if [ "$rc" -eq 2 ] && grep -qF "different models: theta '2' in the old, '3' in the new" "$tmp/drift.err"; then
    ok drift_refuses_other_theta
else
    fail drift_refuses_other_theta "exit $rc: $(head -c 300 "$tmp/drift.err")"
fi

report=$("$bin" fit "${base[@]}" --family "tweedie power=1.5" "$data" 2>&1)
if grep -qF "model      tweedie family (power 1.5, fixed), log link" <<<"$report" &&
    grep -qE "^  log-likelihood      -[0-9.]+$" <<<"$report"; then
    ok report_tweedie
else
    fail report_tweedie "$(grep -E '^model|log-lik' <<<"$report")"
fi

"$bin" fit --quiet "${base[@]}" --family "tweedie power=1.5" --json "$tmp/tw.json" "$data" >/dev/null &&
    "$bin" report --html "$tmp/tw.html" "$tmp/tw.json" "$tmp/t2.json" 2>"$tmp/html.err"
rc=$?
if [ "$rc" -eq 0 ] && grep -qF "tweedie family (power 1.5, fixed)" "$tmp/tw.html" &&
    grep -qE "<td>AIC</td><td>[0-9.]+</td>" "$tmp/tw.html" && ! grep -qi ">nan<" "$tmp/tw.html"; then
    ok html_tweedie
else
    fail html_tweedie "exit $rc: $(head -c 300 "$tmp/html.err")"
fi

# collapsed patterns (factors only) against the rows one by one
for fl in "negative-binomial theta=1.5:log" "negative-binomial theta=1.5:sqrt" "negative-binomial theta=1.5:identity"; do
    family=${fl%:*} link=${fl#*:}
    opts=(--outcome y --factor g --factor h --family "$family" --link "$link" --tolerance 1e-13)
    "$bin" fit --quiet "${opts[@]}" --json "$tmp/c.json" "$data" >/dev/null 2>"$tmp/c.err" &&
        "$bin" fit --quiet "${opts[@]}" --no-collapse --json "$tmp/n.json" "$data" >/dev/null 2>>"$tmp/c.err"
    rc=$?
    if [ "$rc" -ne 0 ]; then
        fail "collapse_${family%% *}_$link" "exit $rc: $(head -c 300 "$tmp/c.err")"
        continue
    fi
    why=$(/usr/bin/python3 - "$tmp/c.json" "$tmp/n.json" <<'EOF'
import json, sys
c, n = (json.load(open(p)) for p in sys.argv[1:3])
problems = []
if c["convergence"]["collapsed_patterns"] != 8 or n["convergence"]["collapsed_patterns"] is not None:
    problems.append("patterns %r / %r" % (c["convergence"]["collapsed_patterns"], n["convergence"]["collapsed_patterns"]))
# The deviance and log-likelihood are flat at the maximum: equal to 1e-10.
# The two paths stop at slightly different points of these non-canonical
# links (linear convergence; DEVELOPERS.md, "Speed paths"), which moves the
# estimates by about 1e-9 standard errors and the Pearson statistic by
# about 1e-8: allowed 1e-7.
for key, tol in (("deviance", 1e-10), ("null_deviance", 1e-10), ("log_likelihood", 1e-10), ("aic", 1e-10),
                 ("pearson_chi2", 1e-7), ("dispersion", 1e-7)):
    a, b = c["fit"][key], n["fit"][key]
    if a is None or b is None or abs(a - b) > tol * abs(b):
        problems.append("%s %r vs %r" % (key, a, b))
for x, y in zip(c["coefficients"], n["coefficients"]):
    if abs(x["estimate"] - y["estimate"]) > 1e-7 * y["standard_error"] or \
       abs(x["standard_error"] - y["standard_error"]) > 1e-7 * y["standard_error"]:
        problems.append("%s %r vs %r" % (x["name"], x["estimate"], y["estimate"]))
print("; ".join(problems))
EOF
    )
    if [ -z "$why" ]; then ok "collapse_${family%% *}_$link"; else fail "collapse_${family%% *}_$link" "$why"; fi
done

# the Tweedie's rows are never collapsed
"$bin" fit --quiet --outcome y --factor g --factor h --family "tweedie power=1.4" --json "$tmp/tw.json" "$data" \
    >/dev/null 2>"$tmp/tw.err"
if /usr/bin/python3 -c 'import json, sys; sys.exit(json.load(open(sys.argv[1]))["convergence"]["collapsed_patterns"] is not None)' \
    "$tmp/tw.json"; then
    ok tweedie_rows_not_collapsed
else
    fail tweedie_rows_not_collapsed "$(head -c 300 "$tmp/tw.err")"
fi

finish
