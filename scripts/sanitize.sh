#!/usr/bin/env bash
# The sanitizer half of the README's test command (scripts/setup.sh test runs it
# after the main build's tests, whose build/test-data it reuses):
#  1. build-fuzz: clang with AddressSanitizer + UBSan (and coverage for libFuzzer),
#     -O1, asserts on; the test suite runs there (but the brute-force checks of
#     the join, which the main build runs);
#  2. scripts/fuzz.sh: every libFuzzer target for FUZZ_SECONDS (default 30);
#  3. build-tsan: ThreadSanitizer; the tests that compare thread counts (outputs
#     for 1, 2 and 4 threads; failed decodes on any thread) run there.
# Only the binaries the tests run are built (no benchmarks), to keep the test
# command within CI's time on two cores.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$here"
jobs="$(nproc)"
data="$here/build/test-data"
targets=(probe decode exif inflate policy keep baseline index record part)
CC=clang CXX=clang++ cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=None -DCMAKE_CXX_FLAGS="-O1" -DTAMIS_FUZZ=ON \
  -DTAMIS_BUILD_TESTS=ON -DTAMIS_TEST_DATA="$data" >/dev/null
cmake --build build-fuzz -j "$jobs" --target tamis tamis_tests dct_export fashion_mnist_export $(printf "fuzz_%s " "${targets[@]}")
# The brute-force comparisons of the look-alike join (index vs all pairs, the
# screen vs every pair) are left to the main build: they are arithmetic on arrays
# the other tests also drive, and take three quarters of the time under ASan.
ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
  ctest --test-dir build-fuzz --output-on-failure -j "$jobs" \
  -E "index equals brute force|screen never rejects|find_groups equals the definition"
bash scripts/fuzz.sh "${FUZZ_SECONDS:-30}"
CC=clang CXX=clang++ cmake -S . -B build-tsan -DCMAKE_BUILD_TYPE=None -DTAMIS_BUILD_TESTS=ON \
  -DTAMIS_TEST_DATA="$data" -DCMAKE_CXX_FLAGS="-O1 -gline-tables-only -fsanitize=thread" \
  -DCMAKE_EXE_LINKER_FLAGS="-fsanitize=thread" >/dev/null
cmake --build build-tsan -j "$jobs" --target tamis_thread_tests
TSAN_OPTIONS="halt_on_error=1:second_deadlock_stack=1:suppressions=$here/tests/tsan.supp" \
  TAMIS_TEST_DATA="$data" build-tsan/tests/tamis_thread_tests "[threads]"
