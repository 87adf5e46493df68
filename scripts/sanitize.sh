#!/usr/bin/env bash
# Builds the library and the tests with AddressSanitizer + UndefinedBehaviorSanitizer into
# build-asan/ and runs the whole suite there. Any report fails the run.
set -euo pipefail
cd "$(dirname "$0")/.."
BUILD_DIR=build-asan
generator=()
command -v ninja >/dev/null && generator=(-G Ninja)
if [[ ! -f $BUILD_DIR/CMakeCache.txt ]]; then
  # -O1 keeps the instrumented build fast enough for the suite (docs/reliability.md).
  cmake -S . -B $BUILD_DIR "${generator[@]}" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g" -DBEAMTRIM_SANITIZE=ON
fi
cmake --build $BUILD_DIR -j"$(nproc)"
cd $BUILD_DIR
export ASAN_OPTIONS=detect_leaks=1:abort_on_error=1:strict_string_checks=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
export LSAN_OPTIONS=suppressions=$PWD/../tests/lsan.supp
ctest --output-on-failure -j"$(nproc)" --timeout 1200 -LE no-sanitizer
