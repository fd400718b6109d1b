#!/usr/bin/env bash
# fit --checkpoint: a fit of 10^6 rows (build/synth) killed with SIGKILL at
# points a seeded random generator picks - inside the first pass, inside a
# later pass, between two passes, in the middle of writing a checkpoint,
# and twice in a row - then run again with the same command, goes on from
# its last finished pass and writes the JSON of a fit that ran through,
# byte for byte (the run's audit trail and the timings aside).  A
# checkpoint cut short, one made for another input, one whose input was
# touched since, and one for other options are not used: each says why in
# one line and the fit starts afresh, to the same bytes.  Standard input is
# refused, and so is a set of files.  With robust standard errors by clusters, a fit killed within an
# IRLS pass or within the final pass that adds up the sandwich's meat goes
# on to the same bytes too.  A fit killed once its passes are over, before
# its JSON is written, goes on without reading the data again.  The kills
# come from the test-only MILLRACE_TEST_KILL hook
# (README, "Scheduled reruns"): the process sends itself SIGKILL at a
# chosen pass and row, at its N-th checkpoint, or with the fit made just
# before its outputs are written (publish), as kill -9 from outside
# would then; nothing here is timed.  MILLRACE=build/asan/millrace runs it
# under ASan+UBSan.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
bin=${MILLRACE:-$bin}
synth="$root/build/synth"
seed=${CHECKPOINT_SEED:-20261205}
"$synth" --rows 1000000 --seed 11 --out "$tmp/big.csv" || fail synth "exit $?"
"$synth" --rows 100000 --seed 12 --out "$tmp/other.csv" || fail synth "exit $?"
ck="$tmp/fit.ckpt"
data="$tmp/big.csv"
# case B of bench/run.py, never collapsed, to a tight tolerance: several
# passes over the file
model=(--outcome events --family poisson --exposure followup --factor age_band --factor sex --factor region
       --numeric deprivation --numeric year --numeric age --numeric bmi --interact "age sex" --no-collapse
       --tolerance 1e-13 --threads 2)

# fit NAME [env...]: the command, its JSON $tmp/NAME.json, stderr $tmp/NAME.err; prints the exit code
fit() {
    local name=$1 rc
    shift
    env "$@" "$bin" fit "${model[@]}" --checkpoint "$ck" --json "$tmp/$name.json" "$data" \
        >/dev/null 2>"$tmp/$name.err"
    rc=$?
    echo "$rc"
}

# The JSON without the run's audit trail (it says when, and whether it was
# resumed) and the timings: the rest must be the same bytes.
strip() {
    /usr/bin/python3 - "$1" <<'PY'
import re, sys
out, skip = [], None
for line in open(sys.argv[1]):
    if skip is not None:
        if re.match(skip, line):
            skip = None
        continue
    m = re.match(r'(\s*)"(run|pass_seconds)": [\[{]\s*$', line)
    if m:
        skip = m.group(1) + r'[\]}],?\s*$'
        continue
    if re.match(r'\s*"(seconds|rows_per_second)":', line):
        continue
    out.append(line)
sys.stdout.write("".join(out))
PY
}

resumed_after() { # the JSON's run.resumed.after_pass, or 0
    /usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["run"].get("resumed", {}).get("after_pass", 0))' "$1"
}

# same NAME WANT-RESUMED: NAME.json is the reference's bytes, resumed as said
same() {
    local name=$1 want=$2 got
    got=$(resumed_after "$tmp/$name.json" 2>/dev/null)
    if ! strip "$tmp/$name.json" | cmp -s - "$tmp/ref.stripped"; then
        fail "$name" "JSON differs: $(strip "$tmp/$name.json" | diff "$tmp/ref.stripped" - | head -n 4 | tr '\n' '|')"
    elif [ "$got" != "$want" ]; then
        fail "$name" "resumed after pass $got, not $want; $(head -c 300 "$tmp/$name.err")"
    elif [ -e "$ck" ] || ls "$tmp" | grep -q 'ckpt\.\(tmp\|lock\)'; then
        fail "$name" "left behind: $(ls "$tmp" | grep ckpt | tr '\n' ' ')"
    else
        ok "$name: the reference's bytes, resumed after pass $want"
    fi
}

killed() { # killed NAME RC: the run was killed by SIGKILL
    if [ "$2" -eq 137 ]; then ok "$1: killed"; else fail "$1" "exit $2, not killed: $(head -c 300 "$tmp/$1.err")"; fi
}

rm -f "$ck"
rc=$("$bin" fit "${model[@]}" --json "$tmp/ref.json" "$tmp/big.csv" 2>"$tmp/ref.err" >/dev/null; echo $?)
[ "$rc" -eq 0 ] || fail reference "exit $rc: $(cat "$tmp/ref.err")"
strip "$tmp/ref.json" >"$tmp/ref.stripped"
passes=$(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["convergence"]["passes"])' "$tmp/ref.json")
[ "$passes" -ge 5 ] && ok "reference: $passes passes" || fail reference "only $passes passes"

# the kill points, drawn from the seed: [name, MILLRACE_TEST_KILL, pass resumed after]
points=$(/usr/bin/python3 - "$seed" "$passes" <<'PY'
import random, sys
r = random.Random(int(sys.argv[1])); n = int(sys.argv[2])
k = r.randint(2, n - 1); c = r.randint(1, n - 2); d = r.randint(2, n - 1)
print("first-pass pass:1:%d 0" % r.randint(1, 999999))
print("pass-%d pass:%d:%d %d" % (k, k, r.randint(1, 999999), k - 1))
print("after-checkpoint-%d checkpoint:%d:after %d" % (c, c, c))
print("writing-checkpoint-%d checkpoint:%d:during %d" % (d, d, d - 1))
PY
)
while read -r name hook want; do
    rm -f "$ck"
    killed "$name" "$(fit "$name.killed" MILLRACE_TEST_KILL="$hook")"
    rc=$(fit "$name")
    [ "$rc" -eq 0 ] || fail "$name" "rerun exit $rc: $(head -c 300 "$tmp/$name.err")"
    same "$name" "$want"
done <<<"$points"

# killed once its passes are over, before its outputs were in place: just
# after the checkpoint that follows the last IRLS pass (the passes-th), and
# with the fit made, just before the JSON is written (publish).  The
# checkpoint outlives the fit until the JSON and the run log are in place,
# so the rerun goes on after its last pass and reads no data: it is armed
# to kill itself at its next pass (pass passes + 1) and still finishes.
for hook in "checkpoint:$passes:after" publish; do
    name=done-${hook%%:*}
    rm -f "$ck"
    killed "$name" "$(fit "$name.killed" MILLRACE_TEST_KILL="$hook")"
    [ -e "$ck" ] && ok "$name: the checkpoint outlives the fit" || fail "$name" "no checkpoint after the kill"
    [ "$name" = done-checkpoint ] && echo "# with the last pass's totals it takes $(stat -c %s "$ck") bytes"
    [ ! -e "$tmp/$name.json" ] || fail "$name" "a JSON was written before the kill"
    rc=$(fit "$name" MILLRACE_TEST_KILL=pass:$((passes + 1)):0)
    [ "$rc" -eq 0 ] || fail "$name" "rerun exit $rc (137: it read the data again): $(head -c 300 "$tmp/$name.err")"
    same "$name" "$passes"
done
# with a run log: the checkpoint goes once the log's line is written too
rm -f "$ck"
model+=(--run-log "$tmp/runs.log")
killed logged.killed "$(fit logged.killed MILLRACE_TEST_KILL=publish)"
rc=$(fit logged MILLRACE_TEST_KILL=pass:$((passes + 1)):0)
[ "$rc" -eq 0 ] && [ "$(grep -c . "$tmp/runs.log" 2>/dev/null)" = 1 ] || fail logged "exit $rc, log: $(cat "$tmp/runs.log")"
same logged "$passes"
unset 'model[-1]' 'model[-1]'

# killed twice: after the first checkpoint, then within the third pass
rm -f "$ck"
killed twice.1 "$(fit twice.1 MILLRACE_TEST_KILL=checkpoint:1:after)"
killed twice.2 "$(fit twice.2 MILLRACE_TEST_KILL=pass:3:500000)"
size=$(stat -c %s "$ck")
rc=$(fit twice)
same twice 2
ncoef=$(/usr/bin/python3 -c 'import json,sys; print(len(json.load(open(sys.argv[1]))["coefficients"]))' "$tmp/ref.json")
echo "# the checkpoint of this fit (10^6 rows in 62 blocks, $ncoef coefficients) takes $size bytes"

# refused checkpoints: each says why and the fit starts afresh, to the same bytes
refused() { # refused NAME WHY
    local rc
    rc=$(fit "$1")
    if [ "$rc" -ne 0 ]; then fail "$1" "exit $rc: $(head -c 300 "$tmp/$1.err")"; return; fi
    if grep -q "checkpoint .*$2.*starts afresh" "$tmp/$1.err" && [ "$(grep -c . "$tmp/$1.err")" -eq 1 ]; then
        ok "$1: said in one line: $(cat "$tmp/$1.err")"
    else fail "$1" "stderr: $(cat "$tmp/$1.err")"; fi
    same "$1" 0
}
rm -f "$ck"
killed cut.killed "$(fit cut.killed MILLRACE_TEST_KILL=checkpoint:2:after)"
head -c $(($(stat -c %s "$ck") - 100)) "$ck" >"$tmp/cut" && mv "$tmp/cut" "$ck"
refused truncated "cut short"
# (a whole fit of the other file removes its checkpoint: killed after its first)
killed other.killed "$(env MILLRACE_TEST_KILL=checkpoint:1:after "$bin" fit "${model[@]}" --checkpoint "$ck" \
    "$tmp/other.csv" >/dev/null 2>"$tmp/other.killed.err"; echo $?)"
refused other-input "made for another input file"
killed touched.killed "$(fit touched.killed MILLRACE_TEST_KILL=checkpoint:1:after)"
touch -d '2020-01-01' "$tmp/big.csv" # the JSON says the input's time: a new reference
"$bin" fit "${model[@]}" --json "$tmp/ref.json" "$tmp/big.csv" >/dev/null 2>&1 || fail reference "again"
strip "$tmp/ref.json" >"$tmp/ref.stripped"
refused touched-input "size or time changed"
killed options.killed "$(fit options.killed MILLRACE_TEST_KILL=checkpoint:1:after)"
model+=(--level 0.9)
rc=$(fit options)
grep -q "another model or other options" "$tmp/options.err" && [ "$rc" -eq 0 ] && ok "other options: said" ||
    fail "other options" "exit $rc: $(cat "$tmp/options.err")"

# standard input cannot be read again after a kill: refused
rc=$(head -n 1000 "$tmp/big.csv" | "$bin" fit "${model[@]}" --checkpoint "$ck" - >/dev/null 2>"$tmp/stdin.err"; echo $?)
[ "$rc" -eq 2 ] && grep -q "read only once" "$tmp/stdin.err" && ok "standard input refused" ||
    fail "standard input" "exit $rc: $(cat "$tmp/stdin.err")"
# a set of files (or a directory) is refused: a checkpoint records one file
head -n 1000 "$tmp/big.csv" >"$tmp/a.csv"
head -n 1 "$tmp/big.csv" >"$tmp/b.csv" && sed -n 1001,2000p "$tmp/big.csv" >>"$tmp/b.csv"
rc=$("$bin" fit "${model[@]}" --checkpoint "$ck" "$tmp/a.csv" "$tmp/b.csv" >/dev/null 2>"$tmp/set.err"; echo $?)
[ "$rc" -eq 2 ] && grep -q "a set of 2 files" "$tmp/set.err" && [ ! -e "$ck" ] && ok "a set of files refused" ||
    fail "set of files" "exit $rc: $(cat "$tmp/set.err")"
# a factor declared many (2,000 areas): its levels' coefficients travel in
# the IRLS state, its first pass's levels in every checkpoint (encoded
# before the workers' copies are dropped), the last pass's level totals
# and the sandwich's level rows in the finished stages; killed inside an
# IRLS pass, after the last one and after the robust pass, each rerun gives
# the reference's bytes, the last two without reading the data again
/usr/bin/python3 "$root/tests/cli/areas.py" "$tmp/areas.csv" 60000 2000 5
saved=("${model[@]}")
model=(--outcome y --family poisson --exposure py --numeric age --factor "area many" --factor sex --tolerance 1e-13
       --threads 2 --robust hc1 --many-means)
data="$tmp/areas.csv"
rm -f "$ck"
"$bin" fit "${model[@]}" --json "$tmp/ref.json" "$data" >/dev/null 2>"$tmp/ref.err" ||
    fail "many reference" "$(cat "$tmp/ref.err")"
strip "$tmp/ref.json" >"$tmp/ref.stripped"
passes=$(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["convergence"]["passes"])' "$tmp/ref.json")
for point in "pass:3:20000 2" "checkpoint:$((passes - 1)):after $((passes - 1))" "checkpoint:$passes:after $passes"; do
    read -r hook want <<<"$point"
    name=many-${hook%%:*}-${want}
    rm -f "$ck"
    killed "$name.killed" "$(fit "$name.killed" MILLRACE_TEST_KILL="$hook")"
    rc=$(fit "$name" MILLRACE_TEST_KILL=pass:$((passes + 1)):0)
    [ "$rc" -eq 0 ] || fail "$name" "rerun exit $rc: $(head -c 300 "$tmp/$name.err")"
    same "$name" "$want"
done
model=("${saved[@]}")
data="$tmp/big.csv"

# robust standard errors by clusters of region (not grouped: held in a
# table), from a final pass at the converged coefficients: killed inside an
# IRLS pass and inside that final pass, each goes on to the reference's
# bytes, robust object included; the robust type changed is another option
model+=(--robust hc1 --cluster region)
rm -f "$ck"
"$bin" fit "${model[@]}" --json "$tmp/ref.json" "$tmp/big.csv" >/dev/null 2>"$tmp/ref.err" ||
    fail "robust reference" "$(cat "$tmp/ref.err")"
strip "$tmp/ref.json" >"$tmp/ref.stripped"
grep -q '"robust"' "$tmp/ref.stripped" && ok "robust reference: a robust object" || fail "robust reference" "no robust object"
passes=$(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["convergence"]["passes"])' "$tmp/ref.json")
killed robust-irls.killed "$(fit robust-irls.killed MILLRACE_TEST_KILL=pass:3:400000)"
rc=$(fit robust-irls)
[ "$rc" -eq 0 ] || fail robust-irls "rerun exit $rc: $(head -c 300 "$tmp/robust-irls.err")"
same robust-irls 2
# the final pass is the last one counted; the last checkpoint came after
# the last IRLS pass, the one before: the rerun reads the file once (it
# would die at a second pass)
killed robust-meat.killed "$(fit robust-meat.killed MILLRACE_TEST_KILL=pass:$passes:600000)"
rc=$(fit robust-meat MILLRACE_TEST_KILL=pass:$((passes + 1)):0)
[ "$rc" -eq 0 ] || fail robust-meat "rerun exit $rc: $(head -c 300 "$tmp/robust-meat.err")"
same robust-meat $((passes - 1))
# killed after the checkpoint that follows the final pass (the sandwich's
# sums in it): the rerun reads no data
killed robust-done.killed "$(fit robust-done.killed MILLRACE_TEST_KILL=checkpoint:$passes:after)"
rc=$(fit robust-done MILLRACE_TEST_KILL=pass:$((passes + 1)):0)
[ "$rc" -eq 0 ] || fail robust-done "rerun exit $rc: $(head -c 300 "$tmp/robust-done.err")"
same robust-done "$passes"
killed robust-type.killed "$(fit robust-type.killed MILLRACE_TEST_KILL=checkpoint:2:after)"
model+=(--robust hc0)
rc=$(fit robust-type)
grep -q "another model or other options" "$tmp/robust-type.err" && [ "$rc" -eq 0 ] &&
    [ "$(resumed_after "$tmp/robust-type.json")" = 0 ] && ok "robust type changed: said, started afresh" ||
    fail "robust type changed" "exit $rc: $(cat "$tmp/robust-type.err")"
# a Tweedie power by profile likelihood: the powers' fits run side by
# side from one read and write no checkpoint; a note says so
rm -f "$ck"
rc=$("$bin" fit --quiet --outcome events --family "tweedie power=profile" --exposure followup --factor sex \
    --numeric age --checkpoint "$ck" --json "$tmp/profile.json" "$tmp/other.csv" 2>"$tmp/profile.err" >/dev/null; echo $?)
[ "$rc" -eq 0 ] && grep -qx "millrace: checkpoint $ck: not written: the power profile's fits run side by side from one read" \
    "$tmp/profile.err" && [ ! -e "$ck" ] && ok "a profile writes no checkpoint, and says so" ||
    fail profile "exit $rc, checkpoint $( [ -e "$ck" ] && echo left || echo gone): $(cat "$tmp/profile.err")"
# a family parameter estimated alongside (negative binomial theta) and a
# series log-likelihood (Tweedie): killed within pass 3, the rerun gives the
# reference's bytes (the parameter travels in the IRLS state)
for fam in "negative-binomial theta=estimate" "tweedie power=1.5"; do
    name=${fam%% *}
    model=(--outcome events --family "$fam" --exposure followup --factor age_band --factor sex --factor region
           --numeric deprivation --numeric age --no-collapse --threads 2)
    rm -f "$ck"
    "$bin" fit "${model[@]}" --json "$tmp/ref.json" "$tmp/big.csv" >/dev/null 2>"$tmp/ref.err" ||
        fail "$name reference" "$(cat "$tmp/ref.err")"
    strip "$tmp/ref.json" >"$tmp/ref.stripped"
    killed "$name.killed" "$(fit "$name.killed" MILLRACE_TEST_KILL=pass:3:400000)"
    rc=$(fit "$name")
    [ "$rc" -eq 0 ] || fail "$name" "rerun exit $rc: $(head -c 300 "$tmp/$name.err")"
    same "$name" 2
done
finish
