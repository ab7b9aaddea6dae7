#!/usr/bin/env bash
# scripts/fuzz.sh - build the libFuzzer targets (tests/fuzz/) and run each for a bounded time.
#   bash scripts/fuzz.sh short          every target ~45 s (what CI runs; whole run < 5 min on 2 cores)
#   bash scripts/fuzz.sh long N         every target N seconds
#   bash scripts/fuzz.sh run TARGET N   one target N seconds (FUZZ_NOBUILD=1: skip the build)
#   bash scripts/fuzz.sh build          only build them
# Environment: FUZZ_JOBS (targets run side by side, default 2, at most nproc), FUZZ_BUILD
# (build folder, default build-fuzz), FUZZ_CMAKE_ARGS (extra cmake options), CC (default clang).
# Each target starts from its seed corpus tests/fuzz/corpus/<target>/ and adds what it finds to
# out/fuzz/<target>/corpus/; a crash, leak, timeout (10 s per input) or memory blow-up
# (2048 MB) leaves its input in out/fuzz/<target>/ and makes this script exit 1.
# Printed per target: executions, coverage (cov: edges, ft: features), corpus size, verdict.
set -uo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here"
mode=${1:-short}
case "$mode" in
  short) secs=45; only="" ;;
  long) secs=${2:?usage: fuzz.sh long SECONDS}; only="" ;;
  run) only=${2:?usage: fuzz.sh run TARGET SECONDS}; secs=${3:?usage: fuzz.sh run TARGET SECONDS} ;;
  build) secs=0; only="" ;;
  *) echo "usage: bash scripts/fuzz.sh short | long SECONDS | run TARGET SECONDS | build" >&2; exit 2 ;;
esac
case "$secs" in ''|*[!0-9]*) echo "fuzz.sh: seconds must be a whole number" >&2; exit 2 ;; esac

targets="fuzz_dict_yaml fuzz_dict_json fuzz_cmdlist fuzz_upload fuzz_capture fuzz_sdls"
[ -n "$only" ] && targets=$only
bdir=${FUZZ_BUILD:-build-fuzz}
ncpu=$(nproc 2>/dev/null || echo 1)
jobs=${FUZZ_JOBS:-2}
[ "$jobs" -gt "$ncpu" ] && jobs=$ncpu
[ "$jobs" -lt 1 ] && jobs=1

mkdir -p out
if [ -z "${FUZZ_NOBUILD:-}" ]; then
echo "== building fuzz targets in $bdir (clang, -fsanitize=fuzzer,address,undefined)"
if ! CC=${CC:-clang} cmake -S . -B "$bdir" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DULK_FUZZ=ON ${FUZZ_CMAKE_ARGS:-} >"out/fuzz-build.log" 2>&1 ||
   ! cmake --build "$bdir" --target fuzz_all -j"$ncpu" >>"out/fuzz-build.log" 2>&1; then
  grep -m5 -E 'error' out/fuzz-build.log; echo "fuzz.sh: build failed (log: out/fuzz-build.log)" >&2; exit 1
fi
fi
[ "$mode" = build ] && { echo "fuzz.sh: built in $bdir"; exit 0; }

run_one() { # target -> writes out/fuzz/<t>/log, returns libFuzzer's exit code
  local t=$1 o=out/fuzz/$1
  mkdir -p "$o/corpus"
  ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:allocator_may_return_null=0} \
  UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1} \
    "$bdir/tests/fuzz/$t" -max_total_time="$secs" -rss_limit_mb=2048 -timeout=10 \
      -print_final_stats=1 -artifact_prefix="$o/" \
      "$o/corpus" "tests/fuzz/corpus/$t" >"$o/log" 2>&1
}

summary() { # target rc
  local t=$1 rc=$2 log=out/fuzz/$1/log
  local execs cov ft corp
  execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n1)
  cov=$(grep -o 'cov: [0-9]*' "$log" | tail -n1 | cut -d' ' -f2)
  ft=$(grep -o 'ft: [0-9]*' "$log" | tail -n1 | cut -d' ' -f2)
  corp=$(find "out/fuzz/$t/corpus" -type f | wc -l)
  if [ "$rc" -eq 0 ]; then
    printf '%-16s ok     %10s execs  cov %6s  ft %7s  corpus %5s  (%ss)\n' "$t" "${execs:-?}" "${cov:-?}" "${ft:-?}" "$corp" "$secs"
  else
    printf '%-16s FAILED %10s execs  cov %6s  ft %7s  (exit %s)\n' "$t" "${execs:-?}" "${cov:-?}" "${ft:-?}" "$rc"
    grep -m1 -E 'ERROR: (AddressSanitizer|LeakSanitizer|libFuzzer)|runtime error|ALARM|out-of-memory' "$log" | sed 's/^/    /'
    grep -m3 -E '^ *#[0-9]+ .* in ' "$log" | sed 's/^/    /'
    ls out/fuzz/"$t"/crash-* out/fuzz/"$t"/leak-* out/fuzz/"$t"/timeout-* out/fuzz/"$t"/oom-* 2>/dev/null | sed 's/^/    input: /'
    echo "    log: out/fuzz/$t/log"
  fi
}

echo "== fuzzing $secs s per target, $jobs at a time"
failed=0
set -- $targets
while [ $# -gt 0 ]; do
  batch=(); pids=()
  for _ in $(seq "$jobs"); do
    [ $# -eq 0 ] && break
    batch+=("$1"); run_one "$1" & pids+=($!); shift
  done
  for i in "${!batch[@]}"; do
    wait "${pids[$i]}"; rc=$?
    summary "${batch[$i]}" "$rc"
    [ "$rc" -ne 0 ] && failed=$((failed + 1))
  done
done
if [ "$failed" -ne 0 ]; then echo "fuzz.sh: $failed target(s) failed"; exit 1; fi
echo "fuzz.sh: all targets ran clean"
