#!/usr/bin/env bash
# gzip input must fit to the very bits of the same text plain or zstd:
# one member, several members (the text cut in three at arbitrary bytes,
# each piece gzipped, the pieces concatenated, as `cat a.gz b.gz c.gz`
# or a parallel compressor gives), from standard input and from a FIFO, at
# 1 and 3 threads, with the decoded-column cache, without it (every pass
# decompresses again) and in memory.  Source of truth: the fit of the plain
# file at 1 thread, compared number for number (raw JSON text, as in
# determinism.sh); the gzip tool is the independent compressor.  The JSON
# says what was read: compression "gzip", the compressed bytes, the text's
# bytes, and the checksum of the bytes read (README, JSON output).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
export TMPDIR=$tmp
synth=$root/build/synth
[ -x "$synth" ] || { fail setup "$synth not found (run make first)"; finish; exit 1; }

# gzip_copies FILE: FILE.gz (one member) and FILE.3.gz (three members,
# cut mid-row, at three compression levels) of the plain FILE.
gzip_copies() {
    local plain=$1 size third
    gzip -n -c < "$plain" > "$plain.gz"
    size=$(stat -c %s "$plain")
    third=$((size / 3 + 7))
    head -c "$third" "$plain" | gzip -n -c > "$plain.3.gz"
    tail -c +$((third + 1)) "$plain" | head -c "$third" | gzip -9 -c >> "$plain.3.gz"
    tail -c +$((2 * third + 1)) "$plain" | gzip -1 -n -c >> "$plain.3.gz"
    cmp -s <(gzip -dc "$plain.3.gz") "$plain" || fail setup "the three members of $plain.3.gz are not its text"
}

# run NAME [fit options...] DATA: $tmp/NAME.json, $tmp/NAME.err, exit code in $rc.
run() {
    local name=$1
    shift
    timeout 300 "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "$@" > /dev/null 2> "$tmp/$name.err"
    rc=$?
}

# same NAME [fit options...] DATA: the fit gives the base's numbers.
same() {
    run "$@"
    same_as_base "$1" "$rc"
}

# fifo NAME FILE [fit options...]: FILE written into a FIFO the fit reads.
fifo() {
    local name=$1 file=$2
    shift 2
    rm -f "$tmp/fifo"
    mkfifo "$tmp/fifo"
    cat "$file" > "$tmp/fifo" &
    local writer=$!
    run "$name" "$@" "$tmp/fifo"
    kill "$writer" 2> /dev/null
    wait "$writer" 2> /dev/null
    same_as_base "$name" "$rc"
}

# input_is NAME COMPRESSION BYTES TEXT_BYTES CHECKSUM_OF: the JSON's input section.
input_is() {
    local name=$1 want
    want="$2 $3 $4 $(/usr/bin/python3 "$here/checksum.py" "$5")"
    local got
    got=$(/usr/bin/python3 -c '
import json, sys
i = json.load(open(sys.argv[1]))["input"]
print(i["compression"], i["bytes"], i["decompressed_bytes"], i["checksum"])
' "$tmp/$name.json")
    if [ "$got" = "$want" ]; then ok "$name: input $got"; else fail "$name input" "got '$got', wanted '$want'"; fi
}

# ---- the bundled sample: one block, collapsed and row by row -------------
zstd -q -dc "$root/samples/falls.csv.zst" > "$tmp/falls.csv"
gzip_copies "$tmp/falls.csv"
model=(--model "$root/samples/falls.model" --no-collapse)
run base --threads 1 "$tmp/falls.csv"
[ "$rc" = 0 ] || { fail base "exit $rc: $(head -c 300 "$tmp/base.err")"; finish; exit 1; }
fit_values "$tmp/base.json" > "$tmp/base.values"
same falls_zstd --threads 1 "$root/samples/falls.csv.zst"
for t in 1 3; do
    same "falls_gzip_t$t" --threads "$t" "$tmp/falls.csv.gz"
    same "falls_members_t$t" --threads "$t" "$tmp/falls.csv.3.gz"
    same "falls_stdin_gzip_t$t" --threads "$t" - < "$tmp/falls.csv.gz"
done
for mode in --no-cache --in-memory; do
    same "falls_gzip_${mode#--}" "$mode" "$tmp/falls.csv.gz"
    same "falls_members_${mode#--}" "$mode" "$tmp/falls.csv.3.gz"
    same "falls_stdin_gzip_${mode#--}" "$mode" - < <(cat "$tmp/falls.csv.gz")
done
same falls_gzip_buffer_16 --buffer-size 16 "$tmp/falls.csv.3.gz"
input_is falls_gzip_t1 gzip "$(stat -c %s "$tmp/falls.csv.gz")" "$(stat -c %s "$tmp/falls.csv")" "$tmp/falls.csv.gz"
input_is falls_members_t1 gzip "$(stat -c %s "$tmp/falls.csv.3.gz")" "$(stat -c %s "$tmp/falls.csv")" \
    "$tmp/falls.csv.3.gz"
input_is falls_zstd zstd "$(stat -c %s "$root/samples/falls.csv.zst")" "$(stat -c %s "$tmp/falls.csv")" \
    "$root/samples/falls.csv.zst"
"$bin" show "$tmp/falls_gzip_t1.json" > "$tmp/show.out" 2>&1 &&
    grep -q "falls.csv.gz (gzip, $(stat -c %s "$tmp/falls.csv.gz") bytes read" "$tmp/show.out" &&
    ok "report names gzip" || fail "report names gzip" "$(head -c 300 "$tmp/show.out")"

# A saved fit names its compression; a name this library does not know is
# refused naming the field (README, "Reading a fit back").
sed 's/"compression": "gzip"/"compression": "lz4"/' "$tmp/falls_gzip_t1.json" > "$tmp/lz4.json"
"$bin" show "$tmp/lz4.json" > /dev/null 2> "$tmp/lz4.err"
rc=$?
[ "$rc" = 4 ] && grep -q "'input.compression'" "$tmp/lz4.err" && ok "unknown compression in a saved fit: exit 4" ||
    fail "unknown compression in a saved fit" "exit $rc: $(head -c 300 "$tmp/lz4.err")"

# The sample's default fit (covariate patterns, one read) too.
model=(--model "$root/samples/falls.model")
run base --threads 1 "$tmp/falls.csv"
fit_values "$tmp/base.json" > "$tmp/base.values"
same falls_collapsed_gzip --threads 3 "$tmp/falls.csv.3.gz"
same falls_collapsed_stdin_gzip - < "$tmp/falls.csv.gz"

# ---- a 60,000-row extract: four blocks, several passes ---------------------
"$synth" --rows 60000 --seed 5 --out "$tmp/big.csv" 2> "$tmp/synth.err" || fail setup "synth: $(cat "$tmp/synth.err")"
zstd -q -f "$tmp/big.csv" -o "$tmp/big.csv.zst"
gzip_copies "$tmp/big.csv"
model=(--outcome events --family poisson --exposure followup --factor "age_band ref=00-04" --factor "sex ref=F"
       --factor "region ref=R01" --numeric deprivation --numeric year --numeric age --numeric bmi)
run base --threads 1 "$tmp/big.csv"
[ "$rc" = 0 ] || { fail base "exit $rc: $(head -c 300 "$tmp/base.err")"; finish; exit 1; }
fit_values "$tmp/base.json" > "$tmp/base.values"
/usr/bin/python3 -c 'import json, sys; sys.exit(json.load(open(sys.argv[1]))["convergence"]["passes"] < 3)' \
    "$tmp/base.json" && ok "the extract takes several passes" || fail "passes" "fewer than 3: nothing reread"
same big_zstd --threads 3 "$tmp/big.csv.zst"
for t in 1 3; do
    same "big_gzip_t$t" --threads "$t" "$tmp/big.csv.gz"
    same "big_members_t$t" --threads "$t" "$tmp/big.csv.3.gz"
    same "big_members_no_cache_t$t" --threads "$t" --no-cache "$tmp/big.csv.3.gz"
    same "big_stdin_gzip_t$t" --threads "$t" - < "$tmp/big.csv.3.gz"
done
same big_gzip_in_memory --in-memory --threads 3 "$tmp/big.csv.gz"
same big_stdin_gzip_no_cache --no-cache --buffer-size 4096 - < <(cat "$tmp/big.csv.gz")
same big_stdin_gzip_in_memory --in-memory - < <(cat "$tmp/big.csv.3.gz")
fifo big_fifo_gzip_no_cache "$tmp/big.csv.3.gz" --no-cache --threads 3
fifo big_fifo_gzip "$tmp/big.csv.gz" --threads 1

left=$(find "$tmp" -name 'millrace-*' | head -n 3)
[ -z "$left" ] && ok no_temporary_left || fail no_temporary_left "$left"
finish
