#!/usr/bin/python3
"""One drawing at several sizes, from a collection nobody tuned for: the icons of
Debian's adwaita-icon-theme in the categories actions, status and devices, rendered
by the theme at 32, 48, 64 and 96 px, one class per category. The renderings of one
icon are the same drawing resampled, so each is a copy of the others.

Such drawings are symmetric or sparse: many of their DCT coefficients sit near the
hash's median, and the codes of two renderings differ in 10-32 bits although the
pictures match. The second candidate key (docs/lookalikes.md) is what finds them.
Measured (fifteenth session): without it 0.861 / 0.859 / 0.895 of the renderings at
32 / 64 / 96 px were found in their 48 px rendering's group, with it 0.971 / 1.000 /
1.000.

The truth comes from the theme's file names (one name, one drawing) and is checked
against Pillow and numpy (Debian python3-pil, python3-numpy), independent of tamis:
  - at 32, 64 and 96 px at least 0.95 of the renderings share their 48 px
    rendering's group with the default settings;
  - every look-alike link joins two pictures whose alpha planes (reduced to 32x32 by
    Pillow's box filter), under the best of the eight flips/turns, correlate at 0.9
    or more: the key brings candidates, never a join the thumbnails do not confirm;
  - with the key off (policy lookalike.screen_radius 0) fewer renderings are found at
    64 px (below 0.95), so the test sees the key at work, and the pairs of different
    icon names that share a group are the same with and without it.

Usage: icon_sizes_test.py TAMIS_BINARY
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
from icons import THEME, best_turn_correlation, copy_icon_tree, name_pairs, recall_against_48  # noqa: E402

SIZES = ["32x32", "48x48", "64x64", "96x96"]
CATEGORIES = ("actions", "status", "devices")


def alpha_32(path):
    im = Image.open(path).convert("RGBA")
    return np.asarray(im.getchannel("A").resize((32, 32), Image.BOX), dtype=np.float64)


def audit(tamis, root, out, policy=None):
    args = [tamis, "audit", root, "--out", out, "--no-cache"] + (["--policy", policy] if policy else [])
    run = subprocess.run(args, capture_output=True, text=True)
    if run.returncode not in (0, 1):
        raise RuntimeError(run.stdout + run.stderr)
    return json.load(open(os.path.join(out, "report.json")))


def main():
    tamis = sys.argv[1]
    if not os.path.isdir(os.path.join(THEME, "48x48")):
        print(f"{THEME} is missing: install adwaita-icon-theme (scripts/setup.sh test does)")
        return 1
    work = tempfile.mkdtemp(prefix="tamis-icon-sizes-")
    try:
        root = os.path.join(work, "icons")
        copy_icon_tree(root, SIZES, CATEGORIES)
        report = audit(tamis, root, os.path.join(work, "on"))
        off_policy = os.path.join(work, "off.json")
        with open(off_policy, "w") as f:
            json.dump({"lookalike": {"screen_radius": 0}}, f)
        off = audit(tamis, root, os.path.join(work, "off"), off_policy)
        failures = []
        on_recall, off_recall = recall_against_48(report, root), recall_against_48(off, root)
        for size in ("32x32", "64x64", "96x96"):
            found, total = on_recall[size]
            print(f"{size} against 48x48: {found}/{total} with the second key, {off_recall[size][0]}/{total} without")
            if total < 200 or found < 0.95 * total:
                failures.append(f"{size}: {found} of {total} renderings found (at least 0.95 wanted)")
        found, total = off_recall["64x64"]
        if found >= 0.95 * total:
            failures.append(f"without the key 64x64 finds {found} of {total}: the test no longer sees the key at work")
        links = 0
        for g in report["groups"]:
            for link in g["links"]:
                if link["how"] == "identical":
                    continue
                links += 1
                c = best_turn_correlation(alpha_32(os.path.join(root, link["a"])), alpha_32(os.path.join(root, link["b"])))
                if c < 0.9:
                    failures.append(f"{g['id']}: {link['a']} ~ {link['b']}: alpha planes correlate at {c:.3f}")
        if name_pairs(report) != name_pairs(off):
            failures.append(f"pairs of icon names in one group: {len(name_pairs(report))} with the key, "
                            f"{len(name_pairs(off))} without")
        print(f"{len(report['groups'])} groups, {links} look-alike links checked against Pillow")
        for f in failures[:40]:
            print("FAIL", f)
        return 1 if failures else 0
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
