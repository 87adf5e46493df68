#!/usr/bin/env bash
# Installs what is missing, builds, and runs the whole test suite (ctest).
# Then runs the tests of the layers that read untrusted bytes or run concurrently again, built
# with AddressSanitizer + UndefinedBehaviorSanitizer (scripts/sanitize.sh); docs/reliability.md
# says why those layers and what the run costs.
#   BEAMTRIM_SANITIZE=0                    skip the sanitizer run
#   BEAMTRIM_SANITIZE_LAYERS="all"         every layer's tests (or a list: "dicom store")
set -euo pipefail
cd "$(dirname "$0")/.."
./scripts/setup.sh
./scripts/build.sh
(cd "${BUILD_DIR:-build}" && ctest --output-on-failure -j"$(nproc)" --timeout 1800)
if [[ "${BEAMTRIM_SANITIZE:-1}" != 0 ]]; then
  layers=${BEAMTRIM_SANITIZE_LAYERS:-core dicom analysis store net}
  [[ $layers == all ]] && layers=""
  # shellcheck disable=SC2086  # a list of layer names
  ./scripts/sanitize.sh $layers
fi
