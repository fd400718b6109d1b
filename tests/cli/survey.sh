#!/usr/bin/env bash
# millrace survey: usage errors and exit codes (README, "Surveying a file
# before a model"), the output rules of outfile.c, the text report.  The
# numbers themselves are checked against Python's csv module in
# tests/ref/survey.py.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

exit_code() { # NAME WANT CMD...: the command's exit status
    local name=$1 want=$2
    shift 2
    "$@" > "$tmp/out" 2> "$tmp/err"
    local rc=$?
    if [ "$rc" = "$want" ]; then ok "$name"; else fail "$name" "exit $rc, not $want: $(head -c 200 "$tmp/err")"; fi
}

sample=$root/samples/screening.csv
exit_code no_file 2 "$bin" survey
exit_code two_files 2 "$bin" survey "$sample" "$sample"
exit_code bad_cap 2 "$bin" survey --distinct-cap 0 "$sample"
exit_code bad_option 2 "$bin" survey --tolerance 1 "$sample"
exit_code absent_file 3 "$bin" survey "$tmp/absent.csv"
exit_code json_over_input 2 "$bin" survey --json "$sample" "$sample"
check "the input is left alone" cmp -s "$sample" <(zstd -dc "$root/samples/screening.csv.zst")
printf 'a,b\n1,"open\n' > "$tmp/quote.csv"
exit_code unterminated_quote 4 "$bin" survey "$tmp/quote.csv"
exit_code help 0 "$bin" survey --help
check "--help names survey" grep -q "millrace survey" "$tmp/out"

"$bin" survey --json "$tmp/s.json" "$root/samples/falls.csv.zst" > "$tmp/s.txt" 2> "$tmp/err"
check "text report: every column" test "$(grep -cE '^  (age_band|sex|region|year|person_years|admissions) ' "$tmp/s.txt")" = 6
check "json written, no temporary left" test -s "$tmp/s.json" -a "$(ls "$tmp" | grep -c '\.tmp')" = 0
"$bin" survey --quiet "$sample" > "$tmp/q.txt"
check "--quiet prints nothing" test ! -s "$tmp/q.txt"
finish
