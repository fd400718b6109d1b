#!/usr/bin/env bash
# The speed paths of `millrace fit` are only allowed to be faster, never to
# give other answers.  Each group below fits the same 300,000-row synthetic
# registry extract two or more ways and compares the JSON reports against
# the slowest, most direct way of getting the same numbers, which is named
# in a comment at each group as the source of truth.
#
#   collapsed covariate patterns vs row-level passes   within 1e-11 relative
#     at tolerance 1e-14, 1e-7 at the default (each path stops at its
#     own distance from the maximum; README, "Covariate patterns")
#     (standard errors and Pearson statistic, from the pass before the last
#     step: within 10 x that step in standard errors)
#   decoded-column cache vs rereading vs in memory     bit-identical
#   rereads by the block map vs the zstd stream        bit-identical
#   1, 2 and 3 threads                                 bit-identical
#   plain CSV vs quoted (libcsv) CSV vs CRLF           bit-identical
#   16-byte reads vs the default read size             bit-identical
#
# Bit-identity is Python float equality on the parsed JSON numbers.
# Set MILLRACE_KEEP_TMP=1 to keep the work directory for a failed check.
set -u

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
root=$(cd "$here/../.." && pwd)
bin=${MILLRACE:-$root/build/millrace}
synth=${SYNTH:-$root/build/synth}
py=/usr/bin/python3
tmp=$(mktemp -d)
if [ "${MILLRACE_KEEP_TMP:-0}" = 1 ]; then
    trap 'echo "work directory kept: $tmp"' EXIT
else
    trap 'rm -rf "$tmp"' EXIT
fi
# The decoded-column cache lives under $TMPDIR; keep it inside the work
# directory so that it is cleaned up with everything else.
export TMPDIR=$tmp

passed=0
failed=0
ok() { echo "ok $1"; passed=$((passed + 1)); }
fail() { echo "FAIL $1: $2"; failed=$((failed + 1)); }
finish() {
    echo "$passed passed, $failed failed"
    [ "$failed" -eq 0 ] || exit 1
    exit 0
}

for tool in "$bin" "$synth"; do
    if [ ! -x "$tool" ]; then
        fail setup "$tool not found (run make first)"
        finish
    fi
done

# ---- data ---------------------------------------------------------------
rows=300000
if ! "$synth" --rows "$rows" --seed 11 --out "$tmp/data.csv.zst" 2> "$tmp/synth.err"; then
    fail setup "synth failed: $(head -c 300 "$tmp/synth.err")"
    finish
fi
if ! zstd -q -d -c "$tmp/data.csv.zst" > "$tmp/data.csv"; then
    fail setup "zstd could not decompress the synth output"
    finish
fi
# Every field quoted (forces the libcsv path) but still LF line ends, so
# that only the quoting differs from data.csv; a CRLF copy separately.
"$py" - "$tmp/data.csv" "$tmp/quoted.csv" <<'EOF'
import csv, sys
with open(sys.argv[1], newline="") as src, open(sys.argv[2], "w", newline="") as dst:
    out = csv.writer(dst, quoting=csv.QUOTE_ALL, lineterminator="\n")
    for row in csv.reader(src):
        out.writerow(row)
EOF
sed 's/$/\r/' "$tmp/data.csv" > "$tmp/crlf.csv"
# The same rows with what a later pass reading blocks by the first pass's
# map must cut exactly as the stream was cut: blank and whitespace-only
# lines (also right after a block boundary and at the end), some rows
# quoted, some with CRLF ends.
"$py" - "$tmp/data.csv" "$tmp/ragged.csv" <<'EOF'
import csv, sys
block = 16384  # MR__BLOCK_ROWS (src/input/chunk.h)
with open(sys.argv[1], newline="") as src, open(sys.argv[2], "w", newline="") as dst:
    rows = csv.reader(src)
    dst.write(",".join(next(rows)) + "\n")
    for i, row in enumerate(rows):
        if i % 997 == 0 or i % block == 0:
            dst.write(" \t\r\n" if i % 2 else "\n")
        quoting = csv.QUOTE_ALL if i % 5 == 0 else csv.QUOTE_MINIMAL
        end = "\r\n" if i % 7 == 0 else "\n"
        csv.writer(dst, quoting=quoting, lineterminator=end).writerow(row)
    dst.write("\n\n")
EOF

# Case A: factors and numerics with few distinct values, so the default is
# to collapse rows into covariate patterns (one read of the data).
cat > "$tmp/case_a.model" <<'EOF'
outcome events
family poisson
exposure followup
factor age_band ref=00-04
factor sex ref=F
factor region ref=R01
numeric deprivation
numeric year
EOF
# Case B: continuous age and bmi (bmi has empty cells), so collapsing is
# given up and every IRLS iteration is a pass over the rows.
cp "$tmp/case_a.model" "$tmp/case_b.model"
printf 'numeric age\nnumeric bmi\n' >> "$tmp/case_b.model"
cat > "$tmp/binomial.model" <<'EOF'
outcome flag
family binomial
numeric deprivation
factor sex ref=F
factor age_band ref=00-04
EOF

# ---- running fits --------------------------------------------------------
# fit NAME MODEL [options...] DATA: writes NAME.json, NAME.rc, NAME.cmd.
# A name already run is not run again, so groups can share a reference.
fit() {
    local name=$1 model=$2
    shift 2
    [ -e "$tmp/$name.rc" ] && return
    local cmd=("$bin" fit --model "$tmp/$model.model" "$@" --json "$tmp/$name.json" --quiet)
    local shown
    shown=$(printf '%q ' "${cmd[@]}")
    shown=${shown//$tmp/\$TMP}
    echo "${shown//$bin/build/millrace}" > "$tmp/$name.cmd"
    "${cmd[@]}" > "$tmp/$name.out" 2> "$tmp/$name.err"
    echo $? > "$tmp/$name.rc"
}

cat > "$tmp/compare.py" <<'EOF'
"""compare.py MODE REF OTHER [TOL] [--expect WHICH:PATH OP VALUE ...]

MODE exact: coefficient estimates and standard errors and every number of
the fit section must be equal as Python floats.
MODE close: |a-b| / max(|b|, se(b)) for estimates and standard errors and
|a-b| / |b| for the main fit statistics must stay within TOL; b is REF.
A fit that stopped on the Newton-decrement rule reports the statistics of
the pass before its last step (README, "Result"): they differ from those at
its coefficients by about the square root of the change it predicted, so
its standard errors and Pearson statistic are held to 10 x that square
root instead (if larger).
--expect checks a field of ref or other (e.g. other:convergence.passes>1),
so that a comparison cannot pass because the fast path was not taken.
Prints one line; exit 0 when everything holds."""
import json
import math
import operator
import re
import sys

FIT_STATS = ("deviance", "pearson_chi2", "null_deviance", "log_likelihood", "aic")
OPS = {"==": operator.eq, "!=": operator.ne, ">": operator.gt, ">=": operator.ge, "<": operator.lt}


def load(path):
    try:
        with open(path) as fh:
            return json.load(fh)
    except (OSError, ValueError) as exc:
        sys.exit("no usable JSON in %s (%s)" % (path, exc))


def same(a, b):
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    return a == b


def field(js, path):
    for part in path.split("."):
        js = js[part]
    return js


def check_expectations(docs, expects):
    bad = []
    for text in expects:
        m = re.fullmatch(r"(ref|other):([\w.]+)\s*(==|!=|>=|>|<)\s*(\S+)", text)
        if not m:
            sys.exit("bad --expect %r" % text)
        which, path, op, want = m.groups()
        got = field(docs[which], path)
        want = json.loads(want)
        if not OPS[op](got, want):
            bad.append("%s %s is %r, expected %s %r" % (which, path, got, op, want))
    return bad


def names(js):
    return [c["name"] for c in js["coefficients"]]


def exact(ref, other):
    diffs, count = [], 0
    for a, b in zip(other["coefficients"], ref["coefficients"]):
        for key in ("estimate", "standard_error"):
            count += 1
            if not same(a[key], b[key]):
                diffs.append("%s[%s] %r vs ref %r" % (key, b["name"], a[key], b[key]))
    keys = sorted(set(ref["fit"]) | set(other["fit"]))
    for key in keys:
        count += 1
        a, b = other["fit"].get(key), ref["fit"].get(key)
        if not same(a, b):
            diffs.append("fit.%s %r vs ref %r" % (key, a, b))
    if diffs:
        return False, "%d of %d values differ: %s" % (len(diffs), count, "; ".join(diffs[:4]))
    return True, "%d values identical" % count


def relative(a, b, scale):
    if a is None or b is None or not (math.isfinite(a) and math.isfinite(b)):
        return 0.0 if same(a, b) else math.inf
    if scale == 0:
        return 0.0 if a == b else math.inf
    return abs(a - b) / scale


def statistics_lag(js):
    c = js["convergence"]
    return c["relative_change"] if c["criterion"] == "step in standard errors" else 0.0


def close(ref, other, tol):
    worst = []  # (relative difference / its limit, label, other value, ref value, difference, limit)
    se_tol = max(tol, 10 * max(statistics_lag(ref), statistics_lag(other)))
    for a, b in zip(other["coefficients"], ref["coefficients"]):
        se = b["standard_error"] if isinstance(b["standard_error"], float) else 0.0
        for key, limit in (("estimate", tol), ("standard_error", se_tol)):
            scale = max(abs(b[key]), se) if isinstance(b[key], float) else 0.0
            d = relative(a[key], b[key], scale)
            worst.append((d / limit, "%s[%s]" % (key, b["name"]), a[key], b[key], d, limit))
    for key in FIT_STATS:
        a, b = other["fit"][key], ref["fit"][key]
        limit = se_tol if key == "pearson_chi2" else tol
        d = relative(a, b, abs(b))
        worst.append((d / limit, "fit." + key, a, b, d, limit))
    worst.sort(key=lambda w: -w[0])
    over = [w for w in worst if not w[0] <= 1]
    top = worst[0]
    text = "%d values, largest relative difference %.3g (limit %.3g) at %s (%r vs ref %r)" % (
        len(worst), top[4], top[5], top[1], top[2], top[3])
    if over:
        return False, "%d over their limits; %s" % (len(over), text)
    return True, text


def main(argv):
    expects = []
    while "--expect" in argv:
        i = argv.index("--expect")
        expects.append(argv[i + 1])
        del argv[i:i + 2]
    mode, ref_path, other_path = argv[:3]
    docs = {"ref": load(ref_path), "other": load(other_path)}
    ref, other = docs["ref"], docs["other"]
    problems = check_expectations(docs, expects)
    if names(ref) != names(other):
        problems.append("coefficient names differ: %s vs ref %s" % (names(other)[:5], names(ref)[:5]))
        good, text = False, "not compared"
    elif mode == "exact":
        good, text = exact(ref, other)
    else:
        good, text = close(ref, other, float(argv[3]))
    if problems:
        print("; ".join(problems) + "; numbers: " + text)
        return 1
    print(text)
    return 0 if good else 1


sys.exit(main(sys.argv[1:]))
EOF

# run_summary NAME: why a fit that exited non-zero did so.
run_summary() {
    local name=$1 rc
    rc=$(cat "$tmp/$name.rc")
    local why
    why=$(tr '\n' ' ' < "$tmp/$name.err" | head -c 240)
    if [ -s "$tmp/$name.json" ]; then
        why="$why$("$py" -c '
import json, sys
c = json.load(open(sys.argv[1]))["convergence"]
print(" [converged=%s iterations=%s passes=%s relative_change=%r]" % (c["converged"], c["iterations"], c["passes"], c["relative_change"]))
' "$tmp/$name.json" 2>/dev/null)"
    fi
    echo "\`$(cat "$tmp/$name.cmd")\` exited $rc: $why"
}

# compare CHECK MODE REF OTHER [TOL] [--expect ...]: one ok/FAIL line.
# Every fit involved must exit 0; the numbers are compared (and reported)
# even when one did not, as long as it wrote its JSON.
compare() {
    local check=$1 mode=$2 ref=$3 other=$4
    shift 4
    local problems="" name result
    for name in "$ref" "$other"; do
        [ "$(cat "$tmp/$name.rc")" = 0 ] || problems="$problems$(run_summary "$name"); "
    done
    if result=$("$py" "$tmp/compare.py" "$mode" "$tmp/$ref.json" "$tmp/$other.json" "$@" 2>&1) && [ -z "$problems" ]; then
        ok "$check ($result)"
    else
        fail "$check" "$problems$result; ref: \`$(cat "$tmp/$ref.cmd")\`; other: \`$(cat "$tmp/$other.cmd")\`"
    fi
}

zst=$tmp/data.csv.zst
strict=(--tolerance 1e-14 --max-passes 100)

# ---- (1) collapsed patterns, poisson with exposure ----------------------
# Source of truth: the row-level fit (--no-collapse), which sums the IRLS
# quantities over every row instead of over covariate patterns.
fit a_collapsed case_a "${strict[@]}" "$zst"
fit a_rows case_a "${strict[@]}" --no-collapse "$zst"
compare collapse_poisson close a_rows a_collapsed 1e-11 \
    --expect "other:convergence.passes==1" --expect "ref:convergence.passes>1"

# ---- (2) decoded-column cache, rereading, in memory ----------------------
# Source of truth: --no-cache, where every pass rereads and re-decodes the
# input.  Only row-level fits use a store for later passes, so case B and
# case A with --no-collapse are the fits where the three paths differ.
fit b_cache case_b "$zst"
fit b_nocache case_b --no-cache "$zst"
fit b_memory case_b --in-memory "$zst"
compare cache_b exact b_nocache b_cache \
    --expect "other:options.cache==true" --expect "ref:options.cache==false" --expect "ref:convergence.passes>1"
compare in_memory_b exact b_nocache b_memory --expect "other:options.in_memory==true"
fit a_rows_cache case_a --no-collapse "$zst"
fit a_rows_nocache case_a --no-collapse --no-cache "$zst"
fit a_rows_memory case_a --no-collapse --in-memory "$zst"
compare cache_a_rows exact a_rows_nocache a_rows_cache \
    --expect "other:options.cache==true" --expect "ref:options.cache==false" --expect "ref:convergence.passes>1"
compare in_memory_a_rows exact a_rows_nocache a_rows_memory --expect "other:options.in_memory==true"
# Rereads of a plain file: workers read and cut the blocks themselves by
# the first pass's map (src/input/blockmap.h).  Source of truth: the same
# rereads of the zstd file, which one reader thread decompresses and cuts.
for t in 1 3; do
    fit "b_nocache_plain_t$t" case_b --no-cache --threads "$t" "$tmp/data.csv"
    compare "reread_by_map_t$t" exact b_nocache "b_nocache_plain_t$t" --expect "other:convergence.passes>1"
    fit "b_nocache_ragged_t$t" case_b --no-cache --threads "$t" "$tmp/ragged.csv"
    compare "reread_by_map_ragged_t$t" exact b_nocache "b_nocache_ragged_t$t" --expect "other:convergence.passes>1"
done

# ---- (3) threads ----------------------------------------------------------
# Source of truth: --threads 1, where blocks are decoded and summed one
# after another with no hand-over between threads.
for t in 1 2 3; do
    fit "a_t$t" case_a --threads "$t" "$zst"
    fit "b_t$t" case_b --threads "$t" "$zst"
done
for t in 2 3; do
    compare "threads_${t}_collapsed" exact a_t1 "a_t$t" \
        --expect "ref:convergence.passes==1" --expect "other:convergence.passes==1"
    compare "threads_${t}_rows" exact b_t1 "b_t$t" \
        --expect "ref:convergence.passes>1" --expect "other:convergence.passes>1"
done
# At the default tolerance the two ways of case A agree only as far as the
# stopping rule lets them: coefficients about 1e-8 relative (README,
# "Covariate patterns"); the bound checked leaves a factor of ten.
compare collapse_default_tolerance close a_rows_cache a_t1 1e-7 \
    --expect "other:convergence.passes==1" --expect "ref:convergence.passes>1"

# ---- (4) quoting and line ends -------------------------------------------
# Source of truth: the unquoted LF file read by the plain CSV fast path;
# the quoted copy goes through libcsv and the CRLF copy has to drop the CR
# of every line, including after the empty bmi cells.
for m in a b; do
    fit "${m}_plain" "case_$m" "$tmp/data.csv"
    fit "${m}_quoted" "case_$m" "$tmp/quoted.csv"
    fit "${m}_crlf" "case_$m" "$tmp/crlf.csv"
    compare "quoted_$m" exact "${m}_plain" "${m}_quoted"
    compare "crlf_$m" exact "${m}_plain" "${m}_crlf"
done

# ---- (5) read size -----------------------------------------------------
# Source of truth: the default read size on the same file; 16-byte reads
# cut nearly every line and every zstd frame across reads.
for m in a b; do
    fit "${m}_plain_buf16" "case_$m" --buffer-size 16 "$tmp/data.csv"
    compare "buffer_16_plain_$m" exact "${m}_plain" "${m}_plain_buf16"
    fit "${m}_zst" "case_$m" "$zst"
    fit "${m}_zst_buf16" "case_$m" --buffer-size 16 "$zst"
    compare "buffer_16_zstd_$m" exact "${m}_zst" "${m}_zst_buf16"
done

# ---- (6) collapsed patterns, binomial --------------------------------------
# Source of truth: the row-level fit (--no-collapse), as in (1).
fit bin_collapsed binomial "${strict[@]}" "$zst"
fit bin_rows binomial "${strict[@]}" --no-collapse "$zst"
compare collapse_binomial close bin_rows bin_collapsed 1e-11 \
    --expect "other:convergence.passes==1" --expect "ref:convergence.passes>1"

# ---- (7) collapsing given up after the first block -------------------------
# Source of truth: --no-cache, where every IRLS pass decodes the file
# afresh.  Age is whole years in the first 20,000 rows, so the first block
# may still collapse and defers its rows' log(exposure); the second block
# gives collapsing up, and whichever blocks the cache then keeps must carry
# the same offsets as a fresh decode.
"$py" - "$tmp/data.csv" "$tmp/late.csv" <<'EOF'
import csv, sys
with open(sys.argv[1], newline="") as src, open(sys.argv[2], "w", newline="") as dst:
    rows = csv.reader(src)
    out = csv.writer(dst, lineterminator="\n")
    header = next(rows)
    out.writerow(header)
    age = header.index("age")
    for i, row in enumerate(rows):
        if i < 20000:
            row[age] = str(int(float(row[age])))
        out.writerow(row)
EOF
cp "$tmp/case_a.model" "$tmp/late.model"
echo 'numeric age' >> "$tmp/late.model"
fit late_nocache late --no-cache "$tmp/late.csv"
for t in 1 2 3; do
    fit "late_t$t" late --threads "$t" "$tmp/late.csv"
    compare "late_give_up_t$t" exact late_nocache "late_t$t" --expect "other:convergence.passes>1"
done
fit late_memory late --in-memory "$tmp/late.csv"
compare late_give_up_in_memory exact late_nocache late_memory --expect "other:options.in_memory==true"

finish
