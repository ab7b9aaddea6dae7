#!/usr/bin/env bash
# scripts/cross-aarch64.sh - the same dictionary compiles to the same bits on another machine.
#
#   bash scripts/cross-aarch64.sh [COUNT [SEED]]     default 1000 cases, seed 1
#
# Cross-builds ulk for aarch64 (Debian's gcc-aarch64-linux-gnu and its multiarch arm64
# libraries), runs it under qemu-user (qemu-aarch64 -L /usr/aarch64-linux-gnu), and compares
# it with the native build on COUNT generated dictionaries and command lists
# (scripts/cross_cases.py: calibrated values on and next to rounding ties, nearly flat
# polynomials, values equal to range ends, float32 midpoints and extremes): compile output and
# upload files and timing tables byte for byte, samples within 1e-6. Prints the counts; exit 0
# when every case agrees, 1 when one differs (its folder is kept under the work folder), 2 when
# the toolchain is missing.
#
# Missing packages are installed with apt-get when run as root (or with ULK_CROSS_INSTALL=1
# through sudo); cairo is not needed (plots are left out of the cross build).
# Env: ULK_JOBS (build jobs, default 2), ULK_CROSS_WORK (cases folder, default
# build-aarch64/cases), ULK_SAMPLES_EVERY (modulate every Nth case to samples, default 20).
# Time: ~30 s per build on 2 cores, then ~0.5 s per case (1000 cases: ~9 minutes).
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
cd "$here"
count=${1:-1000}
seed=${2:-1}
jobs=${ULK_JOBS:-2}
work=${ULK_CROSS_WORK:-$here/build-aarch64/cases}

PKGS="gcc-aarch64-linux-gnu libc6-dev-arm64-cross qemu-user libyaml-dev:arm64 libcjson-dev:arm64
      libsndfile1-dev:arm64 libssl-dev:arm64 libgmp-dev:arm64 libfftw3-dev:arm64 libcmocka-dev:arm64"
missing=""
for p in $PKGS; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "ok installed" || missing="$missing $p"
done
if [ -n "$missing" ]; then
  SUDO=""
  if [ "$(id -u)" -ne 0 ]; then
    if [ "${ULK_CROSS_INSTALL:-0}" = 1 ] && command -v sudo >/dev/null; then SUDO=sudo
    else echo "cross-aarch64: missing packages:$missing (run as root, or ULK_CROSS_INSTALL=1 with sudo)" >&2; exit 2; fi
  fi
  echo "== installing:$missing"
  dpkg --print-foreign-architectures | grep -qx arm64 || $SUDO dpkg --add-architecture arm64
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends $missing >/dev/null
fi

echo "== native build (Release)"
cmake -S . -B build-cross-native -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build-cross-native -j"$jobs" --target ulk >/dev/null
echo "== aarch64 cross build (Release)"
tc=()  # the toolchain file is read when the build folder is first configured
[ -f build-aarch64/CMakeCache.txt ] || tc=(-DCMAKE_TOOLCHAIN_FILE="$here/scripts/aarch64-toolchain.cmake")
PKG_CONFIG_LIBDIR=/usr/lib/aarch64-linux-gnu/pkgconfig:/usr/share/pkgconfig \
  cmake -S . -B build-aarch64 -DCMAKE_BUILD_TYPE=Release "${tc[@]}" >/dev/null
cmake --build build-aarch64 -j"$jobs" --target ulk >/dev/null
file build-aarch64/ulk | grep -q "ARM aarch64" || { echo "cross-aarch64: build-aarch64/ulk is not an aarch64 program" >&2; exit 2; }
QEMU="qemu-aarch64 -L /usr/aarch64-linux-gnu"
$QEMU build-aarch64/ulk --help >/dev/null

echo "== $count cases, seed $seed: native against aarch64 under qemu-user"
rm -rf "$work"
exec /usr/bin/python3 scripts/cross_cases.py --count "$count" --seed "$seed" --work "$work" \
  --a "$here/build-cross-native/ulk" --b "$QEMU $here/build-aarch64/ulk" \
  --samples-every "${ULK_SAMPLES_EVERY:-20}"
