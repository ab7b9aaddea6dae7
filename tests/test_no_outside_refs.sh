#!/bin/bash
# tests/test_no_outside_refs.sh - the repository stands alone: no tracked file refers to the
# design pages the project was started from (their content is docs/spec/) or to an absolute
# path outside the repository (a user's or a build machine's folders).
#
# Allowed absolute paths: the standard system folders (/tmp, /dev, /usr, /proc, /sys, /etc,
# /bin, /sbin, /lib, /lib64, /var, /run), names beginning "nonexistent" (tests of a missing
# file), a path right after a folder variable (SOURCE_DIR "/dictionaries/...",
# ${CMAKE_SOURCE_DIR}/src), and .gitignore (its patterns are relative to the repository).
# Binary files (sample files, fuzz inputs with NUL bytes) are not read.
#
# The patterns are built from pieces so that this file does not match itself.
# scripts/fix-references.py rewrites the old page references into docs/spec/.
set -u
SRC=${ULK_SOURCE_DIR:-$(cd "$(dirname "$0")/.." && pwd)}
cd "$SRC" || { echo "FAIL: cannot enter the source folder $SRC"; exit 1; }
git rev-parse --is-inside-work-tree >/dev/null 2>&1 || { echo "FAIL: $SRC is not a git checkout (the test lists tracked files)"; exit 1; }

pages="subbit-profile|ccsds-tc-profile|composite-carrier|interfaces"
folder="shared/""design"
names_re="(${pages})[.]md|${folder}"
abs_re="(^|[[:space:]\"'\`(=:,;<[])/[A-Za-z][A-Za-z0-9_.-]*/"
allowed_top="tmp|dev|usr|proc|sys|etc|bin|sbin|lib|lib64|var|run|nonexistent[A-Za-z0-9_.-]*"

T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
git ls-files -z | grep -z -v -E '(^|/)\.gitignore$' > "$T/files"
n_files=$(tr -cd '\0' < "$T/files" | wc -c)
[ "$n_files" -gt 50 ] || { echo "FAIL: only $n_files tracked files listed; expected the whole tree"; exit 1; }

# 1. the former design pages and their folder
xargs -0 grep -I -n -E "$names_re" < "$T/files" > "$T/names" 2>/dev/null
# 2. absolute paths whose first folder is not a system folder
xargs -0 grep -I -n -o -E "$abs_re" < "$T/files" 2>/dev/null \
    | grep -v -E "/(${allowed_top})/\$" > "$T/abs0"
# drop paths that follow a folder variable (the -o match starts at the quote)
: > "$T/abs"
while IFS= read -r hit; do
    file=${hit%%:*}; rest=${hit#*:}; line=${rest%%:*}; frag=${rest#*:}
    frag=${frag#?}   # the character before the slash
    text=$(sed -n "${line}p" -- "$file")
    case "$text" in
        *"DIR \"$frag"*|*"DIR}$frag"*) continue ;;
    esac
    echo "$file:$line: $frag" >> "$T/abs"
done < "$T/abs0"

# the check itself must be able to fail: a line of each kind is found
printf 'see %s-%s.md section 2\n' "subbit" "profile" > "$T/probe1"
printf 'path /%s/notes/x.md\n' "work" > "$T/probe2"
grep -q -E "$names_re" "$T/probe1" || { echo "FAIL: the page pattern misses a former page reference"; exit 1; }
grep -o -E "$abs_re" "$T/probe2" | grep -q -v -E "/(${allowed_top})/\$" \
    || { echo "FAIL: the path pattern misses an outside absolute path"; exit 1; }

status=0
if [ -s "$T/names" ]; then
    echo "FAIL: $(wc -l < "$T/names") line(s) refer to the former design pages (run scripts/fix-references.py):"
    cat "$T/names"
    status=1
fi
if [ -s "$T/abs" ]; then
    echo "FAIL: $(wc -l < "$T/abs") absolute path(s) outside the repository:"
    cat "$T/abs"
    status=1
fi
[ $status -eq 0 ] && echo "ok: $n_files tracked files, no reference outside the repository"
exit $status
