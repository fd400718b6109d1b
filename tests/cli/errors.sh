#!/usr/bin/env bash
# Bad input for `millrace fit`: exit codes, the one-line error message
# (file, line, column, value), no JSON left behind, input never modified.
# Expected exit codes and the message format are those of the command-line
# contract: 2 usage, 3 I/O, 4 malformed input, 5 value outside the model's
# domain, 6 no data; "millrace: FILE:LINE:COLUMN: message (value 'V')".
# LINE counts the header as line 1; COLUMN is the 1-based field number.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# A small valid data set: y count, g factor, x numeric, plus columns used by
# some families (s/t binomial, e exposure, w weight, z positive outcome).
good_rows() {
    local i
    for i in $(seq 1 40); do
        printf '%d,%s,%d.5,%d,%d,%d.25,%d.5,%d.75\n' $((i % 7)) \
            "$([ $((i % 3)) -eq 0 ] && echo B || echo A)" $((i % 5)) \
            $((i % 4)) $((i % 4 + 2)) $((i % 6 + 1)) $((i % 3 + 1)) $((i % 9 + 1))
    done
}
header='y,g,x,s,t,e,w,z'
poisson_model=(--outcome y --family poisson --factor g --numeric x)

# expect NAME CODE DATA 'fixed strings to find in stderr' -- fit options...
# Runs one failing fit and checks everything a failure must guarantee.
expect() {
    expect_within 600 "$@"
}

# expect_within SECONDS NAME CODE DATA ...: the same, the fit given at most
# SECONDS (a limit far above the time it needs: it catches a quadratic
# cost, not a slow machine).
expect_within() {
    local limit=$1 name=$2 code=$3 data=$4
    shift 4
    local needles=()
    while [ $# -gt 0 ] && [ "$1" != "--" ]; do needles+=("$1"); shift; done
    shift
    local outdir="$tmp/out.$name"
    mkdir -p "$outdir"
    local json="$outdir/fit.json" err="$tmp/$name.err" before="" after=""
    [ -f "$data" ] && before=$(sha256sum < "$data")
    timeout "$limit" "$bin" fit --quiet --json "$json" "$@" "$data" > "$tmp/$name.out" 2> "$err"
    local rc=$?
    [ -f "$data" ] && after=$(sha256sum < "$data")
    local problems=""
    [ "$rc" -eq "$code" ] || problems+="exit $rc, expected $code; "
    local nlines
    nlines=$(wc -l < "$err")
    if [ "$nlines" -ne 1 ] || [ -n "$(tail -c1 "$err")" ]; then
        problems+="stderr has $nlines lines, expected exactly one; "
    fi
    head -n1 "$err" | grep -q '^millrace: ' || problems+="stderr does not start with 'millrace: '; "
    local needle
    for needle in "${needles[@]}"; do
        grep -qF -- "$needle" "$err" || problems+="stderr lacks \"$needle\"; "
    done
    [ -z "$(ls -A "$outdir")" ] || problems+="left files behind: $(ls -A "$outdir" | tr '\n' ' '); "
    [ "$before" = "$after" ] || problems+="input file changed; "
    if [ -n "$problems" ]; then
        fail "$name" "${problems}stderr: $(head -c 400 "$err" | tr '\n' '|')"
    else
        ok "$name"
    fi
}

# ---- model / usage errors (exit 2)
f="$tmp/good.csv"
{ echo "$header"; good_rows; } > "$f"
expect unknown_column 2 "$f" "'nosuch'" -- "${poisson_model[@]}" --numeric nosuch
expect unseen_reference_level 2 "$f" "ZZZ" -- --outcome y --family poisson --factor "g ref=ZZZ"
expect unknown_family 2 "$f" "frobnicate" -- --outcome y --family frobnicate --numeric x
expect link_not_allowed 2 "$f" "logit" -- --outcome y --family poisson --link logit --numeric x
expect bad_option_value 2 "$f" "--threads" -- "${poisson_model[@]}" --threads many
expect column_with_two_roles 2 "$f" "column 'y' is used twice, as the outcome and as a factor" -- \
    --outcome y --family poisson --factor y
expect weight_also_exposure 2 "$f" "column 'e' is used twice, as the weight and as the exposure" -- \
    "${poisson_model[@]}" --weight e --exposure e

# Text from the file reaches stderr with its control bytes escaped: no
# escape sequence from a header or a cell gets to the terminal.
no_raw_controls() {
    if LC_ALL=C grep -q '[[:cntrl:]]' <(tr -d '\n' < "$tmp/$1.err"); then
        fail "$1_escaped" "raw control bytes in stderr: $(od -c "$tmp/$1.err" | head -n 3 | tr '\n' '|')"
    else
        ok "$1_escaped"
    fi
}
f="$tmp/escape_in_header.csv"
{ printf 'y,\033[31mred,\033]0;title\007\n'; echo '1,2,3'; } > "$f"
expect escape_in_header_name 2 "$f" 'columns: y, \x1b[31mred, \x1b]0;title\x07)' -- --outcome y --numeric x
no_raw_controls escape_in_header_name
f="$tmp/escape_in_duplicate.csv"
{ printf 'y,\033[2J,\033[2J\n'; echo '1,2,3'; } > "$f"
expect escape_in_duplicate_name 4 "$f" "duplicate column name '\x1b[2J' (also column 2)" -- --outcome y
no_raw_controls escape_in_duplicate_name
f="$tmp/escape_in_cell.csv"
{ echo "$header"; printf '1,A,\0332,1,2,1.5,1.5,1.5\n'; good_rows; } > "$f"
expect escape_in_cell 4 "$f" "$f:2:3:" "(value '\x1b2')" -- "${poisson_model[@]}"
no_raw_controls escape_in_cell

# ---- I/O (exit 3)
expect missing_input 3 "$tmp/does-not-exist.csv" "$tmp/does-not-exist.csv" -- "${poisson_model[@]}"
f="$tmp/good.csv"
expect missing_model_file 3 "$f" "$tmp/no-such.model" "cannot open model file" -- -m "$tmp/no-such.model"
mkdir -p "$tmp/a-directory.model"
expect model_file_is_a_directory 3 "$f" "$tmp/a-directory.model" "cannot read model file" -- -m "$tmp/a-directory.model"

# standard input closed (not merely empty): said so, not "the file is empty"
"$bin" fit --quiet "${poisson_model[@]}" - <&- > /dev/null 2> "$tmp/closed_stdin.err"
rc=$?
if [ "$rc" -eq 3 ] && grep -q '^millrace: <stdin>: standard input is closed' "$tmp/closed_stdin.err"; then
    ok closed_stdin
else
    fail closed_stdin "exit $rc, expected 3; stderr: $(head -c 300 "$tmp/closed_stdin.err")"
fi

# ---- malformed input (exit 4)
f="$tmp/duplicate_header.csv"
{ echo 'y,g,x,g'; echo '1,A,2,B'; echo '2,B,3,A'; } > "$f"
expect duplicate_column 4 "$f" "$f:1:4:" "'g'" -- "${poisson_model[@]}"

# 200,000 columns, the first name again at the end: found at once (the
# duplicate check is n log n, not a comparison of every pair)
f="$tmp/wide_duplicate.csv"
/usr/bin/python3 -c '
import sys
names = ["y"] + ["c%d" % i for i in range(2, 200001)] + ["y"]
sys.stdout.write(",".join(names) + "\n" + ",".join(["1"] * len(names)) + "\n")' > "$f"
expect_within 30 wide_duplicate_column 4 "$f" "$f:1:200001:" "'y' (also column 1)" -- --outcome y
f="$tmp/wide.csv"
/usr/bin/python3 -c '
import sys
names = ["y", "x"] + ["c%d" % i for i in range(3, 200001)]
rows = [[str(i % 3), str(i)] + ["0"] * (len(names) - 2) for i in range(6)]
sys.stdout.write("\n".join(",".join(r) for r in [names] + rows) + "\n")' > "$f"
if timeout 30 "$bin" fit --quiet --outcome y --numeric x "$f" > "$tmp/wide.out" 2> "$tmp/wide.err"; then
    ok wide_header_fits
else
    fail wide_header_fits "exit $? (124: timed out); $(head -c 300 "$tmp/wide.err")"
fi

f="$tmp/cr_only.csv"
{ echo "$header"; good_rows; } | tr '\n' '\r' > "$f"
expect cr_only_line_ends 4 "$f" "$f:1: the line ends are carriage returns alone" -- "${poisson_model[@]}"

f="$tmp/field_count.csv"
{ echo "$header"; good_rows | head -n 2; echo '3,A,1.5'; good_rows | tail -n 5; } > "$f"
expect wrong_field_count 4 "$f" "$f:4:" -- "${poisson_model[@]}"

f="$tmp/bad_number.csv"
{ echo "$header"; good_rows | head -n 1; echo '2,B,12x,1,2,1.5,1.5,1.5'; good_rows | tail -n 5; } > "$f"
expect unparsable_number 4 "$f" "$f:3:3:" "'12x'" -- "${poisson_model[@]}"

f="$tmp/number_too_large.csv"
{ echo "$header"; good_rows | head -n 3; echo '2,B,-1e400,1,2,1.5,1.5,1.5'; good_rows | tail -n 5; } > "$f"
expect number_out_of_range 4 "$f" "$f:5:3:" "out of the range of a double" "'-1e400'" -- "${poisson_model[@]}"

f="$tmp/nul_in_level.csv"
{ echo "$header"; good_rows | head -n 2; printf '2,A\0B,1.5,1,2,1.5,1.5,1.5\n2,A\0C,1.5,1,2,1.5,1.5,1.5\n'; good_rows; } > "$f"
expect nul_in_level 4 "$f" "$f:4:2: column 'g': a NUL byte in a level" "(value 'A\x00B')" -- "${poisson_model[@]}"

f="$tmp/unterminated_quote.csv"
{ echo "$header"; good_rows | head -n 3; echo '1,"A,2.5,1,2,1.5,1.5,1.5'; echo '2,B,1.5,1,2,1.5,1.5,1.5'; } > "$f"
expect unterminated_quote 4 "$f" "$f:5" -- "${poisson_model[@]}"

big="$tmp/big.csv"
{ echo "$header"; for _ in $(seq 1 500); do good_rows; done; } > "$big"
zstd -q -f "$big" -o "$tmp/big.csv.zst"
f="$tmp/truncated.csv.zst"
size=$(stat -c %s "$tmp/big.csv.zst")
head -c $((size / 2)) "$tmp/big.csv.zst" > "$f"
expect truncated_zstd 4 "$f" "$f" -- "${poisson_model[@]}"

f="$tmp/corrupt.csv.zst"
cp "$tmp/big.csv.zst" "$f"
printf '\xde\xad\xbe\xef\x00\xff\x13\x37\xde\xad\xbe\xef\x00\xff\x13\x37' |
    dd of="$f" bs=1 seek=$((size / 2)) conv=notrunc status=none
expect corrupt_zstd 4 "$f" "$f" -- "${poisson_model[@]}"

# A frame whose header gives 6,477 bytes of content (RFC 8878 3.1.1.1.4: a
# 2-byte Frame_Content_Size holds the size less 256) and whose one block is
# an empty last block: libzstd's stream decoder, fed a little at a time,
# took it as a whole empty frame (a fuzzing find).
f="$tmp/frame_short_of_its_size.csv.zst"
printf '\x28\xb5\x2f\xfd\x50\x2a\x4d\x18\x05\x00\x00' > "$f"
expect zstd_frame_short_of_its_size 4 "$f" "$f" "corrupt zstd stream" -- "${poisson_model[@]}"

# gzip (RFC 1952): gzip -n writes a 10-byte header, so byte 10 begins the
# first deflate block (RFC 1951: bits 1-2 its type, 11 reserved); the
# member ends with the text's CRC-32 and length, 8 bytes.
gzip -n -c < "$big" > "$tmp/big.csv.gz"
size=$(stat -c %s "$tmp/big.csv.gz")
f="$tmp/truncated.csv.gz"
head -c $((size / 2)) "$tmp/big.csv.gz" > "$f"
expect truncated_gzip 4 "$f" "$f: the gzip stream ends inside a member (member 1, from offset 0" -- "${poisson_model[@]}"
f="$tmp/corrupt_crc.csv.gz"
cp "$tmp/big.csv.gz" "$f"
printf '\x5a' | dd of="$f" bs=1 seek=$((size - 8)) conv=notrunc status=none
expect corrupt_crc_gzip 4 "$f" "$f: corrupt gzip stream (member 1, found at offset $((size - 4))):" \
    "the CRC-32 in its trailer does not match its data" -- "${poisson_model[@]}"
f="$tmp/corrupt_data.csv.gz"
cp "$tmp/big.csv.gz" "$f"
printf '\x07' | dd of="$f" bs=1 seek=10 conv=notrunc status=none
expect corrupt_data_gzip 4 "$f" "$f: corrupt gzip stream (member 1, found at offset 11): invalid block type" -- \
    "${poisson_model[@]}"
f="$tmp/garbage_tail.csv.gz"
{ cat "$tmp/big.csv.gz"; tail -n +2 "$big" | gzip -n -c; } > "$f"
size=$(stat -c %s "$f")
printf 'y,g\n' >> "$f"
expect garbage_tail_gzip 4 "$f" \
    "$f: trailing garbage: the bytes from offset $size on, after gzip member 2, are not a gzip member" -- \
    "${poisson_model[@]}"

# ---- no data (exit 6)
f="$tmp/empty.csv"
: > "$f"
expect empty_file 6 "$f" "$f" -- "${poisson_model[@]}"

f="$tmp/bom_only.csv"
printf '\xef\xbb\xbf' > "$f"
expect bom_only 6 "$f" "$f" -- "${poisson_model[@]}"
f="$tmp/bom_and_blank_line.csv"
printf '\xef\xbb\xbf\r\n' > "$f"
expect bom_and_blank_line 6 "$f" "$f" -- "${poisson_model[@]}"

f="$tmp/header_only.csv"
echo "$header" > "$f"
expect header_only 6 "$f" "$f" -- "${poisson_model[@]}"

f="$tmp/all_missing.csv"
{ echo "$header"; good_rows | sed 's/^[0-9]*,/NA,/'; } > "$f"
expect no_usable_rows 6 "$f" "$f" -- "${poisson_model[@]}"

# rows of weight 0 carry nothing: all of them is no data, collapsed or not
f="$tmp/all_zero_weight.csv"
{ echo "$header"; good_rows | awk -F, -v OFS=, '{ $7 = 0; print }'; } > "$f"
expect zero_weights_collapsed 6 "$f" "$f" "weight 'w'" -- "${poisson_model[@]}" --weight w
expect zero_weights_rows 6 "$f" "$f" "weight 'w'" -- "${poisson_model[@]}" --weight w --no-collapse
expect zero_weights_exposure 6 "$f" "$f" "weight 'w'" -- "${poisson_model[@]}" --weight w --exposure e
expect zero_weights_gaussian 6 "$f" "$f" "weight 'w'" -- --outcome z --numeric x --weight w --in-memory

# ---- values outside the model's domain (exit 5)
f="$tmp/negative_count.csv"
{ echo "$header"; good_rows | head -n 1; echo '-1,A,1.5,1,2,1.5,1.5,1.5'; good_rows | tail -n 3; } > "$f"
expect negative_poisson_count 5 "$f" "$f:3:1:" "'-1'" -- "${poisson_model[@]}"

f="$tmp/successes_over_trials.csv"
{ echo "$header"; good_rows | head -n 2; echo '1,A,1.5,5,3,1.5,1.5,1.5'; good_rows | tail -n 3; } > "$f"
expect successes_exceed_trials 5 "$f" "$f:4:" -- --outcome s --trials t --family binomial --numeric x

f="$tmp/gamma_zero.csv"
{ echo "$header"; echo '1,A,1.5,1,2,1.5,1.5,0'; good_rows | tail -n 3; } > "$f"
expect gamma_nonpositive_y 5 "$f" "$f:2:8:" "'0'" -- --outcome z --family gamma --numeric x

f="$tmp/exposure_zero.csv"
{ echo "$header"; good_rows | head -n 4; echo '1,A,1.5,1,2,0,1.5,1.5'; good_rows | tail -n 3; } > "$f"
expect nonpositive_exposure 5 "$f" "$f:6:6:" "'0'" -- "${poisson_model[@]}" --exposure e

f="$tmp/negative_weight.csv"
{ echo "$header"; good_rows | head -n 2; echo '1,A,1.5,1,2,1.5,-2,1.5'; good_rows | tail -n 3; } > "$f"
expect negative_weight 5 "$f" "$f:4:7:" "'-2'" -- "${poisson_model[@]}" --weight w

# A factor with more levels than the limit (100,000): the file's first
# level beyond it is named, whatever the threads, read size or bad-row
# mode (each worker numbers the levels it meets; the count is the file's).
f="$tmp/many_levels.csv"
/usr/bin/python3 - "$f" > "$tmp/many_levels.expect" <<'EOF2'
import sys
seen, first_beyond = set(), None
with open(sys.argv[1], "w") as out:
    out.write("y,h,g\n")
    for i in range(300000):
        level = "L%d" % ((i * 2654435761) % 180000)
        if level not in seen and len(seen) == 100000 and first_beyond is None:
            first_beyond = (i + 2, level)  # line 1 is the header
        seen.add(level)
        out.write("%d,%s,%s\n" % (i % 3, "AB"[i % 2], level))
print("%s:%d:3: column 'g': more than 100000 distinct levels" % (sys.argv[1], first_beyond[0]))
print("(value '%s')" % first_beyond[1])
EOF2
mapfile -t want < "$tmp/many_levels.expect"
for run in "1 1048576 fail" "2 4096 fail" "3 65536 skip" "4 100000 fail"; do
    set -- $run
    expect "many_levels_threads_$1_$3" 5 "$f" "${want[0]}" "${want[1]}" -- --outcome y --family poisson --factor h \
        --factor g --threads "$1" --buffer-size "$2" --on-bad-row "$3"
done

# ---- an existing JSON at the --json path survives a failed run
f="$tmp/field_count.csv"
json="$tmp/existing.json"
echo '{"previous": true}' > "$json"
sum_before=$(sha256sum < "$json")
"$bin" fit --quiet --json "$json" "${poisson_model[@]}" "$f" > /dev/null 2>&1
rc=$?
if [ "$rc" -eq 4 ] && [ "$(sha256sum < "$json")" = "$sum_before" ] &&
   [ "$(ls -A "$tmp" | grep -c '^existing\.json')" -eq 1 ]; then
    ok existing_json_kept_on_failure
else
    fail existing_json_kept_on_failure "exit $rc; json now: $(head -c 200 "$json"); files: $(ls -A "$tmp" | grep '^existing' | tr '\n' ' ')"
fi

# ---- --on-bad-row skip turns the wrong-field-count file into a fit
f="$tmp/two_bad_rows.csv"
{ echo "$header"; good_rows | head -n 10; echo '3,A,1.5'; good_rows | tail -n 20; echo '1,B,2.5,1,2,1.5,1.5,1.5,9'; } > "$f"
json="$tmp/skip.json"
before=$(sha256sum < "$f")
"$bin" fit --quiet --json "$json" --on-bad-row skip "${poisson_model[@]}" "$f" > /dev/null 2> "$tmp/skip.err"
rc=$?
if [ "$rc" -ne 0 ]; then
    fail on_bad_row_skip "exit $rc, expected 0; stderr: $(head -c 300 "$tmp/skip.err")"
elif ! /usr/bin/python3 - "$json" <<'EOF'
import json, sys
rows = json.load(open(sys.argv[1]))["rows"]
ok = rows.get("bad") == 2 and rows.get("used") == 30 and rows.get("read") in (30, 32)
if not ok:
    print("rows section", rows)
sys.exit(0 if ok else 1)
EOF
then
    fail on_bad_row_skip "JSON rows do not report 2 bad rows and 30 used"
elif [ "$(sha256sum < "$f")" != "$before" ]; then
    fail on_bad_row_skip "input file changed"
else
    ok on_bad_row_skip
fi

finish
