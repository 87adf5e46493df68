#!/usr/bin/env bash
# Regenerates testdata/broken/: DICOM files broken in one way each (truncated, lying lengths,
# deep sequences, odd VRs, short/long pixel data, cut compressed streams, bad JPEG 2000 header,
# zero and huge sizes). The test suite expects a clear error for every one.
set -euo pipefail
cd "$(dirname "$0")/.."
BUILD_DIR=${BUILD_DIR:-build}
./scripts/build.sh >/dev/null
cmake --build "$BUILD_DIR" --target make_broken_corpus
rm -rf testdata/broken
"$BUILD_DIR/tests/make_broken_corpus" testdata/broken
