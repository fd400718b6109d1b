#!/usr/bin/env bash
# SIGTERM, SIGINT, SIGHUP during a fit of 10^6 rows (build/synth): the fit
# ends at a block boundary with exit 128 + the signal's number, no
# temporary file in $TMPDIR or beside the JSON, and an earlier JSON
# untouched; a second signal ends the process at once (killed by it),
# still removing its temporary files and the JSON's lock file.
# Python drives the signals: a background job of a script ignores SIGINT.
# The fit is made long on purpose: its first pass reads the file 16 bytes
# at a time (about three million reads, over a second on this machine), so
# a signal 0.3 s in is mid-pass; a tolerance of 1e-300 keeps later passes
# going unless the deviance stops changing to the last bit.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
synth="$root/build/synth"
"$synth" --rows 1000000 --seed 7 --out "$tmp/big.csv" || fail synth "exit $?"
mkdir "$tmp/tmpdir" "$tmp/out"
echo '{"an": "earlier fit"}' >"$tmp/out/fit.json"
cp "$tmp/out/fit.json" "$tmp/earlier.json"

# run SIGNAL DELAY [SECOND-SIGNAL-AFTER] [stdin]: prints "returncode|stderr"
run() {
    TMPDIR="$tmp/tmpdir" /usr/bin/python3 - "$bin" "$tmp" "$@" <<'PY'
import os, signal, subprocess, sys, time
bin_, tmp, sig, delay = sys.argv[1], sys.argv[2], getattr(signal, sys.argv[3]), float(sys.argv[4])
second = float(sys.argv[5]) if len(sys.argv) > 5 and sys.argv[5] != "-" else None
stdin = len(sys.argv) > 6
cmd = [bin_, "fit", "--quiet", "--outcome", "events", "--family", "poisson", "--exposure", "followup",
       "--factor", "age_band", "--factor", "sex", "--factor", "region", "--numeric", "year", "--numeric", "age",
       "--no-collapse", "--no-cache", "--buffer-size", "16", "--tolerance", "1e-300", "--max-passes", "100", "--json", tmp + "/out/fit.json", "-" if stdin else tmp + "/big.csv"]
# a run under nohup inherits SIGHUP ignored, which millrace keeps ignored
# (README): the fit under test starts with every signal at its default
def defaults():
    for s in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
        signal.signal(s, signal.SIG_DFL)
p = subprocess.Popen(cmd, stdin=subprocess.PIPE if stdin else None, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                     preexec_fn=defaults)
if stdin:  # half the rows, then the signal while the first pass waits for more
    data = open(tmp + "/big.csv", "rb").read()
    p.stdin.write(data[: len(data) // 2])
    p.stdin.flush()
time.sleep(delay)
p.send_signal(sig)
if second is not None:
    time.sleep(second)
    p.send_signal(sig)
try:
    if stdin:
        p.stdin.write(data[len(data) // 2 :])
        p.stdin.close()
except BrokenPipeError:
    pass
out, err = p.communicate()
print("%d|%s|%d" % (p.returncode, err.decode().strip(), len(out)))
PY
}

no_leftovers() { # no_leftovers NAME
    local left
    left=$(ls -A "$tmp/tmpdir"; ls -A "$tmp/out" | grep -v '^fit\.json$')
    if [ -z "$left" ] && cmp -s "$tmp/out/fit.json" "$tmp/earlier.json"; then ok "$1: no temporary file, the JSON untouched"; else
        fail "$1" "left: $left; $(head -c 100 "$tmp/out/fit.json")"; fi
}

expect() { # expect NAME WANT-RC GOT
    local got=$3
    case $got in
    "$2|millrace: stopped by signal "*"; nothing written|0") ok "$1: exit $2, no report" ;;
    *) fail "$1" "got '$got'" ;;
    esac
}

expect "SIGTERM mid-pass" 143 "$(run SIGTERM 0.3)"
no_leftovers "SIGTERM mid-pass"
expect "SIGINT mid-pass" 130 "$(run SIGINT 0.3)"
no_leftovers "SIGINT mid-pass"
expect "SIGHUP mid-pass" 129 "$(run SIGHUP 0.3)"
no_leftovers "SIGHUP mid-pass"
expect "SIGTERM while standard input is copied (the spool)" 143 "$(run SIGTERM 0.3 - stdin)"
no_leftovers "SIGTERM while standard input is copied"
# a second signal does not wait for the block: the process dies of it (with
# its input held back, the first cannot have ended the run meanwhile: a
# run stops at the next block, and none comes)
got=$(run SIGTERM 0.5 0.3 stdin)
check "a second SIGTERM ends it at once (killed by the signal)" test "${got%%|*}" = -15
no_leftovers "second SIGTERM"
# the fit itself still works with the handler in place
"$bin" fit --quiet --outcome events --family poisson --exposure followup --factor sex --json "$tmp/out/fit.json" \
    "$tmp/big.csv" >/dev/null
check "an unsignalled fit writes its JSON" grep -q '"millrace-fit"' "$tmp/out/fit.json"
finish
