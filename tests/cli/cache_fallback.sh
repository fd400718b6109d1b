#!/usr/bin/env bash
# The cache of decoded columns only saves time.  When $TMPDIR cannot hold it
# (not a directory, not writable, or too small: a write fails in the middle
# of a pass) the fit must go on rereading the input, say so once among its
# warnings, and give the very numbers of --no-cache.  Standard input has no
# such way out (it is kept in $TMPDIR to be read again): it must fail with a
# message saying that $TMPDIR needs room.  Source of truth: the --no-cache
# fit of the same file, compared number for number (raw JSON text).  A full
# disk is stood in for by a file size limit (ulimit -f, with SIGXFSZ
# ignored): the write fails with EFBIG instead of ENOSPC, on the same path.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
mkdir -p "$tmp/t"
export TMPDIR=$tmp/t

# 100,000 rows (7 blocks).  `age` takes 10 values in the first 3 blocks and
# hundreds after, so a fit that may collapse rows gives collapsing up only
# after blocks went unkept, and fills the cache in its first IRLS pass.
awk 'BEGIN { print "claims,region,age,years";
             for (i = 0; i < 100000; i++)
                 printf "%d,%s,%s,%d.5\n", (i * 7) % 5, substr("abcd", i % 4 + 1, 1),
                        i < 49152 ? 20 + i % 10 : sprintf("%d.%d", 20 + i % 61, i % 7), 1 + i % 3 }' > "$tmp/data.csv"
zstd -q -f "$tmp/data.csv" -o "$tmp/data.csv.zst"
model=(--outcome claims --family poisson --factor region --numeric age --exposure years)


# fit NAME [options...] DATA: exit code in $rc, report in $tmp/NAME.out
fit() {
    local name=$1
    shift
    "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "$@" > "$tmp/$name.out" 2> "$tmp/$name.err"
    rc=$?
}

# fallback NAME BASE: exit 0, one cache warning, the numbers of BASE
fallback() {
    local name=$1 base=$2 problems=""
    [ "$rc" -eq 0 ] || problems+="exit $rc: $(head -c 300 "$tmp/$name.err"); "
    [ "$(grep -c 'no cache' "$tmp/$name.out")" -eq 1 ] || problems+="no single cache warning in the report; "
    grep -q 'rereads the input' "$tmp/$name.out" || problems+="the warning does not say the input is reread; "
    if [ "$rc" -eq 0 ] && ! fit_values "$tmp/$name.json" | cmp -s - "$tmp/$base.values"; then
        problems+="differs from --no-cache: $(fit_values "$tmp/$name.json" | diff "$tmp/$base.values" - | head -n 2 | tr '\n' '|')"
    fi
    [ -z "$(ls -A "$TMPDIR")" ] || problems+="left in TMPDIR: $(ls -A "$TMPDIR" | head -n 3 | tr '\n' ' ')"
    [ -z "$problems" ] && ok "$name" || fail "$name" "$problems"
}

fit base --no-cache "$tmp/data.csv"
fit_values "$tmp/base.json" > "$tmp/base.values"
fit base_rows --no-cache --no-collapse "$tmp/data.csv"
fit_values "$tmp/base_rows.json" > "$tmp/base_rows.values"

# TMPDIR a regular file: no cache file can be made there.
touch "$tmp/notadir"
TMPDIR=$tmp/notadir fit tmpdir_is_a_file "$tmp/data.csv"
fallback tmpdir_is_a_file base

# TMPDIR not writable (root writes anywhere: the check needs another user).
if [ "$(id -u)" -ne 0 ]; then
    mkdir -p "$tmp/ro" && chmod 555 "$tmp/ro"
    TMPDIR=$tmp/ro fit tmpdir_read_only --no-collapse "$tmp/data.csv"
    fallback tmpdir_read_only base_rows
    chmod 755 "$tmp/ro"
else
    ok "tmpdir_read_only (not checked: running as root)"
fi

# A write to the cache fails in the middle of the first pass (about 180 KB
# a block; the limit lets one block in).
limited() { (ulimit -f 300 && trap '' XFSZ && fit "$@" && exit "$rc"); rc=$?; }
limited full_in_first_pass --no-collapse --threads 2 "$tmp/data.csv"
fallback full_in_first_pass base_rows
limited full_in_first_pass_zstd --no-collapse --threads 1 "$tmp/data.csv.zst"
fallback full_in_first_pass_zstd base_rows
# ... in the first IRLS pass, which fills the cache after collapsing was given up
limited full_in_irls_pass --threads 2 "$tmp/data.csv"
fallback full_in_irls_pass base

# Standard input must be kept in TMPDIR: a clear failure, never a hang.
cat "$tmp/data.csv" | TMPDIR=$tmp/notadir "$bin" fit --quiet "${model[@]}" - > /dev/null 2> "$tmp/stdin.err"
rc=$?
if [ "$rc" -eq 3 ] && grep -q 'read only once' "$tmp/stdin.err" && grep -q 'TMPDIR' "$tmp/stdin.err"; then
    ok stdin_needs_tmpdir
else
    fail stdin_needs_tmpdir "exit $rc: $(head -c 300 "$tmp/stdin.err")"
fi
cat "$tmp/data.csv" | (ulimit -f 300 && trap '' XFSZ && exec "$bin" fit --quiet --no-collapse "${model[@]}" -) \
    > /dev/null 2> "$tmp/stdin_full.err"
rc=$?
if [ "$rc" -eq 3 ] && grep -q 'room' "$tmp/stdin_full.err"; then
    ok stdin_copy_needs_room
else
    fail stdin_copy_needs_room "exit $rc: $(head -c 300 "$tmp/stdin_full.err")"
fi
finish
