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

step "scan: measure every image into the audit store"
rm -f "$OUT/audit.sqlite" "$OUT/audit.sqlite-wal" "$OUT/audit.sqlite-shm"
"$BIN" scan "$OUT/images" --store "$OUT/audit.sqlite" --key-file "$OUT/store.key"

step "tables: per radiographer, room, exam and month (CSV, JSON and XLSX)"
rm -rf "$OUT/tables"
"$BIN" tables --store "$OUT/audit.sqlite" --format csv --out "$OUT/tables"
"$BIN" tables --store "$OUT/audit.sqlite" --format json --out "$OUT/tables.json"
"$BIN" tables --store "$OUT/audit.sqlite" --format xlsx --out "$OUT/tables.xlsx" \
  --pseudonymise --key-file "$OUT/manager.key"

# The busiest month of the three, so the report has the most to show.
PERIOD=$(sqlite3 "$OUT/audit.sqlite" \
  "SELECT month FROM images WHERE month <> '' GROUP BY month ORDER BY count(*) DESC LIMIT 1" \
  2>/dev/null || true)
[[ -n "$PERIOD" ]] || PERIOD=$(date +%Y-%m)
step "physicist QC: a synthetic test exposure of XR-ROOM-1"
rm -rf "$OUT/qc"
# Dated in the reported month, so the report shows the room's QC beside its clinical audit.
"$BIN" synth-qc --out "$OUT/qc" --count 1 --seed "$SEED" --room XR-ROOM-1 \
  --date "${PERIOD/-/}15"
qc_image=$(find "$OUT/qc" -name '*.dcm' | sort | sed -n 1p)  # sed reads all: no SIGPIPE for sort under pipefail
"$BIN" qc-field "$qc_image" --store "$OUT/audit.sqlite" --html "$OUT/qc-report.html" || \
  echo "demo: the QC check reported a problem (see above)"

step "report: the busiest month, with feedback sheets"
"$BIN" report --store "$OUT/audit.sqlite" --period "$PERIOD" --out "$OUT/report.html" \
  --feedback "$OUT/feedback"

step "overlay: one image with its measured field and anatomy"
first=$(find "$OUT/images" -name '*.dcm' | sort | sed -n 1p)  # sed reads all: no SIGPIPE for sort under pipefail
"$BIN" overlay "$first" --png "$OUT/overlay.png"

step "done"
cat <<MSG
Open these (all data are invented: patients, staff, rooms and the institution):
  $OUT/report.html         monthly audit report ($PERIOD)
  $OUT/feedback/           one feedback sheet per radiographer
  $OUT/tables/             audit tables (CSV); $OUT/tables.xlsx (pseudonymised)
  $OUT/overlay.png         one radiograph with its measured field
  $OUT/qc-report.html      beam-limiting device QC for XR-ROOM-1
Dose figures are estimates for quality improvement, not patient dose records. Findings about a
person are for coaching; local regulations, the department's protocols and the medical
physicist take precedence.
MSG
