#!/usr/bin/env bash
# Accuracy and speed benchmarks (separate programs, never tests): field detection, metrics,
# physicist QC, scan throughput. Prints their tables; docs/validation.md and
# docs/performance.md keep the figures with the date and the machine.
#   scripts/bench.sh [field|metrics|qc|scan ...]     (default: all four)
# BENCH_QUICK=1 runs small counts (a smoke run, minutes instead of the better part of an hour).
set -euo pipefail
cd "$(dirname "$0")/.."
build="${BUILD_DIR:-build-bench}"
if [[ ! -f "$build/CMakeCache.txt" ]]; then
  cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=Release
fi
cmake --build "$build" --target bench_field bench_metrics bench_qc bench_scan
quick="${BENCH_QUICK:-0}"
which=("$@")
[[ ${#which[@]} -eq 0 ]] && which=(field metrics qc scan)
for b in "${which[@]}"; do
  echo "== $b ($(date -u +%Y-%m-%dT%H:%MZ), $(nproc) cores)"
  case "$b" in
    field)
      if [[ "$quick" == 1 ]]; then "$build/bench_field" --count 52 --full 2
      else "$build/bench_field" --count 420 --full 12; fi ;;
    metrics)
      if [[ "$quick" == 1 ]]; then "$build/bench_metrics" --count 52
      else "$build/bench_metrics" --count 400 --seed 20261202; fi ;;
    qc)
      if [[ "$quick" == 1 ]]; then "$build/bench_qc" --count 12 --seed 2026
      else "$build/bench_qc" --count 120 --seed 2026; fi ;;
    scan)
      # The images are generated once into BENCH_SCAN_DIR and reused (fixed seed); the
      # machine's load average is printed with every row, as the figures depend on it.
      scan_dir="${BENCH_SCAN_DIR:-${TMPDIR:-/tmp}/beamtrim-bench-scan}"
      uptime
      if [[ "$quick" == 1 ]]; then
        "$build/bench_scan" --dir "$scan_dir-quick" --small 40 --full 4 --threads 1 --stages 20
      else
        "$build/bench_scan" --dir "$scan_dir" --small 2000 --full 200 --threads 1,2 --stages 100
      fi
      uptime ;;
    *) echo "unknown benchmark: $b (field, metrics, qc, scan)" >&2; exit 2 ;;
  esac
done
