# scripts/aarch64-toolchain.cmake - cross build for aarch64 with Debian's cross compiler
# (gcc-aarch64-linux-gnu) and its multiarch arm64 libraries (libyaml-dev:arm64 ...); used by
# scripts/cross-aarch64.sh, which also points pkg-config at the arm64 .pc files.
set(CMAKE_SYSTEM_NAME Linux)
set(CMAKE_SYSTEM_PROCESSOR aarch64)
set(CMAKE_C_COMPILER aarch64-linux-gnu-gcc)
set(CMAKE_FIND_ROOT_PATH /usr/aarch64-linux-gnu /usr/lib/aarch64-linux-gnu)
set(CMAKE_FIND_ROOT_PATH_MODE_PROGRAM NEVER)
set(CMAKE_CROSSCOMPILING_EMULATOR qemu-aarch64;-L;/usr/aarch64-linux-gnu)
