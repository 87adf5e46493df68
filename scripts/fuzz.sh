#!/usr/bin/env bash
# Runs the libFuzzer targets for a total time in seconds (default 600), split evenly.
#   ./scripts/fuzz.sh 3600            # one hour in total
#   ./scripts/fuzz.sh 600 fuzz_reader # only one target
# Seeds: synthetic radiographs in every transfer syntax plus the broken-file corpus.
# Crashing inputs are copied to testdata/fuzz-regressions/, which the test suite replays.
# Executions and findings are appended to fuzz/runs.log for docs/reliability.md.
set -euo pipefail
cd "$(dirname "$0")/.."
TOTAL=${1:-600}
shift || true
TARGETS=("$@")
((${#TARGETS[@]})) || TARGETS=(fuzz_reader fuzz_measure)

BEAMTRIM_WITH_CLANG=1 BEAMTRIM_WITH_BROWSER=0 ./scripts/setup.sh
BUILD=build-fuzz
if [[ ! -f $BUILD/CMakeCache.txt ]]; then
  CC=clang-14 CXX=clang++-14 cmake -S . -B $BUILD -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DBEAMTRIM_FUZZ=ON -DBEAMTRIM_TESTS=OFF
fi
cmake --build $BUILD --target "${TARGETS[@]}" -j"$(nproc)"

SEEDS=fuzz/seeds
if [[ ! -d $SEEDS ]]; then
  mkdir -p $SEEDS
  # Small synthetic images in every transfer syntax the generator writes.
  # Seeds come from the ordinary build's generator.
  [[ -x build/beamtrim ]] || ./scripts/build.sh >/dev/null
  build/beamtrim synth --out "$SEEDS/synth" --count 48 --seed 7 --pixel-mm 4 --syntax mixed >/dev/null
  find "$SEEDS/synth" -name '*.dcm' -exec cp {} $SEEDS/ \;
  rm -rf "$SEEDS/synth"
  cp testdata/broken/*.dcm $SEEDS/ 2>/dev/null || true
fi

mkdir -p fuzz/artifacts testdata/fuzz-regressions
per=$((TOTAL / ${#TARGETS[@]}))
for t in "${TARGETS[@]}"; do
  corpus=fuzz/corpus-$t
  mkdir -p "$corpus"
  log=fuzz/artifacts/$t.log
  echo "fuzz: $t for ${per}s"
  set +e
  ASAN_OPTIONS=detect_leaks=0:allocator_may_return_null=1 \
    $BUILD/fuzz/$t "$corpus" $SEEDS -max_total_time=$per -timeout=20 -rss_limit_mb=2560 \
    -max_len=262144 -artifact_prefix=fuzz/artifacts/$t- -print_final_stats=1 >"$log" 2>&1
  rc=$?
  set -e
  execs=$(grep -Eo 'stat::number_of_executed_units: *[0-9]+' "$log" | grep -Eo '[0-9]+$' | tail -1)
  echo "$(date -u +%FT%TZ) $t seconds=$per executions=${execs:-?} exit=$rc" | tee -a fuzz/runs.log
  for a in fuzz/artifacts/$t-*; do
    [[ -f $a ]] || continue
    cp "$a" "testdata/fuzz-regressions/$(basename "$a").dcm"
    echo "fuzz: finding kept as testdata/fuzz-regressions/$(basename "$a").dcm"
  done
done
