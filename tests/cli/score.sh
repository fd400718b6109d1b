#!/usr/bin/env bash
# millrace score (README, "Scoring"): the policy for a row the fit cannot
# score, both ways; outputs refused over an input; a .zst output is the
# plain output compressed; no temporary file left after a failure.
# The numbers themselves are checked against statsmodels in
# tests/ref/score_samples.py.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
cd "$root" || exit 1

"$bin" fit -m samples/falls.model --quiet --json "$tmp/f.json" samples/falls.csv.zst >/dev/null || exit 1
{
    echo 'id,age_band,sex,region,year,person_years,admissions'
    echo '"a,1",00-04,F,Eastmoor,2015,100,3'
    echo 'b2,00-04,F,Westvale,2015,100,3'
    echo 'c3,00-04,,Eastmoor,2015,100,3'
    echo 'd4,00-04,F,Eastmoor,,100,3'
    echo 'e5,00-04,F,Eastmoor,2015,100,'
} >"$tmp/new.csv"

"$bin" score --fit "$tmp/f.json" --out "$tmp/fail.csv" "$tmp/new.csv" 2>"$tmp/err"
rc=$?
check "unseen level, --unseen fail: exit 5" test "$rc" -eq 5
check "the message names file, line, column and value" \
    grep -qF "new.csv:3:4: column 'region': a level the fit never saw (value 'Westvale')" "$tmp/err"
check "no output after the failure" test ! -e "$tmp/fail.csv"
check "no temporary file left" test -z "$(find "$tmp" -name '*.tmp-*')"

"$bin" score --fit "$tmp/f.json" --out "$tmp/blank.csv" --unseen blank --keep id "$tmp/new.csv" 2>"$tmp/err"
check "--unseen blank: exit 0" test $? -eq 0
check "the summary counts rows scored and left empty, and why" \
    grep -qF "5 rows to $tmp/blank.csv: 2 scored, 3 left empty (1 unseen level, 2 missing value)" "$tmp/err"
check "a kept cell with a comma is quoted (RFC 4180)" grep -q '^"a,1",' "$tmp/blank.csv"
check "an unscorable row keeps its cells, predictions empty" grep -qx 'b2,,,,,,,,' "$tmp/blank.csv"
check "a missing outcome leaves only the residuals empty" grep -qE '^e5,[-0-9.e]+,[0-9.e-]+,[0-9.e-]+,[0-9.e-]+,[0-9.e-]+,,,$' "$tmp/blank.csv"
check "one line per data row and the header" test "$(wc -l <"$tmp/blank.csv")" -eq 6

"$bin" score --fit "$tmp/f.json" --out "$tmp/blank.csv.zst" --unseen blank --keep id --quiet "$tmp/new.csv"
check ".zst output decompresses to the plain output's bytes" cmp -s <(zstd -dc "$tmp/blank.csv.zst") "$tmp/blank.csv"

printf 'age_band,sex,region,year,person_years\n00-04,F,Eastmoor,20l5,100\n' >"$tmp/bad.csv"
"$bin" score --fit "$tmp/f.json" --out "$tmp/bad.out" --unseen blank "$tmp/bad.csv" 2>"$tmp/err"
check "a cell that is not a number is exit 4 whatever the policy" test $? -eq 4
check "and names line and column" grep -qF "bad.csv:2:4: column 'year': not a number (value '20l5')" "$tmp/err"

cp "$tmp/new.csv" "$tmp/keep.csv"
"$bin" score --fit "$tmp/f.json" --out "$tmp/keep.csv" "$tmp/keep.csv" 2>/dev/null
check "output over the input refused: exit 2" test $? -eq 2
check "the input untouched" cmp -s "$tmp/keep.csv" "$tmp/new.csv"
"$bin" score --fit "$tmp/f.json" --out "$tmp/f.json" "$tmp/new.csv" 2>/dev/null
check "output over the fit refused: exit 2" test $? -eq 2
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" --keep nosuch "$tmp/new.csv" 2>/dev/null
check "--keep naming no column: exit 2" test $? -eq 2
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" --unseen maybe "$tmp/new.csv" 2>/dev/null
check "--unseen takes fail or blank: exit 2" test $? -eq 2
"$bin" score --fit "$tmp/f.json" --out "$tmp/g1.csv" --by region --by sex --by-out "$tmp/g1.json" --threads 1 --quiet samples/falls.csv.zst &&
    "$bin" score --fit "$tmp/f.json" --out "$tmp/g3.csv" --by region --by sex --by-out "$tmp/g3.json" --threads 3 --quiet samples/falls.csv.zst
check "groups: the same bytes with 1 and 3 threads" cmp -s "$tmp/g1.json" "$tmp/g3.json"
check "groups: 16 region x sex groups" test "$(grep -c '"key"' "$tmp/g1.json")" -eq 16
printf 'age_band,sex,region,year,person_years\n00-04,F,Eastmoor,2015,100\n' >"$tmp/no_outcome.csv"
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" --quiet "$tmp/no_outcome.csv"
check "a file without the outcome scores (no residual columns)" test "$(head -1 "$tmp/x.csv")" = "eta,se_eta,mean,mean_low,mean_high"
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" --by region "$tmp/no_outcome.csv" 2>"$tmp/err"
check "--by on a file without the outcome: exit 2" test $? -eq 2
check "and says so" grep -q "needs the outcome 'admissions'" "$tmp/err"
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" --by region --by-out "$tmp/keep.csv" "$tmp/keep.csv" 2>/dev/null
check "--by-out over the input refused: exit 2" test $? -eq 2
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" --by-out "$tmp/g.txt" "$tmp/new.csv" 2>/dev/null
check "--by-out without --by: exit 2" test $? -eq 2
printf 'age_band,sex,region,year,person_years,region\n00-04,F,Eastmoor,2015,100,Eastmoor\n' >"$tmp/dup.csv"
"$bin" score --fit "$tmp/f.json" --out "$tmp/x.csv" "$tmp/dup.csv" 2>"$tmp/err"
check "a column the fit needs twice in the header: exit 4" test $? -eq 4
check "and names both" grep -qF "dup.csv:1:6: duplicate column name 'region' (also column 3)" "$tmp/err"
# The fit's missing-value tokens go with it (README, fit JSON `options.missing_values`):
# cells the fit read as missing are missing when its rows are scored, not "not a number".
printf 'y,x,g\n1,0.5,a\n2,.,b\n0,0.25,.\n3,1.5,b\n1,0.75,a\n2,1.25,b\n' >"$tmp/dots.csv"
"$bin" fit --missing . --outcome y --family poisson --numeric x --factor g --json "$tmp/dots.json" "$tmp/dots.csv" >/dev/null
check "the fit records its missing tokens" /usr/bin/python3 -c "import json,sys; sys.exit(json.load(open('$tmp/dots.json'))['options']['missing_values'] != {'tokens': ['.']})"
"$bin" score --fit "$tmp/dots.json" --out "$tmp/dots-out.csv" --unseen blank "$tmp/dots.csv" 2>"$tmp/err"
check "a '.' cell of that fit's file is missing when scored (exit 0)" test $? -eq 0
check "and counted as missing, 2 rows" grep -q "4 scored, 2 left empty (0 unseen level, 2 missing value)" "$tmp/err"
"$bin" score --fit "$tmp/dots.json" --out "$tmp/dots-out.csv" "$tmp/dots.csv" 2>"$tmp/err"
check "by default a missing cell fails the run: exit 5 (README: the unseen-level policy)" test $? -eq 5
check "and names the row and column" grep -qF "dots.csv:3:2: column 'x'" "$tmp/err"
printf 'y,x,g\n1,NA,a\n' >"$tmp/na.csv"
"$bin" score --fit "$tmp/dots.json" --out "$tmp/na-out.csv" "$tmp/na.csv" 2>"$tmp/err"
check "NA is not missing for a fit that did not take it: exit 4, not a number" sh -c "grep -q 'not a number' '$tmp/err'"


# --columns: the columns asked for, in the standard order whatever the
# order given, each field byte for byte the full output's (the oracle: the
# same run without --columns), blank rows included; an unknown name and a
# residual without the outcome are usage errors (exit 2), nothing written.
"$bin" score --fit "$tmp/dots.json" --unseen blank --keep g --out "$tmp/all.csv" "$tmp/dots.csv" 2>/dev/null
"$bin" score --fit "$tmp/dots.json" --unseen blank --keep g --columns resid_pearson,mean,eta --out "$tmp/some.csv" \
    "$tmp/dots.csv" 2>/dev/null
check "--columns: the fields of the full output, in its order" /usr/bin/python3 -c '
import csv, sys
full = list(csv.reader(open(sys.argv[1]))); some = list(csv.reader(open(sys.argv[2])))
want = [full[0].index(c) for c in ("g", "eta", "mean", "resid_pearson")]
sys.exit(some != [[row[i] for i in want] for row in full] or len(some) != 7)' "$tmp/all.csv" "$tmp/some.csv"
"$bin" score --fit "$tmp/dots.json" --columns mean,sideways --out "$tmp/sideways.csv" "$tmp/dots.csv" 2>"$tmp/err"
check "--columns with an unknown name: exit 2, naming it" sh -c "[ $? -eq 2 ] && grep -q \"no column 'sideways'\" '$tmp/err' && [ ! -e '$tmp/sideways.csv' ]"
printf 'x,g\n0.5,a\n' >"$tmp/noy.csv"
"$bin" score --fit "$tmp/dots.json" --columns mean,resid_deviance --out "$tmp/noy-out.csv" "$tmp/noy.csv" 2>"$tmp/err"
check "--columns: a residual without the outcome: exit 2, nothing written" sh -c "[ $? -eq 2 ] && grep -q 'need the outcome' '$tmp/err' && [ ! -e '$tmp/noy-out.csv' ]"
"$bin" score --fit "$tmp/dots.json" --columns mean --out "$tmp/noy-out.csv" "$tmp/noy.csv" 2>/dev/null
check "--columns mean without the outcome: the mean alone" sh -c "head -n 1 '$tmp/noy-out.csv' | grep -qx mean"

finish
