#!/usr/bin/python3
"""The plain-Python pipeline tamis is compared with (docs/performance.md): what a practitioner
would write with Debian's Pillow, numpy, scipy and scikit-learn, on a process pool.

walk -> decode (Pillow, JPEG draft mode for a reduced decode) -> 64-bit DCT hash (32x32 gray,
scipy.fft.dctn ortho, low 8x8, median) -> all pairs within Hamming distance 8 (numpy, 16-bit
popcount table, blocked) -> stratified train/val/test split (scikit-learn, two stages).
Usage: python_pipeline.py ROOT [WORKERS=2]    Prints the wall time of each stage.
"""
import os
import sys
import time
from concurrent.futures import ProcessPoolExecutor

import numpy as np
from PIL import Image
from scipy.fft import dctn
from sklearn.model_selection import train_test_split

EXTS = {".jpg", ".jpeg", ".png", ".bmp", ".gif", ".tif", ".tiff", ".webp", ".ppm", ".pgm"}


def dct_hash(path):
    try:
        with Image.open(path) as im:
            if im.format == "JPEG":
                im.draft("L", (64, 64))  # libjpeg's scaled decode through Pillow
            im = im.convert("L").resize((32, 32), Image.BOX)
        c = dctn(np.asarray(im, dtype=np.float64), norm="ortho")[:8, :8].ravel()
        bits = c > np.median(c)
        return int(np.packbits(bits).view(">u8")[0]), im.size
    except Exception:
        return None, None


def main(root, workers):
    t0 = time.perf_counter()
    files, labels = [], []
    for d, _, names in os.walk(root):
        for n in names:
            if os.path.splitext(n)[1].lower() in EXTS and not n.startswith("."):
                files.append(os.path.join(d, n))
                labels.append(os.path.relpath(d, root).split(os.sep)[0])
    t1 = time.perf_counter()
    with ProcessPoolExecutor(workers) as pool:
        results = list(pool.map(dct_hash, files, chunksize=256))
    t2 = time.perf_counter()
    ok = [i for i, (h, _) in enumerate(results) if h is not None]
    codes = np.array([results[i][0] for i in ok], dtype=np.uint64)
    lut = np.array([bin(v).count("1") for v in range(1 << 16)], dtype=np.uint8)
    parts = codes.view(np.uint16).reshape(-1, 4)
    pairs = 0
    block = 512
    for s in range(0, len(codes), block):
        x = codes[s:s + block, None] ^ codes[None, :]
        d = lut[(x & 0xFFFF).astype(np.uint16)].astype(np.uint16)
        for k in (16, 32, 48):
            d += lut[((x >> np.uint64(k)) & np.uint64(0xFFFF)).astype(np.uint16)]
        i, j = np.nonzero(d <= 8)
        pairs += int(np.count_nonzero(i + s < j))
    del parts
    t3 = time.perf_counter()
    y = np.array([labels[i] for i in ok])
    idx = np.arange(len(y))
    train, rest = train_test_split(idx, train_size=0.70, stratify=y, random_state=1)
    val, test = train_test_split(rest, train_size=0.5, stratify=y[rest], random_state=1)
    t4 = time.perf_counter()
    print(f"{len(files)} files, {len(ok)} hashed, {pairs} pairs within 8; split {len(train)}/{len(val)}/{len(test)}")
    print(f"walk {t1 - t0:.2f} s, decode+hash {t2 - t1:.2f} s, all pairs {t3 - t2:.2f} s, split {t4 - t3:.2f} s, "
          f"total {t4 - t0:.2f} s")


if __name__ == "__main__":
    main(sys.argv[1], int(sys.argv[2]) if len(sys.argv) > 2 else 2)
