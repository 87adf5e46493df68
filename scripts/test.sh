#!/usr/bin/env bash
# Installs what is missing, builds, and runs the whole test suite (ctest), then the same suite
# built with AddressSanitizer + UndefinedBehaviorSanitizer (scripts/sanitize.sh).
# BEAMTRIM_SKIP_SANITIZE=1 skips the second pass for a quicker local run.
set -euo pipefail
cd "$(dirname "$0")/.."
./scripts/setup.sh
./scripts/build.sh
(cd "${BUILD_DIR:-build}" && ctest --output-on-failure -j"$(nproc)" --timeout 900)
if [[ "${BEAMTRIM_SKIP_SANITIZE:-0}" != 1 ]]; then
  ./scripts/sanitize.sh
fi
