#!/usr/bin/env bash
# millrace-mpi (make mpi): a fit shared by 1, 2 and 3 processes under
# Debian's OpenMPI (mpirun --oversubscribe on this machine) writes the JSON
# of the single-process `millrace fit`, byte for byte but for the run's
# audit trail and the timings, and rank 0 prints its report: a plain CSV
# (cached, and read by the block map with --no-cache), a zstd file of many
# frames, a set of three files, each with a model that makes several IRLS
# passes (continuous covariates of many values, --no-collapse), a model
# whose rows collapse into patterns, a fit started from a previous one, and
# a negative binomial whose theta is estimated; robust standard errors by
# rows (HC1 from the cache, HC0 rereading a many-frame file) and by
# clusters of a file grouped by the cluster column (plain and many
# frames); a file not grouped by it ends every rank with exit 13.  A fit
# with --checkpoint killed after an IRLS pass, after its last pass or after
# the robust pass goes on, under as many processes, others or one, to the
# single process's JSON.
# 600,000 rows: three groups of 16 blocks, so that with 3 ranks each rank
# owns one.  One writer: one run log line, one JSON.  An error met by rank
# 1 in its share of pass 2 (the test-only MILLRACE_TEST_SHARE_ERROR hook:
# the first pass, by rank 0, catches every malformed row, so a real one
# cannot reach pass 2) ends every rank with that one message, printed once,
# and the same exit code; standard input is refused (exit 2), and so is a
# JSON path that is the input (rank 0 alone
# checks it; the others end with its message's exit code).  Without mpicc and mpirun the test says SKIPPED and
# passes.  Source of truth: the single-process fit of the same data.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
mpibin=${MILLRACE_MPI:-$root/build/millrace-mpi}
if ! command -v mpicc > /dev/null || ! command -v mpirun > /dev/null; then
    echo "SKIPPED: mpi.sh: mpicc or mpirun not found (Debian: apt-get install openmpi-bin libopenmpi-dev)"
    finish
    exit 0
fi
if [ ! -x "$mpibin" ]; then
    fail setup "$mpibin not found (run make mpi first)"
    finish
    exit 1
fi
# CI runs as root; OpenMPI refuses root unless told twice
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
export TMPDIR=$tmp
cd "$tmp" || exit 1

"$root/build/synth" --rows 600000 --seed 23 --out all.csv || fail synth "exit $?"
head -n 1 all.csv > header
mkdir set
{ cat header; sed -n '2,200001p' all.csv; } > set/a.csv
{ cat header; sed -n '200002,450001p' all.csv; } | zstd -q -c > set/b.csv.zst
{ cat header; sed -n '450002,$p' all.csv; } | gzip -n -c > set/c.csv.gz
split -b 3000000 --filter='zstd -q -1 -c' all.csv > frames.zst
awk -F, 'NR == 1 { print $0 ",person"; next } { print $0 ",p" int((NR - 2) / 7) }' all.csv |
    split -b 3000000 --filter='zstd -q -1 -c' > frames_grouped.zst
many=(--outcome events --family poisson --exposure followup --factor age_band --factor sex --numeric bmi
      --numeric age --no-collapse --tolerance 1e-12)
few=(--outcome events --family poisson --exposure followup --factor age_band --factor sex)
# theta estimated: its score and information travel with each group's totals
nb=(--outcome events --family negative-binomial --exposure followup --factor sex --numeric age --no-collapse)

# strip JSON: the fit without its run's audit trail and timings
strip() {
    /usr/bin/python3 -c '
import json, sys
d = json.load(open(sys.argv[1]), parse_float=str, parse_int=str)
d.pop("run", None)
c = d["convergence"]
for k in ("seconds", "pass_seconds", "rows_per_second"): c.pop(k, None)
print(json.dumps(d, indent=1, sort_keys=True))' "$1"
}

# case NAME MODEL-ARRAY-NAME [options and data...]: one process, then 1, 2, 3
case_() {
    local name=$1 n rc
    local -n model=$2
    shift 2
    timeout 600 "$bin" fit --quiet --threads 1 --json "$name.json" "${model[@]}" "$@" > "$name.out" 2> "$name.err" ||
        { fail "$name" "one process: exit $?: $(head -c 300 "$name.err")"; return; }
    strip "$name.json" > "$name.ref"
    for n in 1 2 3; do
        timeout 600 mpirun --oversubscribe -np "$n" "$mpibin" fit --quiet --threads 1 --json "$name.$n.json" \
            "${model[@]}" "$@" > "$name.$n.out" 2> "$name.$n.err"
        rc=$?
        if [ "$rc" -ne 0 ]; then
            fail "$name np $n" "exit $rc: $(head -c 300 "$name.$n.err")"
        elif ! strip "$name.$n.json" | cmp -s - "$name.ref"; then
            fail "$name np $n" "JSON differs: $(strip "$name.$n.json" | diff "$name.ref" - | head -n 4 | tr '\n' '|')"
        elif ! cmp -s <(grep -v 'rows/s' "$name.$n.out") <(grep -v 'rows/s' "$name.out"); then
            fail "$name np $n" "the report differs (timings aside; printed once, by rank 0)"
        else
            ok "$name np $n: the single process's JSON and report"
        fi
    done
}

case_ plain many all.csv
case_ plain_nocache many --no-cache all.csv
case_ frames many frames.zst
case_ fileset many set/a.csv set/b.csv.zst set/c.csv.gz
case_ collapsed few all.csv
case_ negbin nb frames.zst
# robust standard errors by rows: the meat pass split as the IRLS passes are
case_ robust many --robust hc1 all.csv
case_ robust_nocache many --robust hc0 --no-cache frames.zst
# cluster-robust standard errors from a file grouped by the cluster
# column (runs of 7 rows, across blocks, groups and ranks): every rank's
# blocks of runs added in block order
awk -F, 'NR == 1 { print $0 ",person"; next } { print $0 ",p" int((NR - 2) / 7) }' all.csv > grouped.csv
case_ clustered many --cluster person grouped.csv
# 600,000 rows in runs of 7: 85,715 clusters, each met once
[ "$(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["robust"]["clusters"])' clustered.3.json)" = 85715 ] &&
    ok "clustered np 3: 85715 clusters" || fail clustered "not 85715 clusters"
case_ clustered_frames many --cluster person --robust hc1 --no-cache frames_grouped.zst
# every exchange broadcast in pieces of 1,000 bytes, as one of more than
# 1 GiB goes (MPI counts are ints)
export MILLRACE_TEST_MPI_PIECE=1000
case_ pieces many --cluster person grouped.csv
unset MILLRACE_TEST_MPI_PIECE
# a previous fit as the start: every rank reads it
"$bin" fit --quiet --threads 1 --json prev.json "${many[@]}" set/a.csv > /dev/null 2>&1 || fail prev "exit $?"
case_ started many --start-from prev.json all.csv
# one writer: the run log gets one line, the JSON one file and no lock left
timeout 600 mpirun --oversubscribe -np 3 "$mpibin" fit --quiet --threads 1 --json one.json --run-log runs.log \
    "${few[@]}" all.csv > one.out 2> one.err
if [ "$(wc -l < runs.log)" -eq 1 ] && [ -s one.json ] && ! ls | grep -q 'one\.json\.'; then
    ok "np 3: one run log line, one JSON, nothing else"
else
    fail one_writer "$(wc -l < runs.log) log lines; $(ls | grep one | tr '\n' ' ')"
fi
[ "$(/usr/bin/python3 -c 'import json,sys; print(json.load(open(sys.argv[1]))["convergence"]["passes"])' plain.json)" -ge 3 ] &&
    ok "plain: several IRLS passes" || fail plain "fewer than 3 passes"
# --progress under mpirun: rank 0's lines alone (one a pass), the IRLS
# passes' rows said to be its share
timeout 600 mpirun --oversubscribe -np 2 "$mpibin" fit --progress --threads 1 "${many[@]}" all.csv > /dev/null 2> progress.err
if [ "$(grep -c '^pass 1 done: [0-9]* rows in' progress.err)" = 1 ] &&
    [ "$(grep -c '^pass 2 done: [0-9]* rows (this process.s share) in' progress.err)" = 1 ]; then
    ok "np 2 --progress: a line a pass, from rank 0"
else
    fail progress "$(head -c 300 progress.err)"
fi

# expect NAME NP CODE PATTERN [env...] -- [fit arguments...]
expect() {
    local name=$1 np=$2 code=$3 pattern=$4 rc lines
    shift 4
    local envs=()
    while [ "$1" != -- ]; do envs+=("$1"); shift; done
    shift
    env "${envs[@]}" timeout 600 mpirun --oversubscribe -np "$np" "$mpibin" fit --quiet --threads 1 "$@" \
        > "$name.out" 2> "$name.err" < /dev/null
    rc=$?
    # mpirun adds its own notice of a rank's non-zero exit: millrace's lines alone
    lines=$(grep -c '^millrace:' "$name.err")
    if [ "$rc" -ne "$code" ]; then
        fail "$name" "exit $rc, not $code: $(head -c 300 "$name.err")"
    elif ! grep '^millrace:' "$name.err" | grep -q -- "$pattern" || [ "$lines" -ne 1 ]; then
        fail "$name" "not one line saying '$pattern': $(head -c 300 "$name.err")"
    else
        ok "$name: exit $code, one line"
    fi
}

expect rank1_error 3 4 "rank 1 met a malformed row in pass 2" MILLRACE_TEST_SHARE_ERROR=1:2 -- "${many[@]}" all.csv
expect rank2_error 3 4 "rank 2 met a malformed row in pass 3" MILLRACE_TEST_SHARE_ERROR=2:3 -- "${many[@]}" all.csv
expect stdin_refused 2 2 "does not take standard input" -- "${many[@]}" -
# a cluster column the file is not grouped by: one process holds a table
# of the clusters, a share none
expect cluster_ungrouped 3 13 "grouped by the cluster column" -- "${many[@]}" --cluster age_band all.csv
# rank 0 alone checks its outputs, before the fit: the others, waiting for
# its first pass, end with its refusal
expect output_is_input 3 2 "refusing to overwrite it" -- "${many[@]}" --json all.csv all.csv

# --checkpoint: rank 0 alone keeps it, and a fit it resumes starts every
# rank from it.  Killed (rank 0's SIGKILL just after its K-th checkpoint,
# the test-only MILLRACE_TEST_KILL hook: K = 2 after an IRLS pass, 5 after
# the last, 6 after the robust pass) under NP processes, then run again
# under RE processes (0: the plain command), it writes the single
# process's JSON; the kill leaves the checkpoint, the finished run removes it.
resume_case() {
    local k=$1 np=$2 re=$3 name="resume_k$1_np$2_re$3" rc
    rm -f ck.state "$name.json"
    env MILLRACE_TEST_KILL="checkpoint:$k:after" timeout 600 mpirun --oversubscribe -np "$np" "$mpibin" fit --quiet \
        --threads 1 --checkpoint ck.state --json "$name.json" "${many[@]}" --robust hc1 all.csv > /dev/null 2>&1
    rc=$?
    [ "$rc" -ne 0 ] && [ -s ck.state ] && [ ! -e "$name.json" ] ||
        { fail "$name" "the killed run: exit $rc, $(ls ck.state "$name.json" 2>&1 | tr '\n' ' ')"; return; }
    if [ "$re" = 0 ]; then
        timeout 600 "$bin" fit --quiet --threads 1 --checkpoint ck.state --json "$name.json" "${many[@]}" \
            --robust hc1 all.csv > /dev/null 2> "$name.err"
    else
        timeout 600 mpirun --oversubscribe -np "$re" "$mpibin" fit --quiet --threads 1 --checkpoint ck.state \
            --json "$name.json" "${many[@]}" --robust hc1 all.csv > /dev/null 2> "$name.err"
    fi
    rc=$?
    if [ "$rc" -ne 0 ]; then
        fail "$name" "the rerun: exit $rc: $(head -c 300 "$name.err")"
    elif ! grep -q "resumed after pass" "$name.err"; then
        fail "$name" "not resumed: $(head -c 300 "$name.err")"
    elif ! strip "$name.json" | cmp -s - robust.ref; then
        fail "$name" "JSON differs: $(strip "$name.json" | diff robust.ref - | head -n 4 | tr '\n' '|')"
    elif [ -e ck.state ]; then
        fail "$name" "the checkpoint outlived the finished run"
    else
        ok "$name: killed after checkpoint $k under $np, resumed under ${re/#0/one process}: the same JSON"
    fi
}
resume_case 2 2 2
resume_case 2 3 0
resume_case 5 2 3
resume_case 6 3 2
finish
