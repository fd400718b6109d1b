#!/usr/bin/env bash
# A negative binomial's theta estimated by maximum likelihood ("family
# negative-binomial" with no theta, or theta=estimate): both spellings give
# the same fit; the report and the JSON name theta with its standard error;
# rows never collapse into patterns (the likelihood in theta needs each y);
# the same bits on 1, 2 and 3 worker threads, cached or not, over more rows
# than one group of blocks (accum/partial.h) so that the group order is
# exercised; bad input: theta <= 0, theta estimated in a quasi family, a negative count (exit 5, the file, line,
# column and value named), outcomes that are not whole numbers (a warning),
# counts with no overdispersion (theta held at its bound, a warning).  The
# numbers themselves are checked against R's MASS::glm.nb in
# tests/ref/estimated_parameters.py.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

synth="$root/build/synth"
[ -x "$synth" ] || { fail setup "$synth not found (run make first)"; finish; exit 1; }
"$synth" --rows 300000 --seed 7 --out "$tmp/big.csv" 2>"$tmp/synth.err" || fail setup "synth: $(cat "$tmp/synth.err")"

# same_fit A.json B.json: the coefficients, the fit statistics, theta and
# its standard error as written, digit for digit
same_fit() {
    /usr/bin/python3 - "$1" "$2" <<'EOF'
import json, sys
a, b = (json.load(open(p), parse_float=str, parse_int=str) for p in sys.argv[1:3])
for key in ("coefficients", "fit"):
    if a[key] != b[key]:
        print("%s differs" % key)
if a["model"]["family_parameter"] != b["model"]["family_parameter"]:
    print("theta differs")
EOF
}

opts=(--outcome events --exposure followup --factor age_band --factor sex --factor region --numeric bmi)
for t in 1 2 3; do
    "$bin" fit --quiet "${opts[@]}" --family negative-binomial --threads "$t" --json "$tmp/t$t.json" "$tmp/big.csv" \
        >/dev/null 2>"$tmp/t$t.err" || fail "threads_$t" "exit $?: $(head -c 300 "$tmp/t$t.err")"
done
"$bin" fit --quiet "${opts[@]}" --family "negative-binomial theta=estimate" --threads 2 --no-cache \
    --json "$tmp/nc.json" "$tmp/big.csv" >/dev/null 2>"$tmp/nc.err" || fail no_cache "exit $?: $(head -c 300 "$tmp/nc.err")"
for other in t2 t3 nc; do
    why=$(same_fit "$tmp/t1.json" "$tmp/$other.json")
    if [ -z "$why" ]; then ok "same_bits_$other"; else fail "same_bits_$other" "$why"; fi
done

why=$(/usr/bin/python3 - "$tmp/t1.json" <<'EOF'
import json, math, sys
js = json.load(open(sys.argv[1]))
fp = js["model"].get("family_parameter") or {}
problems = []
if fp.get("name") != "theta" or not (fp.get("value", 0) > 0):
    problems.append("family_parameter %r" % fp)
se = (fp.get("estimated") or {}).get("standard_error")
if not (isinstance(se, float) and se > 0):
    problems.append("standard error %r" % se)
if js["convergence"]["collapsed_patterns"] is not None or not js["convergence"]["converged"]:
    problems.append("convergence %r" % js["convergence"])
# AIC counts theta: -2 loglik + 2 (rank + 1)
if abs(js["fit"]["aic"] - (-2 * js["fit"]["log_likelihood"] + 2 * (js["fit"]["rank"] + 1))) > 1e-9 * js["fit"]["aic"]:
    problems.append("aic %r" % js["fit"]["aic"])
print("; ".join(problems))
EOF
)
if [ -z "$why" ]; then ok json_theta; else fail json_theta "$why"; fi

# a small file of counts, some overdispersed
data="$tmp/counts.csv"
{
    echo 'y,g,x'
    for i in $(seq 1 400); do
        printf '%d,%s,%d\n' $(((i * 7919) % 13 * (i % 4 == 0 ? 3 : 1) % 17)) "$([ $((i % 3)) -eq 0 ] && echo B || echo A)" $((i % 5))
    done
} >"$data"
report=$("$bin" fit --outcome y --factor g --numeric x --family negative-binomial "$data" 2>&1)
if grep -qE "^model      negative-binomial family \(theta [0-9.e+-]+, standard error [0-9.e+-]+, maximum likelihood\), log link" \
    <<<"$report"; then
    ok report_theta
else
    fail report_theta "$(grep '^model' <<<"$report")"
fi

# refused NAME EXIT 'needle' -- fit options... FILE: that exit, one line holding needle
refused() {
    local name=$1 want=$2 needle=$3
    shift 4
    "$bin" fit --quiet "$@" >"$tmp/$name.out" 2>"$tmp/$name.err"
    local rc=$?
    if [ "$rc" -ne "$want" ]; then
        fail "$name" "exit $rc, expected $want: $(head -c 300 "$tmp/$name.err")"
    elif [ "$(wc -l <"$tmp/$name.err")" -ne 1 ] || ! grep -qF -- "$needle" "$tmp/$name.err"; then
        fail "$name" "message '$(cat "$tmp/$name.err")' lacks '$needle'"
    else
        ok "$name"
    fi
}
refused theta_zero 2 "--family: theta must be > 0, got '0'" -- --outcome y --family "negative-binomial theta=0" "$data"
refused theta_word 2 "theta takes a number, got 'estimated'" -- --outcome y --family "negative-binomial theta=estimated" "$data"
refused theta_quasi 2 "theta is estimated by its likelihood, which 'dispersion estimate' (a quasi family) does not have" \
    -- --outcome y --family negative-binomial --dispersion estimate "$data"
printf 'y,g\n2,a\n0,b\n-1,a\n4,b\n' >"$tmp/negative.csv"
refused negative_count 5 "negative.csv:4:1: column 'y': a count cannot be negative (value '-1')" -- \
    --outcome y --factor g --family negative-binomial "$tmp/negative.csv"

# warned NAME 'needle' ROWS: a fit of y,g rows (printf format) whose report warns with needle
warned() {
    local name=$1 needle=$2
    printf "y,g\n$3" >"$tmp/$name.csv"
    "$bin" fit --outcome y --factor g --family negative-binomial "$tmp/$name.csv" >"$tmp/$name.out" 2>&1
    if grep -qF -- "$needle" "$tmp/$name.out"; then
        ok "$name"
    else
        fail "$name" "$(grep -E '!|model' "$tmp/$name.out" | head -c 300)"
    fi
}
# outcomes that are not whole numbers: fitted, with a warning
warned fractional_counts_warned "2 outcome values are not whole numbers: the negative binomial is a distribution of counts" \
    '2.5,a\n0,b\n7,a\n4.25,b\n0,a\n11,b\n1,a\n0,b\n9,a\n3,b\n'
# counts with no overdispersion: theta at its bound, said so
warned theta_at_bound_warned "theta reached 1e+08, its largest value: the counts show no overdispersion" \
    '1,a\n1,b\n1,a\n1,b\n1,a\n1,b\n'

finish
