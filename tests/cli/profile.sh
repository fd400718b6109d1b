#!/usr/bin/env bash
# A Tweedie power chosen by profile likelihood ("family tweedie
# power=profile"): the fit is the one of the largest log-likelihood among
# fits at each power of the grid 1.1, 1.2, ..., 1.9, all from one read of
# the data (the same bits as the fit at that power given: checked against
# nine separate fits), its AIC and BIC count the power, the report and the
# JSON list the profile; standard input is fitted as the file is; a
# profile among models fitted together (millrace compare) is refused.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

data="$tmp/claims.csv"
/usr/bin/python3 - "$data" <<'EOF'
import sys
import numpy as np
rng = np.random.default_rng(11)
n, p, phi = 2000, 1.6, 1.5
g = rng.choice(["A", "B", "C"], n)
x = np.round(rng.uniform(0, 2, n), 3)
mu = np.exp(0.5 + 0.3 * (g == "B") - 0.2 * (g == "C") + 0.25 * x)
lam = mu ** (2 - p) / (phi * (2 - p))
count = rng.poisson(lam)
y = np.where(count > 0, rng.gamma(np.maximum(count, 1) * (2 - p) / (p - 1), phi * (p - 1) * mu ** (p - 1)), 0.0)
with open(sys.argv[1], "w") as fh:
    fh.write("y,g,x\n")
    for a, b, c in zip(np.round(y, 4), g, x):
        fh.write("%r,%s,%r\n" % (float(a), b, float(c)))
EOF
opts=(--outcome y --factor g --numeric x)
"$bin" fit --quiet "${opts[@]}" --family "tweedie power=profile" --json "$tmp/profile.json" "$data" >/dev/null \
    2>"$tmp/profile.err" || fail profile_fit "exit $?: $(head -c 300 "$tmp/profile.err")"
for p in 1.1 1.2 1.3 1.4 1.5 1.6 1.7 1.8 1.9; do
    "$bin" fit --quiet "${opts[@]}" --family "tweedie power=$p" --json "$tmp/p$p.json" "$data" >/dev/null \
        2>"$tmp/p$p.err" || fail "fixed_$p" "exit $?: $(head -c 300 "$tmp/p$p.err")"
done
why=$(/usr/bin/python3 - "$tmp" <<'EOF'
import json, math, os, sys
tmp = sys.argv[1]
load = lambda name: json.load(open(os.path.join(tmp, name)), parse_float=str, parse_int=str)
prof = load("profile.json")
fixed = {p: load("p%s.json" % p) for p in ("1.1", "1.2", "1.3", "1.4", "1.5", "1.6", "1.7", "1.8", "1.9")}
problems = []
best = max(fixed, key=lambda p: float(fixed[p]["fit"]["log_likelihood"]))
fp = prof["model"]["family_parameter"]
if float(fp["value"]) != float(best):
    problems.append("chose %s, the largest log-likelihood is at %s" % (fp["value"], best))
points = fp.get("profile", {}).get("points", [])
if [(float(pt["value"]), pt["log_likelihood"]) for pt in points] != \
        [(float(p), fixed[p]["fit"]["log_likelihood"]) for p in sorted(fixed)]:
    problems.append("profile %r" % points)
if prof["coefficients"] != fixed[best]["coefficients"]:
    problems.append("coefficients differ from the fit at %s" % best)
ll, k = float(prof["fit"]["log_likelihood"]), int(prof["fit"]["rank"]) + 2  # dispersion and power
if abs(float(prof["fit"]["aic"]) - (-2 * ll + 2 * k)) > 1e-9 * abs(ll):
    problems.append("aic %s" % prof["fit"]["aic"])
print("; ".join(problems))
EOF
)
if [ -z "$why" ]; then ok profile_is_the_best_fixed_fit; else fail profile_is_the_best_fixed_fit "$why"; fi

report=$("$bin" show "$tmp/profile.json" 2>&1)
if grep -qE "^model      tweedie family \(power 1\.[1-9], chosen by profile likelihood over 1\.1 to 1\.9\)" <<<"$report" &&
    [ "$(grep -c "log-likelihood -" <<<"$report")" -eq 9 ]; then
    ok report_profile
else
    fail report_profile "$(grep -E '^model|profile' <<<"$report")"
fi

# Every power's fit comes from one read of the data (their first pass
# shared), so standard input, which can be read once, is fitted too: the
# same fit as from the file (the input's name and the run aside)
"$bin" fit --quiet "${opts[@]}" --family "tweedie power=profile" --json "$tmp/stdin.json" - <"$data" >/dev/null \
    2>"$tmp/stdin.err"
rc=$?
if [ "$rc" -eq 0 ] && /usr/bin/python3 - "$tmp/stdin.json" "$tmp/profile.json" <<'EOF'
import json, sys
a, b = (json.load(open(p), parse_float=str) for p in sys.argv[1:])
sys.exit(any(a[k] != b[k] for k in ("model", "coefficients", "fit", "covariance")) or
         a["convergence"]["passes"] != b["convergence"]["passes"])
EOF
then
    ok profile_from_stdin
else
    fail profile_from_stdin "exit $rc: $(head -c 300 "$tmp/stdin.err")"
fi

printf 'outcome y\nfactor g\nfamily tweedie power=profile\n' >"$tmp/profile.model"
printf 'outcome y\nfactor g\nfamily tweedie power=1.5\n' >"$tmp/fixed.model"
"$bin" compare --quiet -m "$tmp/fixed.model" -m "$tmp/profile.model" "$data" >/dev/null 2>"$tmp/compare.err"
rc=$?
if [ "$rc" -eq 2 ] && grep -qF "power=profile is for a fit alone" "$tmp/compare.err"; then
    ok profile_refused_in_compare
else
    fail profile_refused_in_compare "exit $rc: $(head -c 300 "$tmp/compare.err")"
fi

finish
