#!/usr/bin/env bash
# Installs benchid's build and test dependencies from Debian's packages,
# only those missing (dpkg -s), so a machine that has them is left alone.
set -euo pipefail
pkgs=(g++ make cmake pkg-config libeigen3-dev libfftw3-dev libsndfile1-dev libcli11-dev libgtest-dev nlohmann-json3-dev)
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
