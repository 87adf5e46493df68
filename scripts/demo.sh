#!/usr/bin/env bash
# The beamtrim demo: installs what is missing, builds, writes a fictional clinic's three months
# of synthetic radiographs into demo-output/ and runs the pipeline stages over them.
# All data are invented (docs/synth.md). Environment:
#   DEMO_COUNT   number of exams (default 300)      DEMO_SEED  seed (default 2026)
#   DEMO_OUT     output folder (default demo-output) BUILD_DIR  build folder (default build)
#   DEMO_SKIP_SETUP=1 skips the package check (no root needed)
set -euo pipefail
cd "$(dirname "$0")/.."
ROOT=$(pwd)
BUILD_DIR=${BUILD_DIR:-build}
OUT=${DEMO_OUT:-demo-output}
COUNT=${DEMO_COUNT:-300}
SEED=${DEMO_SEED:-2026}
BIN="$ROOT/$BUILD_DIR/beamtrim"

step() { printf '\n== %s\n' "$*"; }

if [[ "${DEMO_SKIP_SETUP:-0}" != 1 ]]; then
  step "setup"
  ./scripts/setup.sh
fi
step "build"
BUILD_DIR="$BUILD_DIR" ./scripts/build.sh
[[ -x "$BIN" ]] || { echo "demo: $BIN was not built" >&2; exit 1; }

step "synthetic clinic: $COUNT exams into $OUT/images (seed $SEED)"
mkdir -p "$OUT"
rm -rf "$OUT/images"
"$BIN" synth --clinic --out "$OUT/images" --count "$COUNT" --seed "$SEED" --png

# Later stages run when the program offers them; each is optional so the demo stays usable
# while the tool grows.
has() { "$BIN" "$1" --help >/dev/null 2>&1; }
if has measure; then
  step "measure"
  "$BIN" measure "$OUT/images" --jsonl "$OUT/records.jsonl" || echo "demo: measure reported problems (see above)"
fi

step "done"
echo "Synthetic images, truth records and manifest: $OUT/images"
[[ -f "$OUT/records.jsonl" ]] && echo "Measurements: $OUT/records.jsonl"
echo "All patients, staff, rooms and the institution in this demo are invented."
