#!/usr/bin/python3
"""The cache never changes an output: a property test.

A tree with mask twins, byte copies and look-alike copies (drawn with Pillow, Debian
python3-pil) is edited by seeded random sequences of the edits a data set sees: touch,
same-bytes rewrite, rename, copy into another class, delete, new pixels in a photo, new
pixels in a mask, a new or a removed mask twin, and the cache's own loss of stored
thumbnails (rows another run replaced, or damaged ones: the files are read again, after the
masks were paired). After every step the tree is audited
with the cache (kept across the steps) and without it; all four output files must be
byte-identical (one of the two keeps its thumbnails in a scratch file, alternately),
and the summary's "moved or renamed" count must be the number of files
that this step moved (its truth is the edit the test made).

Usage: cache_property_test.py TAMIS [SEQUENCES] [STEPS]
"""
import json
import os
import random
import shutil
import sqlite3
import subprocess
import sys
import tempfile

from PIL import Image, ImageDraw, ImageFilter

TAMIS = sys.argv[1]
SEQUENCES = int(sys.argv[2]) if len(sys.argv) > 2 else 6
STEPS = int(sys.argv[3]) if len(sys.argv) > 3 else 12
OUTPUTS = ("manifest.csv", "report.json", "report.html", "index.cbor")
CLASSES = ("lichen", "moss", "fern")


def photo(rng, size=(64, 48)):
    img = Image.new("RGB", size, tuple(rng.randrange(40, 200) for _ in range(3)))
    d = ImageDraw.Draw(img)
    for _ in range(6):
        x, y = rng.randrange(size[0]), rng.randrange(size[1])
        r = rng.randrange(4, 18)
        d.ellipse((x - r, y - r, x + r, y + r), fill=tuple(rng.randrange(256) for _ in range(3)))
    return img


def mask_for(img, rng):
    m = Image.new("L", img.size, 0)
    d = ImageDraw.Draw(m)
    x, y = rng.randrange(8, img.size[0] - 8), rng.randrange(8, img.size[1] - 8)
    d.rectangle((x - 6, y - 5, x + 6, y + 5), fill=255)
    return m


def build_tree(root, rng):
    for c in CLASSES:
        os.makedirs(os.path.join(root, c, "images"))
        os.makedirs(os.path.join(root, c, "masks"))
        for k in range(5):
            img = photo(rng)
            name = f"{c}_{k}.png"
            img.save(os.path.join(root, c, "images", name))
            if k < 3:
                mask_for(img, rng).save(os.path.join(root, c, "masks", name))
    # a byte copy and look-alike copies (mirrored, re-encoded, blurred) across classes
    src = os.path.join(root, "lichen", "images", "lichen_0.png")
    shutil.copyfile(src, os.path.join(root, "moss", "images", "copy_of_lichen_0.png"))
    img = Image.open(src).convert("RGB")
    img.transpose(Image.FLIP_LEFT_RIGHT).save(os.path.join(root, "fern", "images", "mirror.png"))
    img.save(os.path.join(root, "fern", "images", "reencoded.jpg"), quality=80)
    img.filter(ImageFilter.GaussianBlur(0.5)).save(os.path.join(root, "moss", "images", "soft.png"))


def listed(root, sub):
    """The visible files in folders named "masks" (sub "masks") or elsewhere (sub
    "images"), sorted: in the Pillow tree and in the demo tree alike."""
    out = []
    for d, dirs, files in os.walk(root):
        dirs.sort()
        in_masks = os.path.basename(d) == "masks"
        if in_masks == (sub == "masks"):
            out += [os.path.join(d, n) for n in sorted(files) if not n.startswith(".")]
    return out


def classes_of(root):
    return sorted(e for e in os.listdir(root) if os.path.isdir(os.path.join(root, e)))


def drop_thumbnails(cache, rng):
    """The cache loses about half its stored thumbnails (masks' among them) and its
    stored groups, so that the next run reads those files again for the groups."""
    db = sqlite3.connect(cache)
    rows = [r[0] for r in db.execute("SELECT rowid FROM thumbs ORDER BY rowid")]
    gone = [r for r in rows if rng.random() < 0.5]
    db.executemany("DELETE FROM thumbs WHERE rowid = ?", [(r,) for r in gone])
    db.execute("DELETE FROM groups")
    db.commit()
    db.close()
    return len(gone)


def edit(root, rng, cache):
    """One random edit; returns (description, files moved by it)."""
    kind = rng.choice(["touch", "rewrite", "rename", "copy", "delete", "pixels", "mask_pixels", "new_mask",
                       "remove_mask", "cache_loss"])
    if kind == "cache_loss":
        return f"the cache lost {drop_thumbnails(cache, rng)} thumbnails", 0
    imgs = listed(root, "images")
    # Half the edits hit members of the look-alike group (whose thumbnails the report shows).
    family = [q for q in imgs if any(k in os.path.basename(q)
                                     for k in ("lichen_0", "mirror", "reencoded", "soft", "swatch_001", "swatch_002", "swatch_090"))]
    p = rng.choice(family if family and rng.random() < 0.5 else imgs)
    if kind == "touch":
        st = os.stat(p)
        os.utime(p, ns=(st.st_atime_ns, st.st_mtime_ns + rng.randrange(1, 10**9) * 7))
        return f"touch {p}", 0
    if kind == "rewrite":  # same bytes, a new file (new inode) under the same name
        data = open(p, "rb").read()
        os.remove(p)
        open(p, "wb").write(data)
        return f"rewrite {p}", 0
    if kind == "rename":
        base, ext = os.path.splitext(p)
        q = base + f"_r{rng.randrange(1000)}" + ext
        os.rename(p, q)
        return f"rename {p}", 1
    if kind == "copy":
        other = rng.choice([c for c in classes_of(root) if f"/{c}/" not in p])
        into = os.path.join(root, other, "images") if os.path.isdir(os.path.join(root, other, "images")) \
            else os.path.join(root, other)
        q = os.path.join(into, f"x{rng.randrange(1000)}_" + os.path.basename(p))
        shutil.copyfile(p, q)
        return f"copy {p} -> {other}", 0
    if kind == "delete":
        if len(imgs) > 6:
            os.remove(p)
        return f"delete {p}", 0
    if kind == "pixels":
        try:
            img = Image.open(p).convert("RGB")
        except OSError:  # a file the demo made unreadable on purpose
            return f"pixels (unreadable) {p}", 0
        ImageDraw.Draw(img).rectangle((2, 2, 12, 12), fill=tuple(rng.randrange(256) for _ in range(3)))
        img.save(p)
        return f"pixels {p}", 0
    ms = listed(root, "masks")
    if kind == "mask_pixels" and ms:
        m = rng.choice(ms)
        img = Image.open(m).convert("L")
        ImageDraw.Draw(img).rectangle((1, 1, 9, 9), fill=255)
        img.save(m)
        return f"mask pixels {m}", 0
    if kind == "remove_mask" and ms:
        m = rng.choice(ms)
        os.remove(m)
        return f"remove mask {m}", 0
    # a new mask twin for an image without one
    name = os.path.basename(p)
    if name.endswith(".png") and os.path.basename(os.path.dirname(p)) == "images":
        m = os.path.join(os.path.dirname(os.path.dirname(p)), "masks", name)
        if not os.path.exists(m) and os.path.isdir(os.path.dirname(m)):
            mask_for(Image.open(p), rng).save(m)
            return f"new mask {m}", 0
    return "nothing", 0


def audit(root, out, cache, spill=False, scratch=None):
    args = [TAMIS, "audit", root, "--out", out, "--format", "json", "--threads", "2"]
    args += ["--cache", cache] if cache else ["--no-cache"]
    # Thumbnails in a scratch file (--thumbnail-memory-mb 0) or in memory: never a different output.
    args += ["--thumbnail-memory-mb", "0" if spill else "1024"]
    env = dict(os.environ, TMPDIR=scratch) if scratch else None
    r = subprocess.run(args, capture_output=True, text=True, env=env)
    if r.returncode not in (0, 1):
        raise SystemExit(f"audit exited {r.returncode}: {r.stderr}")
    return json.loads(r.stdout)


def main():
    failures = 0
    steps = 0
    for seq in range(SEQUENCES):
        rng = random.Random(1000 + seq)
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "tree")
            if seq % 3 == 2:  # every third sequence edits the demo tree (JPEG, 16-bit, alpha, EXIF, masks)
                r = subprocess.run([TAMIS, "demo", root], capture_output=True, text=True)
                if r.returncode != 0:
                    raise SystemExit(f"demo exited {r.returncode}: {r.stderr}")
            else:
                build_tree(root, rng)
            cache = os.path.join(t, "cache.sqlite")
            scratch = os.path.join(t, "scratch")
            os.mkdir(scratch)
            spill = seq % 2 == 1  # odd sequences: the cached runs spill, the runs without a cache do not
            audit(root, os.path.join(t, "warm"), cache, spill, scratch)
            for step in range(STEPS):
                what, moved = edit(root, rng, cache)
                steps += 1
                summary = audit(root, os.path.join(t, "warm"), cache, spill, scratch)
                audit(root, os.path.join(t, "cold"), None, not spill, scratch)
                if os.listdir(scratch):
                    failures += 1
                    print(f"sequence {seq} step {step}: the scratch folder is not empty: {os.listdir(scratch)}")
                for name in OUTPUTS:
                    a = open(os.path.join(t, "warm", name), "rb").read()
                    b = open(os.path.join(t, "cold", name), "rb").read()
                    if a != b:
                        failures += 1
                        print(f"sequence {seq} step {step} ({what}): {name} differs with the cache")
                got = summary.get("moved_or_renamed")
                if got != moved:
                    failures += 1
                    print(f"sequence {seq} step {step} ({what}): moved or renamed {got}, expected {moved}")
    print(f"{steps} steps, {failures} failed")
    print(f"{steps - failures if failures <= steps else 0} passed, {failures} failed")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
