#!/usr/bin/python3
"""Seed corpora for the libFuzzer targets (tests/fuzz), from real files.

Usage: make_corpus.py OUT_DIR TAMIS_BINARY TEST_DATA_DIR
  OUT_DIR/<target>/ gets seeds for each target:
  probe, decode  image files: Debian's visp-images-data and libjxl-testdata, the
                 Pillow-written fixtures (every mode, bit depth and JPEG sampling
                 layout; TEST_DATA_DIR/pillow and /coverage), the demo data;
                 small files first (decode: at most 64 KB each)
  exif           the TIFF structures inside those JPEGs' APP1 "Exif" segments
  inflate        the zlib streams of those PNGs' IDAT chunks, prefixed with their
                 decoded size (2 bytes, big-endian; streams up to 65,535 bytes out)
  policy         the policy example of docs/policy.md, and variants
  keep, baseline, index, record, part
                 a manifest.csv, report.json and index.cbor of an audit of the demo
                 data, and the record rows of its cache (read with Python's sqlite3,
                 the 8-byte checksum taken off); parts of the demo data in 3 shards
                 (tamis scan) and a join output over them (tamis join)
"""
import os
import re
import shutil
import sqlite3
import struct
import subprocess
import sys
import tempfile
import zlib

out, tamis, test_data = sys.argv[1], sys.argv[2], sys.argv[3]
here = os.path.dirname(os.path.abspath(__file__))
repo = os.path.dirname(os.path.dirname(here))
EXT = {".png", ".jpg", ".jpeg", ".gif", ".bmp", ".webp", ".tif", ".tiff", ".ppm", ".pgm", ".pbm", ".pnm"}


def images():
    roots = ["/usr/share/visp-images-data", "/usr/share/libjxl-testdata", os.path.join(test_data, "pillow"),
             os.path.join(test_data, "coverage"), os.path.join(repo, "demo_data")]
    found = []
    for r in roots:
        for d, _, files in os.walk(r):
            for f in files:
                p = os.path.join(d, f)
                if os.path.splitext(f)[1].lower() in EXT and os.path.isfile(p) and not os.path.islink(p):
                    found.append((os.path.getsize(p), p))
    found.sort()
    return [p for _, p in found]


def put(target, name, data):
    d = os.path.join(out, target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, name), "wb") as f:
        f.write(data)


def read(p):
    with open(p, "rb") as f:
        return f.read()


shutil.rmtree(out, ignore_errors=True)
imgs = images()
seen_ext = {}
for k, p in enumerate(imgs):
    data = read(p)
    ext = os.path.splitext(p)[1].lower()
    # Every kind of file, small ones first; at most 40 of one extension.
    if seen_ext.get(ext, 0) >= 40 or len(data) > 256 * 1024:
        continue
    seen_ext[ext] = seen_ext.get(ext, 0) + 1
    put("probe", "%04d%s" % (k, ext), data[:4096] if len(data) > 4096 else data)
    if len(data) <= 64 * 1024:
        put("decode", "%04d%s" % (k, ext), data)
    if ext in (".jpg", ".jpeg"):
        for m in re.finditer(rb"\xff\xe1(..)Exif\x00\x00", data, re.S):
            n = struct.unpack(">H", m.group(1))[0]
            put("exif", "%04d-%d" % (k, m.start()), data[m.end():m.start() + 2 + n])
    if ext in (".tif", ".tiff"):
        put("exif", "%04d.tif" % k, data[:65536])
    if ext == ".png" and data[:8] == b"\x89PNG\r\n\x1a\n":
        pos, idat = 8, b""
        while pos + 8 <= len(data):
            n, kind = struct.unpack(">I4s", data[pos:pos + 8])
            if kind == b"IDAT":
                idat += data[pos + 8:pos + 8 + n]
            pos += 12 + n
        try:
            raw = zlib.decompress(idat)
        except zlib.error:
            continue
        if len(raw) <= 65535:
            put("inflate", "%04d" % k, struct.pack(">H", len(raw)) + idat)

with open(os.path.join(repo, "docs", "policy.md"), encoding="utf-8") as f:
    blocks = re.findall(r"```json\n(.*?)```", f.read(), re.S)
for k, b in enumerate(blocks):
    put("policy", "docs-%d.json" % k, b.encode())
put("policy", "empty.json", b"{}")
put("policy", "fail-on.json", b'{"fail_on": "any", "severity": {"unreadable": "off"}}')

with tempfile.TemporaryDirectory() as t:
    o = os.path.join(t, "out")
    cache = os.path.join(t, "cache.sqlite")
    r = subprocess.run([tamis, "audit", os.path.join(repo, "demo_data"), "--out", o, "--cache", cache, "--quiet"],
                       capture_output=True)
    if r.returncode not in (0, 1):
        sys.exit("make_corpus: the demo audit failed: " + r.stderr.decode(errors="replace"))
    put("keep", "manifest.csv", read(os.path.join(o, "manifest.csv")))
    put("keep", "short.csv", b"path,split\r\na/b.png,train\r\nc/d.png,test\r\n")
    put("baseline", "report.json", read(os.path.join(o, "report.json")))
    put("index", "index.cbor", read(os.path.join(o, "index.cbor")))
    db = sqlite3.connect(cache)
    for k, (data,) in enumerate(db.execute("SELECT data FROM records ORDER BY path LIMIT 60")):
        put("record", "%03d" % k, bytes(data)[:-8])
    db.close()
    # Parts of the demo in 3 shards and a join output over them (scan, join).
    for k in range(3):
        part = os.path.join(t, "%d.part" % k)
        r = subprocess.run([tamis, "scan", os.path.join(repo, "demo_data"), "--shard", "%d/3" % k, "--out", part,
                            "--no-cache", "--quiet"], capture_output=True)
        if r.returncode != 0:
            sys.exit("make_corpus: the demo scan failed: " + r.stderr.decode(errors="replace"))
        put("part", "%d.part" % k, read(part))
    j = os.path.join(t, "0.join")
    r = subprocess.run([tamis, "join"] + [os.path.join(t, "%d.part" % k) for k in range(3)] + ["--out", j, "--quiet"],
                       capture_output=True)
    if r.returncode != 0:
        sys.exit("make_corpus: the demo join failed: " + r.stderr.decode(errors="replace"))
    put("part", "0.join", read(j))

for t in sorted(os.listdir(out)):
    print("make_corpus: %-9s %4d seeds" % (t, len(os.listdir(os.path.join(out, t)))))
