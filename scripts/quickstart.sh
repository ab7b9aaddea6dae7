#!/usr/bin/env bash
# scripts/quickstart.sh - the README's two quick-start commands.
#   bash scripts/quickstart.sh demo   install what is missing, build, run the whole job on the demo
#   bash scripts/quickstart.sh test   install what is missing, build, run the whole test suite
#                                     (plain build, then again under ASan+UBSan, then short fuzz runs)
# Works on a fresh Debian 12 machine as root (apt-get); as another user it uses sudo when present.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here"
mode=${1:-demo}

PKGS="build-essential cmake pkg-config libyaml-dev libcjson-dev libcmocka-dev libsndfile1-dev
      libfftw3-dev libssl-dev libcairo2-dev python3 python3-numpy python3-scipy python3-yaml
      python3-jsonschema python3-crcmod"
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
build() { # build DIR [cmake options...]
  local dir=$1; shift
  cmake -S . -B "$dir" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DULK_WERROR=ON "$@" >/dev/null
  cmake --build "$dir" -j"$jobs" >/dev/null
}

case "$mode" in
  demo)
    build build
    exec bash scripts/demo.sh build/ulk
    ;;
  test)
    echo "== build (-Wall -Wextra -Werror) and test"
    build build
    ctest --test-dir build --output-on-failure -j"$jobs"
    echo "== build under AddressSanitizer + UndefinedBehaviorSanitizer and test"
    build build-asan -DULK_SANITIZE=ON
    ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
      ctest --test-dir build-asan --output-on-failure -j"$jobs"
    if [ -x scripts/fuzz.sh ]; then
      echo "== fuzz targets, short bounded runs"
      bash scripts/fuzz.sh short
    fi
    echo "== all tests passed"
    ;;
  *)
    echo "usage: bash scripts/quickstart.sh demo|test" >&2
    exit 2
    ;;
esac
