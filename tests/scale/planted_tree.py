"""A planted-copy tree for the scale-out tests (the truth is constructed here).

Three classes of textured photographs drawn with numpy and written with Pillow,
and planted across them: a byte copy, a mirrored copy, a JPEG re-encode at
quality 50, a lightly blurred copy (Pillow GaussianBlur, radius 0.8) and a
half-size copy, each in another class than its source; masks in a sibling
folder for one class; a truncated PNG, a text file named .png, a hidden file,
an empty folder and a symbolic link. Deterministic (numpy seed 11).
"""
import os

import numpy as np
from PIL import Image, ImageFilter, ImageOps


def photo(rng, w=96, h=72):
    """A smooth colour field with a few shapes: distinct pictures of one kind."""
    y, x = np.mgrid[0:h, 0:w].astype(np.float32)
    img = np.zeros((h, w, 3), np.float32)
    for c in range(3):
        a, b, p = rng.uniform(-3, 3, 3)
        img[..., c] = 128 + 80 * np.sin(a * x / w * 3.14 + b * y / h * 3.14 + p)
    for _ in range(4):
        cx, cy, r = rng.uniform(0, w), rng.uniform(0, h), rng.uniform(6, 20)
        img[(x - cx) ** 2 + (y - cy) ** 2 < r * r] = rng.uniform(0, 255, 3)
    img += rng.normal(0, 6, img.shape)
    return Image.fromarray(np.clip(img, 0, 255).astype(np.uint8), "RGB")


def planted_copy_tree(root):
    """Writes the tree into root; returns {copy path: source path} (relative)."""
    rng = np.random.default_rng(11)
    classes = ("heron", "kestrel", "plover")
    sources = {}
    for c in classes:
        os.makedirs(os.path.join(root, c))
        for k in range(24):
            rel = f"{c}/{k:03d}.png"
            im = photo(rng)
            im.save(os.path.join(root, rel))
            sources[rel] = im
    planted = {}

    def plant(rel, src, make, fmt="PNG", **kw):
        make(sources[src]).save(os.path.join(root, rel), fmt, **kw)
        planted[rel] = src

    with open(os.path.join(root, "heron/003.png"), "rb") as f:
        data = f.read()
    with open(os.path.join(root, "kestrel/copy_of_heron_003.png"), "wb") as f:
        f.write(data)
    planted["kestrel/copy_of_heron_003.png"] = "heron/003.png"
    plant("plover/mirror_of_heron_005.png", "heron/005.png", ImageOps.mirror)
    plant("heron/jpeg_of_kestrel_007.jpg", "kestrel/007.png", lambda im: im, "JPEG", quality=50)
    plant("kestrel/blur_of_plover_009.png", "plover/009.png", lambda im: im.filter(ImageFilter.GaussianBlur(0.8)))
    plant("plover/half_of_kestrel_011.png", "kestrel/011.png", lambda im: im.resize((48, 36), Image.BICUBIC))
    # Masks in a sibling folder of one class: plover/ beside plover_masks/ (same names).
    os.makedirs(os.path.join(root, "plover_masks"))
    for k in range(24):
        m = Image.new("L", (96, 72), 0)
        x0, y0 = int(rng.integers(5, 60)), int(rng.integers(5, 40))
        m.paste(255, (x0, y0, x0 + 25, y0 + 20))
        m.save(os.path.join(root, "plover_masks", f"{k:03d}.png"))
    with open(os.path.join(root, "heron/000.png"), "rb") as f:
        head = f.read()[:300]
    with open(os.path.join(root, "kestrel/cut.png"), "wb") as f:
        f.write(head)
    with open(os.path.join(root, "heron/notes.png"), "w") as f:
        f.write("field notes, not a picture\n")
    with open(os.path.join(root, "kestrel/.hidden.png"), "wb") as f:
        f.write(data)
    os.makedirs(os.path.join(root, "empty_class"))
    os.symlink("../heron/001.png", os.path.join(root, "plover/link.png"))
    return planted
