#!/bin/bash
# tests/test_exports.sh - libulk.so exports exactly the functions declared in the public headers
# (include/ulk/*.h), nothing internal; the shipped program has no allocation-failure injection
# (ULK_FAIL_ALLOC is read only by the test build, ulk_fi).
set -u
SRC=${ULK_SOURCE_DIR:?}
BIN=${ULK_BINARY_DIR:?}
ULK=${ULK:?}
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fail=0
so=$(ls "$BIN"/libulk.so.* 2>/dev/null | head -1)
[ -n "$so" ] || { echo "FAIL: no libulk.so in $BIN"; exit 1; }
nm -D --defined-only "$so" | awk '$2 ~ /^[TDBRWV]$/ {print $3}' | sed 's/@.*//' | sort -u >"$T/exported"
cat "$SRC/include/ulk/"*.h | sed 's|/\*.*\*/||' | grep -o '\bulk_[A-Za-z0-9_]*[[:space:]]*(' | tr -d ' (' | sort -u >"$T/declared"
extra=$(comm -23 "$T/exported" "$T/declared")
if [ -n "$extra" ]; then echo "FAIL: exported but not declared in include/ulk/*.h:"; echo "$extra"; fail=1; fi
n=$(wc -l <"$T/exported")
[ "$n" -gt 100 ] || { echo "FAIL: only $n symbols exported"; fail=1; }
bad=$(grep -v '^ulk_' "$T/exported")
[ -z "$bad" ] || { echo "FAIL: exported names outside ulk_: $bad"; fail=1; }
[ $fail = 0 ] && echo "ok: $n exported symbols, every one declared in include/ulk/*.h"

if grep -q ULK_FAIL_ALLOC "$ULK" "$so"; then echo "FAIL: the shipped program or library reads ULK_FAIL_ALLOC"; fail=1; fi
ULK_FAIL_ALLOC=1 "$ULK" validate "$SRC/dictionaries/demo-subbit.yaml" >/dev/null 2>&1
rc=$?
[ $rc = 0 ] || { echo "FAIL: ULK_FAIL_ALLOC=1 changed the shipped program (exit $rc)"; fail=1; }
ULK_FAIL_ALLOC=1 "$BIN/ulk_fi" validate "$SRC/dictionaries/demo-subbit.yaml" >/dev/null 2>&1
rc=$?
[ $rc != 0 ] || { echo "FAIL: ulk_fi ignored ULK_FAIL_ALLOC=1"; fail=1; }
[ $fail = 0 ] && echo "ok: fault injection only in ulk_fi (ulk: exit 0 under ULK_FAIL_ALLOC=1, ulk_fi: exit $rc)"
exit $fail
