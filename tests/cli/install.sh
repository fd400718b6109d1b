#!/usr/bin/env bash
# make install and make uninstall (mk/install.mk), as a user or a packager
# uses them:
# - a staged install (DESTDIR, PREFIX=/usr/local) puts exactly the expected
#   files there, with the soname links, the .pc file and only the MR_API
#   calls exported; make uninstall removes exactly those, nothing else;
# - an install into a temporary prefix serves a C program built with
#   `pkg-config --cflags --libs millrace`, run on the shared library, and
#   again linked with the static library by `pkg-config --static`: both fit
#   the screening sample to the same bits as the installed command.
# shellcheck source=tests/cli/common.bash
source "$(dirname "$0")/common.bash"
cd "$root" || exit 1
# The test's own make, not a part of the make that may have started it.
unset MAKEFLAGS MFLAGS MAKELEVEL
version=$(sed -n 's/^#define MR_VERSION_STRING "\(.*\)"/\1/p' include/millrace.h)
soname=libmillrace.so.${version%%.*}

files_under() { (cd "$1" && find . \( -type f -o -type l \) | sed 's|^\./||' | sort); }

# ---- a staged install, as a Debian package build makes one -----------------
stage=$tmp/stage
mkdir -p "$stage/usr/local/lib" "$stage/usr/local/share/man/man1"
echo keep >"$stage/usr/local/lib/libother.so.1"
echo keep >"$stage/usr/local/share/man/man1/other.1"
check "make install DESTDIR" make -s install DESTDIR="$stage" PREFIX=/usr/local
sort >"$tmp/want" <<EOF
usr/local/bin/millrace
usr/local/include/millrace.h
usr/local/lib/$soname
usr/local/lib/libmillrace.a
usr/local/lib/libmillrace.so
usr/local/lib/libmillrace.so.$version
usr/local/lib/libother.so.1
usr/local/lib/pkgconfig/millrace.pc
usr/local/share/bash-completion/completions/millrace
usr/local/share/doc/millrace/examples/README.md
usr/local/share/doc/millrace/examples/falls.csv.zst
usr/local/share/doc/millrace/examples/falls.model
usr/local/share/doc/millrace/examples/screening.csv.zst
usr/local/share/doc/millrace/examples/screening.model
usr/local/share/man/man1/millrace.1
usr/local/share/man/man1/other.1
EOF
files_under "$stage" >"$tmp/got"
check "installed files" diff "$tmp/want" "$tmp/got"

lib=$stage/usr/local/lib
check "soname link" test "$(readlink "$lib/$soname")" = "libmillrace.so.$version"
check "development link" test "$(readlink "$lib/libmillrace.so")" = "libmillrace.so.$version"
check "SONAME $soname" grep -qE "SONAME +$soname\$" <(objdump -p "$lib/libmillrace.so.$version")
check "modes: command 755, library and data 644" test \
    "$(stat -c %a "$stage/usr/local/bin/millrace" "$lib/libmillrace.so.$version" "$lib/libmillrace.a" \
        "$stage/usr/local/share/man/man1/millrace.1" | tr '\n' ' ')" = "755 644 644 644 "

# Exported: exactly the calls the header declares MR_API, nothing internal.
grep -E '^MR_API' include/millrace.h | sed -E 's/\(.*//; s/.*[ *]//' | sort >"$tmp/api"
nm -D --defined-only "$lib/libmillrace.so.$version" | awk '{ print $3 }' | sort >"$tmp/exported"
check "exported symbols are the MR_API calls ($(wc -l <"$tmp/api"))" diff "$tmp/api" "$tmp/exported"

pc_has() { # pc_has LINE...: each line is in the installed millrace.pc
    local line
    for line; do grep -qxF "$line" "$lib/pkgconfig/millrace.pc" || { echo "no line '$line'"; return 1; }; done
}
# shellcheck disable=SC2016 # ${prefix} is pkg-config's, written as it is
check "millrace.pc: prefix, version, directories" pc_has "prefix=/usr/local" "Version: $version" \
    'libdir=${prefix}/lib' 'includedir=${prefix}/include'
check "millrace.pc: private dependencies for a static link" pc_has \
    "Requires.private: openblas lapacke jansson libzstd zlib" "Libs.private: -lcsv -pthread -lm"

check "make uninstall DESTDIR" make -s uninstall DESTDIR="$stage" PREFIX=/usr/local
printf '%s\n' usr/local/lib/libother.so.1 usr/local/share/man/man1/other.1 >"$tmp/want"
files_under "$stage" >"$tmp/got"
check "uninstall leaves only what it did not install" diff "$tmp/want" "$tmp/got"
check "uninstall removes share/doc/millrace" test ! -e "$stage/usr/local/share/doc/millrace"

# ---- an install into a temporary prefix, used through pkg-config -------------
prefix=$tmp/prefix
check "make install PREFIX" make -s install PREFIX="$prefix" LDCONFIG=:
export PKG_CONFIG_PATH=$prefix/lib/pkgconfig
check "pkg-config --modversion" test "$(pkg-config --modversion millrace)" = "$version"

data=samples/screening.csv model=samples/screening.model
"$prefix/bin/millrace" fit -m "$model" --quiet --json "$tmp/fit.json" "$data" >/dev/null
want=$(/usr/bin/python3 -c '
import json, sys
fit = json.load(open(sys.argv[1]))
print("age %.17g" % next(c["estimate"] for c in fit["coefficients"] if c["name"] == "age"))
' "$tmp/fit.json")

shared=$tmp/fit_shared
# shellcheck disable=SC2046 # pkg-config's words are meant to split
check "build with pkg-config --cflags --libs" \
    cc -std=c11 -Wall -Wextra -Werror -o "$shared" tests/cli/install_fit.c $(pkg-config --cflags --libs millrace)
check "linked against the installed shared library" \
    grep -qF "$prefix/lib/$soname" <(LD_LIBRARY_PATH=$prefix/lib ldd "$shared")
got=$(LD_LIBRARY_PATH=$prefix/lib "$shared" "$data" "$model" age)
check "shared library fit: $got (command: $want)" test "$got" = "$want"

static=$tmp/fit_static
libs=$(pkg-config --static --libs millrace)
# -l:libmillrace.a picks the archive where the shared library lies too.
# shellcheck disable=SC2046,SC2086
check "build with pkg-config --static" \
    cc -std=c11 -Wall -Wextra -Werror -o "$static" tests/cli/install_fit.c $(pkg-config --cflags millrace) \
    ${libs/-lmillrace/-l:libmillrace.a}
check "static build needs no libmillrace.so" test -z "$(objdump -p "$static" | grep 'NEEDED.*libmillrace')"
got=$("$static" "$data" "$model" age)
check "static library fit: $got" test "$got" = "$want"

check "make uninstall PREFIX" make -s uninstall PREFIX="$prefix" LDCONFIG=:
check "nothing left under the prefix" test -z "$(files_under "$prefix")"
finish
