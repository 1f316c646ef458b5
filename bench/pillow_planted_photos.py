#!/usr/bin/python3
"""Look-alike truth on copies that an independent library makes (docs/lookalikes.md,
"Copies made by Pillow"): each source photograph is saved as it is and as 25 kinds of
copy made by Pillow (Debian python3-pil) and numpy, never by tamis's own planting
code (tests/support/planted.h); one `tamis audit` of the tree; a copy counts as found
when it shares a group with its source. Also counted: pairs of distinct sources
joined. Sources with transparency are left out (their copies would be judged over a
ground the copy no longer has).

Usage: pillow_planted_photos.py TAMIS WORKDIR SOURCE...
(the sources used for docs/lookalikes.md: the photographs of Debian's gnome-backgrounds
and mate-backgrounds and 14 of scikit-image's sample images, python3-skimage)
Prints recall per kind, the sources each kind missed, and the distinct pairs joined.
A blur of "b" is Pillow's Gaussian of sigma = b / 28 of the shorter side (b px at 28 px).
"""
import collections
import json
import os
import subprocess
import sys

import numpy as np
from PIL import Image, ImageEnhance, ImageFilter, ImageOps


def hue_shift(im, deg):
    hsv = np.asarray(im.convert("HSV"), dtype=np.int32)
    hsv[..., 0] = (hsv[..., 0] + int(round(deg / 360 * 256))) % 256
    return Image.fromarray(hsv.astype(np.uint8), "HSV").convert("RGB")


def noise(im, sd, seed):
    a = np.asarray(im, dtype=np.float64) + np.random.default_rng(seed).normal(0, sd, (im.height, im.width, 3))
    return Image.fromarray(np.clip(a + 0.5, 0, 255).astype(np.uint8))


def gamma(im, g):
    return im.point([int(round(255 * (i / 255) ** g)) for i in range(256)] * 3)


def blur(im, b):
    return im.filter(ImageFilter.GaussianBlur(b / 28 * min(im.size)))


KINDS = {
    "half-bicubic": lambda im, s: im.resize((im.width // 2, im.height // 2), Image.BICUBIC),
    "quarter-lanczos": lambda im, s: im.resize((im.width // 4, im.height // 4), Image.LANCZOS),
    "eighth-box": lambda im, s: im.resize((im.width // 8, im.height // 8), Image.BOX),
    "small-256-nearest": lambda im, s: im.resize((256, max(1, 256 * im.height // im.width)), Image.NEAREST),
    "mirror": lambda im, s: ImageOps.mirror(im),
    "rot90": lambda im, s: im.transpose(Image.ROTATE_90),
    "jpeg30": "JPEG 30", "jpeg50": "JPEG 50", "jpeg75": "JPEG 75", "webp60": "WEBP 60",
    "brighter-1.25": lambda im, s: ImageEnhance.Brightness(im).enhance(1.25),
    "darker-0.75": lambda im, s: ImageEnhance.Brightness(im).enhance(0.75),
    "contrast-1.3": lambda im, s: ImageEnhance.Contrast(im).enhance(1.3),
    "contrast-0.7": lambda im, s: ImageEnhance.Contrast(im).enhance(0.7),
    "gamma-0.7": lambda im, s: gamma(im, 0.7),
    "gamma-1.4": lambda im, s: gamma(im, 1.4),
    "gray": lambda im, s: im.convert("L"),
    "saturation-0.5": lambda im, s: ImageEnhance.Color(im).enhance(0.5),
    "saturation-1.5": lambda im, s: ImageEnhance.Color(im).enhance(1.5),
    "hue-20": lambda im, s: hue_shift(im, 20),
    "hue-45": lambda im, s: hue_shift(im, 45),
    "blur-0.5": lambda im, s: blur(im, 0.5),
    "blur-1.0": lambda im, s: blur(im, 1.0),
    "sharpen": lambda im, s: im.filter(ImageFilter.UnsharpMask(2, 150, 3)),
    "noise-8": lambda im, s: noise(im, 8, s),
}


def main():
    tamis, work, sources = sys.argv[1], sys.argv[2], sys.argv[3:]
    root = os.path.join(work, "tree")
    made, names = [], []
    for si, src in enumerate(sources):
        im = Image.open(src)
        im.load()
        if im.mode in ("RGBA", "LA", "PA") or "transparency" in im.info:
            continue
        im = ImageOps.exif_transpose(im).convert("RGB")
        if max(im.size) > 2400:  # quicker: at most 2400 px
            f = 2400 / max(im.size)
            im = im.resize((round(im.width * f), round(im.height * f)), Image.LANCZOS)
        cls = f"c{si % 4}"
        os.makedirs(os.path.join(root, cls), exist_ok=True)
        sp = os.path.join(cls, f"s{si:03d}.png")
        im.save(os.path.join(root, sp))
        names.append((sp, os.path.basename(src)))
        for k, how in KINDS.items():
            base = os.path.join(cls, f"s{si:03d}_{k}")
            if isinstance(how, str):
                fmt, q = how.split()
                p = base + (".jpg" if fmt == "JPEG" else ".webp")
                im.save(os.path.join(root, p), fmt, quality=int(q))
            else:
                p = base + ".png"
                how(im, si).save(os.path.join(root, p))
            made.append((sp, p, k))
    out = os.path.join(work, "out")
    subprocess.run([tamis, "audit", root, "--out", out, "--no-cache"], capture_output=True, check=False)
    report = json.load(open(os.path.join(out, "report.json")))
    group = {}
    for g in report["groups"]:
        for link in g["links"]:
            group[link["a"]] = group[link["b"]] = g["id"]
    source_name = dict(names)
    missed = collections.defaultdict(list)
    total = collections.Counter()
    for sp, p, k in made:
        total[k] += 1
        if group.get(sp) is None or group.get(sp) != group.get(p):
            missed[k].append(source_name[sp])
    found = sum(total.values()) - sum(len(v) for v in missed.values())
    print(f"{len(names)} sources, {sum(total.values())} copies, {found} found")
    for k in KINDS:
        print(f"{k:18s} {total[k] - len(missed[k])}/{total[k]}  missed: {', '.join(missed[k])}")
    srcs = [sp for sp, _ in names]
    joined = [(source_name[a], source_name[b]) for i, a in enumerate(srcs) for b in srcs[i + 1:]
              if group.get(a) is not None and group.get(a) == group.get(b)]
    print(f"distinct sources joined: {len(joined)} of {len(srcs) * (len(srcs) - 1) // 2} pairs: {joined}")


if __name__ == "__main__":
    main()
