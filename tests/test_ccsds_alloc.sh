#!/usr/bin/env bash
# tests/test_ccsds_alloc.sh - allocation-failure injection (ULK_FAIL_ALLOC=N, src/util.h)
# along the ccsds-tc job: validate, compile, inspect, decode and verify on
# dictionaries/demo-ccsds.yaml (decode and verify on a three-command capture).
# Every run must end in a message that says memory ran out and exit 1 or 2 -- never a crash,
# a sanitizer report (ASan exit 99, UBSan 98), or a partial upload -- until N passes the
# number of allocations the job makes and the run succeeds.
# Every N up to 300, then a stride of N/40 (a few hundred runs in all).
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
dict=$SRC/dictionaries/demo-ccsds.yaml
list=$SRC/dictionaries/demo-ccsds.cmd
export ASAN_OPTIONS=${ASAN_OPTIONS:-}:exitcode=99:detect_leaks=1:abort_on_error=0
export UBSAN_OPTIONS=halt_on_error=1:exitcode=98
"$ULK" compile -q --dict "$dict" "$list" -o "$work/ok.ulku" >/dev/null 2>&1 || { echo "setup: compile failed"; exit 1; }
printf 'OBC_PING\nRF_SET_POWER level=20dBm\nPROP_ARM arm=true key=7 confirm\n' > "$work/three.cmd"
"$ULK" compile -q --dict "$dict" "$work/three.cmd" -o "$work/three.ulku" >/dev/null 2>&1 &&
  "$ULK" modulate "$work/three.ulku" -o "$work/three.wav" --rate 48000 >/dev/null 2>&1 ||
  { echo "setup: three-command capture failed"; exit 1; }
failed=0
sweep() { # name, output-file-or-empty, command...
  local name=$1 out=$2; shift 2
  local n=1
  while :; do
    [ -n "$out" ] && rm -f "$out" "$work"/*.tmp.* 2>/dev/null
    ULK_FAIL_ALLOC=$n timeout -s KILL 60 "$@" >"$work/log" 2>&1
    local rc=$?
    if [ $rc = 0 ]; then echo "ok   $name: succeeds from allocation $n"; return; fi
    if [ $rc != 1 ] && [ $rc != 2 ]; then
      echo "FAIL $name: allocation $n: exit $rc"; head -c 600 "$work/log"; failed=1; return
    fi
    if ! grep -qi "out of memory" "$work/log"; then
      echo "FAIL $name: allocation $n: no out-of-memory message"; head -c 600 "$work/log"; failed=1; return
    fi
    if [ -n "$out" ] && { [ -e "$out" ] || ls "$work"/*.tmp.* >/dev/null 2>&1; }; then
      echo "FAIL $name: allocation $n: output left behind"; failed=1; return
    fi
    if [ $n -lt 300 ]; then n=$((n + 1)); else n=$((n + n / 40)); fi
    if [ $n -gt 10000000 ]; then echo "FAIL $name: never succeeds"; failed=1; return; fi
  done
}
sweep validate "" "$ULK" validate "$dict"
sweep compile "$work/out.ulku" "$ULK" compile -q --dict "$dict" "$list" -o "$work/out.ulku"
sweep inspect "" "$ULK" inspect "$work/ok.ulku"
sweep inspect-json "" "$ULK" inspect --json "$work/ok.ulku"
sweep decode "" "$ULK" decode --dict "$dict" "$work/three.wav"
sweep verify "" "$ULK" verify --dict "$dict" --upload "$work/three.ulku" "$work/three.wav"

# Authenticated commanding (docs/sdls.md): a failed compile hands out no counter (the first
# success starts at 1 and leaves next 19), a failed decode writes no receive state.
sdict=$SRC/dictionaries/demo-ccsds-sec.yaml
printf '# test key\nharrowick3-uplink %s\n' "$(printf '3c%.0s' $(seq 32))" >"$work/k.keys"
chmod 600 "$work/k.keys"
rm -f "$work/tx.state"
sweep compile-secured "$work/sec.ulku" "$ULK" compile -q --dict "$sdict" "$list" -o "$work/sec.ulku" \
  --keys "$work/k.keys" --state "$work/tx.state"
grep -q "^spi 257 next 19$" "$work/tx.state" ||
  { echo "FAIL compile-secured: the state is not 'next 19' after one success"; cat "$work/tx.state"; failed=1; }
"$ULK" compile -q --dict "$sdict" "$work/three.cmd" -o "$work/sthree.ulku" --keys "$work/k.keys" \
  --state "$work/tx.state" >/dev/null 2>&1 &&
  "$ULK" modulate "$work/sthree.ulku" -o "$work/sthree.wav" --rate 48000 >/dev/null 2>&1 ||
  { echo "setup: secured three-command capture failed"; exit 1; }
sweep decode-secured "$work/rx.state" "$ULK" decode --dict "$sdict" "$work/sthree.wav" --keys "$work/k.keys" \
  --state "$work/rx.state"
grep -q "^spi 257 last 21$" "$work/rx.state" ||
  { echo "FAIL decode-secured: the receive state is not 'last 21'"; failed=1; }
exit $failed
