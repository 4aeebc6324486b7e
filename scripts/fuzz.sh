#!/usr/bin/env bash
# Builds the libFuzzer targets of tests/fuzz with clang, AddressSanitizer and
# UndefinedBehaviorSanitizer, and runs each for a bounded time (default 30 s)
# from its seed corpus, as many at once as there are cores (each target is one
# process). A crash stops the script; its input is written to
# tests/fuzz/corpus/<target>/crash-<hash>: fix the bug and keep the file, so
# that the fuzz_corpus_<target> test of every build replays it from then on.
#
#   scripts/fuzz.sh [seconds per target] [build folder]
#
# A build folder already configured with VEQ_FUZZ=ON is used as it is (CI's
# AddressSanitizer build is one: its tests and the fuzzers share one build);
# any other folder is configured here with the same settings as CI's.
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
seconds="${1:-30}"
build="${2:-build-fuzz}"
targets=(protocol_line_fuzz device_profile_fuzz curve_csv_fuzz sample_json_fuzz scenario_fuzz
  method_file_fuzz)
jobs="$(nproc)"

if ! grep -q '^VEQ_FUZZ:BOOL=ON' "$build/CMakeCache.txt" 2>/dev/null; then
  # Debug with -O1 and line tables only: asserts on, reports name file and
  # line, and more executions per second than CI's -O0 build (which is
  # unoptimised to save build time; see .ci/run).
  cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=Debug -DCMAKE_CXX_FLAGS_DEBUG="-O1 -gline-tables-only" \
    -DCMAKE_CXX_COMPILER=clang++ -DVEQ_WERROR=ON -DVEQ_FUZZ=ON -DVEQ_SANITIZE=address,undefined \
    -DVEQ_BUILD_BENCH=OFF -DVEQ_GUI=OFF -DCMAKE_CXX_COMPILER_LAUNCHER=ccache >/dev/null
fi
cmake --build "$build" --parallel "$jobs" --target "${targets[@]}"

export ASAN_OPTIONS=detect_leaks=1:abort_on_error=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1

# Runs one target; its log is $build/<target>.log, its exit status
# $build/<target>.status.
fuzz_one() {
  local t="$1" work
  work=$(mktemp -d)
  # The seed corpus is copied: new inputs stay out of the repository.
  cp -r "tests/fuzz/corpus/$t/." "$work/"
  local status=0
  "$build/bin/$t" "$work" -max_total_time="$seconds" -max_len=8192 -timeout=10 \
    -artifact_prefix="tests/fuzz/corpus/$t/" >"$build/$t.log" 2>&1 || status=$?
  echo "$status" >"$build/$t.status"
  rm -rf "$work"
}

running=0
for t in "${targets[@]}"; do
  fuzz_one "$t" &
  running=$((running + 1))
  if [ "$running" -ge "$jobs" ]; then
    wait -n || true
    running=$((running - 1))
  fi
done
wait

failed=0
printf '%-22s %12s %10s\n' target executions "exec/s"
for t in "${targets[@]}"; do
  if [ "$(cat "$build/$t.status")" != 0 ]; then
    tail -40 "$build/$t.log"
    echo "fuzz: $t failed; the input is in tests/fuzz/corpus/$t/crash-*" >&2
    failed=1
    continue
  fi
  runs=$(grep -o 'Done [0-9]* runs' "$build/$t.log" | grep -o '[0-9]*' || echo 0)
  printf '%-22s %12s %10s\n' "$t" "$runs" "$((runs / seconds))"
done
exit "$failed"
