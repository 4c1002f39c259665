#!/usr/bin/env bash
# Sets everything up and runs the main job on the bundled (invented) demo
# recording: installs missing packages, builds benchid, estimates the FRF
# (demo_out/frf.csv, report demo_out/report.txt) and fits a model to it
# (demo_out/model.json, summary demo_out/model.txt).
set -euo pipefail
cd "$(dirname "$0")/.."
bash tools/deps.sh
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target benchid -j2
mkdir -p demo_out
./build/cli/benchid frf datasets_demo/belt_axis/belt_axis_log.csv --input drive_v --output speed_rads \
  -o demo_out/frf.csv --report demo_out/report.txt
# a model of the well-measured band (coherence falls above ~250 Hz, where the drive has no energy)
./build/cli/benchid fit demo_out/frf.csv --band 0.4:250 --delay auto --max-order 8 -o demo_out/model.json \
  | tee demo_out/model.txt
# does the model explain the time data? (here the same record; use a second run on a real bench)
./build/cli/benchid replay demo_out/model.json datasets_demo/belt_axis/belt_axis_log.csv --input drive_v \
  --output speed_rads -o demo_out/replay.csv | tee -a demo_out/model.txt
echo "benchid demo: open demo_out/report.txt and demo_out/model.txt (data: demo_out/frf.csv, demo_out/model.json, demo_out/replay.csv)"
