#!/usr/bin/env bash
# Sets everything up and runs the main job on the bundled (invented) demo
# recordings: installs missing packages, builds benchid, and runs
# `benchid demo`, which writes one HTML report per scenario into demo_out/
# (with each report's FRF CSV, model JSON and loop JSON beside it).
set -euo pipefail
cd "$(dirname "$0")/.."
bash tools/deps.sh
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target benchid -j2
./build/cli/benchid demo -o demo_out
