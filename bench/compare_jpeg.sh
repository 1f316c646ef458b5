#!/usr/bin/env bash
# Side by side, alternating, in one run: a floor (decode or read), a cold audit (no cache) and a
# warm audit (cache filled) of the 3 MP JPEG set on 2 threads. Prints wall seconds.
# With PYTHON=1 each round also times bench/python_pipeline.py on 2 workers.
# Usage: bench/compare_jpeg.sh SET_DIR [ROUNDS=3] [FLOOR=decode|read]
#   the 3 MP set: bench/make_jpeg_set.py; Fashion-MNIST: build/test-data/cache/fashion-mnist-png, FLOOR=read
set -euo pipefail
set_dir="$1"; rounds="${2:-3}"; floor="${3:-decode}"
bin="$(cd "$(dirname "$0")/.." && pwd)/build"
work="$(mktemp -d)"; trap 'rm -rf "$work"' EXIT
ms() { local t0 t1; t0=$(date +%s%N); "$@" > /dev/null || true; t1=$(date +%s%N); echo $(( (t1 - t0) / 1000000 )); }
"$bin/tamis" audit "$set_dir" --out "$work/warmup" --cache "$work/cache.sqlite" --threads 2 --quiet || true
for r in $(seq 1 "$rounds"); do
  f=$(ms "$bin/bench/decode_floor" "$floor" "$set_dir" 2)
  c=$(ms "$bin/tamis" audit "$set_dir" --out "$work/cold" --no-cache --threads 2 --quiet)
  w=$(ms "$bin/tamis" audit "$set_dir" --out "$work/warm" --cache "$work/cache.sqlite" --threads 2 --quiet)
  echo "round $r: $floor floor $f ms, cold audit $c ms ($(( 100 * c / f ))% of the floor), warm audit $w ms ($(( 100 * w / c ))% of cold)"
  if [ "${PYTHON:-0}" = 1 ]; then
    p=$(ms /usr/bin/python3 "$(dirname "$0")/python_pipeline.py" "$set_dir" 2)
    echo "round $r: python pipeline $p ms: cold audit is $(( p / c )).$(( (10 * p / c) % 10 ))x faster"
  fi
done
