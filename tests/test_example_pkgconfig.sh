#!/bin/bash
# tests/test_example_pkgconfig.sh - the library as another program sees it: installs the build
# into a temporary prefix (cmake --install), builds examples/rx_example.c with nothing but
# `pkg-config --cflags --libs ulk` from that prefix (examples/Makefile), once against the
# shared library and once against libulk.a with `pkg-config --static` (so Requires.private
# and Libs.private must be complete), and runs both on a demo capture: every command of the
# demo list must come out accepted, in order.
set -u
SRC=${ULK_SOURCE_DIR:-$(cd "$(dirname "$0")/.." && pwd)}
BIN=${ULK_BINARY_DIR:-$SRC/build}
ULK=${ULK:-$BIN/ulk}
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

cmake --install "$BIN" --prefix "$T/prefix" >"$T/install.log" 2>&1 || { cat "$T/install.log"; fail "cmake --install"; }
pc=$(find "$T/prefix" -name ulk.pc | head -1)
[ -n "$pc" ] || fail "no ulk.pc installed under the prefix"
export PKG_CONFIG_PATH=$(dirname "$pc")
[ "$(pkg-config --variable=libdir ulk)" -ef "$(dirname "$(dirname "$pc")")" ] ||
    fail "ulk.pc's libdir $(pkg-config --variable=libdir ulk) is not where it was installed"
[ -f "$(pkg-config --variable=includedir ulk)/ulk/rx.h" ] || fail "ulk/rx.h not installed under the includedir"
# a sanitizer build's library needs the sanitizer runtime in the program too: the example is
# built with the build's own compiler and, when they name a sanitizer, its C flags
cache="$BIN/CMakeCache.txt"
cc=$(sed -n 's/^CMAKE_C_COMPILER:[A-Z]*=//p' "$cache" 2>/dev/null)
[ -n "$cc" ] && export CC="$cc"
cflags=$(sed -n 's/^CMAKE_C_FLAGS:[A-Z]*=//p' "$cache" 2>/dev/null)
if grep -q '^ULK_SANITIZE:BOOL=ON' "$cache" 2>/dev/null; then
    export CFLAGS="-O1 -g -fsanitize=address,undefined"
elif [[ "$cflags" == *-fsanitize* ]]; then
    export CFLAGS="-O1 -g $cflags"
fi
cp "$SRC/examples/rx_example.c" "$SRC/examples/Makefile" "$T/" || fail "copying the example"
make -s -C "$T" all static >"$T/make.log" 2>&1 || { cat "$T/make.log"; fail "building the example with pkg-config"; }

cd "$T" || exit 1
cp "$SRC/dictionaries/demo-subbit.yaml" "$SRC/dictionaries/demo-subbit.cmd" "$SRC/dictionaries/demo-ccsds.yaml" \
   "$SRC/dictionaries/demo-ccsds.cmd" . || fail "copying the demo"
for demo in demo-subbit demo-ccsds; do
    "$ULK" compile --dict $demo.yaml $demo.cmd -o $demo.upl -q || fail "compile $demo"
    "$ULK" modulate $demo.upl -o $demo.wav --rate 48000 -q 2>/dev/null || fail "modulate $demo"
    # the list's commands in order: first word of every line that is neither comment nor wait
    sed 's/#.*//' $demo.cmd | awk 'NF && $1 != "wait" {print $1}' >$demo.want
    for prog in rx_example rx_example_static; do
        LD_LIBRARY_PATH=$(pkg-config --variable=libdir ulk) ./$prog $demo.yaml $demo.wav >$demo.$prog.out 2>$demo.$prog.err
        rc=$?
        [ $rc = 0 ] || { cat $demo.$prog.err; fail "$prog $demo: exit $rc"; }
        awk '$3 == "accepted" {print $4}' $demo.$prog.out >$demo.$prog.got
        cmp -s $demo.want $demo.$prog.got ||
            { diff $demo.want $demo.$prog.got | head; fail "$prog $demo: the accepted commands differ from the list"; }
        grep -q '^end: ' $demo.$prog.out || fail "$prog $demo: no end event"
        echo "ok: $prog $demo: $(wc -l <$demo.$prog.got) commands accepted, in order"
    done
done
# the static example must not depend on libulk.so
if ldd rx_example_static | grep -q 'libulk\.so'; then fail "rx_example_static links libulk.so"; fi
echo "ok: rx_example_static carries libulk.a"
