#!/usr/bin/env bash
# Names of our own and the JSON format history: a fit saved as format 2
# (tests/cli/fit_format2.json, kept as that writer left it: std_error,
# df_residual, "(intercept)") is read by show, --start-from and drift as
# format 3; a coefficient name taken twice is refused on its model line;
# quasi families (poisson, binomial with the dispersion estimated) report
# no log-likelihood, AIC or BIC.  Sources of truth: the fit a run of the
# same model gives today (the same bits, README "JSON output"), and the
# definition of a quasi family (its mean and variance, no density).  The
# kept fit's numbers are those of the stopping rule of its day, within
# 1e-5 of today's (see same_table).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
old="$here/fit_format2.json"
printf 'outcome admissions\nfamily poisson\nexposure person_years\nfactor sex\nfactor region\nnumeric year\n' \
    > "$tmp/small.model"
data="$root/samples/falls.csv"

"$bin" fit --quiet --model "$tmp/small.model" --json "$tmp/now.json" "$data" > "$tmp/now.txt" 2> "$tmp/err"
"$bin" show "$old" > "$tmp/old.txt" 2>> "$tmp/err"
# The kept fit stopped under the relative deviance rule, short of where
# today's step rule stops: the same table, each number within 1e-5
# relative of today's (printed to 6 digits; the old rule's distance).
same_table() {
    /usr/bin/python3 - "$1" "$2" <<'END'
import sys
a, b = ([ln for ln in open(p).read().split("\ncoefficients", 1)[1].split("\n") if ln.strip()] for p in sys.argv[1:])
def num(w):
    try:
        return float(w)
    except ValueError:
        return None
ok = len(a) == len(b)
for la, lb in zip(a, b):
    wa, wb = la.split(), lb.split()
    ok = ok and len(wa) == len(wb)
    for x, y in zip(wa, wb):
        nx, ny = num(x), num(y)
        ok = ok and (x == y if nx is None or ny is None else abs(nx - ny) <= 1e-5 * max(abs(nx), abs(ny)))
sys.exit(0 if ok else 1)
END
}
if grep -q '^  intercept  ' "$tmp/old.txt" && grep -q '^  coefficient  .* SE  ' "$tmp/old.txt" &&
    sed '/^calibration: /,/^  groups are whole bins/d' "$tmp/now.txt" > "$tmp/now-table.txt" &&
    same_table "$tmp/now-table.txt" "$tmp/old.txt"; then
    ok "show of a format 2 fit: today's names, today's table (it has no calibration)"
else
    fail "show of a format 2 fit" "$(head -c 300 "$tmp/err")"
fi
if grep -qE '^  deviance +[0-9.]+ +degrees of freedom 2870$' "$tmp/now.txt" && ! grep -qE ' df$|std\.error|\(intercept\)' "$tmp/now.txt"; then
    ok "report: SE, deviance with its degrees of freedom in words"
else
    fail "report wording" "$(grep -E 'deviance|coefficient ' "$tmp/now.txt" | head -3 | tr '\n' '|')"
fi
if grep -q '"format_version": 3' "$tmp/now.json" && grep -q '"name": "intercept"' "$tmp/now.json" &&
    grep -q '"standard_error": ' "$tmp/now.json" && grep -q '"residual_df": 2870' "$tmp/now.json" &&
    ! grep -qE 'std_error|df_residual|df_null|df_denominator' "$tmp/now.json"; then
    ok "JSON format 3 names"
else
    fail "JSON format 3 names" "$(grep -nE 'format_version|std_error|df_' "$tmp/now.json" | head -3 | tr '\n' '|')"
fi

"$bin" fit --quiet --model "$tmp/small.model" --start-from "$old" --json "$tmp/started.json" "$data" \
    > "$tmp/started.txt" 2> "$tmp/err"
if grep -q 'from the previous fit .*: 10 of this fit.s 10 coefficients carried over' "$tmp/started.txt"; then
    ok "--start-from a format 2 fit: every coefficient matched by name, the intercept too"
else
    fail "--start-from a format 2 fit" "$(grep started "$tmp/started.txt") $(head -c 200 "$tmp/err")"
fi

if "$bin" drift --json "$tmp/drift.json" "$old" "$tmp/now.json" > "$tmp/drift.txt" 2> "$tmp/err" &&
    grep -q '^  intercept  ' "$tmp/drift.txt" && grep -q '"old_standard_error"' "$tmp/drift.json" &&
    ! grep -q 'only in' "$tmp/drift.txt"; then
    ok "drift of a format 2 fit against a format 3 one"
else
    fail "drift format 2 against 3" "$(head -c 300 "$tmp/err") $(grep -i 'only' "$tmp/drift.txt" | head -2)"
fi

# a numeric column called intercept beside the intercept
printf 'y,intercept,g\n1,0.5,a\n3,1.5,b\n2,2.5,a\n4,1,b\n' > "$tmp/ic.csv"
printf 'outcome y\nfamily poisson\nfactor g\nnumeric intercept\n' > "$tmp/ic.model"
"$bin" fit --quiet --model "$tmp/ic.model" "$tmp/ic.csv" > /dev/null 2> "$tmp/err"
rc=$?
if [ $rc = 2 ] && grep -q "ic.model:4: the coefficient name 'intercept' is taken twice" "$tmp/err"; then
    ok "a column named intercept is refused on its line"
else
    fail "column named intercept" "exit $rc: $(head -c 300 "$tmp/err")"
fi
echo 'intercept no' >> "$tmp/ic.model"
if "$bin" fit --quiet --model "$tmp/ic.model" "$tmp/ic.csv" > /dev/null 2> "$tmp/err"; then
    ok "without the intercept the column's name is free"
else
    fail "intercept no" "$(head -c 300 "$tmp/err")"
fi
printf 'y,g,g=b\n1,a,0.5\n3,b,1.5\n2,a,2.5\n4,b,1\n' > "$tmp/gb.csv"
"$bin" fit --quiet --outcome y --family poisson --factor g --numeric 'g=b' "$tmp/gb.csv" > /dev/null 2> "$tmp/err"
rc=$?
if [ $rc = 2 ] && grep -q "numeric.*'g=b' is taken twice" "$tmp/err"; then
    ok "a column named like a factor level's coefficient is refused"
else
    fail "column g=b" "exit $rc: $(head -c 300 "$tmp/err")"
fi

# quasi families: no likelihood; plain poisson keeps its AIC
quasi() { # NAME FAMILY OUTCOME [fit arguments...]
    local name=$1
    shift
    "$bin" fit --quiet --json "$tmp/$name.json" "$@" > "$tmp/$name.txt" 2> "$tmp/err" &&
        "$bin" report --html "$tmp/$name.html" "$tmp/$name.json" 2>> "$tmp/err"
}
if quasi qp --model "$tmp/small.model" --dispersion estimate "$data" &&
    grep -q '^  log-likelihood      none: poisson with the dispersion estimated is a quasi family' "$tmp/qp.txt" &&
    grep -q '^  AIC, BIC            none$' "$tmp/qp.txt" && ! grep -q '^  AIC  ' "$tmp/qp.txt" &&
    grep -q '"log_likelihood": null' "$tmp/qp.json" && grep -q '"aic": null' "$tmp/qp.json" &&
    grep -q '"bic": null' "$tmp/qp.json" && grep -q 'No log-likelihood, AIC or BIC' "$tmp/qp.html" &&
    grep -q '<td>AIC</td><td>none (quasi family)</td>' "$tmp/qp.html"; then
    ok "quasi-poisson: no log-likelihood, AIC or BIC (report, JSON, page)"
else
    fail "quasi-poisson" "$(head -c 300 "$tmp/err") $(grep -E 'log-lik|AIC' "$tmp/qp.txt" | tr '\n' '|')"
fi
if quasi qb -m "$root/samples/screening.model" --dispersion estimate "$root/samples/screening.csv" &&
    grep -q 'binomial with the dispersion estimated is a quasi family' "$tmp/qb.txt" &&
    grep -q '"aic": null' "$tmp/qb.json"; then
    ok "quasi-binomial: no log-likelihood, AIC or BIC"
else
    fail "quasi-binomial" "$(head -c 300 "$tmp/err") $(grep -E 'log-lik|AIC' "$tmp/qb.txt" | tr '\n' '|')"
fi
if grep -qE '^  AIC +[0-9.]+$' "$tmp/now.txt" && grep -qE '"aic": [0-9]' "$tmp/now.json" &&
    quasi plain --model "$tmp/small.model" "$data" && grep -qE '<td>AIC</td><td>[0-9.]+</td>' "$tmp/plain.html"; then
    ok "plain poisson keeps its log-likelihood, AIC and BIC"
else
    fail "plain poisson AIC" "$(grep -E 'AIC' "$tmp/now.txt" "$tmp/plain.html" | head -3 | tr '\n' '|')"
fi
finish
