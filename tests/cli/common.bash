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
