#!/usr/bin/env bash
# Installs what is missing, builds, and runs the whole test suite (ctest).
# Then runs the whole suite again built with AddressSanitizer + UndefinedBehaviorSanitizer
# (scripts/sanitize.sh); docs/reliability.md gives what the run costs.
#   BEAMTRIM_SANITIZE=0                    skip the sanitizer run
#   BEAMTRIM_SANITIZE_LAYERS="dicom store" only these layers' tests (default: all)
set -euo pipefail
cd "$(dirname "$0")/.."
./scripts/setup.sh
./scripts/build.sh
(cd "${BUILD_DIR:-build}" && ctest --output-on-failure -j"$(nproc)" --timeout 1800)
if [[ "${BEAMTRIM_SANITIZE:-1}" != 0 ]]; then
  layers=${BEAMTRIM_SANITIZE_LAYERS:-all}
  [[ $layers == all ]] && layers=""
  # shellcheck disable=SC2086  # a list of layer names
  ./scripts/sanitize.sh $layers
fi
