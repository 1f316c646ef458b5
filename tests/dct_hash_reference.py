#!/usr/bin/python3
"""tamis's DCT hash bits against an independent implementation of the published
method (Zauner 2010's DCT hash: 32x32 gray, orthonormal 2-D DCT-II, low 8x8 block,
bit = coefficient > median) with scipy.fft.dctn(norm='ortho') (Debian python3-scipy).

The 8 flip/turn variants are computed here by transforming the thumbnail's pixels
with numpy and hashing each from scratch, which checks tamis's derivation of the
variants from one DCT block. Usage: dct_hash_reference.py EXPORT.json
"""
import json
import sys

import numpy as np
from scipy.fft import dctn


def dct_hash(img):
    c = dctn(img.astype(np.float64), norm="ortho")[:8, :8].flatten()
    med = np.median(c)
    code = 0
    for k, v in enumerate(c):  # coefficient k -> bit 63 - k
        if v > med:
            code |= 1 << (63 - k)
    return code


def variant(img, t):
    out = img.T if t & 4 else img
    if t & 2:
        out = out[::-1, :]
    if t & 1:
        out = out[:, ::-1]
    return out


def main(path):
    with open(path) as f:
        items = json.load(f)
    failures = 0
    checked = 0
    for item in items:
        img = np.array(item["pixels"], dtype=np.uint8).reshape(32, 32)
        for t, hex_code in enumerate(item["codes"]):
            ours = int(hex_code, 16)
            ref = dct_hash(variant(img, t))
            checked += 1
            if ours != ref:
                failures += 1
                print(f"{item['name']} variant {t}: tamis {ours:016x} scipy {ref:016x} "
                      f"({bin(ours ^ ref).count('1')} bits differ)")
    print(f"{checked} hashes compared")
    print(f"{checked - failures} passed, {failures} failed")
    return 1 if failures or checked == 0 else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
