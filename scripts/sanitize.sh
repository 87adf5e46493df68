#!/usr/bin/env bash
# Builds the library and the tests with AddressSanitizer + UndefinedBehaviorSanitizer into
# build-asan/ and runs the tests there. Any report fails the run.
#   ./scripts/sanitize.sh                      # every layer's tests
#   ./scripts/sanitize.sh dicom store          # only these layers' tests (test_dicom, test_store)
# Prints how long the build and the tests took (docs/reliability.md keeps the figures).
set -euo pipefail
cd "$(dirname "$0")/.."
BUILD_DIR=build-asan
LAYERS=("$@")
if ((${#LAYERS[@]} == 0)); then
  for d in tests/*/; do
    compgen -G "$d*_test.cpp" >/dev/null && LAYERS+=("$(basename "$d")")
  done
fi
generator=()
command -v ninja >/dev/null && generator=(-G Ninja)
if [[ ! -f $BUILD_DIR/CMakeCache.txt ]]; then
  # -O1 keeps the instrumented build fast enough for the suite (docs/reliability.md).
  cmake -S . -B $BUILD_DIR "${generator[@]}" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g" -DBEAMTRIM_SANITIZE=ON
fi
targets=()
for layer in "${LAYERS[@]}"; do targets+=("test_$layer"); done
start=$SECONDS
# The test binaries only (each pulls in the library and the program); benchmarks are not built.
cmake --build $BUILD_DIR --target "${targets[@]}" -j"$(nproc)"
built=$SECONDS
echo "sanitize: build of ${targets[*]} took $((built - start)) s"
cd $BUILD_DIR
export ASAN_OPTIONS=detect_leaks=1:abort_on_error=1:strict_string_checks=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
export LSAN_OPTIONS=suppressions=$PWD/../tests/lsan.supp
pattern="^($(IFS='|'; echo "${LAYERS[*]}"))\\."
set +e
ctest --output-on-failure -j"$(nproc)" --timeout 1800 -R "$pattern"
rc=$?
set -e
echo "sanitize: tests of ${LAYERS[*]} took $((SECONDS - built)) s (exit $rc)"
exit $rc
