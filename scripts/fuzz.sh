#!/usr/bin/env bash
# Builds the libFuzzer targets (tests/fuzz) with clang in build-fuzz, makes their
# seed corpora from real files (tests/fuzz/make_corpus.py) and runs each target
# for SECONDS (default 30), two at a time. Inputs that once crashed a target are
# kept in tests/fuzz/regressions/<target>/ and run first, every time. A crash,
# a leak, a sanitizer report or a timeout fails the script; the input is then in
# build-fuzz/artifacts/<target>/ (copy it into the regressions folder with the fix).
# Usage: scripts/fuzz.sh [SECONDS]   (the main build's test data must exist:
# run after `ctest --test-dir build`, which makes build/test-data)
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$here"
seconds="${1:-30}"
CC=clang CXX=clang++ cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=None -DCMAKE_CXX_FLAGS="-O1" -DTAMIS_FUZZ=ON >/dev/null
cmake --build build-fuzz -j "$(nproc)" --target tamis $(printf "fuzz_%s " probe decode exif inflate policy keep baseline index record part)
python3 tests/fuzz/make_corpus.py build-fuzz/corpus build-fuzz/tamis build/test-data
targets=(probe decode exif inflate policy keep baseline index record part)
mkdir -p build-fuzz/logs
run_one() {
  local t="$1"
  mkdir -p "build-fuzz/artifacts/$t" "build-fuzz/work/$t" "tests/fuzz/regressions/$t"
  # The work corpus starts from the seeds; the regressions folder is read only.
  cp -n "build-fuzz/corpus/$t/"* "build-fuzz/work/$t/" 2>/dev/null || true
  if ASAN_OPTIONS=detect_leaks=1:allocator_may_return_null=1 UBSAN_OPTIONS=print_stacktrace=1 \
     "build-fuzz/fuzz_$t" -max_total_time="$seconds" -timeout=20 -rss_limit_mb=3072 -max_len=262144 \
     -print_final_stats=1 -artifact_prefix="build-fuzz/artifacts/$t/" \
     "build-fuzz/work/$t" "tests/fuzz/regressions/$t" > "build-fuzz/logs/$t.log" 2>&1; then
    echo "fuzz: $t ok ($(grep -m1 -o 'stat::number_of_executed_units: *[0-9]*' "build-fuzz/logs/$t.log" | grep -o '[0-9]*$') runs)"
  else
    echo "fuzz: $t FAILED (build-fuzz/logs/$t.log)"; tail -40 "build-fuzz/logs/$t.log"; return 1
  fi
}
failed=0
for ((i = 0; i < ${#targets[@]}; i += 2)); do
  pids=()
  for t in "${targets[@]:i:2}"; do run_one "$t" & pids+=($!); done
  for p in "${pids[@]}"; do wait "$p" || failed=1; done
done
exit $failed
