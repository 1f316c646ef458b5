#!/usr/bin/python3
"""Builds the benchmark set of about 3-megapixel JPEGs from real photographs in Debian's
visp-images-data (the 1927 Solvay photograph, 2126x1463, and Klimt's "The Kiss" scaled up to
2048x2052), varied by crop, mirror, brightness and quality so that no two files are alike.
With --simple, the set is of simple scenes instead (a smooth two-colour gradient, a few soft
shapes, a little sensor noise), 2000x1440 at quality 90, about 170 KB each: files whose decode
at 1/8 scale is cheap, so that the audit's own work per file shows against the floor.
Usage: make_jpeg_set.py OUT_DIR [COUNT=640] [--simple]   (Pillow, Debian python3-pil; numpy)
"""
import os
import sys

from PIL import Image, ImageEnhance, ImageFilter, ImageOps

VISP = "/usr/share/visp-images-data/ViSP-images"
args = [a for a in sys.argv[1:] if a != "--simple"]
out = args[0]
count = int(args[1]) if len(args) > 1 else 640
if "--simple" in sys.argv:
    import numpy as np
    rng = np.random.default_rng(5)
    yy, xx = np.mgrid[0:1440, 0:2000].astype(np.float32)
    for k in range(count):
        a, b = rng.uniform(0, 255, 3), rng.uniform(0, 255, 3)
        t = (xx * rng.uniform(-1, 1) + yy * rng.uniform(-1, 1)) / 2500.0 + 0.5
        img = a + (b - a) * np.clip(t, 0, 1)[..., None]
        for _ in range(5):
            cx, cy = rng.uniform(0, 2000), rng.uniform(0, 1440)
            rx, ry = rng.uniform(80, 400), rng.uniform(80, 400)
            inside = ((xx - cx) / rx) ** 2 + ((yy - cy) / ry) ** 2 < 1
            img[inside] = img[inside] * 0.4 + rng.uniform(0, 255, 3) * 0.6
        img += rng.normal(0, 2.8, img.shape)
        pic = Image.fromarray(np.clip(img, 0, 255).astype(np.uint8), "RGB").filter(ImageFilter.GaussianBlur(1))
        name = "simple" + str(k % 2)
        os.makedirs(os.path.join(out, name), exist_ok=True)
        pic.save(os.path.join(out, name, f"{k:04d}.jpg"), quality=90)
    print(f"wrote {count} simple-scene JPEGs into {out}")
    sys.exit(0)
sources = {
    "solvay": Image.open(f"{VISP}/Solvay/Solvay_conference_1927_Version2_2126x1463.jpg").convert("RGB"),
    "klimt": Image.open(f"{VISP}/Klimt/Klimt.ppm").convert("RGB").resize((2048, 2052), Image.LANCZOS),
}
for k in range(count):
    name = "solvay" if k % 2 == 0 else "klimt"
    src = sources[name]
    w, h = 2000, 1440  # 2.88 MP
    x = (k * 7) % (src.width - w + 1)
    y = (k * 5) % (src.height - h + 1)
    img = src.crop((x, y, x + w, y + h))
    if k % 4 in (1, 2):
        img = ImageOps.mirror(img)
    img = ImageEnhance.Brightness(img).enhance(0.85 + 0.3 * ((k * 37) % 100) / 100)
    os.makedirs(os.path.join(out, name), exist_ok=True)
    img.save(os.path.join(out, name, f"{k:04d}.jpg"), quality=80 + k % 16)
print(f"wrote {count} JPEGs into {out}")
