#!/usr/bin/env bash
# The page of `millrace report --html` in a real browser: Debian's headless
# Chromium loads it from disk with the network off (its own network
# namespace where the machine allows one, and Chromium's flags against
# background traffic), and
# - its screenshot is not blank (tests/cli/html/png_ink.py decodes the PNG
#   with zlib and counts the pixels that are not white);
# - the DOM the browser built holds every plot with drawn marks, well-formed
#   (tests/cli/html/check_page.py on --dump-dom), and its tables the fits'
#   numbers (tests/cli/html/check_numbers.py);
# - the console shows no error;
# - the page prints to a non-empty PDF.
# Without Chromium (make test-deps installs the `chromium` package) the test
# says so and skips; it never passes silently.
source "$(dirname "${BASH_SOURCE[0]}")/common.bash"

# CHROMIUM names the browser (set empty to see the skip).
browser=${CHROMIUM-$(command -v chromium || command -v chromium-browser)}
if [ -z "$browser" ]; then
    echo "SKIP html_browser: chromium is not installed (make test-deps installs it): the page was not checked in a browser"
    echo "0 passed, 0 failed, 1 skipped"
    exit 0
fi
# A network namespace of our own, with nothing in it but a loopback that is down.
offline=()
if unshare -n true 2>/dev/null; then offline=(unshare -n); else echo "note: no network namespace here; Chromium's flags alone keep it offline"; fi

"$bin" fit --quiet --json "$tmp/falls.json" -m "$root/samples/falls.model" "$root/samples/falls.csv.zst" >/dev/null
"$bin" fit --quiet --json "$tmp/screening.json" -m "$root/samples/screening.model" "$root/samples/screening.csv" >/dev/null
head -n 2001 "$root/samples/falls.csv" >"$tmp/part.csv"
"$bin" fit --quiet --json "$tmp/rerun.json" -m "$root/samples/falls.model" "$tmp/part.csv" >/dev/null
# A calibration plot (the groups of tests/cli/html/calibration.json added to
# the fit) and a funnel plot (a scoring run's groups).
/usr/bin/python3 -c 'import json, sys; f = json.load(open(sys.argv[1])); f.update(json.load(open(sys.argv[2])))
json.dump(f, open(sys.argv[3], "w"), indent=1)' "$tmp/falls.json" "$here/html/calibration.json" "$tmp/calib.json"
"$bin" score --quiet --fit "$tmp/falls.json" --out "$tmp/scored.csv" --by region --by-out "$tmp/groups.json" \
    "$root/samples/falls.csv.zst"
"$bin" report --html "$tmp/page.html" --at year=2020 --groups "$tmp/groups.json" "$tmp/calib.json" "$tmp/rerun.json" \
    "$tmp/screening.json"
check "page written" test -s "$tmp/page.html"

run_browser() { # run_browser NAME FLAGS...: stdout to $tmp/NAME.out, stderr to $tmp/NAME.err
    local name=$1
    shift
    rm -rf "$tmp/profile"
    timeout 90 "${offline[@]}" "$browser" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync --disable-extensions \
        --user-data-dir="$tmp/profile" --enable-logging=stderr --v=0 "$@" "file://$tmp/page.html" \
        >"$tmp/$name.out" 2>"$tmp/$name.err"
}

run_browser shot --window-size=1280,1600 --screenshot="$tmp/page.png"
check "screenshot taken" test -s "$tmp/page.png"
ink=$(/usr/bin/python3 "$here/html/png_ink.py" "$tmp/page.png" 2>&1)
# A page of text and tables inks a few per cent of its pixels; a blank one none.
if awk -v v="$ink" 'BEGIN { exit !(v + 0 > 0.01 && v + 0 < 0.6) }'; then ok "screenshot not blank ($ink of the pixels inked)"; else fail "screenshot" "inked share $ink"; fi

run_browser dom --dump-dom
check "DOM as the browser built it: plots with marks, well-formed" /usr/bin/python3 "$here/html/check_page.py" \
    "$tmp/dom.out" cautions fit-1 fit-2 fit-3 forest-1 effect-1-1 curve-1-1 curve-3-2 calibration-1 comparison \
    change-2 groups funnel not-shown
check "DOM as the browser built it: the tables' numbers are the fits' JSON's" /usr/bin/python3 \
    "$here/html/check_numbers.py" --groups "$tmp/groups.json" "$tmp/dom.out" "$tmp/calib.json" "$tmp/rerun.json" \
    "$tmp/screening.json"
plots=$(grep -o '<figure id="[^"]*"' "$tmp/page.html" | wc -l)
drawn=$(grep -o '<figure id="[^"]*"' "$tmp/dom.out" | wc -l)
check "every plot of the page is in the browser's DOM ($plots)" test "$plots" -gt 5 -a "$plots" = "$drawn"

run_browser pdf --print-to-pdf="$tmp/page.pdf" --no-pdf-header-footer
check "printed to PDF" test "$(head -c 5 "$tmp/page.pdf" 2>/dev/null)" = "%PDF-" -a "$(stat -c %s "$tmp/page.pdf" 2>/dev/null || echo 0)" -gt 20000

# Console lines of the page itself (Chromium's own chrome:// pages, such as the
# print preview, log messages of their own), and anything refused or failed
# that names the page.
cat "$tmp"/shot.err "$tmp"/dom.err "$tmp"/pdf.err >"$tmp/console"
if { grep 'CONSOLE' "$tmp/console" | grep -v 'source: chrome://'; grep -E 'Uncaught|Refused to|net::ERR' "$tmp/console" |
    grep -F "$tmp/page.html"; } >"$tmp/console.bad"; then
    fail "console" "$(head -3 "$tmp/console.bad")"
else
    ok "no console errors, nothing refused, no network request failed"
fi
[ -n "${HTML_SHOT_DIR:-}" ] && cp "$tmp/page.png" "$tmp/page.pdf" "$HTML_SHOT_DIR/"
finish
