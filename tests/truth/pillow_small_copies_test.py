#!/usr/bin/python3
"""Reduced and re-encoded copies of small pictures, made by Pillow (Debian
python3-pil), never by tamis's own planting code: found by one audit each?

Sources: every 700th Fashion-MNIST picture (Debian dataset-fashion-mnist, the
tree the fashion_mnist_export fixture writes; 100 pictures, 28x28). For each of
Pillow's reductions to half size (BILINEAR, BICUBIC, LANCZOS, HAMMING, BOX) and
for Pillow's JPEG at quality 30 and 50, one tree holds the sources under src/
and the copies under copy/ with the same names; `tamis audit` (no cache) runs
on it. The truth is constructed here: copy/N is a copy of src/N, and src/N and
src/M (N != M) are distinct pictures.

Checks (docs/lookalikes.md, the resampled and re-encoded comparisons; measured
in the seventeenth session with bench/small_reductions.py: 0.98-1.00 for these
filters at half size, 0.00-0.27 before):
  - at least 0.95 of the copies share their source's group, for every kind;
  - no group holds two different sources' pictures;
  - a link made by an imitation (`resampled`, or a `jpeg_quality`) joins a
    source and its copy, and names the copy's quality.

Usage: pillow_small_copies_test.py TAMIS_BINARY
"""
import json
import os
import subprocess
import sys
import tempfile

from PIL import Image

KINDS = {
    "bilinear-half": lambda im: im.resize((14, 14), Image.BILINEAR),
    "bicubic-half": lambda im: im.resize((14, 14), Image.BICUBIC),
    "lanczos-half": lambda im: im.resize((14, 14), Image.LANCZOS),
    "hamming-half": lambda im: im.resize((14, 14), Image.HAMMING),
    "box-half": lambda im: im.resize((14, 14), Image.BOX),
    "jpeg-30": 30,
    "jpeg-50": 50,
}


def main():
    tamis = sys.argv[1]
    tree = os.path.join(os.environ["TAMIS_TEST_DATA"], "cache", "fashion-mnist-png")
    files = sorted(os.path.join(d, f) for d, _, fs in os.walk(tree) for f in fs if f.endswith(".png"))
    sources = files[::700][:100]
    assert len(sources) == 100, "the fashion_mnist_export fixture makes the tree"
    failures = []
    for kind, make in KINDS.items():
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            os.makedirs(os.path.join(root, "src"))
            os.makedirs(os.path.join(root, "copy"))
            for k, path in enumerate(sources):
                with Image.open(path) as im:
                    im.load()
                    im.save(os.path.join(root, "src", f"{k:03d}.png"))
                    if isinstance(make, int):
                        im.save(os.path.join(root, "copy", f"{k:03d}.jpg"), quality=make)
                    else:
                        make(im).save(os.path.join(root, "copy", f"{k:03d}.png"))
            out = os.path.join(t, "out")
            r = subprocess.run([tamis, "audit", root, "--out", out, "--no-cache", "--quiet"], capture_output=True, text=True)
            if r.returncode not in (0, 1):
                sys.exit(f"{kind}: audit exited {r.returncode}: {r.stderr}")
            with open(os.path.join(out, "report.json"), encoding="utf-8") as f:
                report = json.load(f)
            group_of = {}
            for g in report["groups"]:
                numbers = {os.path.splitext(os.path.basename(p))[0] for p in g["paths"]}
                if len(numbers) > 1:
                    failures.append(f"{kind}: a group joins different sources: {g['paths']}")
                for p in g["paths"]:
                    group_of[p] = g["id"]
            found = 0
            for k in range(100):
                ext = ".jpg" if isinstance(make, int) else ".png"
                a, b = f"src/{k:03d}.png", f"copy/{k:03d}{ext}"
                found += a in group_of and group_of.get(b) == group_of[a]
            # A link made by an imitation joins a source and its copy (sizes or
            # qualities differ only there), and names the quality it imitated.
            links = [l for g in report["groups"] for l in g["links"] if l["how"] == "look-alike"]
            if isinstance(make, int):
                imitated = [l for l in links if l.get("jpeg_quality", 0) > 0]
                if any(l["jpeg_quality"] != make for l in imitated):
                    failures.append(f"{kind}: a link names another quality than {make}")
            else:
                imitated = [l for l in links if l.get("resampled", False)]
            if any({l["a"].split("/")[0], l["b"].split("/")[0]} != {"src", "copy"} for l in imitated):
                failures.append(f"{kind}: a link by the imitation does not join a source and a copy")
            marked = len(imitated)
            print(f"{kind:14} {found:3} of 100 found; {marked} links by the imitation")
            if found < 95:
                failures.append(f"{kind}: {found} of 100 copies found, fewer than 95")
    if failures:
        sys.exit("\n".join(failures))
    print("OK")


if __name__ == "__main__":
    main()
