#!/usr/bin/env bash
# Text that is not UTF-8 (a Latin-1 extract) and text cut to a length, in
# the JSON and in messages.  Sources of truth: RFC 8259 and RFC 3629 as
# implemented by Python's json module and bytes.decode('utf-8') (strict);
# the escape for other bytes is the one README ("JSON output") documents.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# A Latin-1 column name (r\xe9gion) and Latin-1 levels (\xc9st), in a file
# whose name is Latin-1 too.
data="$tmp/r"$'\xe9'"gions.csv"
printf 'y,r\xe9gion,x\n1,Nord,1\n2,\xc9st,2\n3,Sud,3\n5,\xc9st,4\n4,Nord,5\n7,Sud,2\n6,\xc9st,1\n' > "$data"
"$bin" fit --outcome y --family poisson --factor $'r\xe9gion' --numeric x --quiet --json "$tmp/l1.json" "$data" \
    > "$tmp/l1.out" 2> "$tmp/l1.err"
rc=$?
if [ $rc != 0 ]; then
    fail latin1_fit "exit $rc: $(head -c 300 "$tmp/l1.err")"
elif result=$(/usr/bin/python3 - "$tmp/l1.json" "$data" <<'PY'
import json, re, sys

def raw(s):
    """The bytes a JSON text stands for: \\xHH is a byte, \\\\ a backslash."""
    out, i = bytearray(), 0
    while i < len(s):
        if s[i] == "\\":
            if s[i + 1] == "\\":
                out += b"\\"; i += 2; continue
            assert s[i + 1] == "x", s
            out.append(int(s[i + 2:i + 4], 16)); i += 4; continue
        out += s[i].encode("utf-8"); i += 1
    return bytes(out)

j = json.load(open(sys.argv[1], encoding="utf-8"))
names = [raw(c["name"]) for c in j["coefficients"]]
want = [b"intercept", b"r\xe9gion=Sud", b"r\xe9gion=\xc9st", b"x"]
p = len(j["coefficients"])
problems = []
if names != want: problems.append("coefficients %r" % names)
if len(j["covariance"]) != p or any(len(row) != p for row in j["covariance"]):
    problems.append("covariance is not %d x %d" % (p, p))
if any(c["estimate"] is None for c in j["coefficients"]): problems.append("an estimate is null")
f = j["model"]["factors"]
if [raw(k) for k in f] != [b"r\xe9gion"]: problems.append("factors %r" % list(f))
levels = [raw(l) for l in next(iter(f.values()))["levels"]]
if levels != [b"Nord", b"Sud", b"\xc9st"]: problems.append("levels %r" % levels)
if raw(j["input"]["path"]) != sys.argv[2].encode("utf-8", "surrogateescape"):
    problems.append("path %r" % j["input"]["path"])
print("; ".join(problems) if problems else "p=%d" % p)
sys.exit(1 if problems else 0)
PY
); then
    ok "latin1_coefficients_and_covariance ($result)"
else
    fail latin1_coefficients_and_covariance "$result"
fi

# A backslash in a name is doubled, so that \xHH stays unambiguous.
printf 'y,a\\xE9\n1,1\n2,2\n4,3\n3,4\n' > "$tmp/bs.csv"
if "$bin" fit --outcome y --numeric 'a\xE9' --quiet --json "$tmp/bs.json" "$tmp/bs.csv" > /dev/null 2>&1 &&
    /usr/bin/python3 -c '
import json, sys
j = json.load(open(sys.argv[1]))
sys.exit(0 if j["coefficients"][1]["name"] == "a\\\\xE9" else 1)' "$tmp/bs.json"; then
    ok backslash_doubled
else
    fail backslash_doubled "$(grep -o '"name": "a[^"]*"' "$tmp/bs.json" 2>/dev/null)"
fi

# Cut text: a bad cell of 3-byte characters (quoted at 60 bytes) and a
# column name of 2-byte characters too long for a row message (300 bytes)
# are cut between characters, in the JSON's examples and on stderr.
long_name=$(printf 'n%.0s\xc3\xa9' $(seq 1 200))
long_cell=$(printf 'a'; printf '\xe2\x82\xac%.0s' $(seq 1 40))
{ printf 'y,%s\n' "$long_name"; printf '1,1\n2,%s\n3,3\n5,4\n4,5\n' "$long_cell"; } > "$tmp/cut.csv"
"$bin" fit --outcome y --numeric "$long_name" --on-bad-row skip --quiet --json "$tmp/cut.json" "$tmp/cut.csv" \
    > /dev/null 2> "$tmp/cut.err"
rc=$?
{ printf 'y,x\n1,1\n2,%s\n' "$long_cell"; } > "$tmp/cut2.csv"
"$bin" fit --outcome y --numeric x --quiet "$tmp/cut2.csv" > /dev/null 2> "$tmp/cut2.err"
rc2=$?
if [ $rc != 0 ] || [ $rc2 != 4 ]; then
    fail cut_on_characters "exit $rc and $rc2: $(head -c 200 "$tmp/cut.err")"
elif result=$(/usr/bin/python3 - "$tmp/cut.json" "$tmp/cut2.err" <<'PY'
import json, sys
j = json.load(open(sys.argv[1], encoding="utf-8"))
ex = j["rows"]["bad_examples"]
problems = []
if len(ex) != 1: problems.append("%d examples" % len(ex))
elif "\\" in ex[0]: problems.append("example holds a byte that is not UTF-8: %r" % ex[0][-80:])
try:
    err = open(sys.argv[2], "rb").read().decode("utf-8")
    if "\u20ac..." not in err: problems.append("stderr not cut as expected: %r" % err[-80:])
except UnicodeDecodeError as e:
    problems.append("stderr is not UTF-8: %s" % e)
print("; ".join(problems) if problems else "ok")
sys.exit(1 if problems else 0)
PY
); then
    ok cut_on_characters
else
    fail cut_on_characters "$result"
fi

finish
