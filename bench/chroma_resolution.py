#!/usr/bin/python3
"""How fine must the thumbnail's chroma be for the tone-and-colour fit to predict the gray
picture of a hue- or saturation-changed copy? (docs/lookalikes.md, "The 32x32 chroma".)

Independent of tamis: Pillow (Debian python3-pil) reads the photographs, numpy makes the
copies (an HSV turn written after its definition, HSV saturation scaled about the largest
channel, white balance, JPEG by Pillow), the 32x32 thumbnails (area means) and the fit (least
squares by numpy: a cubic tone curve, Cb, Cr and the largest and smallest of R-Y, G-Y, B-Y from
the chroma kept, and the gray change that the copy's HSV change makes to each pixel's colour as
the chroma kept describes it). Prints the lowest fitted correlation of the copies per chroma
resolution, and the largest between tiles of different photographs (distinct pictures).

Usage: python3 bench/chroma_resolution.py
"""
import io
import os

import numpy as np
from PIL import Image

SOURCES = [
    "/usr/lib/python3/dist-packages/sklearn/datasets/images/china.jpg",
    "/usr/lib/python3/dist-packages/sklearn/datasets/images/flower.jpg",
    "/usr/share/libjxl-testdata/jxl/flower/flower.png",
    "/usr/share/libjxl-testdata/external/wesaturate/500px/tmshre_riaphotographs_srgb8.png",
    "/usr/share/libjxl-testdata/external/wesaturate/500px/cvo9xd_keong_macan_srgb8.png",
    "/usr/share/libjxl-testdata/external/wesaturate/500px/u76c0g_bliznaca_srgb8.png",
]


def tiles_of(paths, side=384, most=40):
    out = []
    for p in paths:
        if not os.path.exists(p):
            print("missing", p)
            continue
        im = np.asarray(Image.open(p).convert("RGB")).astype(np.float64)
        for y in range(0, im.shape[0] - side + 1, side):
            for x in range(0, im.shape[1] - side + 1, side):
                out.append(im[y:y + side, x:x + side])
    return out[:most]


def hsv_turn(rgb, deg):
    r, g, b = rgb[..., 0], rgb[..., 1], rgb[..., 2]
    v, m = rgb.max(-1), rgb.min(-1)
    c = v - m
    cs = np.where(c > 1e-9, c, 1)
    h = np.where(v == r, np.mod((g - b) / cs + 6, 6), np.where(v == g, (b - r) / cs + 2, (r - g) / cs + 4))
    h = np.mod(h + deg / 60 + 12, 6)
    x = c * (1 - np.abs(np.mod(h, 2) - 1))
    sec = np.minimum(5, h.astype(int))
    z = 0 * c
    out = np.stack([np.choose(sec, [c, x, z, z, x, c]) + m, np.choose(sec, [x, c, c, x, z, z]) + m,
                    np.choose(sec, [z, z, x, c, c, x]) + m], -1)
    return np.where((c > 1e-9)[..., None], out, rgb)


def saturation(rgb, k):
    v = rgb.max(-1, keepdims=True)
    return np.clip(v - k * (v - rgb), 0, 255)


def jpeg(rgb, q):
    b = io.BytesIO()
    Image.fromarray(np.clip(np.round(rgb), 0, 255).astype(np.uint8)).save(b, "JPEG", quality=q)
    return np.asarray(Image.open(b)).astype(np.float64)


def ycc(rgb):
    y = 0.299 * rgb[..., 0] + 0.587 * rgb[..., 1] + 0.114 * rgb[..., 2]
    return y, (rgb[..., 2] - y) / 1.772, (rgb[..., 0] - y) / 1.402


def area(p, n):
    k = p.shape[0] // n
    return p.reshape(n, k, n, k).mean((1, 3))


def enlarge(p, n):
    """n x n cells to 32x32, bilinear between the cells' centres, edges held."""
    if n == 32:
        return p
    c = np.clip((np.arange(32) + 0.5) * n / 32 - 0.5, 0, n - 1)
    i0 = np.minimum(c.astype(int), n - 2)
    w = c - i0
    top = p[i0][:, i0] * (1 - w)[None, :] + p[i0][:, i0 + 1] * w[None, :]
    bottom = p[i0 + 1][:, i0] * (1 - w)[None, :] + p[i0 + 1][:, i0 + 1] * w[None, :]
    return top * (1 - w)[:, None] + bottom * w[:, None]


def fitted_correlation(src, dst, n, deg, scale):
    y1, cb1, cr1 = ycc(src)
    g1, g2 = area(y1, 32), area(ycc(dst)[0], 32)
    cb, cr = enlarge(area(cb1, n), n), enlarge(area(cr1, n), n)
    # Coarse chroma follows the gray level within its cell (shading keeps the chromaticity).
    shade = np.clip(g1 / np.maximum(enlarge(area(y1, n), n), 1), 0, 3) if n < 32 else 1
    rgb = np.stack([g1 + 1.402 * cr * shade, g1 - (0.344136 * cb + 0.714136 * cr) * shade, g1 + 1.772 * cb * shade], -1)
    changed = saturation(hsv_turn(np.clip(rgb, 0, 255), deg), scale)
    sim = ycc(changed)[0] - g1
    r_, g_, b_ = 1.402 * cr, -0.344136 * cb - 0.714136 * cr, 1.772 * cb
    g = g1 / 255
    cols = [g, g ** 2, g ** 3, cb, cr, np.maximum(np.maximum(r_, g_), b_), np.minimum(np.minimum(r_, g_), b_), sim]
    X = np.stack([np.ravel(v) for v in cols] + [np.ones(1024)], 1)
    y = np.ravel(g2)
    coef, *_ = np.linalg.lstsq(X, y, rcond=None)
    rr = ((y - X @ coef) ** 2).sum()
    ss = ((y - y.mean()) ** 2).sum()
    return np.sqrt(max(0.0, 1 - rr / ss))


def main():
    tiles = tiles_of(SOURCES)
    kinds = {
        "hue 30": (lambda t: np.round(hsv_turn(t, 30)), 30, 1.0, (8, 16, 32)),
        "hue 60": (lambda t: np.round(hsv_turn(t, 60)), 60, 1.0, (8, 16, 32)),
        "hue -45": (lambda t: np.round(hsv_turn(t, -45)), -45, 1.0, (8, 16, 32)),
        "hue 90": (lambda t: np.round(hsv_turn(t, 90)), 90, 1.0, (8, 32)),
        "hue -30 + JPEG 75": (lambda t: jpeg(np.round(hsv_turn(t, -30)), 75), -30, 1.0, (8, 32)),
        "saturation 0.5": (lambda t: saturation(t, 0.5), 0, 0.5, (8, 32)),
        "saturation 1.4": (lambda t: saturation(t, 1.4), 0, 1.4, (8, 32)),
    }
    print(f"{len(tiles)} tiles")
    for name, (make, deg, scale, sizes) in kinds.items():
        copies = [np.clip(make(t), 0, 255) for t in tiles]
        for n in sizes:
            c = np.array([fitted_correlation(t, k, n, deg, scale) for t, k in zip(tiles, copies)])
            print(f"{name:18s} chroma {n:2d}x{n:<2d}: lowest {c.min():.4f}, median {np.median(c):.4f}, "
                  f"at 0.995 or more {np.mean(c >= 0.995):.2f}")
    for n in (8, 32):
        d = [fitted_correlation(tiles[i], tiles[j], n, 40, 1.0)
             for i in range(len(tiles)) for j in range(len(tiles)) if i != j]
        print(f"distinct tiles     chroma {n:2d}x{n:<2d}: largest {max(d):.4f}")


if __name__ == "__main__":
    main()
