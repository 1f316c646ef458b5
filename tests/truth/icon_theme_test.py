#!/usr/bin/python3
"""Pictures drawn through their alpha channel, from a collection nobody tuned for:
the 48x48 icons of Debian's adwaita-icon-theme (its symbolic icons store black
pixels everywhere and draw their shapes in alpha), one class per icon category.

Before tamis laid images with alpha over a plain ground, every symbolic icon was a
flat black picture and 617 distinct icons fell into one group across all eleven
categories. The reference here is Pillow and numpy (Debian python3-pil,
python3-numpy), independent of tamis:
  - every look-alike link joins two icons whose alpha planes, under the best of
    the eight flips/turns, correlate at 0.9 or more (distinct icons stay far
    below; a link between icons that only share a flat colour would not);
  - no icon whose alpha plane varies (standard deviation over 20 levels) is
    reported near-uniform;
  - byte-identical links join files with equal bytes.

Usage: icon_theme_test.py TAMIS_BINARY
"""
import json
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from icons import best_turn_correlation  # noqa: E402

THEME = "/usr/share/icons/Adwaita/48x48"


def alpha_plane(path):
    im = Image.open(path).convert("RGBA")
    return np.asarray(im, dtype=np.float64)[:, :, 3]


def main():
    tamis = sys.argv[1]
    if not os.path.isdir(THEME):
        print(f"{THEME} is missing: install adwaita-icon-theme (scripts/setup.sh test does)")
        return 1
    work = tempfile.mkdtemp(prefix="tamis-icons-")
    try:
        root = os.path.join(work, "icons")
        for category in sorted(os.listdir(THEME)):
            src = os.path.join(THEME, category)
            pngs = sorted(f for f in os.listdir(src) if f.endswith(".png"))
            if not pngs:
                continue
            os.makedirs(os.path.join(root, category))
            for f in pngs:
                shutil.copyfile(os.path.join(src, f), os.path.join(root, category, f))
        out = os.path.join(work, "out")
        run = subprocess.run([tamis, "audit", root, "--out", out, "--no-cache"], capture_output=True, text=True)
        if run.returncode not in (0, 1):
            print(run.stdout, run.stderr)
            return 1
        report = json.load(open(os.path.join(out, "report.json")))
        failures = []
        links = 0
        for g in report["groups"]:
            for link in g["links"]:
                a, b = os.path.join(root, link["a"]), os.path.join(root, link["b"])
                if link["how"] == "identical":
                    if open(a, "rb").read() != open(b, "rb").read():
                        failures.append(f"{g['id']}: {link['a']} and {link['b']} called identical")
                    continue
                links += 1
                c = best_turn_correlation(alpha_plane(a), alpha_plane(b))
                if c < 0.9:
                    failures.append(f"{g['id']}: {link['a']} ~ {link['b']}: alpha planes correlate at {c:.3f}")
        near_uniform = 0
        for f in report["findings"]:
            if f["code"] != "near-uniform":
                continue
            for p in f.get("paths", []):
                if alpha_plane(os.path.join(root, p)).std() > 20:
                    failures.append(f"{p}: near-uniform, but its alpha draws a shape")
                near_uniform += 1
        images = report["totals"]["images"] if "images" in report["totals"] else None
        print(f"{images} icons, {len(report['groups'])} groups, {links} look-alike links checked, "
              f"{near_uniform} near-uniform")
        for f in failures[:40]:
            print("FAIL", f)
        if failures:
            print(f"{len(failures)} failures")
            return 1
        if links < 20:
            print("too few look-alike links to check: the theme's mirrored (rtl) icons should give dozens")
            return 1
        return 0
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
