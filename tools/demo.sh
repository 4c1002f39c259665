#!/usr/bin/env bash
# Sets everything up and runs the main job on the bundled (invented) demo
# recording: installs missing packages, builds benchid, estimates the FRF and
# writes demo_out/frf.csv and the report demo_out/report.txt.
set -euo pipefail
cd "$(dirname "$0")/.."
bash tools/deps.sh
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target benchid -j2
mkdir -p demo_out
./build/cli/benchid frf datasets_demo/belt_axis/belt_axis_log.csv --input drive_v --output speed_rads \
  -o demo_out/frf.csv --report demo_out/report.txt
echo "benchid demo: open demo_out/report.txt (the FRF itself is demo_out/frf.csv)"
