#!/usr/bin/env bash
# Builds benchid and runs the whole test suite twice: an optimised build, and
# a build under AddressSanitizer + UndefinedBehaviorSanitizer; then runs each
# fuzz target (tests/fuzz) for a minute under the same sanitizers.
set -euo pipefail
cd "$(dirname "$0")/.."
bash tools/deps.sh --test
cmake -S . -B build -DCMAKE_BUILD_TYPE=Release -DBENCHID_TESTS=ON >/dev/null
cmake --build build -j2
ctest --test-dir build --output-on-failure -j2
# -O1 with line tables: the optimisation the sanitizers' authors recommend,
# readable stack traces, and half the compile time of -O2 -g; no benchmarks
cmake -S . -B build-sanitize -DCMAKE_BUILD_TYPE=Debug -DCMAKE_CXX_FLAGS_DEBUG="-O1 -g1" -DBENCHID_TESTS=ON \
  -DBENCHID_SANITIZE=ON -DBENCHID_BENCH=OFF >/dev/null
cmake --build build-sanitize -j2
ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
  ctest --test-dir build-sanitize --output-on-failure -j2
# every reader of user files, fuzzed: a crash, leak, sanitizer report or broken property fails
bash tools/fuzz.sh 60
