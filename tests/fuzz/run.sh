#!/bin/sh
# Runs the libFuzzer targets one after another (the machine's cores are shared).
# Usage: tests/fuzz/run.sh check|long SECONDS BUILD_DIR TARGET...
#   check: each target first replays every input in tests/fuzz/regressions/TARGET
#          (inputs that once failed), then fuzzes from its seeds for SECONDS into a
#          scratch corpus that is thrown away, with a fixed random seed: every run
#          of make check explores the same inputs in the same order (a slower
#          machine fewer of them), so a submission that passed here passes in CI,
#          and new ground is for `make fuzz`;
#   long:  fuzzes for SECONDS into BUILD_DIR/corpus/TARGET, which is kept and grows
#          from run to run, and adds the run's executions to BUILD_DIR/executions.
# A finding stops the run: the input is saved as BUILD_DIR/artifacts/TARGET-*.
mode=$1 seconds=$2 dir=$3
shift 3
here=$(dirname "$0")
mkdir -p "$dir/artifacts" "$dir/logs"
status=0
for t in "$@"; do
    bin="$dir/fuzz_$t"
    seeds="$here/corpus/$t"
    regressions="$here/regressions/$t"
    log="$dir/logs/$t.log"
    if [ -d "$regressions" ] && [ -n "$(ls -A "$regressions")" ]; then
        if ! "$bin" "$regressions"/* > "$log" 2>&1; then
            echo "fuzz $t: a past finding fails again (log: $log)"; tail -n 30 "$log"; status=1; continue
        fi
        echo "fuzz $t: $(ls "$regressions" | wc -l) past findings replayed"
    fi
    if [ "$mode" = long ]; then
        work="$dir/corpus/$t"
    else
        work=$(mktemp -d "${TMPDIR:-/tmp}/millrace-fuzz-$t.XXXXXX") || exit 1
    fi
    mkdir -p "$work"
    # -timeout: an input running for seconds is a hang; -rss_limit_mb: one that
    # wants gigabytes is a finding too.  -max_len leaves room for the longest
    # seeds; the targets bound their own work beyond that.
    # rowsplit: none of the 803 units of its committed corpus, kept by runs
    # at 16384, is longer than its longest seed (1101 bytes); its long texts
    # come from repeating a short one (fuzz_rowsplit.c), and a long input
    # costs it time on every pass over the text.
    max_len=16384
    [ "$t" = rowsplit ] && max_len=4096
    fixed_seed=
    [ "$mode" = long ] || fixed_seed=-seed=20261204
    "$bin" $fixed_seed -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -max_len="$max_len" \
        -print_final_stats=1 -artifact_prefix="$dir/artifacts/$t-" "$work" "$seeds" > "$log" 2>&1
    rc=$?
    runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n 1)
    [ "$mode" = long ] || rm -rf "$work"
    if [ "$rc" -ne 0 ]; then
        echo "fuzz $t: FINDING after ${runs:-?} runs (exit $rc; log: $log)"; grep -m 5 -E 'ERROR|FUZZ FAIL|runtime error|==ERROR' "$log"
        ls -t "$dir/artifacts/$t-"* 2>/dev/null | head -n 1
        status=1
        continue
    fi
    if [ "$mode" = long ]; then
        total=$(awk -v t="$t" '$1 == t { s += $2 } END { print s + 0 }' "$dir/executions" 2>/dev/null)
        echo "$t ${runs:-0}" >> "$dir/executions"
        echo "fuzz $t: ${runs:-?} runs in ${seconds}s, no finding ($(( ${total:-0} + ${runs:-0} )) in all kept runs)"
    else
        echo "fuzz $t: ${runs:-?} runs in ${seconds}s, no finding"
    fi
done
exit $status
