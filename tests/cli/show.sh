#!/usr/bin/env bash
# millrace show: the report of a fit saved with --json, read back through
# mr_fit_read_json.  Source of truth: the report the fit printed itself
# (millrace.h: a fit read back gives the same report).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# same_report NAME [fit arguments...]: the fit's report, then show's
# (with the fit's --digits, if the first arguments are --digits N).
same_report() {
    local name=$1
    shift
    "$bin" fit --quiet --json "$tmp/$name.json" "$@" > "$tmp/$name.fit" 2> "$tmp/$name.err"
    local rc=$?
    if [ $rc != 0 ]; then fail "$name" "fit exit $rc: $(head -c 200 "$tmp/$name.err")"; return; fi
    local digits=()
    [ "$1" = --digits ] && digits=(--digits "$2")
    if ! "$bin" show "${digits[@]}" "$tmp/$name.json" > "$tmp/$name.show" 2> "$tmp/$name.err"; then
        fail "$name" "show: $(head -c 200 "$tmp/$name.err")"
    elif cmp -s "$tmp/$name.fit" "$tmp/$name.show"; then
        ok "$name"
    else
        fail "$name" "$(diff "$tmp/$name.fit" "$tmp/$name.show" | head -n 4 | tr '\n' '|')"
    fi
}

same_report falls -m "$root/samples/falls.model" --factor 'region ref=Eastmoor' "$root/samples/falls.csv.zst"
same_report screening -m "$root/samples/screening.model" "$root/samples/screening.csv"
same_report screening_digits --digits 3 -m "$root/samples/screening.model" "$root/samples/screening.csv.zst"
same_report stdin -m "$root/samples/screening.model" - < "$root/samples/screening.csv"
if grep -q '"file": null' "$tmp/stdin.json" && grep -q '"mtime_ns"' "$tmp/falls.json"; then
    ok input_identity
else
    fail input_identity "standard input should have no file identity, a file one"
fi

head -c 1000 "$tmp/falls.json" > "$tmp/cut.json"
"$bin" show "$tmp/cut.json" > /dev/null 2> "$tmp/cut.err"
rc=$?
if [ $rc = 4 ] && grep -qE "cut\.json:[0-9]+:[0-9]+: " "$tmp/cut.err"; then ok truncated_file; else fail truncated_file "exit $rc: $(cat "$tmp/cut.err")"; fi
"$bin" show "$tmp/absent.json" > /dev/null 2> "$tmp/absent.err"
rc=$?
if [ $rc = 3 ]; then ok absent_file; else fail absent_file "exit $rc: $(cat "$tmp/absent.err")"; fi
"$bin" show > /dev/null 2>&1
rc=$?
if [ $rc = 2 ]; then ok show_usage; else fail show_usage "exit $rc"; fi

finish
