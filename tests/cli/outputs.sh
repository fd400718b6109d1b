#!/usr/bin/env bash
# Where outputs may go and what writing them leaves: --json never over an
# input (however named), never over anything but a regular file; links are
# followed and kept; modes and owners are kept; the report's write errors
# count; an interrupted write leaves no temporary file, and those a killed
# run left are swept.  The rules are those of millrace.h ("Output files")
# and README ("Output files"); exit codes 2 (usage) and 3 (I/O).
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin} # make asan-check runs it on the ASan build

cd "$tmp"
cp "$root/samples/falls.csv" "$root/samples/falls.model" .
mkdir keep && cp falls.csv falls.model keep/
fit=("$bin" fit --quiet -m falls.model)

# refuse NAME CODE 'text in stderr' PATH_TO_WATCH -- fit arguments...
# The fit must end with CODE and the message, PATH_TO_WATCH must be as it
# was (content and kind), and no temporary file may be left.
refuse() {
    local name=$1 code=$2 needle=$3 watch=$4
    shift 5
    local before after
    before=$(stat -c '%F %a' "$watch"; [ -f "$watch" ] && sha256sum < "$watch")
    "${fit[@]}" "$@" > "$name.out" 2> "$name.err"
    local rc=$?
    after=$(stat -c '%F %a' "$watch"; [ -f "$watch" ] && sha256sum < "$watch")
    if [ "$rc" -ne "$code" ]; then
        fail "$name" "exit $rc, expected $code: $(head -c 300 "$name.err")"
    elif ! grep -qF -- "$needle" "$name.err"; then
        fail "$name" "stderr lacks '$needle': $(head -c 300 "$name.err")"
    elif [ "$before" != "$after" ]; then
        fail "$name" "$watch changed"
    elif ls ./*.tmp-* > /dev/null 2>&1; then
        fail "$name" "temporary files left: $(ls ./*.tmp-*)"
    else
        ok "$name"
    fi
    # a failing build must not spoil the next case
    cp keep/falls.csv keep/falls.model .
}

refuse json_onto_input 2 "is the input file" falls.csv -- --json falls.csv falls.csv
refuse json_onto_input_other_name 2 "is the input file" falls.csv -- --json ./falls.csv "$tmp/falls.csv"
refuse json_onto_model_file 2 "is the input file falls.model" falls.model -- --json falls.model falls.csv
ln -s falls.csv link-to-data
refuse json_onto_link_to_input 2 "is the input file" falls.csv -- --json link-to-data falls.csv
ln falls.csv hardlink-to-data
refuse json_onto_hard_link_to_input 2 "is the input file" falls.csv -- --json hardlink-to-data falls.csv
refuse json_onto_standard_input 2 "standard input" falls.csv -- --json falls.csv - < falls.csv
mkfifo fifo
refuse json_onto_fifo 3 "is a FIFO" fifo -- --json fifo falls.csv
mkdir adir
refuse json_onto_directory 3 "is a directory" adir -- --json adir falls.csv
ln -s fifo link-to-fifo
refuse json_onto_link_to_fifo 3 "a FIFO" fifo -- --json link-to-fifo falls.csv
refuse json_into_missing_directory 3 "cannot create a file in" falls.csv -- --json nodir/fit.json falls.csv
if [ "$(id -u)" -eq 0 ]; then
    # a copy of /dev/null's node, so that a failure cannot harm the real one
    mknod nulldev c 1 3
    refuse json_onto_device 3 "is a character device" nulldev -- --json nulldev falls.csv
fi

# ---- what is written
"${fit[@]}" --json plain.json falls.csv > /dev/null
grep -q '"format": "millrace-fit"' plain.json && ok json_written || fail json_written "no JSON in plain.json"

echo old > target.json
ln -s target.json link.json
"${fit[@]}" --json link.json falls.csv > /dev/null
if [ -L link.json ] && [ "$(readlink link.json)" = target.json ] && grep -q millrace-fit target.json; then
    ok link_followed_and_kept
else
    fail link_followed_and_kept "link.json: $(stat -c %F link.json), target.json: $(head -c 40 target.json)"
fi
ln -s new-target.json dangling.json
"${fit[@]}" --json dangling.json falls.csv > /dev/null
[ -L dangling.json ] && grep -q millrace-fit new-target.json && ok dangling_link_writes_its_target ||
    fail dangling_link_writes_its_target "$(ls -l dangling.json new-target.json 2>&1)"

echo old > kept-mode.json
chmod 0644 kept-mode.json
(umask 077 && "${fit[@]}" --json kept-mode.json falls.csv > /dev/null)
mode=$(stat -c %a kept-mode.json)
[ "$mode" = 644 ] && grep -q millrace-fit kept-mode.json && ok existing_mode_kept || fail existing_mode_kept "mode $mode"
(umask 027 && "${fit[@]}" --json new-mode.json falls.csv > /dev/null)
mode=$(stat -c %a new-mode.json)
[ "$mode" = 640 ] && ok new_file_mode_follows_umask || fail new_file_mode_follows_umask "mode $mode, umask 027"
if [ "$(id -u)" -eq 0 ] && getent passwd nobody > /dev/null; then
    echo old > owned.json
    chown nobody owned.json
    "${fit[@]}" --json owned.json falls.csv > /dev/null
    owner=$(stat -c %U owned.json)
    [ "$owner" = nobody ] && ok existing_owner_kept || fail existing_owner_kept "owner $owner"
fi

# ---- a disk that fills up during the write (a 32 KiB file system; root only)
mkdir small
if [ "$(id -u)" -eq 0 ] && mount -t tmpfs -o size=32k tmpfs small 2> /dev/null; then
    echo old > small/fit.json
    "${fit[@]}" --json small/fit.json falls.csv > /dev/null 2> small.err
    rc=$?
    left=$(ls small | tr '\n' ' ')
    content=$(cat small/fit.json)
    umount small
    if [ "$rc" -eq 3 ] && [ "$content" = old ] && [ "$left" = "fit.json " ] && grep -q 'No space' small.err; then
        ok full_disk_keeps_old_output
    else
        fail full_disk_keeps_old_output "exit $rc, files: $left, content: ${content:0:20}, $(head -c 200 small.err)"
    fi
fi

# ---- the report's write errors (larger than the stdio buffer)
"${fit[@]}" falls.csv > /dev/full 2> full.err
rc=$?
[ "$rc" -eq 3 ] && grep -q 'standard output' full.err && ok report_to_full_disk ||
    fail report_to_full_disk "exit $rc: $(head -c 200 full.err)"

# ---- stale temporary files of killed runs
pid_max=$(cat /proc/sys/kernel/pid_max)
dead=$((pid_max + 1)) # no process can have it
touch "swept.json.tmp-$dead-aB3xY9" "swept.json.tmp-$$-aB3xY9" "other.json.tmp-$dead-aB3xY9" \
    "swept.json.tmp-$dead-aB3xY9x" "swept.json.tmp-$dead-aB3"
"${fit[@]}" --json swept.json falls.csv > /dev/null
left=$(ls swept.json.tmp-* other.json.tmp-* 2> /dev/null | sort | tr '\n' ' ')
want=$(printf '%s\n' "other.json.tmp-$dead-aB3xY9" "swept.json.tmp-$$-aB3xY9" "swept.json.tmp-$dead-aB3" \
    "swept.json.tmp-$dead-aB3xY9x" | sort | tr '\n' ' ')
[ "$left" = "$want" ] && ok stale_temporary_swept || fail stale_temporary_swept "left: $left"
rm -f ./*.tmp-*

# ---- a signal while the JSON is being written
# A factor of 1000 levels: a covariance of 10^6 numbers takes long enough
# to write that the temporary file is seen; if a run still ends before it
# is, the next one tries again.
awk 'BEGIN { print "y,g"; for (i = 0; i < 3000; i++) printf "%d,L%04d\n", (i * 7) % 5 + 1, i % 1000 }' > wide.csv
echo old > wide.json
caught=0
for attempt in 1 2 3 4 5; do
    "$bin" fit --quiet --outcome y --family poisson --factor g --json wide.json wide.csv > /dev/null 2>&1 &
    pid=$!
    while kill -0 "$pid" 2> /dev/null; do
        if compgen -G "wide.json.tmp-*" > /dev/null; then
            kill -TERM "$pid"
            caught=1
            break
        fi
        sleep 0.005
    done
    wait "$pid"
    rc=$?
    # a run that finished between the look and the signal proves nothing
    [ "$caught" -eq 1 ] && [ "$rc" -ne 0 ] && break
    caught=0
    echo old > wide.json
done
if [ "$caught" -eq 0 ]; then
    fail signal_during_write "never saw the temporary file in 5 runs"
elif [ "$rc" -ne 143 ]; then
    fail signal_during_write "exit $rc, expected 143 (SIGTERM)"
elif compgen -G "wide.json.tmp-*" > /dev/null; then
    fail signal_during_write "left $(ls wide.json.tmp-*)"
elif [ "$(cat wide.json)" != old ] && ! /usr/bin/python3 -c 'import json, sys; json.load(open(sys.argv[1]))' wide.json; then
    fail signal_during_write "wide.json is neither the earlier file nor a whole new one"
else
    ok signal_during_write
fi

finish
