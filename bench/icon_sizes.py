#!/usr/bin/python3
"""Icons rendered at several sizes (docs/lookalikes.md, "Icons at other sizes"): the
PNG icons of Debian's adwaita-icon-theme in the categories actions, status and
devices, at 16, 24, 32, 48, 64 and 96 px, one class per category; one `tamis audit`;
for every icon that exists at 48 px, the share of its other sizes in its group.
The renderings of one icon at two sizes are the same drawing resampled by the
theme's renderer (with pixel hinting at the small sizes), so each is a copy.

Usage: icon_sizes.py TAMIS WORKDIR [POLICY]

Also counts the links (joined pairs) between icons of different names: the
theme draws some names alike (aliases, variants), so these are not all false,
but a change that raises them joins drawings it should not.
"""
import json
import os
import subprocess
import sys

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests", "truth"))
from icons import copy_icon_tree, name_of, recall_against_48  # noqa: E402

SIZES = ["16x16", "24x24", "32x32", "48x48", "64x64", "96x96"]


def main():
    tamis, work = sys.argv[1], sys.argv[2]
    root = os.path.join(work, "icons")
    copy_icon_tree(root, SIZES, ("actions", "status", "devices"))
    out = os.path.join(work, "out")
    policy = ["--policy", sys.argv[3]] if len(sys.argv) > 3 else []
    subprocess.run([tamis, "audit", root, "--out", out, "--no-cache"] + policy, capture_output=True, check=False)
    report = json.load(open(os.path.join(out, "report.json")))
    recall = recall_against_48(report, root)
    icons = sum(len(files) for _, _, files in os.walk(root))
    print(f"{icons} icons, {len(report['groups'])} groups")
    links = [l for g in report["groups"] for l in g["links"]]
    other = [l for l in links if name_of(l["a"]) != name_of(l["b"])]
    print(f"{len(links)} links, {len(other)} between different icon names")
    for size in SIZES:
        if size in recall:
            found, total = recall[size]
            print(f"{size} against 48x48: {found}/{total} = {found / total:.3f}")


if __name__ == "__main__":
    main()
