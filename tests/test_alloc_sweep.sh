#!/usr/bin/env bash
# tests/test_alloc_sweep.sh - allocation-failure injection along the whole job.
# For N = 1, 2, ... fail the Nth allocation inside libulk (ULK_FAIL_ALLOC=N) while running
# validate, compile, inspect, modulate and decode on the demo. Every run must end in a clean
# message and a non-zero exit -- never a crash (signal), never a sanitizer report, never a
# partial output file -- until N passes the number of allocations the job makes and the run
# succeeds. Under the ASan build, leaks are reported by LeakSanitizer (exit code 99 here).
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
dict=$SRC/dictionaries/demo-subbit.yaml
list=$SRC/dictionaries/demo-subbit.cmd
export ASAN_OPTIONS=${ASAN_OPTIONS:-}:exitcode=99:detect_leaks=1
export UBSAN_OPTIONS=halt_on_error=1:exitcode=98
"$ULK" compile --dict "$dict" "$list" -o "$work/ok.ulku" >/dev/null 2>&1 || { echo "setup: compile failed"; exit 1; }
"$ULK" modulate "$work/ok.ulku" -o "$work/ok.wav" --rate 48000 >/dev/null 2>&1 || { echo "setup: modulate failed"; exit 1; }

fails=0; runs=0
sweep() { # name, output-file-or-empty, command...
  local name=$1 out=$2; shift 2
  local n=1 step=1
  while :; do
    rm -f "$out" "$work"/*.tmp.* 2>/dev/null
    ULK_FAIL_ALLOC=$n "$@" >"$work/stdout" 2>"$work/stderr"
    local rc=$?
    runs=$((runs + 1))
    if [ $rc -eq 0 ]; then
      echo "$name: succeeds from allocation $n on ($runs runs so far)"
      break
    fi
    if [ $rc -ge 97 ] || ! grep -qi "memory" "$work/stderr"; then
      echo "FAIL $name N=$n: exit $rc"; head -n 15 "$work/stderr"; fails=$((fails + 1))
    fi
    if [ -n "$out" ] && { [ -e "$out" ] || ls "$work"/*.tmp.* >/dev/null 2>&1; }; then
      echo "FAIL $name N=$n: partial output left behind"; fails=$((fails + 1))
    fi
    [ $fails -gt 5 ] && break
    # every N up to 300, then a widening stride so the sweep stays bounded
    [ $n -ge 300 ] && step=$((n / 50))
    n=$((n + step))
    [ $n -gt 200000 ] && { echo "FAIL $name: never succeeded"; fails=$((fails + 1)); break; }
  done
}
sweep validate "" "$ULK" validate "$dict"
sweep compile "$work/a.ulku" "$ULK" compile --dict "$dict" "$list" -o "$work/a.ulku"
sweep inspect "" "$ULK" inspect "$work/ok.ulku"
sweep modulate "$work/a.wav" "$ULK" modulate "$work/ok.ulku" -o "$work/a.wav" --rate 48000
sweep decode "" "$ULK" decode --dict "$dict" "$work/ok.wav"
echo "$runs runs"
if [ $fails -eq 0 ]; then echo "5 passed, 0 failed"; exit 0; fi
echo "sweep found $fails failures"; exit 1
