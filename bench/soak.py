#!/usr/bin/python3
"""Soak: an audit of a generated tree of many small files, with its peak memory.

Usage: soak.py TAMIS WORKDIR [FILES] [--keep-tree]

Writes WORKDIR/tree: FILES (default 200,000) small images in 20 classes, drawn
from a seeded generator (numpy): 48x48 PNGs (grey, RGB and RGBA, written with
zlib), one in ten a JPEG (Pillow), 1% byte copies and 1% mirrored copies across
classes, 0.1% truncated files. Then runs, each as a child whose own peak
resident memory is read from wait4 (not the largest of all children so far):
  1. a cold audit without a cache,
  2. a cold audit that writes a fresh cache,
  3. a warm audit from that cache,
and prints wall time, peak memory and peak memory a file for each, and checks
that the three runs' outputs are identical (the set file aside, which names the
run's time) and that every file is accounted for. Figures go to
docs/performance.md (the soak section).
"""
import io
import os
import shutil
import struct
import subprocess
import sys
import time
import zlib

import numpy as np
from PIL import Image


def chunk(kind, data):
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)


def png(a):
    h, w = a.shape[:2]
    ch = 1 if a.ndim == 2 else a.shape[2]
    ct = {1: 0, 3: 2, 4: 6}[ch]
    raw = b"".join(b"\0" + a[y].tobytes() for y in range(h))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, ct, 0, 0, 0)) +
            chunk(b"IDAT", zlib.compress(raw, 6)) + chunk(b"IEND", b""))


def picture(rng, ch):
    """Soft shapes on a gradient, with noise: distinct pictures that compress a little."""
    y, x = np.mgrid[0:48, 0:48].astype(np.float32)
    base = rng.uniform(0, 255) + rng.uniform(-3, 3) * x + rng.uniform(-3, 3) * y
    img = np.repeat(base[:, :, None], ch, axis=2)
    for _ in range(rng.integers(1, 4)):
        cx, cy, r = rng.uniform(0, 48), rng.uniform(0, 48), rng.uniform(5, 20)
        mask = (x - cx) ** 2 + (y - cy) ** 2 < r * r
        img[mask] = rng.uniform(0, 255, size=ch)
    img += rng.normal(0, 6, size=img.shape)
    a = np.clip(img, 0, 255).astype(np.uint8)
    return a[:, :, 0] if ch == 1 else a


def make_tree(root, files, seed=2026):
    rng = np.random.default_rng(seed)
    classes = [f"kind_{k:02d}" for k in range(20)]
    for c in classes:
        os.makedirs(os.path.join(root, c), exist_ok=True)
    written = []
    for i in range(files):
        c = classes[i % 20]
        path = os.path.join(root, c, f"item_{i:07d}")
        roll = rng.random()
        if roll < 0.01 and written:  # a byte copy of an earlier file, under this class
            src = written[int(rng.integers(len(written)))]
            shutil.copyfile(src, path + os.path.splitext(src)[1])
            continue
        if roll < 0.02 and written:  # a mirrored copy
            src = written[int(rng.integers(len(written)))]
            if src.endswith(".png"):
                with Image.open(src) as im:
                    im.transpose(Image.FLIP_LEFT_RIGHT).save(path + ".png")
                continue
        ch = (1, 3, 3, 4)[int(rng.integers(4))]
        a = picture(rng, ch)
        if roll > 0.9 and ch != 4:
            buf = io.BytesIO()
            Image.fromarray(a).save(buf, "JPEG", quality=int(rng.integers(60, 95)))
            data, ext = buf.getvalue(), ".jpg"
        else:
            data, ext = png(a), ".png"
        if 0.5 < roll < 0.501:
            data = data[: len(data) // 2]  # truncated
        with open(path + ext, "wb") as f:
            f.write(data)
        written.append(path + ext)
    return files


def run(tamis, args):
    start = time.monotonic()
    child = subprocess.Popen([tamis, *args], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(child.pid, 0)
    wall = time.monotonic() - start
    code = os.waitstatus_to_exitcode(status)
    err = child.stderr.read().decode(errors="replace")
    if code not in (0, 1):
        sys.exit(f"tamis {' '.join(args)} exited {code}: {err}")
    return wall, usage.ru_maxrss * 1024


def main():
    tamis, work = sys.argv[1], sys.argv[2]
    files = int(sys.argv[3]) if len(sys.argv) > 3 and sys.argv[3].isdigit() else 200_000
    root = os.path.join(work, "tree")
    if not os.path.isdir(root):
        t = time.monotonic()
        make_tree(root, files)
        print(f"tree: {files} files written in {time.monotonic() - t:.0f} s")
    cache = os.path.join(work, "records.sqlite")
    for p in (cache, cache + "-wal", cache + "-shm"):
        if os.path.exists(p):
            os.remove(p)
    runs = [("cold, no cache", ["--no-cache"]), ("cold, writing the cache", ["--cache", cache]),
            ("warm, from the cache", ["--cache", cache])]
    outputs = []
    for name, extra in runs:
        out = os.path.join(work, "out-" + str(len(outputs)))
        shutil.rmtree(out, ignore_errors=True)
        wall, peak = run(tamis, ["audit", root, "--out", out, "--quiet", "--threads", "2", *extra])
        print(f"{name:26s} wall {wall:6.1f} s  peak {peak / 2**20:7.1f} MB  {peak / files:7.0f} B a file")
        outputs.append(out)
    names = ("manifest.csv", "report.json", "report.html", "index.cbor")
    for out in outputs[1:]:
        for n in names:
            with open(os.path.join(outputs[0], n), "rb") as a, open(os.path.join(out, n), "rb") as b:
                if a.read() != b.read():
                    sys.exit(f"{n} differs between {outputs[0]} and {out}")
    with open(os.path.join(outputs[0], "manifest.csv"), encoding="utf-8") as f:
        rows = sum(1 for _ in f) - 1
    seen = sum(len(fs) for _, _, fs in os.walk(root))
    if rows != seen:
        sys.exit(f"the manifest has {rows} rows for {seen} files")
    print(f"outputs identical across the three runs; {rows} rows for {seen} files")


if __name__ == "__main__":
    main()
