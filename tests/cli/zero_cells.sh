#!/usr/bin/env bash
# Factor levels and cells whose outcomes leave no finite estimate, and
# coefficients that run off to infinity.  Source of truth: the data are
# built so that the answer is known by construction (a site where every
# count is 0, or every trial a success; a cell of two factors with no
# events; y = 1 exactly when x > 50): the maximum-likelihood estimate of
# the coefficients named does not exist (it is at infinity), and every
# other coefficient's does.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
py=/usr/bin/python3

# make NAME KIND: writes $tmp/NAME.csv (fixed seed); kinds triple*: a
# third factor, sex, and 100 rows to each cell of site x grp x sex
make() {
    "$py" - "$tmp/$1.csv" "$2" <<'EOF'
import random, sys
path, kind = sys.argv[1], sys.argv[2]
three = kind.startswith("triple")
rnd = random.Random(11 if three else 7)
rows = ["y,n,site,grp,sex,x" if three else "y,n,site,grp,x"]
for i in range(2400 if three else 1200):
    site, grp, sex, x = "S%d" % (i % 4), "G%d" % (i % 3), "FM"[(i // 12) % 2], round(rnd.random(), 3)
    n = 1 + i % 5
    if kind == "counts":          # site S3: no events at all
        y = 0 if site == "S3" else rnd.randint(0, 4)
    elif kind == "reference":     # the reference site S0: no events
        y = 0 if site == "S0" else rnd.randint(0, 4)
    elif kind == "cell":          # only the cell S1 & G2 without events
        y = 0 if (site, grp) == ("S1", "G2") else rnd.randint(1, 4)
    elif kind == "cell_ref":      # the cell of the reference site S0 & G2 without events
        y = 0 if (site, grp) == ("S0", "G2") else rnd.randint(1, 4)
    elif kind == "binary":        # S2 all 0, S3 all 1
        y = 0 if site == "S2" else 1 if site == "S3" else int(rnd.random() < 0.4)
    elif kind == "trials":        # S3: every trial a success
        y = n if site == "S3" else rnd.randint(0, n)
    elif kind == "clean":
        y = rnd.randint(1, 4) if site == "S3" else rnd.randint(0, 4)
    elif kind == "triple":        # only the cell S1 & G2 & M without events
        y = 0 if (site, grp, sex) == ("S1", "G2", "M") else rnd.randint(1, 4)
    elif kind == "triple_ref":    # S0 (the reference site) & G2 & M without events
        y = 0 if (site, grp, sex) == ("S0", "G2", "M") else rnd.randint(1, 4)
    elif kind == "triple_max":    # S2 & G1 & F: every trial a success
        y = n if (site, grp, sex) == ("S2", "G1", "F") else rnd.randint(0, n)
    elif kind == "triple_clean":
        y = rnd.randint(0, 4)
    rows.append(",".join(["%d,%d,%s,%s" % (y, n, site, grp)] + [sex] * three + [str(x)]))
open(path, "w").write("\n".join(rows) + "\n")
EOF
}
for k in counts reference cell cell_ref binary trials clean triple triple_ref triple_max triple_clean; do
    make "$k" "$k"
done
{ echo "y,x"; for i in $(seq 1 100); do echo "$((i > 50)),$i"; done; } > "$tmp/sep.csv"

# flagged NAME EXPECTED-COEFFICIENTS WARNING-TEXT... -- fit options and file:
# the fit exits 0, exactly these coefficients are not estimable (JSON and
# the text table's mark; those left aliased aside), and each text is in a
# warning.  "#0" stands for the first coefficient (the intercept).
flagged() {
    local name=$1 want=$2 texts=()
    shift 2
    while [ "$1" != -- ]; do texts+=("$1"); shift; done
    shift
    $bin fit --json "$tmp/$name.json" "$@" > "$tmp/$name.out" 2> "$tmp/$name.err"
    local rc=$?
    if [ $rc != 0 ]; then fail "$name" "exit $rc: $(head -c 300 "$tmp/$name.err")"; return; fi
    if msg=$("$py" - "$tmp/$name.json" "$tmp/$name.out" "$want" "${texts[@]}" <<'EOF'
import json, sys
js = json.load(open(sys.argv[1]))
out = open(sys.argv[2]).read()
coefs = js["coefficients"]
want = set(w for w in sys.argv[3].split("|") if w)
want = set(coefs[0]["name"] if w == "#0" else w for w in want)
want -= set(c["name"] for c in coefs if c["aliased"])  # an aliased one has no estimate to mark
got = set(c["name"] for c in coefs if c["not_estimable"])
problems = []
if got != want:
    problems.append("not estimable %r, expected %r" % (sorted(got), sorted(want)))
marked = set(c["name"] for c in coefs if any(l.lstrip().startswith(c["name"] + "  ") and l.endswith("! not estimable")
                                             for l in out.splitlines()))
if marked != want:
    problems.append("marked in the table %r" % sorted(marked))
for text in sys.argv[4:]:
    if not any(text in w for w in js["warnings"]):
        problems.append("no warning with %r: %r" % (text, js["warnings"]))
if not want and any("not estimable" in w for w in js["warnings"]):
    problems.append("a warning: %r" % js["warnings"])
print("; ".join(problems))
sys.exit(1 if problems else 0)
EOF
    ); then ok "$name"; else fail "$name" "$msg"; fi
}

common=(--factor site --factor grp --numeric x)
flagged poisson_zero_level "site=S3" "every outcome 0" "site=S3 (300 rows)" "Merge" "drop its rows" -- \
    --outcome y --family poisson "${common[@]}" "$tmp/counts.csv"
flagged poisson_zero_reference "#0|site=S1|site=S2|site=S3" "site=S0 (the reference)" -- \
    --outcome y --family poisson "${common[@]}" "$tmp/reference.csv"
flagged poisson_zero_cell "site=S1 & grp=G2" "every outcome 0" "site=S1 & grp=G2 (100 rows)" -- \
    --outcome y --family poisson "${common[@]}" --interact "site grp" "$tmp/cell.csv"
# the reference site's cell: grp=G2 runs off, and the other sites' cells of
# G2 make up for it by their own interaction coefficients
flagged poisson_zero_cell_reference "grp=G2|site=S1 & grp=G2|site=S2 & grp=G2|site=S3 & grp=G2" \
    "site=S0 & grp=G2 (100 rows)" -- --outcome y --family poisson "${common[@]}" --interact "site grp" "$tmp/cell_ref.csv"
flagged negative_binomial_zero_level "site=S3" "site=S3" -- \
    --outcome y --family "negative-binomial theta=2" "${common[@]}" "$tmp/counts.csv"
flagged tweedie_zero_level "site=S3" "site=S3" -- \
    --outcome y --family "tweedie power=1.5" "${common[@]}" "$tmp/counts.csv"
flagged binomial_zero_and_one "site=S2|site=S3" "every outcome 0 in 1 factor level or cell: site=S2" \
    "every trial a success (outcome at its maximum) in 1 factor level or cell: site=S3" -- \
    --outcome y --family binomial "${common[@]}" "$tmp/binary.csv"
flagged binomial_trials_all_successes "site=S3" "every trial a success" "site=S3" -- \
    --outcome y --trials n --family binomial "${common[@]}" "$tmp/trials.csv"
flagged poisson_clean "" -- --outcome y --family poisson "${common[@]}" --interact "site grp" "$tmp/clean.csv"
# gaussian outcomes of 0 are ordinary values
flagged gaussian_zero_level_is_fine "" -- --outcome y --family gaussian "${common[@]}" "$tmp/counts.csv"
# a numeric covariate separating the outcomes: its standard error grows at
# every pass (the existing separation warning stays)
flagged numeric_separation "#0|x" "grew pass after pass" "possible separation" -- \
    --outcome y --family binomial --numeric x "$tmp/sep.csv"

# cells of three factors, the model holding every lower-order term
three=(--factor site --factor grp --factor sex --numeric x --interact "site grp" --interact "site sex"
       --interact "grp sex" --interact "site grp sex")
flagged poisson_zero_triple "site=S1 & grp=G2 & sex=M" "every outcome 0 in 1 factor level or cell" \
    "site=S1 & grp=G2 & sex=M (100 rows)" -- --outcome y --family poisson "${three[@]}" "$tmp/triple.csv"
# with the reference site in the cell, the pair's coefficient runs off, and
# the other sites' cells of G2 & M make up for it by their own
flagged poisson_zero_triple_reference \
    "grp=G2 & sex=M|site=S1 & grp=G2 & sex=M|site=S2 & grp=G2 & sex=M|site=S3 & grp=G2 & sex=M" "site=S0 & grp=G2 & sex=M (100 rows)" -- \
    --outcome y --family poisson "${three[@]}" "$tmp/triple_ref.csv"
flagged binomial_triple_all_successes "site=S2 & grp=G1|site=S2 & grp=G1 & sex=M" "every trial a success" "site=S2 & grp=G1 & sex=F (100 rows)" -- \
    --outcome y --trials n --family binomial "${three[@]}" "$tmp/triple_max.csv"
flagged poisson_triple_clean "" -- --outcome y --family poisson "${three[@]}" "$tmp/triple_clean.csv"

# The counts add up to the same totals whatever the threads and reads.
for t in 1 3; do
    $bin fit --quiet --json "$tmp/t$t.json" --threads "$t" --buffer-size 4096 --outcome y --family poisson \
        "${common[@]}" --interact "site grp" "$tmp/cell.csv" > /dev/null 2>&1
done
if "$py" -c '
import json, sys
a, b = (json.load(open(p)) for p in sys.argv[1:])
assert [c["not_estimable"] for c in a["coefficients"]] == [c["not_estimable"] for c in b["coefficients"]]
assert a["warnings"] == b["warnings"] and a["coefficients"] == b["coefficients"]
' "$tmp/t1.json" "$tmp/t3.json"; then ok threads_same_flags; else fail threads_same_flags "differ"; fi
for t in 1 3; do
    $bin fit --quiet --json "$tmp/u$t.json" --threads "$t" --buffer-size 4096 --outcome y --family poisson \
        "${three[@]}" "$tmp/triple.csv" > /dev/null 2>&1
done
if cmp -s <("$py" -c 'import json,sys; j=json.load(open(sys.argv[1])); print(j["warnings"], j["coefficients"])' "$tmp/u1.json") \
          <("$py" -c 'import json,sys; j=json.load(open(sys.argv[1])); print(j["warnings"], j["coefficients"])' "$tmp/u3.json") &&
   grep -q "site=S1 & grp=G2 & sex=M (100 rows)" "$tmp/u1.json"; then ok threads_same_triple_flags
else fail threads_same_triple_flags "differ"; fi
finish
