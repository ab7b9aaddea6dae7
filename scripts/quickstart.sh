#!/usr/bin/env bash
# scripts/quickstart.sh - the README's two quick-start commands.
#   bash scripts/quickstart.sh demo   install what is missing, build, run the whole job on the demo
#   bash scripts/quickstart.sh test   install what is missing, build, run the whole test suite:
#                                     gcc Release (-Werror) + tests, clang Release (-Werror),
#                                     clang UBSan (float-cast-overflow, no recovery) + tests,
#                                     gcc ASan+UBSan + tests, short fuzz runs, and a reduced
#                                     aarch64 cross comparison (50 cases; the full 1000 is
#                                     scripts/cross-aarch64.sh). Every test run prints its count
#                                     of skipped tests, and any skip fails the run.
# Works on a fresh Debian 12 machine as root (apt-get); as another user it uses sudo when present.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here"
mode=${1:-demo}

PKGS="build-essential cmake pkg-config libyaml-dev libcjson-dev libcmocka-dev libsndfile1-dev
      libfftw3-dev libssl-dev libcairo2-dev libgmp-dev python3 python3-numpy python3-scipy python3-yaml
      python3-jsonschema python3-crcmod python3-cryptography"
if [ "$mode" = test ]; then PKGS="$PKGS clang libclang-rt-14-dev valgrind"; fi

missing=""
for p in $PKGS; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "ok installed" || missing="$missing $p"
done
if [ -n "$missing" ]; then
  echo "== installing:$missing"
  SUDO=""
  [ "$(id -u)" -ne 0 ] && command -v sudo >/dev/null && SUDO=sudo
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends $missing >/dev/null
fi

jobs=$(nproc 2>/dev/null || echo 2)
build() { # build DIR [cmake options...]: warnings are errors in every development and CI build
  local dir=$1; shift
  cmake -S . -B "$dir" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DULK_WERROR=ON "$@" >/dev/null
  cmake --build "$dir" -j"$jobs" >/dev/null
}
# run_tests DIR: the whole suite; prints the number of skipped tests, and a skip is a failure
# (a test that did not run proves nothing).
run_tests() {
  local dir=$1 log rc skipped
  log=$(mktemp)
  set +e
  ctest --test-dir "$dir" --output-on-failure -j"$jobs" 2>&1 | tee "$log"
  rc=${PIPESTATUS[0]}
  set -e
  skipped=$(grep -c -- '\*\*\*Skipped' "$log" || true)
  rm -f "$log"
  echo "== $dir: skipped tests: $skipped"
  [ "$rc" -eq 0 ] || return "$rc"
  [ "$skipped" -eq 0 ] || { echo "== $dir: $skipped test(s) skipped: refused" >&2; return 1; }
}

case "$mode" in
  demo)
    build build
    exec bash scripts/demo.sh build/ulk
    ;;
  test)
    echo "== gcc Release build (-Wall -Wextra -Werror) and test"
    build build -DCMAKE_BUILD_TYPE=Release
    run_tests build
    echo "== clang Release build (-Werror)"
    CC=clang build build-clang -DCMAKE_BUILD_TYPE=Release
    echo "== clang build under UndefinedBehaviorSanitizer (float-cast-overflow, no recovery) and test"
    CC=clang build build-ubsan -DCMAKE_C_FLAGS="-fsanitize=undefined,float-cast-overflow -fno-sanitize-recover=all -fno-omit-frame-pointer"
    UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 run_tests build-ubsan
    echo "== build under AddressSanitizer + UndefinedBehaviorSanitizer and test"
    build build-asan -DULK_SANITIZE=ON
    ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
      run_tests build-asan
    if [ -x scripts/fuzz.sh ]; then
      echo "== fuzz targets, short bounded runs"
      bash scripts/fuzz.sh short
    fi
    echo "== aarch64 cross build under qemu-user against the native build (50 cases)"
    ULK_JOBS=$jobs ULK_CROSS_INSTALL=1 bash scripts/cross-aarch64.sh 50 1
    echo "== all tests passed"
    ;;
  *)
    echo "usage: bash scripts/quickstart.sh demo|test" >&2
    exit 2
    ;;
esac
