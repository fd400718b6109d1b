#!/usr/bin/env bash
# A short tour of the command on the bundled samples, run under whatever
# $MILLRACE says (the ASan build, or the normal build under valgrind), so
# that every main path of the library runs at least once with a checker
# watching: zstd, gzip and plain input, standard input, threads, in-memory mode,
# rereads of a plain file by the block map,
# both sample models, JSON output and reading it back, the HTML page, and
# an error path.
set -u
root=$(cd "$(dirname "$0")/../.." && pwd)
MILLRACE=${MILLRACE:-$root/build/millrace}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
pass=0 fail=0

expect() { # expect NAME CODE command...
    local name=$1 want=$2
    shift 2
    "$@" >"$tmp/out" 2>"$tmp/err"
    local got=$?
    if [ "$got" = "$want" ]; then
        pass=$((pass + 1)); echo "ok $name"
    else
        fail=$((fail + 1)); echo "FAIL $name: exit $got, wanted $want"; head -5 "$tmp/err"
    fi
}

cd "$root"
expect "poisson zstd sample" 0 $MILLRACE fit -m samples/falls.model --quiet --json "$tmp/f.json" samples/falls.csv.zst
expect "logistic sample, 1 thread, in memory" 0 $MILLRACE fit -m samples/screening.model --threads 1 --in-memory --quiet samples/screening.csv
expect "spline terms, quantile knots times a factor" 0 $MILLRACE fit -m samples/falls.model --spline "year df=3" --interact "year sex" --threads 2 --no-collapse --quiet --json "$tmp/spline.json" samples/falls.csv
expect "spline terms with given knots, in memory" 0 $MILLRACE fit -m samples/screening.model --spline "age knots=40,55 boundary=30,70" --in-memory --quiet samples/screening.csv
expect "plain file reread by the block map" 0 $MILLRACE fit -m samples/screening.model --threads 2 --no-cache --no-collapse --quiet samples/screening.csv
expect "standard input, tiny reads" 0 sh -c "cat samples/falls.csv | $MILLRACE fit -m samples/falls.model --buffer-size 4096 --quiet -"
expect "gzip members on standard input, rereads" 0 sh -c "{ head -n 1000 samples/falls.csv | gzip; tail -n +1001 samples/falls.csv | gzip; } | $MILLRACE fit -m samples/falls.model --no-collapse --no-cache --buffer-size 4096 --quiet -"
expect "options override the model file" 0 $MILLRACE fit -m samples/falls.model --family poisson --link log --dispersion estimate --quiet samples/falls.csv
expect "unknown column is a usage error" 2 $MILLRACE fit --outcome nosuch --family poisson --quiet samples/falls.csv
printf 'y,x\n1,2\n3,zz\n' >"$tmp/bad.csv"
expect "unparsable number is a format error" 4 $MILLRACE fit --outcome y --numeric x --quiet "$tmp/bad.csv"
[ -s "$tmp/f.json" ] && grep -q '"format": "millrace-fit"' "$tmp/f.json" && { pass=$((pass + 1)); echo "ok json written"; } ||
    { fail=$((fail + 1)); echo "FAIL json written"; }
expect "the saved fit read back" 0 $MILLRACE show "$tmp/f.json"
expect "run log appended" 0 $MILLRACE fit -m samples/falls.model --quiet --run-log "$tmp/runs.log" --json "$tmp/g.json" samples/falls.csv
expect "drift of two fits, written as JSON and CSV" 0 $MILLRACE drift --json "$tmp/d.json" --csv "$tmp/d.csv" "$tmp/f.json" "$tmp/g.json"
expect "saved fits as an HTML page, with their comparison" 0 $MILLRACE report --html "$tmp/f.html" --at year=2020 "$tmp/f.json" "$tmp/f.json"
expect "score, 3 threads, kept column, zstd output" 0 $MILLRACE score --fit "$tmp/f.json" --out "$tmp/s.csv.zst" --keep region --threads 3 --quiet samples/falls.csv.zst
expect "score from standard input" 0 sh -c "cat samples/falls.csv | $MILLRACE score --fit $tmp/f.json --out $tmp/s.csv --threads 2 --quiet -"
printf 'age_band,sex,region,year,person_years\n00-04,F,Westvale,2015,10\n00-04,F,,2015,10\n' >"$tmp/new.csv"
expect "score: unseen level, blank" 0 $MILLRACE score --fit "$tmp/f.json" --out "$tmp/n.csv" --unseen blank "$tmp/new.csv"
expect "score: groups to JSON" 0 $MILLRACE score --fit "$tmp/f.json" --out "$tmp/s2.csv" --by region --by sex --by-out "$tmp/g.json" --threads 2 --quiet samples/falls.csv
expect "score: groups as text" 0 $MILLRACE score --fit "$tmp/f.json" --out "$tmp/s2.csv" --by region --quiet samples/falls.csv.zst
expect "score: unseen level fails" 5 $MILLRACE score --fit "$tmp/f.json" --out "$tmp/n.csv" "$tmp/new.csv"
# The checksum, recomputed from its documented definition (README, JSON
# output) by an independent implementation.
want=$(/usr/bin/python3 tests/cli/checksum.py samples/falls.csv.zst)
grep -q "\"$want\"" "$tmp/f.json" && { pass=$((pass + 1)); echo "ok checksum $want"; } ||
    { fail=$((fail + 1)); echo "FAIL checksum: wanted $want"; }
echo "$pass passed, $fail failed"
[ "$fail" = 0 ]
