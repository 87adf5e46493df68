#!/usr/bin/env bash
# Runs the libFuzzer targets for a total time in seconds (default 600), split evenly.
#   ./scripts/fuzz.sh 3600            # one hour in total
#   ./scripts/fuzz.sh 600 fuzz_reader # only one target
#   nice -n 19 ./scripts/fuzz.sh 3600 # on a shared machine
# Seeds: synthetic radiographs in every transfer syntax plus the broken-file corpus.
# libFuzzer stops at its first finding; the target is then started again on the grown corpus
# until its share of the time is used, so one finding does not end the run.
# Crashing, hanging (over FUZZ_TIMEOUT s, default 20) and slow (over FUZZ_SLOW s, default 10)
# inputs are copied to testdata/fuzz-regressions/, which the test suite replays. Both limits
# are wall-clock times: on a loaded machine raise them, or starved inputs count as findings. Each run's real length,
# executions and exit status are appended to fuzz/runs.log for docs/reliability.md.
set -euo pipefail
cd "$(dirname "$0")/.."
TOTAL=${1:-600}
shift || true
TARGETS=("$@")
((${#TARGETS[@]})) || TARGETS=(fuzz_reader fuzz_measure)
TIMEOUT=${FUZZ_TIMEOUT:-20}
SLOW=${FUZZ_SLOW:-10}

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
  end=$((SECONDS + per))
  run=0
  while ((end - SECONDS >= 10)); do
    left=$((end - SECONDS))
    run=$((run + 1))
    log=fuzz/artifacts/$t-$run.log
    echo "fuzz: $t for ${left}s (run $run)"
    started=$SECONDS
    set +e
    ASAN_OPTIONS=detect_leaks=0:allocator_may_return_null=1 \
      $BUILD/fuzz/$t "$corpus" $SEEDS -max_total_time=$left -timeout="$TIMEOUT" \
      -report_slow_units="$SLOW" -rss_limit_mb=2560 -max_len=262144 -artifact_prefix=fuzz/artifacts/$t- \
      -print_final_stats=1 >"$log" 2>&1
    rc=$?
    set -e
    # Final stats when libFuzzer printed them, else the last progress line's count.
    execs=$(grep -Eo 'stat::number_of_executed_units: *[0-9]+' "$log" | grep -Eo '[0-9]+$' |
      tail -1 || true)
    [[ -n $execs ]] || execs=$(grep -Eo '^#[0-9]+' "$log" | tail -1 | tr -d '#' || true)
    echo "$(date -u +%FT%TZ) $t seconds=$((SECONDS - started)) executions=${execs:-0} exit=$rc" |
      tee -a fuzz/runs.log
    for a in fuzz/artifacts/$t-crash-* fuzz/artifacts/$t-timeout-* fuzz/artifacts/$t-oom-* \
             fuzz/artifacts/$t-slow-unit-* fuzz/artifacts/$t-leak-*; do
      [[ -f $a ]] || continue
      kept=testdata/fuzz-regressions/$(basename "$a").dcm
      [[ -f $kept ]] && continue
      cp "$a" "$kept"
      echo "fuzz: finding kept as $kept"
    done
    ((rc == 0)) && break  # ran its full time without a finding
  done
done
