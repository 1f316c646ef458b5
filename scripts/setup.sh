#!/usr/bin/env bash
# One-command set-up for tamis on Debian 12 (see README.md).
#   scripts/setup.sh demo   install what is missing, build, audit demo_data/
#   scripts/setup.sh test   install what is missing, build, run the whole test suite
# Installs Debian packages with apt-get (as root directly, through sudo otherwise).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$here"
mode="${1:-demo}"

# Build and run-time dependencies, then what the tests compare against.
build_pkgs=(cmake make g++ pkg-config libopencv-dev nlohmann-json3-dev libcli11-dev catch2
            libspdlog-dev libturbojpeg0-dev libjpeg-dev libxxhash-dev libsqlite3-dev zlib1g-dev)
test_pkgs=(libjxl-testdata dataset-fashion-mnist visp-images-data python3 python3-numpy python3-scipy
           python3-sklearn python3-jsonschema python3-pil python3-cbor2 python3-xxhash python3-pandas libjpeg-turbo-progs chromium fonts-dejavu-core adwaita-icon-theme
           slurmctld slurmd slurm-client
           clang libclang-rt-14-dev llvm)

as_root() {
  if [ "$(id -u)" = 0 ]; then "$@"; elif command -v sudo >/dev/null; then sudo "$@"; else
    echo "setup: need root or sudo to install packages: $*" >&2; exit 3; fi
}

install_missing() {
  local missing=()
  for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  if [ ${#missing[@]} -gt 0 ]; then
    echo "setup: installing ${missing[*]}"
    as_root apt-get update -qq
    as_root env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends "${missing[@]}"
  fi
}

build() {
  cmake -S . -B build -DCMAKE_BUILD_TYPE=Release >/dev/null
  cmake --build build -j "$(nproc)"
}

case "$mode" in
  demo)
    install_missing "${build_pkgs[@]}"
    build
    mkdir -p build/demo-report
    set +e
    ./build/tamis audit demo_data --out build/demo-report --no-cache
    rc=$?
    set -e
    echo "setup: the demo audit exited $rc (1 means it found problems, as the demo data is built to have)"
    echo "setup: reports are in $here/build/demo-report (open report.html in a browser)"
    [ $rc -le 1 ] || exit $rc
    ;;
  test)
    install_missing "${build_pkgs[@]}" "${test_pkgs[@]}"
    build
    ctest --test-dir build --output-on-failure -j "$(nproc)"
    # The same suite under AddressSanitizer and UBSan (clang, in build-fuzz, whose
    # library is also instrumented for the fuzzers), then every libFuzzer target
    # for 30 s, then the threaded tests under ThreadSanitizer (build-tsan).
    # Both builds share build/test-data (the Fashion-MNIST export is made once).
    bash scripts/sanitize.sh
    ;;
  *)
    echo "usage: scripts/setup.sh demo|test" >&2
    exit 2
    ;;
esac
