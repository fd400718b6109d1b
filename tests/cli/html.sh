#!/usr/bin/env bash
# millrace report --html: the page of saved fits.  Sources of truth: HTML's
# and XML's well-formedness (python3's html.parser and xml.etree, in
# tests/cli/html/check_page.py), the page's own promises (no reference to
# anything outside it, every plot with marks and text alternatives, the
# same bytes for the same fits), and the README's escape of text; the
# numbers of the page's tables against the fits' JSON, rounded as the page
# rounds them (tests/cli/html/check_numbers.py, which says which digits).
# tests/cli/html_browser.sh shows the page in a real browser.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin} # make asan-check runs it on the ASan build
checker="$here/html/check_page.py"
numbers="$here/html/check_numbers.py"

fit() { # fit NAME ARGS...: a fit saved as $tmp/NAME.json
    local name=$1
    shift
    "$bin" fit --quiet --json "$tmp/$name.json" "$@" >/dev/null 2>"$tmp/$name.err" || fail "fit $name" "$(head -c 300 "$tmp/$name.err")"
}
page_ok() { # page_ok NAME SECTION...: $tmp/NAME.html passes the checker
    local name=$1
    shift
    check "$name: well-formed, self-contained, plots drawn, sections" /usr/bin/python3 "$checker" "$tmp/$name.html" "$@"
}
numbers_ok() { # numbers_ok NAME [--digits N] [--groups FILE] FIT.json...: the tables' numbers are the fits'
    local name=$1
    shift
    local opts=()
    while [ "${1:0:2}" = "--" ]; do opts+=("$1" "$2"); shift 2; done
    if /usr/bin/python3 "$numbers" "${opts[@]}" "$tmp/$name.html" "$@" >"$tmp/numbers.out" 2>&1; then
        ok "$name: the tables' numbers are the JSON's ($(tail -1 "$tmp/numbers.out"))"
    else
        fail "$name: the tables' numbers are the JSON's" "$(head -5 "$tmp/numbers.out")"
    fi
}

fit falls -m "$root/samples/falls.model" "$root/samples/falls.csv.zst"
fit screening -m "$root/samples/screening.model" "$root/samples/screening.csv"
head -n 2001 "$root/samples/falls.csv" >"$tmp/falls-part.csv"
fit rerun -m "$root/samples/falls.model" "$tmp/falls-part.csv"

check "falls page" "$bin" report --html "$tmp/falls.html" --at year=2020 "$tmp/falls.json"
page_ok falls cautions fit-1 forest-1 effect-1-1 effect-1-2 effect-1-3 curve-1-1 not-shown
numbers_ok falls "$tmp/falls.json"
for want in '<h3>Coefficients</h3>' '<h3>Convergence</h3>' 'factor    age_band  ref=40-44' 'rows left out' \
    'year at 2020' 'rate ratio' 'admissions per 1,000 person_years' 'delta method' 'Validate before use' \
    'calibration plot' 'reference' '<h3>Term tests</h3>' '<td>age_band &amp; sex</td><td>chi-square</td>' \
    'Effect curve: admissions per 1,000 person_years along year' "Garwood&#39;s exact Poisson interval of the observed count"; do
    grep -qF "$want" "$tmp/falls.html" || fail "falls page says '$want'" "not found"
done

check "tick labels: a year as a year, no exponent" test "$(grep -c 'middle">2016<' "$tmp/falls.html")" -gt 0 -a \
    "$(grep -c 'middle">[^<]*e+0' "$tmp/falls.html")" = 0

# Each of the README's statistical cautions, under its own words, on the page.
sed -n '/^## Statistical cautions/,/^## /p' "$root/README.md" | grep -o '^- \*\*[^*]*\*\*' | sed 's/^- \*\*//; s/\*\*$//' >"$tmp/cautions"
check "the README's cautions found" test "$(wc -l <"$tmp/cautions")" -ge 5
while read -r caution; do
    grep -qF "<strong>$caution</strong>" "$tmp/falls.html" || fail "the page's cautions have '$caution'" "not found"
done <"$tmp/cautions"

check "screening page" "$bin" report --html "$tmp/screening.html" --digits 3 "$tmp/screening.json"
page_ok screening cautions fit-1 forest-1 effect-1-1 effect-1-2 curve-1-1 curve-1-2 curve-1-3 not-shown
numbers_ok screening --digits 3 "$tmp/screening.json"
for want in 'odds ratio' 'fitted probability of attended (%)' 'age at 62.0885 (its mean)' 'missing bmi' \
    'bmi runs from 16.1 to 45.8' 'rounded to 3 significant digits' 'Clopper-Pearson exact binomial interval of the events observed'; do
    grep -qF "$want" "$tmp/screening.html" || fail "screening page says '$want'" "not found"
done

check "two fits" "$bin" report --html "$tmp/two.html" --at year=2020 "$tmp/falls.json" "$tmp/rerun.json"
page_ok two fit-1 fit-2 comparison change-2 not-shown
numbers_ok two "$tmp/falls.json" "$tmp/rerun.json"
check "two fits: read different data, so AIC is not compared" grep -q 'not comparable' "$tmp/two.html"
check "three fits: each against the first" "$bin" report --html "$tmp/three.html" "$tmp/falls.json" \
    "$tmp/rerun.json" "$tmp/falls.json"
page_ok three comparison change-2 change-3
numbers_ok three "$tmp/falls.json" "$tmp/rerun.json" "$tmp/falls.json"

# A calibration plot where the fit's file holds calibration groups (the
# object of tests/cli/html/calibration.json added to a fresh fit).
/usr/bin/python3 -c 'import json, sys; f = json.load(open(sys.argv[1])); f.update(json.load(open(sys.argv[2])))
json.dump(f, open(sys.argv[3], "w"), indent=1)' "$tmp/falls.json" "$here/html/calibration.json" "$tmp/calib.json"
check "calibration page" "$bin" report --html "$tmp/calib.html" --at year=2020 "$tmp/calib.json"
page_ok calib fit-1 forest-1 calibration-1
numbers_ok calib "$tmp/calib.json"
check "calibration: ten groups in its table" test "$(sed -n '/<figure id="calibration-1">/,/<\/figure>/p' "$tmp/calib.html" | grep -c '^<tr><td>')" = 10
check "calibration: the groups' basis said" grep -qF 'tenths of the fitted mean (invented' "$tmp/calib.html"
check "a fresh fit's own calibration groups plotted" test "$(grep -c 'id="calibration-' "$tmp/falls.html")" -gt 0
/usr/bin/python3 -c 'import json, sys; f = json.load(open(sys.argv[1])); f.pop("calibration")
json.dump(f, open(sys.argv[2], "w"), indent=1)' "$tmp/falls.json" "$tmp/nocal.json"
check "page of a fit without calibration" "$bin" report --html "$tmp/nocal.html" "$tmp/nocal.json"
check "no calibration plot without the groups" test "$(grep -c 'id="calibration-' "$tmp/nocal.html")" = 0

# A fit saved before fits recorded their numeric columns: numerics at 0,
# said; no curve for a plain numeric, a spline's over its boundary knots.
/usr/bin/python3 -c 'import json, sys; f = json.load(open(sys.argv[1])); del f["model"]["numeric_summary"]
json.dump(f, open(sys.argv[2], "w"), indent=1)' "$tmp/screening.json" "$tmp/older.json"
check "older fit page" "$bin" report --html "$tmp/older.html" "$tmp/older.json"
page_ok older fit-1 forest-1 effect-1-1
numbers_ok older "$tmp/older.json"
check "older fit: numerics at 0, said" grep -qF 'does not record the values of its numeric columns' "$tmp/older.html"
check "older fit: no curve, said" grep -qF 'No effect curve for age: this fit does not record its range' "$tmp/older.html"

# A funnel plot of a scoring run's groups (--groups).
"$bin" score --quiet --fit "$tmp/falls.json" --out "$tmp/scored.csv" --by region --by age_band --by-out "$tmp/groups.json" \
    "$root/samples/falls.csv.zst" || fail "score --by-out" "exit $?"
check "funnel page" "$bin" report --html "$tmp/funnel.html" --groups "$tmp/groups.json" "$tmp/falls.json"
page_ok funnel fit-1 groups funnel
numbers_ok funnel --groups "$tmp/groups.json" "$tmp/falls.json"
for want in 'exact Poisson control limits' 'Groups outside the 95% limits' 'region=Brindlemarch, age_band=00-04' \
    'expected count' 'observed / expected'; do
    grep -qF "$want" "$tmp/funnel.html" || fail "funnel page says '$want'" "not found"
done
check "funnel: tick labels 5000 and 10,000, no exponent" test "$(grep -c 'middle">10,000<\|middle">5000<' "$tmp/funnel.html")" -gt 0 -a \
    "$(grep -c 'middle">[^<]*e+0' "$tmp/funnel.html")" = 0

# The render cases: an aliased column, a quasi family, a factor of one
# level, and 1,000 coefficients (the forest plot shows the 40 of largest
# |z| and says so).
{
    echo "y,x1,x2,g,one,n"
    for i in $(seq 1 300); do echo "$((i % 7)),$((i % 11)),$((2 * (i % 11))),g$((i % 4)),solo,$((10 + i % 5))"; done
} >"$tmp/cases.csv"
fit aliased --outcome y --family poisson --numeric x1 --numeric x2 --factor g "$tmp/cases.csv"
check "aliased page" "$bin" report --html "$tmp/aliased.html" "$tmp/aliased.json"
page_ok aliased fit-1 forest-1 effect-1-1 curve-1-1
numbers_ok aliased "$tmp/aliased.json"
check "aliased: said in the table and the plots" test "$(grep -c 'aliased (no estimate)\|not estimable' "$tmp/aliased.html")" -ge 2
# Rows left out by each reason, and a prior weight (no interval in the
# calibration plot, said).
{ cat "$tmp/cases.csv" | sed '1s/$/,w/; 2,$s/$/,1/'; echo "3,,1,g1,solo,10,1"; echo "2,4,8"; echo "1,2,4,g2,solo,10,0"; } >"$tmp/left.csv"
fit left --outcome y --family poisson --numeric x1 --factor g --weight w --on-bad-row skip "$tmp/left.csv"
check "rows left out page" "$bin" report --html "$tmp/left.html" "$tmp/left.json"
page_ok left fit-1 forest-1 calibration-1
numbers_ok left "$tmp/left.json"
for want in 'a model column missing' 'missing x1' 'malformed, skipped' 'used, weight 0' \
    'No interval is drawn: a prior weight'; do
    grep -qF "$want" "$tmp/left.html" || fail "rows left out page says '$want'" "not found"
done
# Events out of trials: the calibration intervals are Clopper-Pearson's
# for each group's events out of its trials (its weight).
awk 'BEGIN { print "k,n,x,g"; for (i = 0; i < 500; i++) { n = 5 + i % 7; print int(n * (0.2 + 0.05 * (i % 9))) "," n "," i % 9 ",g" i % 3 } }' >"$tmp/trials.csv"
fit trials --outcome k --trials n --family binomial --numeric x --factor g "$tmp/trials.csv"
check "events out of trials page" "$bin" report --html "$tmp/trials.html" "$tmp/trials.json"
page_ok trials fit-1 forest-1 calibration-1
numbers_ok trials "$tmp/trials.json"
fit quasi --outcome y --family poisson --dispersion estimate --exposure n --numeric x1 --factor g "$tmp/cases.csv"
check "quasi page" "$bin" report --html "$tmp/quasi.html" "$tmp/quasi.json"
page_ok quasi fit-1 forest-1 effect-1-1 curve-1-1
numbers_ok quasi "$tmp/quasi.json"
check "quasi: t intervals, dispersion estimated" grep -qF 'dispersion estimated' "$tmp/quasi.html"
check "quasi: the calibration intervals too narrow, said" grep -qF 'the data vary more than the interval assumes' "$tmp/quasi.html"
fit onelevel --outcome y --family poisson --factor one --factor g --numeric x1 "$tmp/cases.csv"
check "single-level factor page" "$bin" report --html "$tmp/onelevel.html" "$tmp/onelevel.json"
page_ok onelevel fit-1 forest-1 effect-1-2 curve-1-1
numbers_ok onelevel "$tmp/onelevel.json"
awk 'BEGIN { print "y,unit,x"; for (i = 0; i < 4000; i++) print 1 + (i * 7 + int(i / 1000)) % 5 + (i % 1000 == 3) * 20 ",u" sprintf("%04d", i % 1000) "," i % 13 }' >"$tmp/big.csv"
fit big --outcome y --family poisson --factor unit --numeric x "$tmp/big.csv"
check "1,000 coefficients page" "$bin" report --html "$tmp/big.html" "$tmp/big.json"
page_ok big fit-1 forest-1 curve-1-1
numbers_ok big "$tmp/big.json"
check "1,000 coefficients: the forest plot shows 40, says so" grep -qF 'shown are the 40 of largest' "$tmp/big.html"
check "1,000 coefficients: no effect plot of 1,000 levels, says so" grep -qF 'at most 100 are drawn' "$tmp/big.html"

# The same fits give the same bytes.
"$bin" report --html "$tmp/two-again.html" --at year=2020 "$tmp/falls.json" "$tmp/rerun.json"
check "deterministic: the same fits, the same bytes" cmp "$tmp/two.html" "$tmp/two-again.html"

# Text from the data: markup, quotes and a byte that is not UTF-8 (Latin-1
# e-acute), in a level and a column name.
{
    printf 'y,n,"gr<u>"\n'
    for i in 1 2 3 4 5 6; do
        printf '%d,10,"a<script>alert(1)</script>"\n' "$i"
        printf '%d,12,"b&""x\047"\n' "$((i + 2))"
        printf '%d,11,R\xe9gion\n' "$((i + 1))"
    done
} >"$tmp/hostile.csv"
fit hostile --outcome y --family poisson --exposure n --factor 'gr<u>' "$tmp/hostile.csv"
check "hostile page" "$bin" report --html "$tmp/hostile.html" "$tmp/hostile.json"
page_ok hostile fit-1 forest-1 effect-1-1
numbers_ok hostile "$tmp/hostile.json"
check "no markup from the data" test "$(grep -c '<script\|<u>' "$tmp/hostile.html")" = 0
check "level escaped" grep -qF 'a&lt;script&gt;alert(1)&lt;/script&gt;' "$tmp/hostile.html"
check "quotes escaped" grep -qF 'b&amp;&quot;x&#39;' "$tmp/hostile.html"
check "column name escaped" grep -qF 'gr&lt;u&gt;' "$tmp/hostile.html"
check "a byte that is not UTF-8 shows as \\xE9" grep -qF 'R\xE9gion' "$tmp/hostile.html"
"$bin" score --quiet --fit "$tmp/hostile.json" --out "$tmp/hostile-scored.csv" --by 'gr<u>' \
    --by-out "$tmp/hostile-groups.json" "$tmp/hostile.csv" || fail "score hostile --by-out" "exit $?"
check "hostile funnel page" "$bin" report --html "$tmp/hostile-funnel.html" --groups "$tmp/hostile-groups.json" \
    "$tmp/hostile.json"
page_ok hostile-funnel groups funnel
numbers_ok hostile-funnel --groups "$tmp/hostile-groups.json" "$tmp/hostile.json"
check "funnel: no markup from the data" test "$(grep -c '<script\|<u>' "$tmp/hostile-funnel.html")" = 0
check "funnel: group key escaped" grep -qF 'gr&lt;u&gt;=a&lt;script&gt;' "$tmp/hostile-funnel.html"

# Errors: exit codes of the README.
expect_exit() { # expect_exit NAME CODE ARGS...
    local name=$1 want=$2
    shift 2
    "$bin" "$@" >/dev/null 2>"$tmp/err"
    local rc=$?
    if [ "$rc" = "$want" ] && [ -s "$tmp/err" ]; then ok "$name (exit $want)"; else fail "$name" "exit $rc, want $want: $(cat "$tmp/err")"; fi
}
cp "$tmp/falls.json" "$tmp/keep.json"
expect_exit "no --html" 2 report "$tmp/falls.json"
expect_exit "no fit" 2 report --html "$tmp/x.html"
expect_exit "the page would replace a fit" 2 report --html "$tmp/falls.json" "$tmp/falls.json"
check "the fit is intact" cmp "$tmp/falls.json" "$tmp/keep.json"
expect_exit "--at of a column no fit has" 2 report --html "$tmp/x.html" --at age=3 "$tmp/falls.json"
expect_exit "--at without a number" 2 report --html "$tmp/x.html" --at year=soon "$tmp/falls.json"
expect_exit "--digits 0" 2 report --html "$tmp/x.html" --digits 0 "$tmp/falls.json"
expect_exit "a fit that is not there" 3 report --html "$tmp/x.html" "$tmp/absent.json"
expect_exit "a fit that is not JSON" 4 report --html "$tmp/x.html" "$tmp/hostile.csv"
expect_exit "--groups not there" 3 report --html "$tmp/x.html" --groups "$tmp/absent.json" "$tmp/falls.json"
expect_exit "--groups not a group table" 4 report --html "$tmp/x.html" --groups "$tmp/falls.json" "$tmp/falls.json"
expect_exit "the page would replace the group table" 2 report --html "$tmp/groups.json" --groups "$tmp/groups.json" "$tmp/falls.json"
expect_exit "the page onto a directory" 3 report --html "$tmp" "$tmp/falls.json"
check "no page after the errors" test ! -e "$tmp/x.html"
check "no temporary file left" test -z "$(find "$tmp" -name '*.tmp-*')"

finish
