#!/bin/sh
# Installs the Debian packages millrace needs, or says which to install.
# Usage: tools/install-deps.sh PACKAGE...
# As root it runs apt-get for whatever is missing; otherwise it prints the
# one apt-get line to run and fails, so a build never half-works.
missing=""
for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing="$missing $p"
done
[ -z "$missing" ] && exit 0
if [ "$(id -u)" = 0 ]; then
    echo "installing Debian packages:$missing"
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -q >/dev/null && apt-get install -y -q --no-install-recommends $missing >/dev/null || {
        echo "apt-get could not install:$missing" >&2; exit 1; }
else
    echo "millrace needs these Debian packages; install them with:" >&2
    echo "  sudo apt-get install$missing" >&2
    exit 1
fi
