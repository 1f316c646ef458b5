#!/usr/bin/python3
"""Reduced copies of small pictures made by Pillow: found by an audit?

Usage: small_reductions.py TAMIS TREE WORKDIR [EVERY] [LIMIT]

Takes every EVERY-th picture (default 350, in path order) of TREE (for example the
Fashion-MNIST tree of 28x28 PNGs, or a tree of 32x32 colour crops made by
bench/colour_crops.py), at most LIMIT of them (default 200), and writes to
WORKDIR/tree the picture under src/ and its reductions by each of Pillow's
filters (NEAREST, BOX, BILINEAR, HAMMING, BICUBIC, LANCZOS) to half and
three-quarter size under one folder per filter and size. Audits the tree (no
cache, 2 threads) and prints, per filter and size, how many reductions the audit
groups with their source, and how many groups join two different sources
(distinct pictures joined). Pillow is the reference: its filters are the ones
most Python training code reduces pictures with. docs/lookalikes.md records what
it measured.
"""
import json
import os
import shutil
import subprocess
import sys

from PIL import Image

FILTERS = {"nearest": Image.NEAREST, "box": Image.BOX, "bilinear": Image.BILINEAR, "hamming": Image.HAMMING,
           "bicubic": Image.BICUBIC, "lanczos": Image.LANCZOS}


def main():
    if len(sys.argv) < 4:
        sys.exit(__doc__)
    tamis, tree, work = sys.argv[1], sys.argv[2], sys.argv[3]
    every = int(sys.argv[4]) if len(sys.argv) > 4 else 350
    limit = int(sys.argv[5]) if len(sys.argv) > 5 else 200
    files = sorted(os.path.join(d, f) for d, _, fs in os.walk(tree) for f in fs if f.lower().endswith((".png", ".jpg")))
    chosen = files[::every][:limit]
    out = os.path.join(work, "tree")
    shutil.rmtree(out, ignore_errors=True)
    os.makedirs(os.path.join(out, "src"))
    source_of = {}
    for k, path in enumerate(chosen):
        with Image.open(path) as im:
            im.load()
            name = f"{k:05d}.png"
            im.save(os.path.join(out, "src", name))
            source_of["src/" + name] = k
            for fname, f in FILTERS.items():
                for share, tag in ((0.5, "half"), (0.75, "three-quarter")):
                    folder = f"{fname}-{tag}"
                    os.makedirs(os.path.join(out, folder), exist_ok=True)
                    size = (max(1, round(im.width * share)), max(1, round(im.height * share)))
                    im.resize(size, f).save(os.path.join(out, folder, name))
                    source_of[f"{folder}/{name}"] = k
    # One audit per filter and size, of the sources and those reductions alone:
    # a reduction is found when its own link chain reaches its source, not
    # through another filter's copy.
    print(f"{len(chosen)} sources from {tree}")
    mixed = 0
    for folder in sorted({p.split("/")[0] for p in source_of} - {"src"}):
        one = os.path.join(work, "one")
        shutil.rmtree(one, ignore_errors=True)
        shutil.copytree(os.path.join(out, "src"), os.path.join(one, "src"))
        shutil.copytree(os.path.join(out, folder), os.path.join(one, folder))
        report_dir = os.path.join(work, "out")
        r = subprocess.run([tamis, "audit", one, "--out", report_dir, "--no-cache", "--threads", "2", "--quiet"],
                           capture_output=True, text=True)
        if r.returncode not in (0, 1):
            sys.exit(f"audit exited {r.returncode}: {r.stderr}")
        with open(os.path.join(report_dir, "report.json"), encoding="utf-8") as f:
            report = json.load(f)
        group_of = {}
        for g in report["groups"]:
            mixed += len({source_of[p] for p in g["paths"]}) > 1
            for p in g["paths"]:
                group_of[p] = g["id"]
        found = sum(1 for k in range(len(chosen))
                    if f"{folder}/{k:05d}.png" in group_of and group_of.get(f"src/{k:05d}.png") == group_of[f"{folder}/{k:05d}.png"])
        print(f"  {folder:24} {found:4} of {len(chosen)}  {found / len(chosen):.3f}")
    print(f"groups that join two different sources: {mixed}")


if __name__ == "__main__":
    main()
