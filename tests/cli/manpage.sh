#!/usr/bin/env bash
# The man page (doc/millrace.1) and the bash completion
# (doc/millrace.bash-completion) against the command itself:
# - the man page's OPTIONS describe every option src/cli/*.c accept
#   and no other; so does the completion; --help and the README name each;
# - its EXIT STATUS lists exactly the status values of millrace.h;
# - its version is the library's, groff renders it without a warning;
# - every command of its EXAMPLES runs on the bundled samples;
# - the completion completes commands, options and option values.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
cd "$root" || exit 1
man=doc/millrace.1
completion=doc/millrace.bash-completion

# The lines of a man page section, roff's \- as -.
section() { awk -v s="$1" '/^\.SH/ { on = ($0 ~ "^\\.SH \"?" s "\"?$"); next } on' "$man" | sed 's/\\-/-/g'; }
options_in() { grep -oE '(^|[^a-zA-Z0-9])--?[a-z][a-z-]*' | sed -E 's/^[^-]*//' | sort -u; }

# What the command accepts: the long options of getopt_long's tables (fit's,
# report's, the run's shared by fit and compare) and the letters of the
# short-option strings given to the option loop.
{
    cat src/cli/*.[ch] | grep -oE '\{"[a-z-]+", *(no|required|optional)_argument' | grep -oE '"[a-z-]+"' | sed 's/^"/--/; s/"//'
    cat src/cli/*.c | grep -oE '(getopt_long|cli_options)\([^"]*"[^"]*"' | sed -E 's/.*"(.*)"/\1/' | tr -d ':' | grep -o . | sed 's/^/-/'
} | sort -u >"$tmp/accepted"
check "option table read ($(wc -l <"$tmp/accepted") options)" test "$(wc -l <"$tmp/accepted")" -gt 20

# Option headings: the line after each .TP of OPTIONS.
section OPTIONS | awk 'tp { print; tp = 0 } /^\.TP/ { tp = 1 }' | options_in >"$tmp/man_options"
check "man page OPTIONS: every accepted option and no other" diff "$tmp/accepted" "$tmp/man_options"

# shellcheck source=doc/millrace.bash-completion
source "$completion"
tr -s ' \n' '\n' <<<"$_millrace_options" | grep . | sort -u >"$tmp/completion_options"
check "completion: every accepted option and no other" diff "$tmp/accepted" "$tmp/completion_options"

missing=$(while read -r option; do grep -qE -- "$option([^a-z-]|\$)" README.md || echo "$option"; done <"$tmp/accepted")
if [ -z "$missing" ]; then ok "README names every accepted option"; else fail "README" "no ${missing//$'\n'/ }"; fi

"$bin" help | options_in >"$tmp/help_options"
echo --help >>"$tmp/help_options" # the help text does not list itself
sort -u -o "$tmp/help_options" "$tmp/help_options"
check "--help names every accepted option" diff "$tmp/accepted" "$tmp/help_options"

sed -n '/typedef enum mr_status/,/} mr_status;/p' include/millrace.h | grep -oE '^ *MR_[A-Z_]+ = [0-9]+' | grep -oE '[0-9]+$' | sort -n >"$tmp/statuses"
section "EXIT STATUS" | awk 'tp { print; tp = 0 } /^\.TP/ { tp = 1 }' | sed -E 's/^\.B +//' | sort -n >"$tmp/man_statuses"
check "EXIT STATUS: the status values of millrace.h" diff "$tmp/statuses" "$tmp/man_statuses"

check "man page version is the library's" grep -qF "\"$("$bin" version)\"" <(grep -m1 '^\.TH' "$man")
for s in NAME SYNOPSIS DESCRIPTION COMMANDS OPTIONS '"MODEL FILE"' '"EXIT STATUS"' ENVIRONMENT FILES EXAMPLES \
    CAVEATS; do
    grep -qx "\.SH $s" "$man" || fail "man page section $s" "missing"
done
check "ENVIRONMENT names TMPDIR" grep -q '^\.B TMPDIR' <(section ENVIRONMENT)
for w in overdispers confounding 'Validate before use'; do
    section CAVEATS | grep -qi "$w" || fail "CAVEATS" "nothing on '$w'"
done

if groff -man -Tutf8 -ww -z "$man" 2>"$tmp/groff.err" && [ ! -s "$tmp/groff.err" ]; then
    ok "groff renders the man page without warnings"
else
    fail "groff" "$(head -3 "$tmp/groff.err")"
fi

# The examples, as a user would type them in a copy of the samples.
mkdir "$tmp/examples" && cp samples/*.csv samples/*.csv.zst samples/*.model "$tmp/examples/"
section EXAMPLES | sed -n '/^\.nf/,/^\.fi/p' | grep -v '^\.' |
    sed -e 's/\\e/\\/g' -e 's/\\(dq/"/g' -e 's/\\(aq/'"'"'/g' | sed -e :a -e '/\\$/N; s/\\\n//; ta' >"$tmp/examples.txt"
[ "$(wc -l <"$tmp/examples.txt")" -ge 4 ] || fail "examples read" "$(cat "$tmp/examples.txt")"
while IFS= read -r example; do
    if (cd "$tmp/examples" && PATH="$root/build:$PATH" bash -c "$example" >/dev/null 2>"$tmp/example.err"); then
        ok "example: $example"
    else
        fail "example: $example" "$(head -3 "$tmp/example.err")"
    fi
done <"$tmp/examples.txt"
check "example wrote falls-fit.json" test -s "$tmp/examples/falls-fit.json"

# The completion itself.
complete_words() { # complete_words WORD...: the completions of the last word
    COMP_WORDS=("$@")
    COMP_CWORD=$(($# - 1))
    COMPREPLY=()
    _millrace
    echo "${COMPREPLY[*]}"
}
expect_completion() { # expect_completion WANT WORD...
    local want=$1 got
    shift
    got=$(complete_words "$@")
    check "completion of '$*': '$want'" test "$got" = "$want"
}
expect_completion "fit" millrace f
expect_completion "report" millrace rep
expect_completion "--family" millrace fit --fam
expect_completion "--no-intercept --no-cache --no-collapse" millrace fit -m falls.model --no-
expect_completion "poisson" millrace fit --family po
expect_completion "inverse inverse-squared" millrace fit --link inv
expect_completion "fail skip" millrace fit --on-bad-row ""
expect_completion "" millrace fit --model fa
finish
