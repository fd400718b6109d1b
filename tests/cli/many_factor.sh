#!/usr/bin/env bash
# A factor declared `many` (its levels eliminated, not columns): the same
# bits with 1 and 2 threads, streamed, cached, in memory and with small
# buffers, its levels included; the report's summary; the model lines it
# refuses (exit 2); scoring (threads, an unseen level).  Its numbers are
# checked against R glm and the ordinary fit in tests/ref/many_factor.py.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin}
/usr/bin/python3 "$root/tests/cli/areas.py" "$tmp/d.csv" 150000 3000 3
printf 'outcome y\nfamily poisson\nexposure py\nnumeric age\nfactor area many\nfactor sex\n' > "$tmp/m.model"

values() {
    /usr/bin/python3 -c '
import json, sys
js = json.load(open(sys.argv[1]), parse_float=str, parse_int=str)
for c in js["coefficients"]: print(c["name"], c["estimate"], c["standard_error"])
for l in js["many_factor"]["levels"]:
    print(l["level"], l["estimate"], l["standard_error"], l["information"], l.get("weighted_means"))
print(js["covariance"], js["fit"]["deviance"], js["fit"]["rank"])
' "$1"
}

# --many-means: each level's weighted column means kept, and compared
# with the rest (tests/ref/many_factor.py checks what scoring makes of them)
if $bin fit --quiet -m "$tmp/m.model" --threads 1 --many-means --json "$tmp/base.json" "$tmp/d.csv" > "$tmp/report.txt"; then
    values "$tmp/base.json" > "$tmp/base.values"
    ok "fit"
else
    fail "fit" "exit $?"
fi
for opts in "--threads 2" "--threads 2 --no-cache --buffer-size 65536" "--threads 2 --in-memory" \
            "--threads 2 --no-collapse" "--threads 1 --no-cache"; do
    # shellcheck disable=SC2086
    if $bin fit --quiet -m "$tmp/m.model" $opts --many-means --json "$tmp/o.json" "$tmp/d.csv" > /dev/null &&
       values "$tmp/o.json" | cmp -s - "$tmp/base.values"; then
        ok "same bits: $opts"
    else
        fail "same bits: $opts" "differs from one thread"
    fi
done
grep -q "factor area (many): 2999 levels besides the reference A00000" "$tmp/report.txt" &&
    grep -q "tiny information" "$tmp/report.txt" && ok "report summary" || fail "report summary" "missing"
# The levels are written one at a time into the rest of the document
# (output/json.c); the file must be laid out as one whole dump: the same
# text as Python's json.dumps(indent=1) of what it parses to, numbers
# compared as doubles (oracle: Python's json module)
/usr/bin/python3 - "$tmp/base.json" <<'P' && ok "the levels written apart: laid out as one document" ||
import json, re, sys
num = re.compile(r'-?\d+(\.\d+)?([eE][-+]?\d+)?')
norm = lambda t: num.sub(lambda m: repr(float(m.group())), t)
text = open(sys.argv[1]).read()
sys.exit(norm(text) != norm(json.dumps(json.loads(text), indent=1, ensure_ascii=False) + "\n"))
P
    fail "the levels written apart" "laid out otherwise than one document"
# and read back one level at a time (json_read.c) when so laid out; the
# same fit laid out otherwise (Python's indent=2) reads as one tree, to the
# same report; a level's record broken as JSON is reported at its line in
# the file (exit 4)
/usr/bin/python3 - "$tmp/base.json" "$tmp" <<'P'
import json, sys
text = open(sys.argv[1]).read()
json.dump(json.loads(text), open(sys.argv[2] + "/indent2.json", "w"), indent=2)
lines = text.split("\n")
k = [i for i, l in enumerate(lines) if l.startswith('    "estimate": ')][2]
lines[k] = lines[k].replace('"estimate": ', '"estimate" ', 1)
open(sys.argv[2] + "/broken.json", "w").write("\n".join(lines))
open(sys.argv[2] + "/broken.line", "w").write(str(k + 1))
P
$bin show "$tmp/base.json" > "$tmp/show.a" 2>&1 && $bin show "$tmp/indent2.json" > "$tmp/show.b" 2>&1 &&
    cmp -s "$tmp/show.a" "$tmp/show.b" && ok "a fit laid out otherwise reads to the same report" ||
    fail "a fit laid out otherwise" "$(diff "$tmp/show.a" "$tmp/show.b" | head -5)"
$bin show "$tmp/broken.json" > /dev/null 2> "$tmp/broken.err"
rc=$?
[ "$rc" -eq 4 ] && grep -q "broken.json:$(cat "$tmp/broken.line"):[0-9]*: not a JSON fit" "$tmp/broken.err" &&
    ok "a level's record broken: exit 4 at its line" || fail "a level's record broken" "exit $rc: $(cat "$tmp/broken.err")"
$bin show "$tmp/base.json" > "$tmp/show.txt" && grep -q "factor area (many)" "$tmp/show.txt" &&
    ok "show reads it back" || fail "show reads it back" "no summary"

refused() { # NAME EXTRA-LINES: the model refused with exit 2
    local name=$1
    printf 'outcome y\nfamily poisson\nexposure py\nnumeric age\nfactor area many\nfactor sex\n%b' "$2" > "$tmp/r.model"
    $bin fit --quiet -m "$tmp/r.model" "$tmp/d.csv" > /dev/null 2> "$tmp/r.err"
    local rc=$?
    [ "$rc" -eq 2 ] && grep -q "$3" "$tmp/r.err" && ok "$name" || fail "$name" "exit $rc: $(cat "$tmp/r.err")"
}
refused "two many factors" 'factor sex many\n' "only one factor"
refused "many in an interaction" 'interact area age\n' "cannot be in an interaction"
refused "many without intercept" 'intercept no\n' "needs the intercept"
printf 'outcome y\nfactor area many sideways\n' > "$tmp/w.model"
$bin fit --quiet -m "$tmp/w.model" "$tmp/d.csv" > /dev/null 2>&1
[ $? -eq 2 ] && ok "unknown word on a factor line" || fail "unknown word on a factor line" "not exit 2"
printf 'outcome y\nfamily poisson\nexposure py\nnumeric age\nfactor area many\nfactor sex\n' > "$tmp/r.model"
# clusters by another column than the factor: refused
$bin fit --quiet --cluster sex -m "$tmp/r.model" --json "$tmp/rob.json" "$tmp/d.csv" > /dev/null 2> "$tmp/r.err"
rc=$?
[ "$rc" -eq 2 ] && [ ! -e "$tmp/rob.json" ] && grep -q "by that factor alone (--cluster area)" "$tmp/r.err" &&
    ok "clusters by another column refused" || fail "clusters by another column refused" "exit $rc: $(cat "$tmp/r.err")"
# robust standard errors by rows and by the factor's levels (their
# numbers: tests/ref/many_factor.py): the same bytes for 1 and 3 threads
for opt in "--robust hc1" "--cluster area"; do
    for t in 1 3; do
        $bin fit --quiet --threads $t $opt -m "$tmp/r.model" --json "$tmp/rob$t.json" "$tmp/d.csv" > /dev/null \
            2> "$tmp/r.err" || fail "$opt, $t threads" "exit $?: $(cat "$tmp/r.err")"
    done
    if cmp -s <(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["robust"])' "$tmp/rob1.json") \
           <(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["robust"])' "$tmp/rob3.json"); then
        ok "$opt: the same robust standard errors for 1 and 3 threads"
    else
        fail "$opt" "1 and 3 threads differ"
    fi
done
# scoring: its numbers are checked in tests/ref/many_factor.py; here the
# same bytes for 1 and 3 threads, and a level the fit never saw
$bin score --quiet --threads 1 --fit "$tmp/base.json" --out "$tmp/s1.csv" "$tmp/d.csv" 2> "$tmp/s.err" &&
    $bin score --quiet --threads 3 --fit "$tmp/base.json" --out "$tmp/s3.csv" "$tmp/d.csv" 2>> "$tmp/s.err" &&
    cmp -s "$tmp/s1.csv" "$tmp/s3.csv" && [ "$(wc -l < "$tmp/s1.csv")" -eq 150001 ] &&
    ok "scored, the same bytes for 1 and 3 threads" || fail "scored" "$(cat "$tmp/s.err")"
# without --many-means the levels keep no means (the JSON has no
# weighted_means); such a fit, or one written before they could be kept,
# still reads and scores: the same
# predictions, its standard errors and intervals empty (but the reference
# level's); the key on a later
# level but not the first, or naming no coefficient: exit 4, the field named
/usr/bin/python3 - "$tmp/base.json" "$tmp" <<'P'
import json, sys
js = json.load(open(sys.argv[1]))
levels = js["many_factor"]["levels"]
for l in levels: del l["weighted_means"]
json.dump(js, open(sys.argv[2] + "/old.json", "w"), indent=2)
levels[1]["weighted_means"] = {"intercept": 1}
json.dump(js, open(sys.argv[2] + "/later.json", "w"), indent=2)
del levels[1]["weighted_means"]
for l in levels: l["weighted_means"] = {"intercept": 1}
levels[2]["weighted_means"] = {"age": 50.0, "intercept": 1}
json.dump(js, open(sys.argv[2] + "/order.json", "w"), indent=2)
P
$bin fit --quiet -m "$tmp/m.model" --json "$tmp/plain.json" "$tmp/d.csv" > /dev/null &&
    ! grep -q weighted_means "$tmp/plain.json" && ok "without --many-means: no level means" ||
    fail "without --many-means" "weighted_means written"
$bin score --quiet --fit "$tmp/old.json" --out "$tmp/old.csv" "$tmp/d.csv" 2> "$tmp/old.err" &&
    /usr/bin/python3 -c '
import csv, sys
a, b = list(csv.DictReader(open(sys.argv[1]))), list(csv.DictReader(open(sys.argv[2])))
area = [r["area"] for r in csv.DictReader(open(sys.argv[3]))]
wide = lambda r: (r["se_eta"], r["mean_low"], r["mean_high"])
# the reference level: its rows never needed the means
same = len(a) == len(b) == 150000 and all(
    r["eta"] == s["eta"] and r["mean"] == s["mean"] and r["resid_deviance"] == s["resid_deviance"] and
    (wide(r) == wide(s) if g == "A00000" else wide(r) == ("", "", "") != wide(s)) for r, s, g in zip(a, b, area))
sys.exit(not same)' "$tmp/old.csv" "$tmp/s1.csv" "$tmp/d.csv" &&
    ok "a fit without the levels' means: same predictions, standard errors empty" ||
    fail "a fit without the levels' means" "$(cat "$tmp/old.err")"
for bad in "later:many_factor.levels\\[1\\].weighted_means' is given here but not on the first level" \
           "order:many_factor.levels\\[2\\].weighted_means.intercept' should name a coefficient, in the coefficients' order"; do
    $bin score --quiet --fit "$tmp/${bad%%:*}.json" --out "$tmp/bad.csv" "$tmp/d.csv" > /dev/null 2> "$tmp/bad.err"
    rc=$?
    [ "$rc" -eq 4 ] && [ ! -e "$tmp/bad.csv" ] && grep -q "${bad#*:}" "$tmp/bad.err" &&
        ok "levels' means damaged (${bad%%:*}): exit 4, the field named" ||
        fail "levels' means damaged (${bad%%:*})" "exit $rc: $(cat "$tmp/bad.err")"
done
{ head -n 1 "$tmp/d.csv"; echo "3,B00001,50,M,500"; } > "$tmp/new.csv"
$bin score --quiet --fit "$tmp/base.json" --out "$tmp/new.out" "$tmp/new.csv" > /dev/null 2> "$tmp/new.err"
rc=$?
[ "$rc" -eq 5 ] && grep -q "new.csv:2:.*a level the fit never saw" "$tmp/new.err" && [ ! -e "$tmp/new.out" ] &&
    ok "a level the fit never saw: exit 5, its line" || fail "unseen level" "exit $rc: $(cat "$tmp/new.err")"

# The levels as CSV (show --many-csv): a row a level, in the JSON's order,
# every number the JSON's double (shortest round trip both); onto the fit
# it reads: refused (exit 2), the fit intact; a fit without the factor:
# exit 2, nothing written.
cp "$tmp/base.json" "$tmp/base.keep"
$bin show --many-csv "$tmp/levels.csv" "$tmp/base.json" > "$tmp/show.out" 2>&1 &&
    /usr/bin/python3 -c '
import csv, json, sys
js = json.load(open(sys.argv[1]))["many_factor"]["levels"]
rows = list(csv.reader(open(sys.argv[2], newline="")))
num = lambda t: float(t) if t else None
same = rows[0] == ["level", "estimate", "standard_error", "information"] and len(rows) == len(js) + 1 and all(
    r[0] == l["level"] and num(r[1]) == l["estimate"] and num(r[2]) == l["standard_error"] and
    num(r[3]) == l["information"] for r, l in zip(rows[1:], js))
sys.exit(not same)' "$tmp/base.json" "$tmp/levels.csv" && [ ! -s "$tmp/show.out" ] &&
    ok "show --many-csv: the JSON's levels, number for number" || fail "show --many-csv" "$(cat "$tmp/show.out")"
$bin show --many-csv "$tmp/base.json" "$tmp/base.json" > /dev/null 2> "$tmp/show.err"
rc=$?
[ "$rc" -eq 2 ] && cmp -s "$tmp/base.json" "$tmp/base.keep" && ok "show --many-csv onto the fit it reads: exit 2, fit intact" ||
    fail "show --many-csv onto its input" "exit $rc: $(cat "$tmp/show.err")"
printf 'y,sex,py\n1,M,10\n0,F,12\n2,M,9\n1,F,11\n' > "$tmp/nomany.csv"
printf 'outcome y\nfamily poisson\nexposure py\nfactor sex\n' > "$tmp/nomany.model"
$bin fit --quiet -m "$tmp/nomany.model" --json "$tmp/nomany.json" "$tmp/nomany.csv" > /dev/null
$bin show --many-csv "$tmp/nomany.levels.csv" "$tmp/nomany.json" > /dev/null 2> "$tmp/show.err"
rc=$?
[ "$rc" -eq 2 ] && [ ! -e "$tmp/nomany.levels.csv" ] && grep -q "no factor declared 'many'" "$tmp/show.err" &&
    ok "show --many-csv without such a factor: exit 2, nothing written" || fail "show --many-csv, no factor" "exit $rc: $(cat "$tmp/show.err")"

# 30,000 levels of about 10 rows each on 300,000 rows of the synthetic
# registry (tools/synth.c; past 16 blocks, so the warm start fits a sample
# of them), each level given one row with an event, the others at random:
# in the sample many levels have no event, their estimates ran off, and
# the start taken from there leapt out of range (exit 10 before; 102
# passes at 10,000 levels).  Such a level starts at 0 now, the sample's
# fit is judged by the other columns alone, and a level's step in a
# poisson log-link fit is taken by its mean (fit/irls.c): the fit starts
# from the sample and takes 7 passes (11 from a cold start before, the
# sample's 24 steps thrown away; the model without the factor takes 5).
# The passes are checked, not the time.  Oracle: a
# Poisson log-link fit's score equation for each level's indicator,
# observed = expected by level (analytic identity), checked by scoring the
# file with --by area.
"$root/build/synth" --rows 300000 --seed 1 | /usr/bin/python3 -c '
import random, sys
rng, given, L = random.Random(17), 0, 30000
head = sys.stdin.readline().rstrip("\n")
events = head.split(",").index("events")
sys.stdout.write(head + ",area\n")
for line in sys.stdin:
    line = line.rstrip("\n")
    if given < L and line.split(",")[events] != "0":
        level, given = given, given + 1
    else:
        level = rng.randrange(L)
    sys.stdout.write("%s,A%06d\n" % (line, level))' > "$tmp/sparse.csv"
printf 'outcome events\nfamily poisson\nexposure followup\nfactor age_band\nfactor sex\nfactor region\nnumeric deprivation\nnumeric year\nfactor area many\n' > "$tmp/sparse.model"
$bin fit --quiet -m "$tmp/sparse.model" --json "$tmp/sparse.json" "$tmp/sparse.csv" > /dev/null 2> "$tmp/sparse.err"
rc=$?
[ "$rc" -eq 0 ] && ok "sparse levels: the fit converges" || fail "sparse levels" "exit $rc: $(cat "$tmp/sparse.err")"
/usr/bin/python3 -c '
import json, sys
c = json.load(open(sys.argv[1]))["convergence"]
sys.exit(not (c["warm_start"] and c["passes"] <= 7))' "$tmp/sparse.json" &&
    ok "sparse levels: started from the sample, at most 7 passes" || fail "sparse levels: passes" "$(grep -o '"passes":[0-9]*' "$tmp/sparse.json")"
# A level whose 12 rows have no event runs off.  The variance the fit
# follows pass after pass for a level is its own, 1/d (fit/irls.c), which
# grows as its mean falls: both warnings still name the level (the
# ordinary fit's wording), and the fit ends at the boundary (10 passes;
# 16 before the level steps by its mean).
/usr/bin/python3 -c '
import sys
src = open(sys.argv[1]); out = sys.stdout
head = src.readline(); out.write(head)
ev = head.strip().split(",").index("events")
for i, line in enumerate(src):
    out.write(line)
    if i % 20000 == 0:
        f = line.rstrip("\n").split(","); f[ev] = "0"; f[-1] = "ZZZERO"
        out.write(",".join(f) + "\n")' "$tmp/sparse.csv" > "$tmp/zero.csv"
$bin fit -m "$tmp/sparse.model" --json "$tmp/zero.json" "$tmp/zero.csv" > "$tmp/zero.txt" 2>&1
rc=$?
[ "$rc" -eq 0 ] && grep -q "grew pass after pass.*'area=ZZZERO'" "$tmp/zero.txt" &&
    grep -q "every outcome 0 in 1 factor level or cell: area=ZZZERO (15 rows)" "$tmp/zero.txt" &&
    ok "a level with no events: named as running off and as all zero" || fail "level with no events" "exit $rc: $(grep -A3 warnings "$tmp/zero.txt")"
$bin score --quiet --fit "$tmp/sparse.json" --out "$tmp/sparse.scored" --by area --by-out "$tmp/sparse.by.json" \
    "$tmp/sparse.csv" 2> "$tmp/sparse.err"
/usr/bin/python3 -c '
import json, sys
g = json.load(open(sys.argv[1]))["groups"]
worst = max(abs(x["observed"] / x["expected"] - 1) for x in g)
sys.exit(not (len(g) == 30000 and worst < 1e-9))' "$tmp/sparse.by.json" &&
    ok "sparse levels: observed = expected for each of 30,000 levels" || fail "sparse levels: O/E" "$(cat "$tmp/sparse.err")"

# More levels than an ordinary factor may have (100,000): 150,000 units of
# two rows each, every one with events.  Declared `many` the factor may
# have up to 1,000,000 levels (common/levels.h); as an ordinary factor the
# file's first level beyond 100,000 is refused (exit 5), and the message
# says a factor can be declared `many`.  Oracle: a poisson log-link fit's
# score equation for each level, observed = expected by unit (analytic
# identity), through score --by, to 1e-9 for every unit.  The reference
# unit's rate is the intercept, whose row of the Schur complement is the
# reference's own sums (solve/absorb.h, "Precision"); taken as the whole
# weight less 150,000 levels' it was off by 2.7e-7 here.
/usr/bin/python3 -c '
import sys
out = sys.stdout
out.write("y,x,unit\n")
for i in range(300000):
    out.write("%d,%.1f,U%06d\n" % (1 + i % 4, (i % 7) / 10, i % 150000))' > "$tmp/units.csv"
printf 'outcome y\nfamily poisson\nnumeric x\nfactor unit many\n' > "$tmp/units.model"
$bin fit --quiet -m "$tmp/units.model" --json "$tmp/units.json" "$tmp/units.csv" > /dev/null 2> "$tmp/units.err"
rc=$?
$bin score --quiet --fit "$tmp/units.json" --out "$tmp/units.scored" --by unit --by-out "$tmp/units.by.json" \
    "$tmp/units.csv" 2>> "$tmp/units.err"
[ "$rc" -eq 0 ] && /usr/bin/python3 -c '
import json, sys
g = json.load(open(sys.argv[1]))["groups"]
worst = max(abs(x["observed"] / x["expected"] - 1) for x in g)
sys.exit(not (len(g) == 150000 and worst < 1e-9))' "$tmp/units.by.json" &&
    ok "150,000 levels declared many: fitted, observed = expected for each" || fail "150,000 levels" "exit $rc: $(cat "$tmp/units.err")"
printf 'outcome y\nfamily poisson\nnumeric x\nfactor unit\n' > "$tmp/units_plain.model"
$bin fit --quiet -m "$tmp/units_plain.model" "$tmp/units.csv" > /dev/null 2> "$tmp/units_plain.err"
rc=$?
[ "$rc" -eq 5 ] && grep -q "units.csv:100002:3: column 'unit': more than 100000 distinct levels.*can be declared 'many'" \
    "$tmp/units_plain.err" && ok "150,000 levels as an ordinary factor: exit 5, the first beyond named, many suggested" ||
    fail "150,000 ordinary levels" "exit $rc: $(cat "$tmp/units_plain.err")"
finish
