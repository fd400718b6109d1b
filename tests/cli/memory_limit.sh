#!/usr/bin/env bash
# Under an address-space limit (ulimit -v) a fit either works or ends with
# the documented out-of-memory exit (8) and one line saying so; it never
# hangs and never reports an internal error.  The sample fit itself needs
# under 45 MB, but OpenBLAS's allocator, which the solver used to reach
# through dpotrf (and the map back through dgemv/dgemm), retries a 128 MiB
# buffer for ever when it is refused; a refused thread stack was exit 9.
# The second data set has a 400-level factor (401 coefficients), large
# enough that BLAS's matrix-vector product would have taken that buffer too.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# limited NAME MB -- fit arguments: the fit in a subshell under ulimit -v
limited() {
    local name=$1 mb=$2 rc
    shift 3
    (ulimit -v $((mb * 1024)) && exec timeout 60 "$bin" fit --quiet "$@") > /dev/null 2> "$tmp/$name.err"
    rc=$?
    case $rc in
    0) ok "$name: fitted under ${mb} MB" ;;
    8)
        if [ "$(wc -l < "$tmp/$name.err")" -eq 1 ] && grep -q "out of memory" "$tmp/$name.err"; then
            ok "$name: exit 8 under ${mb} MB ($(head -c 120 "$tmp/$name.err"))"
        else
            fail "$name" "exit 8 without one out-of-memory line: $(head -c 300 "$tmp/$name.err")"
        fi
        ;;
    124) fail "$name" "still running after 60 s under ${mb} MB (a hang)" ;;
    *) fail "$name" "exit $rc under ${mb} MB: $(head -c 300 "$tmp/$name.err")" ;;
    esac
}

awk 'BEGIN {
    print "y,f,x"
    for (i = 0; i < 40000; i++) printf "%d,L%03d,%.3f\n", (i * 7 + int(i / 400)) % 5, (i * 13) % 400, (i % 97) / 10
}' > "$tmp/wide.csv"

for mb in 80 150 300; do
    limited "sample_${mb}mb" $mb -- --model "$root/samples/falls.model" "$root/samples/falls.csv.zst"
    limited "wide_${mb}mb" $mb -- --outcome y --family poisson --factor f --numeric x "$tmp/wide.csv"
done
# with room for its threads the sample must fit, not just fail cleanly
limited sample_one_thread_150mb 150 -- --threads 1 --model "$root/samples/falls.model" "$root/samples/falls.csv.zst"
if [ -s "$tmp/sample_one_thread_150mb.err" ]; then
    fail sample_fits_150mb "did not fit under 150 MB with one thread: $(head -c 300 "$tmp/sample_one_thread_150mb.err")"
fi

finish
