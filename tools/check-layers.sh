#!/bin/sh
# check-layers.sh - the folders under src/ are layered: a file includes only
# headers of its own folder or of folders below it, so that each layer can
# be read, tested and changed without the ones above.  The order (lowest
# first) is the one DEVELOPERS.md draws; change both together.
#
# Also fails on a cycle between two files of a folder (a.c includes b.h and
# b.c includes a.h), which the order alone does not catch.
#
# Usage: tools/check-layers.sh [SRC_DIR]   (exit 1 on any violation)
set -eu

ORDER="common input family model accum solve fit output cli"
src=${1:-src}

rank() {
    i=0
    for layer in $ORDER; do
        [ "$layer" = "$1" ] && { echo $i; return; }
        i=$((i + 1))
    done
    echo -1
}

bad=0
edges=$(mktemp)
trap 'rm -f "$edges" "$edges.err"' EXIT

for file in $(find "$src" -name '*.[ch]' | sort); do
    folder=$(basename "$(dirname "$file")")
    module=$folder/$(basename "$file" | sed 's/\.[ch]$//')
    own=$(rank "$folder")
    if [ "$own" -lt 0 ]; then
        echo "$file: folder '$folder' is not in the layer order ($ORDER)"
        bad=1
        continue
    fi
    # "name.h" (no folder) is a header of the file's own folder.
    for inc in $(sed -n 's/^[[:space:]]*#[[:space:]]*include[[:space:]]*"\([^"]*\)".*/\1/p' "$file"); do
        case $inc in
        millrace.h) continue ;;
        */*) target=${inc%%/*} ;;
        *) target=$folder; inc=$folder/$inc ;;
        esac
        theirs=$(rank "$target")
        if [ "$theirs" -lt 0 ] || [ "$theirs" -gt "$own" ]; then
            echo "$file: includes \"$inc\": $target is above $folder (order: $ORDER)"
            bad=1
        fi
        target_module=$(echo "$inc" | sed 's/\.[ch]$//')
        [ "$target_module" != "$module" ] && echo "$module $target_module" >>"$edges"
    done
done

if ! tsort "$edges" >/dev/null 2>"$edges.err"; then
    echo "include cycle between modules (file names without .c/.h):"
    grep -v 'input contains a loop' "$edges.err" | sed 's/^tsort: /  /'
    bad=1
fi

if [ $bad -ne 0 ]; then
    echo "check-layers: a file includes a header above its layer, or modules include each other (see above)"
    exit 1
fi
echo "check-layers: every include goes down the order $ORDER, no cycles"
