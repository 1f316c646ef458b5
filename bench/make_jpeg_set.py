#!/usr/bin/python3
"""Builds the benchmark set of about 3-megapixel JPEGs from real photographs in Debian's
visp-images-data (the 1927 Solvay photograph, 2126x1463, and Klimt's "The Kiss" scaled up to
2048x2052), varied by crop, mirror, brightness and quality so that no two files are alike.
Usage: make_jpeg_set.py OUT_DIR [COUNT=640]   (Pillow, Debian python3-pil)
"""
import os
import sys

from PIL import Image, ImageEnhance, ImageOps

VISP = "/usr/share/visp-images-data/ViSP-images"
out = sys.argv[1]
count = int(sys.argv[2]) if len(sys.argv) > 2 else 640
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
