#!/usr/bin/env bash
# Peak memory and time of each scale-out task on synthetic parts (docs/scale-out.md).
# Usage: bench/scale_out_memory.sh BUILD_DIR N PARTS SLICES WORKDIR
# Writes PARTS synthetic parts of N records (bench/synthetic_parts.cc), runs the
# join's SLICES tasks one after another, the merge with their outputs, and the
# merge alone (the join inside it), each under /usr/bin/time (peak RSS), and
# checks that both merges give the same four files (MERGE_ALONE=0 skips the merge
# alone, which at 10M records takes long). WORKDIR is removed first (REUSE_PARTS=1
# keeps its parts; JOIN_MB sets the join tasks' --join-memory-mb, default 64).
set -euo pipefail
build="$1" n="$2" parts="$3" slices="$4" work="$5"
if [ "${REUSE_PARTS:-0}" = 1 ] && [ -d "$work/parts" ]; then  # parts of an earlier run with the same N and PARTS
  rm -rf "$work/joins" "$work/merged" "$work/alone"
else
  rm -rf "$work"
  mkdir -p "$work"
  "$build/bench/synthetic_parts" "$n" "$parts" "$work/parts"
fi
du -sh "$work/parts"
t() { /usr/bin/time -f "$1: %e s, peak RSS %M KB" "${@:2}"; }
for ((k = 0; k < slices; k++)); do
  t "join $k/$slices" "$build/tamis" join "$work"/parts/*.part --slice "$k/$slices" --out "$work/joins/$k.join" --threads 2 --quiet \
    --join-memory-mb "${JOIN_MB:-64}"
done
set +e
t "merge with the join's outputs" "$build/tamis" merge "$work"/parts/*.part "$work"/joins/*.join --out "$work/merged" --quiet --timings --threads 2
du -sh "$work/merged"
[ "${MERGE_ALONE:-1}" = 0 ] && exit 0
t "merge alone" "$build/tamis" merge "$work"/parts/*.part --out "$work/alone" --quiet --threads 2
set -e
for f in manifest.csv report.json report.html index.cbor; do cmp "$work/merged/$f" "$work/alone/$f"; done
echo "both merges wrote the same four files"
