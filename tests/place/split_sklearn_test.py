#!/usr/bin/python3
"""Per-class split counts of `tamis audit` against scikit-learn's StratifiedShuffleSplit
(Debian python3-sklearn) on the same class counts: they must agree within one image.

scikit-learn splits train/test in one step; for three parts the check uses
StratifiedShuffleSplit(train_size=0.70, test_size=0.15) on each class layout and
compares train and test counts (val is the rest). Usage: split_sklearn_test.py TAMIS
"""
import csv
import json
import os
import struct
import subprocess
import sys
import tempfile
import zlib
from collections import Counter

import numpy as np
from sklearn.model_selection import StratifiedShuffleSplit


def png(v):
    """An 8x8 gray PNG of noise seeded by v: distinct pictures, so no look-alike groups."""
    import random
    rng = random.Random(v)
    def chunk(t, d):
        return struct.pack(">I", len(d)) + t + d + struct.pack(">I", zlib.crc32(t + d) & 0xFFFFFFFF)
    ihdr = struct.pack(">IIBBBBB", 8, 8, 8, 0, 0, 0, 0)
    raw = b"".join(b"\x00" + bytes(rng.randrange(256) for _ in range(8)) for _ in range(8))
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b"")


def main(tamis):
    layouts = [[7, 13, 50, 101, 3, 2], [1000, 20, 33], [9, 9, 9, 9]]
    failures = 0
    for layout, spec, parts in [(l, "70/15/15", (0.70, 0.15)) for l in layouts] + \
                               [(l, "80/20", (0.80, 0.20)) for l in layouts]:
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            k = 0
            for c, n in enumerate(layout):
                os.makedirs(os.path.join(root, f"class{c}"))
                for i in range(n):
                    with open(os.path.join(root, f"class{c}", f"{i}.png"), "wb") as f:
                        f.write(png(k))
                    k += 1
            out = os.path.join(t, "out")
            r = subprocess.run([tamis, "audit", root, "--out", out, "--split", spec, "--quiet"])
            assert r.returncode == 0, r.returncode
            report = json.load(open(os.path.join(out, "report.json")))
            assert report["groups"] == [], report["groups"]
            ours = Counter()
            with open(os.path.join(out, "manifest.csv"), newline="") as f:
                for row in csv.DictReader(f):
                    ours[(row["label"], row["split"])] += 1
            y = np.concatenate([np.full(n, c) for c, n in enumerate(layout)])
            sss = StratifiedShuffleSplit(n_splits=1, train_size=parts[0], test_size=parts[1], random_state=0)
            train_idx, test_idx = next(sss.split(np.zeros(len(y)), y))
            for c, n in enumerate(layout):
                sk_train = int((y[train_idx] == c).sum())
                sk_test = int((y[test_idx] == c).sum())
                mine_train = ours[(f"class{c}", "train")]
                mine_test = ours[(f"class{c}", "test")]
                ok = abs(sk_train - mine_train) <= 1 and abs(sk_test - mine_test) <= 1
                print(f"{spec} class{c} n={n}: sklearn train/test {sk_train}/{sk_test}, "
                      f"tamis {mine_train}/{mine_test} {'ok' if ok else 'DIFFERS'}")
                failures += not ok
    print(f"{0 if failures else 1} passed, {1 if failures else 0} failed")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
