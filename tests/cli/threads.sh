#!/usr/bin/env bash
# Every threaded path on data of many blocks, for ThreadSanitizer (make
# tsan-check runs it with the TSan build as $MILLRACE; with the normal
# build it is a quick functional run).  The reference for each fit is the
# same fit with one thread: the results must be the same bits.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin}
synth="$root/build/synth"
"$synth" --rows 120000 --seed 5 --out "$tmp/d.csv.zst" || { fail synth "cannot generate data"; finish; exit 1; }
cat > "$tmp/a.model" <<'M'
outcome events
family poisson
exposure followup
factor age_band
factor sex
factor region
numeric deprivation
numeric year
M
cp "$tmp/a.model" "$tmp/b.model"
printf 'numeric age\nnumeric bmi\n' >> "$tmp/b.model"

estimates() { /usr/bin/python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); print([c["estimate"] for c in j["coefficients"]], j["fit"]["deviance"], [(l["estimate"], l["standard_error"]) for l in j.get("many_factor", {}).get("levels", [])])' "$1"; }

run() { # [data=FILE] run NAME MODEL OPTIONS...: fit with 1 and 3 threads, compare
    local name=$1 model=$2 in=${data:-$tmp/d.csv.zst}
    shift 2
    if ! $bin fit --quiet -m "$model" --threads 1 "$@" --json "$tmp/1.json" "$in" > /dev/null ||
       ! $bin fit --quiet -m "$model" --threads 3 "$@" --json "$tmp/3.json" "$in" > /dev/null; then
        fail "$name" "a fit failed"
        return
    fi
    [ "$(estimates "$tmp/1.json")" = "$(estimates "$tmp/3.json")" ] && ok "$name" || fail "$name" "1 and 3 threads differ"
}

run collapsed "$tmp/a.model"
run cached "$tmp/b.model"
run streaming "$tmp/b.model" --no-cache --buffer-size 4096
run in_memory "$tmp/b.model" --in-memory
run rows_no_collapse "$tmp/a.model" --no-collapse
# Rereads of a plain file: workers read their blocks by the block map.
zstd -q -d -c "$tmp/d.csv.zst" > "$tmp/d.csv"
data=$tmp/d.csv run rereads_by_map "$tmp/b.model" --no-cache
# A factor of 9,000 levels declared many: each block's level rows made by
# its worker, the Schur complement's 3 parts and the levels' estimates on
# the threads (solve/absorb.c)
awk -F, 'NR == 1 { print $0 ",area"; next } { print $0 ",A" (NR * 7919) % 9000 }' "$tmp/d.csv" > "$tmp/area.csv"
printf 'outcome bmi\nfamily gaussian\nfactor age_band\nfactor sex\nnumeric year\nfactor area many\n' > "$tmp/many.model"
data=$tmp/area.csv run many_factor "$tmp/many.model" --many-means
# Two-byte rows: a read into a chunk's buffer completes a chunk and runs
# on into the next (pass.c, read_stream).  Reference: the mean of the
# outcome, known by construction (0..9 repeated: 4.5).
{ echo y; for i in $(seq 1 12000); do printf '0\n1\n2\n3\n4\n5\n6\n7\n8\n9\n'; done; } > "$tmp/tiny.csv"
zstd -q -f "$tmp/tiny.csv" -o "$tmp/tiny.csv.zst"
for input in "$tmp/tiny.csv" "$tmp/tiny.csv.zst"; do
    for opts in "--threads 1" "--threads 3" "--threads 2 --buffer-size 16" "--threads 3 --no-cache" "--threads 3 --no-cache --no-collapse"; do
        # shellcheck disable=SC2086
        $bin fit --quiet --outcome y $opts --json "$tmp/t.json" "$input" > /dev/null &&
            /usr/bin/python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert j["rows"]["read"] == 120000 and j["coefficients"][0]["estimate"] == 4.5, j["coefficients"][0]' "$tmp/t.json" &&
            ok "tiny_rows ${input##*.} $opts" || fail "tiny_rows ${input##*.} $opts" "wrong rows or mean"
    done
done
cat "$tmp/d.csv.zst" | $bin fit --quiet -m "$tmp/b.model" --threads 3 - > /dev/null && ok stdin || fail stdin "fit from standard input failed"
# scoring: the job's lines and groups from 3 workers, the same bytes as 1
if $bin fit --quiet -m "$root/samples/falls.model" --json "$tmp/falls.json" "$root/samples/falls.csv.zst" > /dev/null &&
    $bin score --quiet --fit "$tmp/falls.json" --out "$tmp/s1.csv" --by region --by-out "$tmp/g1.csv" --threads 1 "$root/samples/falls.csv.zst" &&
    $bin score --quiet --fit "$tmp/falls.json" --out "$tmp/s3.csv" --by region --by-out "$tmp/g3.csv" --threads 3 "$root/samples/falls.csv.zst" &&
    cmp -s "$tmp/s1.csv" "$tmp/s3.csv" && cmp -s "$tmp/g1.csv" "$tmp/g3.csv"; then
    ok "score: 1 and 3 threads"
else
    fail "score: 1 and 3 threads" "failed or differ"
fi
finish
