#!/usr/bin/env bash
# Robust standard errors from the command line (--robust, --cluster,
# --cluster-memory).  Sources of truth: the contract in README ("Robust
# standard errors", "Exit codes"): the same bits for any thread count,
# read size, cache mode, standard input and compressed input (the numbers
# themselves are checked against R's sandwich in tests/ref/robust.py);
# a grouped file is streamed in 8 bytes a cluster, a shuffled one past
# the limit stops with exit 13 and says to group the file; a missing
# cluster cell leaves its row out; bad options and columns are exit 2.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"
bin=${MILLRACE:-$bin} # make asan-check runs it on the ASan build

# 200000 rows in 100001 clusters of 1 to 3 rows, grouped; the same
# rows shuffled (a fixed permutation: 7919 is prime to the row count).
awk 'BEGIN { print "g,a,x,y"; n = 0; c = 0
    while (n < 200000) { k = c % 3 + 1
        for (j = 0; j < k && n < 200000; j++) {
            x = ((n * 37) % 101) / 100; a = substr("pqr", n % 3 + 1, 1)
            y = ((n * 7919 + c * 104729) % 1000) < 300 + 400 * x + 100 * (c % 5 == 0)
            printf "c%d,%s,%.2f,%d\n", c, a, x, y; n++ }
        c++ } }' > "$tmp/grouped.csv"
awk 'NR == 1 { print; next } { row[NR - 2] = $0 } END { n = NR - 1; for (i = 0; i < n; i++) print row[(i * 7919) % n] }' \
    "$tmp/grouped.csv" > "$tmp/shuffled.csv"
model=(--outcome y --family binomial --numeric x --factor a)

# robust_of JSON: the robust object's text, numbers as written
robust_of() {
    /usr/bin/python3 -c '
import json, sys
print(json.dumps(json.load(open(sys.argv[1]), parse_float=str)["robust"]))' "$1"
}

fit_robust() { # NAME OPTIONS... DATA: exit status in $rc
    local name=$1
    shift
    "$bin" fit "${model[@]}" --json "$tmp/$name.json" "$@" > "$tmp/$name.out" 2> "$tmp/$name.err"
    rc=$?
}

same_robust() { # NAME LABEL: exit 0 and the robust object of base
    if [ "$rc" -ne 0 ]; then
        fail "$2" "exit $rc: $(head -c 300 "$tmp/$1.err")"
    elif [ "$(robust_of "$tmp/$1.json")" = "$(cat "$tmp/base.robust")" ]; then
        ok "$2"
    else
        fail "$2" "robust standard errors differ"
    fi
}

for kind in cluster rows; do
    if [ $kind = cluster ]; then opts=(--cluster g); else opts=(--robust hc1); fi
    fit_robust base "${opts[@]}" "$tmp/grouped.csv"
    if [ "$rc" -ne 0 ]; then fail "$kind base" "exit $rc: $(cat "$tmp/base.err")"; continue; fi
    robust_of "$tmp/base.json" > "$tmp/base.robust"
    fit_robust threads1 "${opts[@]}" --threads 1 "$tmp/grouped.csv"; same_robust threads1 "$kind --threads 1"
    fit_robust threads3 "${opts[@]}" --threads 3 --buffer-size 777 "$tmp/grouped.csv"
    same_robust threads3 "$kind --threads 3 --buffer-size 777"
    fit_robust inmem "${opts[@]}" --in-memory "$tmp/grouped.csv"; same_robust inmem "$kind --in-memory"
    fit_robust nocache "${opts[@]}" --no-cache "$tmp/grouped.csv"; same_robust nocache "$kind --no-cache"
    fit_robust stdin "${opts[@]}" - < "$tmp/grouped.csv"; same_robust stdin "$kind standard input"
    if command -v zstd > /dev/null; then
        zstd -q -f -o "$tmp/grouped.csv.zst" "$tmp/grouped.csv"
        fit_robust zst "${opts[@]}" "$tmp/grouped.csv.zst"; same_robust zst "$kind zstd input"
    fi
done

fit_robust show --cluster g "$tmp/grouped.csv"
"$bin" show "$tmp/show.json" > "$tmp/show.txt"
if grep -q "^standard errors: robust (sandwich HC0, factor [0-9.]*) by cluster column 'g', 100001 clusters;" \
    "$tmp/show.txt" && grep -q "robust SE" "$tmp/show.txt" && cmp -s "$tmp/show.txt" "$tmp/show.out"; then
    ok "the report says which standard errors it shows, the same when read back"
else
    fail "report" "$(grep -m1 '^standard errors' "$tmp/show.txt")"
fi

"$bin" report --html "$tmp/page.html" "$tmp/show.json" 2> "$tmp/page.err"
check "the HTML page says which standard errors it shows" grep -q \
    "Standard errors: robust (sandwich HC0, factor [0-9.]*) by cluster column <code>g</code>, 100001 clusters;" \
    "$tmp/page.html"

# 100001 clusters: grouped, a set of 262144 words (2 MiB) fits in 3 MiB;
# shuffled, their sums (16 + 8 x 4 bytes each: 4.8 MB) do not
fit_robust grouped2 --cluster g --cluster-memory 3 "$tmp/grouped.csv"
if [ "$rc" -eq 0 ]; then ok "grouped: 100001 clusters in 3 MiB"; else fail "grouped 3 MiB" "exit $rc: $(cat "$tmp/grouped2.err")"; fi
fit_robust shuffled2 --cluster g --cluster-memory 3 "$tmp/shuffled.csv"
if [ "$rc" -eq 13 ] && grep -q "group the file by the cluster column" "$tmp/shuffled2.err" && [ ! -e "$tmp/shuffled2.json" ]; then
    ok "shuffled past --cluster-memory: exit 13, no JSON, says to group the file"
else
    fail "shuffled 3 MiB" "exit $rc: $(cat "$tmp/shuffled2.err")"
fi
fit_robust shuffled --cluster g "$tmp/shuffled.csv"
check "shuffled within the default limit: the clusters of the grouped file" /usr/bin/python3 -c '
import json, sys
a, b = (json.load(open(p))["robust"] for p in sys.argv[1:])
assert a["clusters"] == b["clusters"] == 100001, (a["clusters"], b["clusters"])
for x, y in zip(a["standard_errors"], b["standard_errors"]):
    assert abs(x - y) <= 1e-10 * abs(y), (x, y)' "$tmp/grouped2.json" "$tmp/shuffled.json"

# a missing cluster cell leaves its row out; a model column may be the cluster
sed '2s/^c0,/,/' "$tmp/grouped.csv" > "$tmp/missing.csv"
fit_robust missing --cluster g "$tmp/missing.csv"
check "a missing cluster cell leaves its row out" /usr/bin/python3 -c '
import json, sys
r = json.load(open(sys.argv[1]))["rows"]
assert r["incomplete"] == 1 and r["missing_by_column"] == {"g": 1}, r' "$tmp/missing.json"
fit_robust factor --cluster a "$tmp/grouped.csv"
check "a model column as the cluster column" /usr/bin/python3 -c '
import json, sys
r = json.load(open(sys.argv[1]))["robust"]
assert r["clusters"] == 3 and r["cluster"] == "a", r' "$tmp/factor.json"

fit_robust nosuch --cluster nosuch "$tmp/grouped.csv"
if [ "$rc" -eq 2 ] && grep -q "the cluster column 'nosuch' is not in the header" "$tmp/nosuch.err"; then
    ok "an unknown cluster column: exit 2"
else
    fail "unknown cluster column" "exit $rc: $(cat "$tmp/nosuch.err")"
fi
fit_robust badtype --robust hc3 "$tmp/grouped.csv"
if [ "$rc" -eq 2 ] && grep -q -- "--robust takes hc0 or hc1" "$tmp/badtype.err"; then ok "--robust hc3: exit 2"; else fail "--robust hc3" "exit $rc"; fi
fit_robust plain "$tmp/grouped.csv"
check "without the options the JSON has no robust object" /usr/bin/python3 -c '
import json, sys
assert "robust" not in json.load(open(sys.argv[1]))' "$tmp/plain.json"

finish
