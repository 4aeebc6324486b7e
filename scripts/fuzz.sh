#!/usr/bin/env bash
# Builds the libFuzzer targets of tests/fuzz with clang, AddressSanitizer and
# UndefinedBehaviorSanitizer, and runs each for a bounded time (default 30 s)
# from its seed corpus. A crash stops the script; its input is written to
# tests/fuzz/corpus/<target>/crash-<hash>: fix the bug and keep the file, so
# that the fuzz_corpus_<target> test of every build replays it from then on.
#
#   scripts/fuzz.sh [seconds per target] [build folder]
set -euo pipefail
cd "$(dirname "${BASH_SOURCE[0]}")/.."
seconds="${1:-30}"
build="${2:-build-fuzz}"
targets=(protocol_line_fuzz device_profile_fuzz curve_csv_fuzz sample_json_fuzz scenario_fuzz
  method_file_fuzz)

cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DVEQ_WERROR=ON \
  -DCMAKE_CXX_COMPILER=clang++ -DVEQ_FUZZ=ON -DVEQ_SANITIZE=address,undefined \
  -DVEQ_BUILD_BENCH=OFF -DVEQ_GUI=OFF -DCMAKE_CXX_COMPILER_LAUNCHER=ccache >/dev/null
cmake --build "$build" --parallel "$(nproc)" --target "${targets[@]}"

export ASAN_OPTIONS=detect_leaks=1:abort_on_error=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
printf '%-22s %12s %10s\n' target executions "exec/s"
for t in "${targets[@]}"; do
  work=$(mktemp -d)
  # The seed corpus is copied: new inputs stay out of the repository.
  cp -r "tests/fuzz/corpus/$t/." "$work/"
  log="$build/$t.log"
  if ! "$build/bin/$t" "$work" -max_total_time="$seconds" -max_len=8192 -timeout=10 \
      -artifact_prefix="tests/fuzz/corpus/$t/" >"$log" 2>&1; then
    tail -40 "$log"
    echo "fuzz: $t failed; the input is in tests/fuzz/corpus/$t/crash-*" >&2
    exit 1
  fi
  runs=$(grep -o 'Done [0-9]* runs' "$log" | grep -o '[0-9]*' || echo 0)
  printf '%-22s %12s %10s\n' "$t" "$runs" "$((runs / seconds))"
  rm -rf "$work"
done
