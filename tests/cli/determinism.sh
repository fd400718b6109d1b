#!/usr/bin/env bash
# The same fit must give bit-identical estimates, standard errors and deviance
# whatever the thread count, read size, in-memory mode, compression (zstd,
# gzip), line endings or whether the data come from a file or standard input.  The raw
# JSON text of the numbers is compared, so even a last-bit difference fails.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# About 50,000 rows of Poisson counts with two factors, a numeric and exposure.
/usr/bin/python3 - "$tmp/data.csv" <<'EOF'
import sys
import numpy as np
rng = np.random.default_rng(7)
n = 50000
region = rng.choice(["north", "south", "east", "west", "centre"], n)
sex = rng.choice(["F", "M"], n)
age = np.round(rng.uniform(20, 80, n), 3)
years = np.round(rng.uniform(0.1, 5.0, n), 4)
eff = {"north": 0.0, "south": 0.2, "east": -0.1, "west": 0.3, "centre": 0.1}
eta = -2.0 + np.array([eff[r] for r in region]) + 0.3 * (sex == "M") + 0.02 * age + np.log(years)
y = rng.poisson(np.exp(eta))
with open(sys.argv[1], "w") as fh:
    fh.write("claims,region,sex,age,years\n")
    fh.writelines("%d,%s,%s,%r,%r\n" % row for row in zip(y, region, sex, age, years))
EOF
zstd -q -f "$tmp/data.csv" -o "$tmp/data.csv.zst"
gzip -n -c < "$tmp/data.csv" > "$tmp/data.csv.gz"
sed 's/$/\r/' "$tmp/data.csv" > "$tmp/data_crlf.csv"

model=(--outcome claims --family poisson --factor "region ref=north" --factor sex
       --numeric age --interact "sex age" --exposure years)

# run NAME [fit options...] DATA ; reads standard input when DATA is -
run() {
    local name=$1
    shift
    "$bin" fit --quiet --json "$tmp/$name.json" "${model[@]}" "$@" > /dev/null 2> "$tmp/$name.err"
}

# Prints the raw text of every compared number, one "key text" per line.
values() {
    /usr/bin/python3 -c '
import json, sys
js = json.load(open(sys.argv[1]), parse_float=str, parse_int=str)
for c in js["coefficients"]:
    print("estimate[%s] %s" % (c["name"], c["estimate"]))
    print("standard_error[%s] %s" % (c["name"], c["standard_error"]))
print("deviance %s" % js["fit"]["deviance"])
' "$1"
}

if ! run base --threads 1 "$tmp/data.csv"; then
    fail base "exit $?: $(head -c 300 "$tmp/base.err")"
    echo "$passed passed, $failed failed"
    exit 1
fi
values "$tmp/base.json" > "$tmp/base.values"
ok "base (threads 1, $(grep -c . "$tmp/base.values") values)"

check() {
    local name=$1
    shift
    if ! run "$name" "$@"; then
        fail "$name" "exit $?: $(head -c 300 "$tmp/$name.err")"
        return
    fi
    values "$tmp/$name.json" > "$tmp/$name.values"
    if cmp -s "$tmp/base.values" "$tmp/$name.values"; then
        ok "$name"
    else
        fail "$name" "differs from threads 1: $(diff "$tmp/base.values" "$tmp/$name.values" | grep '^[<>]' | head -n 4 | tr '\n' '|')"
    fi
}

check threads_2 --threads 2 "$tmp/data.csv"
check threads_4 --threads 4 "$tmp/data.csv"
check buffer_16 --threads 2 --buffer-size 16 "$tmp/data.csv"
check buffer_4096 --threads 2 --buffer-size 4096 "$tmp/data.csv"
check buffer_1048576 --threads 2 --buffer-size 1048576 "$tmp/data.csv"
check in_memory --in-memory "$tmp/data.csv"
check in_memory_threads_4 --in-memory --threads 4 "$tmp/data.csv"
check zstd --threads 2 "$tmp/data.csv.zst"
check zstd_buffer_16 --threads 4 --buffer-size 16 "$tmp/data.csv.zst"
check crlf --threads 2 "$tmp/data_crlf.csv"
check no_cache --threads 2 --no-cache "$tmp/data.csv"
check no_cache_crlf_threads_4 --threads 4 --no-cache "$tmp/data_crlf.csv"
check no_cache_zstd --threads 2 --no-cache "$tmp/data.csv.zst"
check crlf_buffer_4096 --threads 4 --buffer-size 4096 "$tmp/data_crlf.csv"
check stdin --threads 2 - < <(cat "$tmp/data.csv")
check stdin_buffer_16 --threads 1 --buffer-size 16 - < <(cat "$tmp/data.csv")
check stdin_in_memory --in-memory - < <(cat "$tmp/data.csv")
check stdin_no_cache --threads 2 --no-cache --buffer-size 16 - < <(cat "$tmp/data.csv")
check stdin_zstd --threads 2 - < <(cat "$tmp/data.csv.zst")
check gzip_buffer_16 --threads 4 --buffer-size 16 "$tmp/data.csv.gz"
check stdin_gzip_no_cache --threads 2 --no-cache - < <(cat "$tmp/data.csv.gz")

finish
