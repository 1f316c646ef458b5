#!/usr/bin/env bash
# The sanitizer half of the README's test command (scripts/setup.sh test runs it
# after the main build's tests, whose build/test-data it reuses):
#  1. build-fuzz: clang with AddressSanitizer + UBSan (and coverage for libFuzzer);
#     the whole test suite runs there;
#  2. scripts/fuzz.sh: every libFuzzer target for FUZZ_SECONDS (default 30);
#  3. build-tsan: ThreadSanitizer; the tests that run the pipeline on several
#     threads (thread counts compared, failed decodes on any thread, the
#     look-alike join's buckets) run there.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$here"
jobs="$(nproc)"
data="$here/build/test-data"
CC=clang CXX=clang++ cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=RelWithDebInfo -DTAMIS_FUZZ=ON \
  -DTAMIS_BUILD_TESTS=ON -DTAMIS_TEST_DATA="$data" >/dev/null
cmake --build build-fuzz -j "$jobs"
ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
  ctest --test-dir build-fuzz --output-on-failure -j "$jobs"
bash scripts/fuzz.sh "${FUZZ_SECONDS:-30}"
CC=clang CXX=clang++ cmake -S . -B build-tsan -DCMAKE_BUILD_TYPE=RelWithDebInfo -DTAMIS_BUILD_TESTS=ON \
  -DTAMIS_TEST_DATA="$data" -DCMAKE_CXX_FLAGS="-fsanitize=thread -g" -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=thread" >/dev/null
cmake --build build-tsan -j "$jobs" --target tamis tamis_tests
TSAN_OPTIONS=halt_on_error=1:second_deadlock_stack=1 \
  ctest --test-dir build-tsan --output-on-failure -j "$jobs" \
  -R "thread|failed decode changes no other|index equals brute force|find_groups equals"
