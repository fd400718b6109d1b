#!/usr/bin/env bash
# One writer per JSON: a run holds PATH.lock (an fcntl lock) from its start
# until the JSON is in place; a second run writing PATH (under any name:
# a symbolic link too) is refused at once with exit 3, naming the holder's
# pid and host; another PATH is free; the holder removes PATH.lock as it
# lets go; the lock dies with its holder even under kill -9, and the file
# that holder left is taken (and removed) by the next run.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
model=(--quiet --outcome events --family poisson --exposure followup --factor sex --factor region --numeric year)
"$root/build/synth" --rows 200000 --seed 3 --out "$tmp/data.csv" || fail synth "exit $?"
mkfifo "$tmp/fifo"

# holder: a run reading the FIFO, fed half its rows and held there
start_holder() {
    "$bin" fit "${model[@]}" --json "$tmp/fit.json" "$tmp/fifo" >/dev/null 2>"$tmp/holder.err" &
    holder=$!
    exec 3>"$tmp/fifo"
    head -c 3000000 "$tmp/data.csv" >&3
    for _ in $(seq 100); do [ -s "$tmp/fit.json.lock" ] && break; sleep 0.05; done
}

start_holder
"$bin" fit "${model[@]}" --json "$tmp/fit.json" "$tmp/data.csv" >/dev/null 2>"$tmp/second.err"
rc=$?
if [ $rc = 3 ] && grep -qE "fit\.json: another run is writing it \(pid $holder on [^ ]+ since " "$tmp/second.err"; then
    ok "second writer refused, naming the first (pid $holder)"
else
    fail "second writer" "exit $rc: $(cat "$tmp/second.err")"
fi
ln -s fit.json "$tmp/link.json"
"$bin" fit "${model[@]}" --json "$tmp/link.json" "$tmp/data.csv" >/dev/null 2>"$tmp/link.err"
check "through a symbolic link too (exit 3)" test $? = 3
"$bin" fit "${model[@]}" --json "$tmp/other.json" "$tmp/data.csv" >/dev/null 2>"$tmp/other.err"
check "another JSON path is free" test $? = 0
tail -c +3000001 "$tmp/data.csv" >&3
exec 3>&-
wait "$holder"
check "the holder finishes and writes its JSON" test $? = 0 -a -s "$tmp/fit.json"
check "the holder removed its lock file" test ! -e "$tmp/fit.json.lock"
"$bin" fit "${model[@]}" --json "$tmp/fit.json" "$tmp/data.csv" >/dev/null 2>"$tmp/after.err"
check "after it, the next run writes PATH" test $? = 0

# a holder killed outright leaves no lock behind
cp "$tmp/fit.json" "$tmp/before.json"
start_holder
{ kill -9 "$holder" && wait "$holder"; } 2>/dev/null
exec 3>&-
"$bin" fit "${model[@]}" --json "$tmp/fit.json" "$tmp/data.csv" >/dev/null 2>"$tmp/killed.err"
check "a holder killed by SIGKILL holds nothing (next run exit 0)" test $? = 0
check "and the file it left is gone with the next run" test ! -e "$tmp/fit.json.lock"
# a failed run leaves no lock file either
"$bin" fit "${model[@]}" --outcome nosuchcolumn --json "$tmp/failed.json" "$tmp/data.csv" >/dev/null 2>&1
check "a failed run leaves no lock file" test ! -e "$tmp/failed.json.lock" -a ! -e "$tmp/failed.json"
# a lock file that is not a regular file is refused, never replaced
rm -f "$tmp/x.json.lock"
mkdir "$tmp/x.json.lock"
"$bin" fit "${model[@]}" --json "$tmp/x.json" "$tmp/data.csv" >/dev/null 2>"$tmp/dir.err"
check "a directory as the lock file: exit 3" test $? = 3
finish
