#!/usr/bin/env bash
# The sanitizer half of the README's test command (scripts/setup.sh test runs it
# after the main build's tests, whose build/test-data it reuses):
#  1. build-fuzz: clang with AddressSanitizer + UBSan (and coverage for libFuzzer);
#     the test suite runs there (but the brute-force checks of the join);
#  2. scripts/fuzz.sh: every libFuzzer target for FUZZ_SECONDS (default 30);
#  3. build-tsan: ThreadSanitizer; the tests that run the pipeline on several
#     thread counts (outputs compared for 1, 2 and 4 threads, failed decodes on
#     any thread) run there.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$here"
jobs="$(nproc)"
data="$here/build/test-data"
CC=clang CXX=clang++ cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=RelWithDebInfo -DTAMIS_FUZZ=ON \
  -DTAMIS_BUILD_TESTS=ON -DTAMIS_TEST_DATA="$data" >/dev/null
cmake --build build-fuzz -j "$jobs"
# The brute-force comparisons of the look-alike join (index vs all pairs, the
# screen vs every pair) are left to the main build: they are arithmetic on arrays
# the other tests also drive, and take three quarters of the time under ASan.
ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
  ctest --test-dir build-fuzz --output-on-failure -j "$jobs" \
  -E "index equals brute force|screen never rejects|find_groups equals the definition"
bash scripts/fuzz.sh "${FUZZ_SECONDS:-30}"
CC=clang CXX=clang++ cmake -S . -B build-tsan -DCMAKE_BUILD_TYPE=RelWithDebInfo -DTAMIS_BUILD_TESTS=ON \
  -DTAMIS_TEST_DATA="$data" -DCMAKE_CXX_FLAGS="-fsanitize=thread -g" -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=thread" >/dev/null
cmake --build build-tsan -j "$jobs" --target tamis tamis_tests
TSAN_OPTIONS="halt_on_error=1:second_deadlock_stack=1:suppressions=$here/tests/tsan.supp" \
  ctest --test-dir build-tsan --output-on-failure -j "$jobs" \
  -R "thread"
