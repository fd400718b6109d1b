#!/usr/bin/env bash
# Input that cannot be read twice - a FIFO, a /dev/fd pipe (bash process
# substitution), standard input - must be fitted as the same file on disk
# is: the later passes reread a copy kept during the first pass.  Source of
# truth: the fit of the regular file, compared number for number (raw JSON
# text), as in determinism.sh.  `timeout` only guards against a fit that
# would block for ever reopening a FIFO; it is not a time limit on the fit.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
export TMPDIR=$tmp

# 20,000 rows; `age` has many values, so the rows do not collapse into
# covariate patterns and the fit reads its input more than once.
awk 'BEGIN { print "claims,region,age,years";
             for (i = 0; i < 20000; i++)
                 printf "%d,%s,%d.%d,%d.5\n", (i * 7) % 5, substr("abcd", i % 4 + 1, 1), 20 + i % 61, i % 10, 1 + i % 3 }' \
    > "$tmp/data.csv"
zstd -q -f "$tmp/data.csv" -o "$tmp/data.csv.zst"
model=(--outcome claims --family poisson --factor region --numeric age --exposure years)


"$bin" fit --quiet --no-cache --json "$tmp/base.json" "${model[@]}" "$tmp/data.csv" > /dev/null 2> "$tmp/base.err" ||
    fail base "exit $?: $(head -c 300 "$tmp/base.err")"
fit_values "$tmp/base.json" > "$tmp/base.values"

# fit_fifo NAME SOURCE_COMMAND [fit options...]: the input is a FIFO the command writes
fit_fifo() {
    local name=$1 src=$2
    shift 2
    rm -f "$tmp/fifo"
    mkfifo "$tmp/fifo"
    bash -c "$src" > "$tmp/fifo" &
    local writer=$!
    timeout 120 "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "$@" "$tmp/fifo" > /dev/null 2> "$tmp/$name.err"
    local rc=$?
    kill "$writer" 2> /dev/null
    wait "$writer" 2> /dev/null
    same_as_base "$name" "$rc"
}

fit_fifo fifo_no_cache "cat '$tmp/data.csv'" --no-cache --threads 2
fit_fifo fifo_cache "cat '$tmp/data.csv'" --threads 2
fit_fifo fifo_zstd_no_cache "cat '$tmp/data.csv.zst'" --no-cache --threads 1 --buffer-size 16

timeout 120 "$bin" fit --quiet --no-cache --json "$tmp/devfd_no_cache.json" "${model[@]}" <(zstd -dc "$tmp/data.csv.zst") \
    > /dev/null 2> "$tmp/devfd_no_cache.err"
same_as_base devfd_no_cache $?

timeout 120 "$bin" fit --quiet --no-cache --in-memory --json "$tmp/devfd_in_memory.json" "${model[@]}" \
    <(cat "$tmp/data.csv.zst") > /dev/null 2> "$tmp/devfd_in_memory.err"
same_as_base devfd_in_memory $?

# A character device is read once too: /dev/stdin on a pipe.
cat "$tmp/data.csv" | timeout 120 "$bin" fit --quiet --no-cache --json "$tmp/dev_stdin_pipe.json" "${model[@]}" /dev/stdin \
    > /dev/null 2> "$tmp/dev_stdin_pipe.err"
same_as_base dev_stdin_pipe $?

# Nothing is left behind in TMPDIR (the copy is unlinked at once).
left=$(find "$tmp" -name 'millrace-*' | head -n 3)
[ -z "$left" ] && ok no_temporary_left || fail no_temporary_left "$left"
finish
