#!/usr/bin/env bash
# Builds the libFuzzer targets (clang, AddressSanitizer + UndefinedBehaviorSanitizer)
# and runs each on a scratch copy of its seed corpus (tests/fuzz/corpus/NAME)
# for SECONDS (default 60), two at a time. Fails on any crash, leak, sanitizer
# report, broken property or hang (an input running over 10 s); the input that
# did it is kept in build-fuzz/findings/ and its name printed.
#   bash tools/fuzz.sh [SECONDS] [TARGET...]
set -euo pipefail
cd "$(dirname "$0")/.."
seconds="${1:-60}"
shift || true
targets=("$@")
((${#targets[@]})) || targets=(record_csv frf_csv model_json controller plan_json manifest)
CXX=clang++ cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=Debug -DCMAKE_CXX_FLAGS_DEBUG="-O1 -g1" \
  -DBENCHID_TESTS=OFF -DBENCHID_FUZZ=ON >/dev/null
cmake --build build-fuzz -j2 --target $(printf 'fuzz_%s ' "${targets[@]}")
rm -rf build-fuzz/runs build-fuzz/findings
mkdir -p build-fuzz/runs build-fuzz/findings
run() {  # one target; its log in build-fuzz/runs/NAME.log
  local t="$1" dir="build-fuzz/runs/$1"
  mkdir -p "$dir/corpus"
  cp tests/fuzz/corpus/"$t"/* "$dir/corpus/"
  if ASAN_OPTIONS=detect_leaks=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
     build-fuzz/tests/fuzz/fuzz_"$t" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -max_len=65536 \
       -print_final_stats=1 -artifact_prefix="build-fuzz/findings/$t-" "$dir/corpus" >"build-fuzz/runs/$t.log" 2>&1; then
    echo "fuzz $t: clean, $(grep -m1 -o 'stat::number_of_executed_units: *[0-9]*' "build-fuzz/runs/$t.log" | grep -o '[0-9]*$') inputs in ${seconds} s"
  else
    echo "fuzz $t: FAILED; log build-fuzz/runs/$t.log, input(s): $(ls build-fuzz/findings/"$t"-* 2>/dev/null | tr '\n' ' ')"
    grep -m3 -E 'ERROR|runtime error|property broken|terminate' "build-fuzz/runs/$t.log" || true
    return 1
  fi
}
export -f run
export seconds
# two at a time (the machine's cores); every target runs even when one fails
status=0
printf '%s\n' "${targets[@]}" | xargs -P 2 -I{} bash -c 'run {}' || status=1
exit $status
