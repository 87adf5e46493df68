#!/usr/bin/env bash
# Installs every Debian package beamtrim needs to build, test and run its demo.
# Safe to run again: apt-get skips what is already there. Needs root or sudo.
set -euo pipefail

PACKAGES=(
  build-essential cmake ninja-build pkg-config git ca-certificates
  libdcmtk-dev dcmtk            # DICOM toolkit and its command-line peers (network tests)
  libopencv-dev libeigen3-dev   # image processing and linear algebra
  libspdlog-dev nlohmann-json3-dev libcli11-dev doctest-dev
  libsqlite3-dev sqlite3 libopenjp2-7-dev libxlsxwriter-dev
  unzip                         # tests read back the XLSX sheets
)
if [[ "${BEAMTRIM_WITH_BROWSER:-1}" == 1 ]]; then
  PACKAGES+=(chromium fonts-dejavu-core)  # report rendering test and PDF feedback sheets
fi
if [[ "${BEAMTRIM_WITH_CLANG:-0}" == 1 ]]; then
  PACKAGES+=(clang-14 libfuzzer-14-dev libclang-rt-14-dev)  # fuzzing
fi

missing=()
for p in "${PACKAGES[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if ((${#missing[@]} == 0)); then
  echo "setup: all packages present"
  exit 0
fi

SUDO=""
if [[ $(id -u) != 0 ]]; then SUDO="sudo"; fi
echo "setup: installing ${missing[*]}"
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
$SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}"
