#!/usr/bin/python3
"""tamis's DCT hash bits against an independent implementation of the published
method (Zauner 2010's DCT hash: 32x32 gray, orthonormal 2-D DCT-II, low 8x8 block,
bit = coefficient > median) with scipy.fft.dctn(norm='ortho') (Debian python3-scipy).

For every 10th thumbnail also: the full float DCT (dct32) against scipy.fft.dctn,
the coefficients of a flip/turn derived by sign changes and a transpose against
scipy's DCT of the turned pixels, the inverse (idct32) against the pixels, and the
look-alike profile's spectral moments (mean and variance of the grid Laplacian's
eigenvalues 4 sin^2(pi u / 64) + 4 sin^2(pi v / 64) under the power spectrum
without DC, which tamis computes from pixel differences) against the same
quantities computed from scipy's spectrum.

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
    u = np.arange(32)
    lam = (4 * np.sin(np.pi * u / 64) ** 2)[:, None] + (4 * np.sin(np.pi * u / 64) ** 2)[None, :]
    spectra = 0
    for item in items:
        if "dct" not in item:
            continue
        spectra += 1
        img = np.array(item["pixels"], dtype=np.float64).reshape(32, 32)
        ref = dctn(img, norm="ortho")
        scale = max(1.0, np.abs(ref).max())
        checks = {
            "dct32": np.abs(np.array(item["dct"]).reshape(32, 32) - ref).max() / scale,
            "turn 5": np.abs(np.array(item["dct_turn5"]).reshape(32, 32) - dctn(variant(img, 5), norm="ortho")).max() / scale,
            "idct32": np.abs(np.array(item["idct"]).reshape(32, 32) - img).max() / 255.0,
        }
        if not item["flat"]:
            p = ref ** 2
            p[0, 0] = 0
            mean = (p * lam).sum() / p.sum()
            var = (p * (lam - mean) ** 2).sum() / p.sum()
            checks["lambda mean"] = abs(item["lambda_mean"] - mean) / mean
            checks["lambda variance"] = abs(item["lambda_var"] - var) / max(var, 1e-9)
        for what, err in checks.items():
            # float32 arithmetic: relative errors of order 1e-6 (limit 1e-4)
            if not err <= 1e-4:
                failures += 1
                print(f"{item['name']}: {what} off by {err:.2e} (relative)")
    print(f"{spectra} spectra compared")
    print(f"{checked} hashes compared")
    print(f"{checked - failures} passed, {failures} failed")
    return 1 if failures or checked == 0 or spectra == 0 else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
