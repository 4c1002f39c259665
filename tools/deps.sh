#!/usr/bin/env bash
# Installs benchid's build and test dependencies from Debian's packages,
# only those missing (dpkg -s), so a machine that has them is left alone.
# With --test also what only the tests use: Chromium, which renders the HTML
# report headless (and a font for it), GNU parallel, which runs the
# `benchid batch` shards in the fleet test, and clang, whose libFuzzer drives
# the fuzz targets (tools/fuzz.sh).
set -euo pipefail
pkgs=(g++ make cmake pkg-config libeigen3-dev libfftw3-dev libsndfile1-dev libcli11-dev libgtest-dev nlohmann-json3-dev)
if [ "${1:-}" = "--test" ]; then pkgs+=(chromium fonts-dejavu-core parallel clang); fi
missing=()
for p in "${pkgs[@]}"; do
  dpkg -s "$p" >/dev/null 2>&1 || missing+=("$p")
done
if ((${#missing[@]})); then
  sudo=""
  [ "$(id -u)" -eq 0 ] || sudo="sudo"
  echo "benchid: installing ${missing[*]}" >&2
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
fi
