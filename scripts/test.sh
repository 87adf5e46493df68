#!/usr/bin/env bash
# Installs what is missing, builds, and runs the whole test suite (ctest).
# BEAMTRIM_SANITIZE=1 also runs the suite built with AddressSanitizer + UndefinedBehaviorSanitizer
# (scripts/sanitize.sh); see docs/reliability.md for its status.
set -euo pipefail
cd "$(dirname "$0")/.."
./scripts/setup.sh
./scripts/build.sh
(cd "${BUILD_DIR:-build}" && ctest --output-on-failure -j"$(nproc)" --timeout 1800)
if [[ "${BEAMTRIM_SANITIZE:-0}" == 1 ]]; then
  ./scripts/sanitize.sh
fi
