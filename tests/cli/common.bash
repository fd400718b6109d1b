# common.bash - what every command-line test needs: the repository root, the
# binary, a temporary directory removed on exit, and ok/fail counting
# that ends in the "N passed, M failed" line CI reads.  Source it.
set -u
here=$(cd "$(dirname "${BASH_SOURCE[1]}")" && pwd)
root=$(cd "$here/../.." && pwd)
bin="$root/build/millrace"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

passed=0
failed=0
ok() { echo "ok $1"; passed=$((passed + 1)); }
fail() { echo "FAIL $1: $2"; failed=$((failed + 1)); }
finish() { echo "$passed passed, $failed failed"; [ "$failed" -eq 0 ]; }

# fit_values JSON: the raw text of a fit's numbers, one line each, for
# comparing two fits bit for bit (coefficients, standard errors, deviance,
# Pearson statistic, rows read).
fit_values() {
    /usr/bin/python3 -c '
import json, sys
js = json.load(open(sys.argv[1]), parse_float=str, parse_int=str)
for c in js["coefficients"]:
    print("estimate[%s] %s std_error %s" % (c["name"], c["estimate"], c["standard_error"]))
print("deviance %s pearson %s rows %s" % (js["fit"]["deviance"], js["fit"]["pearson_chi2"], js["rows"]["read"]))
' "$1"
}

# same_as_base NAME EXIT_CODE: the fit that wrote $tmp/NAME.json (stderr in
# $tmp/NAME.err) exited 0 with the numbers of $tmp/base.values.
same_as_base() {
    local name=$1 rc=$2
    if [ "$rc" -ne 0 ]; then
        fail "$name" "exit $rc: $(head -c 300 "$tmp/$name.err")"
    elif fit_values "$tmp/$name.json" | cmp -s - "$tmp/base.values"; then
        ok "$name"
    else
        fail "$name" "differs: $(fit_values "$tmp/$name.json" | diff "$tmp/base.values" - | head -n 4 | tr '\n' '|')"
    fi
}

if [ ! -x "$bin" ]; then
    fail setup "$bin not found (run make first)"
    finish
    exit 1
fi

# check NAME command...: ok when the command succeeds, else a failure showing
# the start of its output.
check() {
    local name=$1
    shift
    if "$@" >"$tmp/check.out" 2>&1; then ok "$name"; else fail "$name" "$(head -5 "$tmp/check.out")"; fi
}
