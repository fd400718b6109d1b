#!/usr/bin/env bash
# Several files read as one data set, and zstd files of many frames read by
# several threads.
#
# Sets: three files (plain, zstd, gzip, each with the header) fit and score
# exactly as the one file holding their rows: the JSON is the same byte for
# byte but for the input's identity (input.*), the run's audit trail and
# timings; a directory is the same set (hidden files and subdirectories
# passed over).  input.set.files records each file: its checksum is the
# checksum of that file alone (tests/cli/checksum.py), and input.checksum
# is FNV-1a 64 over those checksums as little-endian words (millrace.h).
# A header that differs, a truncated gzip member, a damaged zstd frame, a
# bad value: one line naming the file (and its own line), exit 4 (5 for
# the value).  Standard input in a set: exit 2; alone it still works.
#
# Frames: a file written by pzstd (a skippable frame before each frame,
# no content size) and one written here as many small frames cut anywhere
# (`split -b` pieces through zstd: through a pipe, no content size; from
# files, with it) fit to the same bits as the plain text at 1, 2 and 3
# threads.  Source of truth throughout: the fit of the plain concatenation;
# the zstd, pzstd and gzip tools are the independent compressors.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
# asan-check and tsan-check run it with their builds as $MILLRACE
bin=${MILLRACE:-$bin}
export TMPDIR=$tmp
cd "$tmp" || exit 1

/usr/bin/python3 - <<'EOF'
import random
random.seed(19)
with open("all.csv", "w") as f:
    f.write("claims,age,region,exposure\n")
    for i in range(52000):
        f.write("%d,%.2f,R%d,%.3f\n" % (random.randint(0, 4), random.uniform(18, 90), random.randint(1, 6),
                                        random.uniform(0.1, 2.0)))
EOF
head -n 1 all.csv > header
mkdir set
{ cat header; sed -n '2,20001p' all.csv; } > set/a.csv
{ cat header; sed -n '20002,37001p' all.csv; } | zstd -q -c > set/b.csv.zst
{ cat header; sed -n '37002,$p' all.csv; } | gzip -n -c > set/c.csv.gz
model=(--outcome claims --numeric age --factor region --exposure exposure --family poisson)

# strip JSON: the fit without what names its input or its run
strip() {
    /usr/bin/python3 -c '
import json, sys
d = json.load(open(sys.argv[1]), parse_float=str, parse_int=str)
d.pop("input"); d.pop("run", None)
c = d["convergence"]
for k in ("seconds", "pass_seconds", "rows_per_second"): c.pop(k, None)
if len(sys.argv) > 2:  # runs with other options: the same numbers
    for k in ("threads", "cache", "in_memory"): d["options"].pop(k, None)
print(json.dumps(d, indent=1, sort_keys=True))' "$@"
}

fit() { # NAME [options and data...]
    local name=$1
    shift
    timeout 300 "$bin" fit --quiet --json "$name.json" "${model[@]}" "$@" > /dev/null 2> "$name.err"
    rc=$?
}

fit base --threads 1 all.csv
[ "$rc" -eq 0 ] || fail base "exit $rc: $(head -c 300 base.err)"
strip base.json > base.strip
strip base.json options > base.numbers

# same NAME: NAME.json is the base's fit, byte for byte but for the input
# and the run (and the options that differ, when given a second word)
same() {
    local want=base.strip
    [ $# -gt 1 ] && want=base.numbers
    if [ "$rc" -ne 0 ]; then fail "$1" "exit $rc: $(head -c 300 "$1.err")"
    elif strip "$1.json" ${2:+options} | cmp -s - "$want"; then ok "$1"
    else fail "$1" "differs: $(strip "$1.json" ${2:+options} | diff "$want" - | head -n 6 | tr '\n' '|')"; fi
}

for t in 1 2 3; do
    fit "set_t$t" --threads "$t" set/a.csv set/b.csv.zst set/c.csv.gz
    if [ "$t" -eq 1 ]; then same set_t1; else same "set_t$t" options; fi
done
fit set_nocache --threads 2 --no-cache set/a.csv set/b.csv.zst set/c.csv.gz
same set_nocache options
fit set_memory --threads 2 --in-memory set/a.csv set/b.csv.zst set/c.csv.gz
same set_memory options
fit set_collapse --threads 2 --no-collapse set/a.csv set/b.csv.zst set/c.csv.gz
fit base_collapse --threads 2 --no-collapse all.csv
if strip set_collapse.json | cmp -s - <(strip base_collapse.json); then ok set_no_collapse; else fail set_no_collapse differs; fi

# a directory: its regular files in byte order; hidden files and
# subdirectories passed over
cp -r set dir
echo "not,data" > dir/.notes.csv
mkdir dir/old
cp set/a.csv dir/old/
fit set_dir --threads 2 dir
same set_dir options
# the run log names every file of the set, in the order read
"$bin" fit --quiet "${model[@]}" --run-log runs.log dir > /dev/null 2>&1
if /usr/bin/python3 -c 'import json,sys; r=json.loads(open("runs.log").readline()); sys.exit(r["input"] != "dir" or [f.split("/")[-1] for f in r["files"]] != ["a.csv", "b.csv.zst", "c.csv.gz"])'
then ok run_log_set_files; else fail run_log_set_files "$(head -c 400 runs.log)"; fi

# the JSON names each file; the checksums by their documented definitions
/usr/bin/python3 - "$here/checksum.py" <<'EOF' > identity.out 2>&1 && ok set_identity || fail set_identity "$(cat identity.out)"
import json, struct, subprocess, sys
d = json.load(open("set_t2.json"))
files = d["input"]["set"]["files"]
assert [f["path"] for f in files] == ["set/a.csv", "set/b.csv.zst", "set/c.csv.gz"], files
assert [f["compression"] for f in files] == ["none", "zstd", "gzip"], files
h = 0xcbf29ce484222325
for f in files:
    own = subprocess.run([sys.executable, sys.argv[1], f["path"]], capture_output=True, text=True).stdout.strip()
    assert f["checksum"] == own, (f, own)
    h = ((h ^ int(own.split(":")[1], 16)) * 0x100000001b3) % 2**64
assert d["input"]["checksum"] == "fnv1a64w:%016x" % h, d["input"]["checksum"]
assert d["input"]["bytes"] == sum(f["bytes"] for f in files)
assert d["input"]["file"]["size"] == sum(f["size"] for f in files)
assert "set" not in json.load(open("base.json"))["input"]
EOF
"$bin" show set_t2.json > show.out 2>&1 && ok set_show_reads_back || fail set_show_reads_back "$(head -3 show.out)"

# scoring the set writes what scoring the one file writes
"$bin" score --quiet --fit base.json --out score_set.csv set/a.csv set/b.csv.zst set/c.csv.gz 2> score.err &&
    "$bin" score --quiet --fit base.json --out score_all.csv all.csv 2>> score.err &&
    cmp -s score_set.csv score_all.csv && ok score_set || fail score_set "$(head -3 score.err)"

# expect NAME CODE PATTERN [data...]: the fit fails with CODE, its one line
# of message matching PATTERN
expect() {
    local name=$1 code=$2 pattern=$3
    shift 3
    fit "$name" "$@"
    if [ "$rc" -ne "$code" ]; then fail "$name" "exit $rc, not $code: $(head -c 300 "$name.err")"
    elif [ "$(wc -l < "$name.err")" -ne 1 ] || ! grep -q -- "$pattern" "$name.err"; then
        fail "$name" "message: $(cat "$name.err")"
    else ok "$name"; fi
}

{ echo "claims,age,area,exposure"; sed -n '2,10p' all.csv; } > other_header.csv
expect header_differs 4 "^millrace: other_header.csv:1:3: the header differs from set/a.csv's: 'area' where it has 'region'" \
    set/a.csv other_header.csv
{ cat header; sed -n '37002,$p' all.csv; } | gzip -n -c | head -c 20000 > cut.csv.gz
expect truncated_gzip 4 "^millrace: cut.csv.gz: the gzip stream ends inside a member" set/a.csv cut.csv.gz set/b.csv.zst
/usr/bin/python3 -c '
d = bytearray(open("set/b.csv.zst", "rb").read()); d[len(d) // 2] ^= 0x5a
open("bad.csv.zst", "wb").write(d)'
expect corrupt_zstd_t1 4 "^millrace: bad.csv.zst: corrupt zstd stream" --threads 1 set/a.csv bad.csv.zst set/c.csv.gz
expect corrupt_zstd_t2 4 "^millrace: bad.csv.zst: corrupt zstd stream" --threads 2 set/a.csv bad.csv.zst set/c.csv.gz
{ cat header; sed -n '2,100p' all.csv; echo "-1,40,R1,1"; } | gzip -n -c > neg.csv.gz
expect bad_value_own_line 5 "^millrace: neg.csv.gz:101:1: column 'claims'" set/a.csv set/b.csv.zst neg.csv.gz
expect stdin_in_set 2 "standard input" set/a.csv -
: > empty.csv
expect empty_file 6 "^millrace: empty.csv: the file is empty" set/a.csv empty.csv

# ---- zstd files of many frames -----------------------------------------
pzstd -q -p 2 -1 -c all.csv > pz.zst 2> /dev/null || fail pzstd "pzstd failed"
# pieces cut anywhere (mid-row), through a pipe (no content size) ...
split -b 37000 --filter='zstd -q -1 -c' all.csv > piped.zst
# ... and from files (the content size in each frame header)
mkdir pieces
split -b 53000 all.csv pieces/p.
for p in pieces/p.*; do zstd -q -c "$p"; done > sized.zst
cmp -s <(zstd -dc pz.zst) all.csv && cmp -s <(zstd -dc piped.zst) all.csv && cmp -s <(zstd -dc sized.zst) all.csv &&
    ok frames_written || fail frames_written "the frames are not the text"
[ "$(zstd -lv piped.zst 2> /dev/null | sed -n 's/^# Zstandard Frames: //p')" -gt 20 ] && ok many_frames ||
    fail many_frames "$(zstd -lv piped.zst 2>&1 | head -3)"
for f in pz piped sized; do
    for t in 1 2 3; do
        fit "${f}_t$t" --threads "$t" "$f.zst"
        same "${f}_t$t" options
    done
done
fit piped_nocache --threads 3 --no-cache piped.zst
same piped_nocache options
# standard input still works, multi-frame or not
timeout 300 "$bin" fit --quiet --threads 2 --json stdin.json "${model[@]}" - < piped.zst > /dev/null 2> stdin.err
rc=$?
same stdin options
cat all.csv | timeout 300 "$bin" fit --quiet --threads 2 --json stdin_plain.json "${model[@]}" - > /dev/null 2> stdin_plain.err
rc=$?
same stdin_plain options
finish
