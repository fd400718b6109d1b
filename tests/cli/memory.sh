#!/usr/bin/env bash
# Streaming means memory does not grow with the number of rows: the peak
# resident set of a fit on 2,000,000 rows must stay within 1.5x of the same
# fit on 400,000 rows.  The smaller file is still large enough to fill the
# pipeline's fixed ring of blocks (2 threads: 12 blocks of 16384 rows), so
# what is compared is growth with the rows alone.  Data are generated here
# (zstd-compressed) and removed.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# generate ROWS FILE: Poisson counts with two factors and two numerics.
generate() {
    /usr/bin/python3 - "$1" <<'EOF' | zstd -q -f -o "$2"
import sys
import numpy as np
rows = int(sys.argv[1])
rng = np.random.default_rng(11)
out = sys.stdout
out.write("count,area,band,x,year\n")
areas = np.array(["A%02d" % i for i in range(12)])
bands = np.array(["low", "mid", "high"])
for start in range(0, rows, 200000):
    n = min(200000, rows - start)
    area = rng.integers(0, 12, n)
    band = rng.integers(0, 3, n)
    x = np.round(rng.normal(0, 1, n), 4)
    year = rng.integers(2000, 2025, n)
    y = rng.poisson(np.exp(0.5 + 0.05 * area - 0.2 * band + 0.1 * x + 0.01 * (year - 2012)))
    out.writelines("%d,%s,%s,%.4f,%d\n" % r for r in zip(y, areas[area], bands[band], x, year))
EOF
}

# peak_rss_kb NAME DATA [THREADS]: runs the fit (2 threads by default),
# prints its peak resident set in kB.
peak_rss_kb() {
    local name=$1 data=$2 threads=${3:-2}
    local cmd=("$bin" fit --quiet --threads "$threads" --json "$tmp/$name.json" --outcome count --family poisson
               --factor area --factor band --numeric x --numeric year "$data")
    if [ -x /usr/bin/time ]; then
        /usr/bin/time -v -o "$tmp/$name.time" "${cmd[@]}" > /dev/null 2> "$tmp/$name.err" || return 1
        awk -F': *' '/Maximum resident set size/ { print $2 }' "$tmp/$name.time"
    else
        # no /usr/bin/time: the children's peak RSS from getrusage instead
        /usr/bin/python3 -c '
import resource, subprocess, sys
with open(sys.argv[1], "w") as err:
    rc = subprocess.call(sys.argv[2:], stdout=subprocess.DEVNULL, stderr=err)
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
sys.exit(rc)' "$tmp/$name.err" "${cmd[@]}" || return 1
    fi
}

rows_used() {
    /usr/bin/python3 -c 'import json, sys; print(json.load(open(sys.argv[1]))["rows"]["used"])' "$1"
}

generate 400000 "$tmp/small.csv.zst"
generate 2000000 "$tmp/large.csv.zst"

small=$(peak_rss_kb small "$tmp/small.csv.zst") || small=""
large=$(peak_rss_kb large "$tmp/large.csv.zst") || large=""

if [ -z "$small" ] || [ "$(rows_used "$tmp/small.json" 2> /dev/null)" != 400000 ]; then
    fail fit_400k "fit failed or wrong row count: $(head -c 300 "$tmp/small.err")"
else
    ok "fit_400k (peak RSS ${small} kB)"
fi
if [ -z "$large" ] || [ "$(rows_used "$tmp/large.json" 2> /dev/null)" != 2000000 ]; then
    fail fit_2m "fit failed or wrong row count: $(head -c 300 "$tmp/large.err")"
else
    ok "fit_2m (peak RSS ${large} kB)"
fi
if [ -n "$small" ] && [ -n "$large" ]; then
    if [ $((large * 2)) -le $((small * 3)) ]; then
        ok "peak RSS 2M rows <= 1.5 x 400k rows ($large kB vs $small kB)"
    else
        fail rss_ratio "2M rows used $large kB, 400k rows $small kB (limit 1.5x)"
    fi
fi

# Scoring streams too (README, "Scoring"): the same files scored with the
# 400k-row fit, zstd output (so the 2M rows' lines do not fill the disk),
# within the same 1.5x.
score_rss_kb() { # score_rss_kb NAME DATA: the peak resident set in kB
    local cmd=("$bin" score --quiet --threads 2 --fit "$tmp/small.json" --out "$tmp/$1.scored.csv.zst" "$2")
    if [ -x /usr/bin/time ]; then
        /usr/bin/time -v -o "$tmp/$1.time" "${cmd[@]}" > /dev/null 2> "$tmp/$1.err" || return 1
        awk -F': *' '/Maximum resident set size/ { print $2 }' "$tmp/$1.time"
    else
        /usr/bin/python3 -c '
import resource, subprocess, sys
rc = subprocess.call(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
sys.exit(rc)' "${cmd[@]}" || return 1
    fi
}
score_small=$(score_rss_kb score_small "$tmp/small.csv.zst") || score_small=""
score_large=$(score_rss_kb score_large "$tmp/large.csv.zst") || score_large=""
if [ -n "$score_small" ] && [ -n "$score_large" ] &&
    [ "$(zstd -dc "$tmp/score_large.scored.csv.zst" | wc -l)" = 2000001 ]; then
    if [ $((score_large * 2)) -le $((score_small * 3)) ]; then
        ok "score: peak RSS 2M rows <= 1.5 x 400k rows ($score_large kB vs $score_small kB)"
    else
        fail score_rss_ratio "2M rows used $score_large kB, 400k rows $score_small kB (limit 1.5x)"
    fi
else
    fail score_rss "scoring failed or wrote the wrong number of lines: $(head -c 300 "$tmp/score_large.err" 2>/dev/null)"
fi
rm -f "$tmp"/*.scored.csv.zst

# Each worker thread costs about 6 MB, so the count is capped at 4 per
# online CPU and 64 in all (src/fit/run.c), with a warning: 256 asked for
# was 1.6 GB.  The bound allows 8 MB a thread beyond the 2-thread fit.
cpus=$(getconf _NPROCESSORS_ONLN)
cap=$((4 * cpus > 64 ? 64 : 4 * cpus))
many=$(peak_rss_kb many "$tmp/small.csv.zst" 256) || many=""
used=$(/usr/bin/python3 -c 'import json, sys; print(json.load(open(sys.argv[1]))["options"]["threads"])' "$tmp/many.json" 2> /dev/null)
if [ -z "$many" ] || [ "$used" != "$cap" ]; then
    fail threads_capped "--threads 256: $used threads used, expected $cap: $(head -c 300 "$tmp/many.err")"
elif ! grep -q "256 worker threads asked for, $cap used" "$tmp/many.json"; then
    fail threads_cap_warning "no warning that 256 threads were capped at $cap"
else
    ok "threads_capped (256 asked, $cap used, with a warning)"
fi
if [ -n "$many" ] && [ -n "$small" ]; then
    if [ "$many" -le $((small + cap * 8192)) ]; then
        ok "peak RSS with 256 threads asked: $many kB (2 threads: $small kB)"
    else
        fail rss_threads "256 threads asked: $many kB, 2 threads $small kB (limit + $cap x 8 MB)"
    fi
fi

finish
