#!/usr/bin/env bash
# Long runs of blank lines are skipped in one sweep, not a row at a time.
# A zstd file of gigabytes of newlines is a few hundred kilobytes; taken a
# line at a time such a file took minutes (about 13 s a gigabyte) before
# ending in "no data rows".  There is no time limit here (timings are not
# tests on a shared machine): the data are large enough (5 GiB of blank
# lines in all) that the row-at-a-time path is obviously slow, and the
# test takes a few seconds when blank runs are swept.  What is checked:
# blank runs change nothing else.  Sources of truth: the same rows without
# the blank lines (fitted number for number, raw JSON text), and line
# numbers counted here (header = line 1, 2^30 newlines in a run).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
export TMPDIR=$tmp

# 1 MiB of newlines as one zstd frame, doubled up to 1 GiB (frames
# concatenated read as one stream).
head -c 1048576 /dev/zero | tr '\0' '\n' | zstd -q -c > "$tmp/gib.zst"
for i in $(seq 10); do cat "$tmp/gib.zst" "$tmp/gib.zst" > "$tmp/twice.zst" && mv "$tmp/twice.zst" "$tmp/gib.zst"; done
gib_lines=1073741824

# 30,000 rows (two blocks), cut after row 20,000 for the blank run.
awk 'BEGIN { for (i = 0; i < 30000; i++)
                 printf "%d,%s,%d.%d,%d.5\n", (i * 7) % 5, substr("abcd", i % 4 + 1, 1), 20 + i % 61, i % 10, 1 + i % 3 }' \
    > "$tmp/rows.csv"
head -n 20000 "$tmp/rows.csv" > "$tmp/rows_a.csv"
tail -n +20001 "$tmp/rows.csv" > "$tmp/rows_b.csv"
header=claims,region,age,years
model=(--outcome claims --family poisson --factor region --numeric age --exposure years)
z() { printf '%s' "$1" | zstd -q -c; }


{ echo "$header"; cat "$tmp/rows.csv"; } > "$tmp/base.csv"
"$bin" fit --quiet --json "$tmp/base.json" "${model[@]}" "$tmp/base.csv" > /dev/null 2> "$tmp/base.err" ||
    fail base "exit $?: $(head -c 300 "$tmp/base.err")"
fit_values "$tmp/base.json" > "$tmp/base.values"

# same NAME FILE [options...]: fits FILE, expecting the numbers of base.csv
same() {
    local name=$1 file=$2
    shift 2
    "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "$@" "$file" > /dev/null 2> "$tmp/$name.err"
    same_as_base "$name" $?
}

# 4 GiB of blank lines after the header: no data rows (exit 6).
{ z "$header"$'\n'; for i in 1 2 3 4; do cat "$tmp/gib.zst"; done; } > "$tmp/header_only.csv.zst"
"$bin" fit --quiet "${model[@]}" "$tmp/header_only.csv.zst" > /dev/null 2> "$tmp/header_only.err"
rc=$?
if [ "$rc" -eq 6 ] && grep -q 'no data rows' "$tmp/header_only.err"; then
    ok header_then_4_gib_blank
else
    fail header_then_4_gib_blank "exit $rc: $(head -c 300 "$tmp/header_only.err")"
fi

# A blank run before the header, and one inside a block (after a blank
# line of spaces and a CRLF one, and before another), fitted as the rows alone.
{ cat "$tmp/gib.zst"; z "$header"$'\n'; zstd -q -c "$tmp/rows_a.csv"; z $'  \t\n\r\n'; cat "$tmp/gib.zst";
  z $'\n \n'; zstd -q -c "$tmp/rows_b.csv"; } > "$tmp/runs.csv.zst"
same blank_runs_zstd "$tmp/runs.csv.zst" --threads 2
same blank_runs_zstd_small_reads "$tmp/runs.csv.zst" --threads 1 --buffer-size 4096 --in-memory

# A plain file with a 128 MiB run inside a block, reread on every pass: the
# same numbers, and the passes stream the file instead of reading that block
# whole into memory (peak resident set within 48 MB of the rows alone's).
peak_rss_kb() {
    /usr/bin/python3 -c '
import resource, subprocess, sys
rc = subprocess.call(sys.argv[2:], stdout=subprocess.DEVNULL, stderr=open(sys.argv[1], "w"))
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss if rc == 0 else "exit %d" % rc)
' "$@"
}
{ echo "$header"; cat "$tmp/rows_a.csv"; head -c 134217728 /dev/zero | tr '\0' '\n'; cat "$tmp/rows_b.csv"; } > "$tmp/runs.csv"
same blank_run_plain_no_cache "$tmp/runs.csv" --no-cache --threads 2
base_kb=$(peak_rss_kb "$tmp/rss_base.err" "$bin" fit --quiet --no-cache --threads 2 "${model[@]}" "$tmp/base.csv")
runs_kb=$(peak_rss_kb "$tmp/rss_runs.err" "$bin" fit --quiet --no-cache --threads 2 "${model[@]}" "$tmp/runs.csv")
if [ -n "${base_kb##*exit*}" ] && [ -n "${runs_kb##*exit*}" ] && [ "$runs_kb" -lt $((base_kb + 48000)) ]; then
    ok "blank_run_plain_memory ($runs_kb kB, rows alone $base_kb kB)"
else
    fail blank_run_plain_memory "$runs_kb kB, rows alone $base_kb kB"
fi
rm -f "$tmp/runs.csv"

# The line numbers after a run are true: a bad cell on the first row after it.
{ z "$header"$'\n'; zstd -q -c "$tmp/rows_a.csv"; cat "$tmp/gib.zst"; z $'1,a,oops,1.5\n'; } > "$tmp/bad.csv.zst"
"$bin" fit --quiet "${model[@]}" "$tmp/bad.csv.zst" > /dev/null 2> "$tmp/bad.err"
rc=$?
line=$((1 + 20000 + gib_lines + 1))
if [ "$rc" -eq 4 ] && grep -q "bad.csv.zst:$line:3:" "$tmp/bad.err"; then
    ok line_number_after_run
else
    fail line_number_after_run "exit $rc, expected line $line: $(head -c 300 "$tmp/bad.err")"
fi
finish
