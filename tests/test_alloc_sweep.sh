#!/usr/bin/env bash
# tests/test_alloc_sweep.sh - allocation-failure injection along the whole job.
# For N = 1, 2, ... fail the Nth allocation inside libulk and every later one (ULK_FAIL_ALLOC=N,
# src/util.h) while running validate, compile, inspect, modulate and decode on the demo. Every
# run must end in a clean message that says memory ran out and a non-zero exit -- never a crash
# (signal), never a sanitizer report, never a hang, never a partial output file -- until N passes
# the number of allocations the job makes and the run succeeds.
# Under the ASan build, leaks are reported by LeakSanitizer (exit code 99 here), UBSan by 98;
# under valgrind (scripts/valgrind.sh) errors exit 97.
#
# What it does not reach: allocations made inside libyaml, cJSON and libsndfile go through their
# own malloc (cJSON could be routed through ulk_malloc with cJSON_InitHooks; not done yet), so
# their failure paths are only those the library's own checks see.
#
# Time bound: every N up to ALLOC_SWEEP_DENSE (default 300), then a stride of N/ALLOC_SWEEP_DIV
# (default 50), then every one of the last ALLOC_SWEEP_TAIL (default 150) allocations before the
# first success; a job of A allocations costs about DENSE + DIV*ln(A/DENSE) + TAIL runs (~2000 in
# all for the demo: about 1.5 min plain, 2 min under ASan on one core). Each run has a 60 s limit.
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?}
DENSE=${ALLOC_SWEEP_DENSE:-300}
DIV=${ALLOC_SWEEP_DIV:-50}
TAIL=${ALLOC_SWEEP_TAIL:-150}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
dict=$SRC/dictionaries/demo-subbit.yaml
list=$SRC/dictionaries/demo-subbit.cmd
export ASAN_OPTIONS=${ASAN_OPTIONS:-}:exitcode=99:detect_leaks=1:abort_on_error=0
export UBSAN_OPTIONS=halt_on_error=1:exitcode=98
"$ULK" compile --dict "$dict" "$list" -o "$work/ok.ulku" >/dev/null 2>&1 || { echo "setup: compile failed"; exit 1; }
"$ULK" modulate "$work/ok.ulku" -o "$work/ok.wav" --rate 48000 >/dev/null 2>&1 || { echo "setup: modulate failed"; exit 1; }

runs=0 passed=0 failed=0
fails=0
try() { # n name out command... -> 0 when the run succeeded
  local n=$1 name=$2 out=$3; shift 3
  rm -f "$out" "$work"/*.tmp.* 2>/dev/null
  ULK_FAIL_ALLOC=$n timeout -s KILL 60 "$@" >"$work/stdout" 2>"$work/stderr"
  local rc=$?
  runs=$((runs + 1))
  [ $rc -eq 0 ] && return 0
  if [ $rc -ge 97 ] || ! grep -qi "memory" "$work/stderr" "$work/stdout"; then
    echo "FAIL $name N=$n: exit $rc"; head -n 15 "$work/stderr"; fails=$((fails + 1))
  fi
  if [ -n "$out" ] && { [ -e "$out" ] || ls "$work"/*.tmp.* >/dev/null 2>&1; }; then
    echo "FAIL $name N=$n: partial output left behind"; fails=$((fails + 1))
  fi
  return 1
}
sweep() { # name, output-file-or-empty, command...
  local name=$1 out=$2; shift 2
  local n=1 step=1 ok=0 last_fail=0
  declare -A tried=()
  fails=0
  while :; do
    tried[$n]=1
    if try "$n" "$name" "$out" "$@"; then ok=$n; break; fi
    last_fail=$n
    [ $fails -gt 5 ] && { echo "$name: stopped after $fails failures"; break; }
    [ $n -ge "$DENSE" ] && step=$((n / DIV))
    [ $step -lt 1 ] && step=1
    n=$((n + step))
    [ $n -gt 2000000 ] && { echo "FAIL $name: never succeeded"; fails=$((fails + 1)); break; }
  done
  if [ $ok -gt 0 ]; then
    # The run succeeds exactly when N is past the job's last allocation: find that point between
    # the last failure and the first success (bisection), then try every one of the TAIL
    # allocations before it -- the stage's own allocations come last, after the dictionary and the
    # input are loaded, where the stride is widest.
    local lo=$last_fail hi=$ok mid
    while [ $((hi - lo)) -gt 1 ] && [ $fails -le 5 ]; do
      mid=$(((lo + hi) / 2)); tried[$mid]=1
      if try "$mid" "$name" "$out" "$@"; then hi=$mid; else lo=$mid; fi
    done
    local m=$((hi - TAIL))
    [ $m -lt 1 ] && m=1
    for ((; m < hi && fails <= 5; m++)); do
      [ -n "${tried[$m]:-}" ] && continue
      try "$m" "$name" "$out" "$@" && { echo "FAIL $name N=$m: succeeded although allocation $m of $((hi - 1)) failed"; fails=$((fails + 1)); }
    done
    local t=$TAIL; [ $t -gt $((hi - 1)) ] && t=$((hi - 1))
    echo "$name: $((hi - 1)) allocations; every one of the last $t failed cleanly ($runs runs so far)"
  fi
  if [ $fails -eq 0 ]; then passed=$((passed + 1)); else failed=$((failed + 1)); fi
}
sweep validate "" "$ULK" validate "$dict"
sweep compile "$work/a.ulku" "$ULK" compile --dict "$dict" "$list" -o "$work/a.ulku"
sweep inspect "" "$ULK" inspect "$work/ok.ulku"
sweep modulate "$work/a.wav" "$ULK" modulate "$work/ok.ulku" -o "$work/a.wav" --rate 48000
sweep decode "" "$ULK" decode --dict "$dict" "$work/ok.wav"
echo "$runs runs"
echo "$passed passed, $failed failed"
[ $failed -eq 0 ]
