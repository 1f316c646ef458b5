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
import collections
import json
import os
import shutil
import subprocess
import sys

THEME = "/usr/share/icons/Adwaita"
SIZES = ["16x16", "24x24", "32x32", "48x48", "64x64", "96x96"]


def main():
    tamis, work = sys.argv[1], sys.argv[2]
    root = os.path.join(work, "icons")
    shutil.rmtree(root, ignore_errors=True)
    for size in SIZES:
        for cat in ("actions", "status", "devices"):
            d = os.path.join(THEME, size, cat)
            if not os.path.isdir(d):
                continue
            os.makedirs(os.path.join(root, cat), exist_ok=True)
            for f in sorted(os.listdir(d)):
                if f.endswith(".png"):
                    shutil.copyfile(os.path.join(d, f), os.path.join(root, cat, f"{size}_{f}"))
    out = os.path.join(work, "out")
    policy = ["--policy", sys.argv[3]] if len(sys.argv) > 3 else []
    subprocess.run([tamis, "audit", root, "--out", out, "--no-cache"] + policy, capture_output=True, check=False)
    report = json.load(open(os.path.join(out, "report.json")))
    group = {}
    for g in report["groups"]:
        for link in g["links"]:
            group[link["a"]] = group[link["b"]] = g["id"]
    by_icon = collections.defaultdict(dict)
    for cat in sorted(os.listdir(root)):
        for f in os.listdir(os.path.join(root, cat)):
            size, name = f.split("_", 1)
            by_icon[(cat, name)][size] = f"{cat}/{f}"
    found, total = collections.Counter(), collections.Counter()
    for sizes in by_icon.values():
        ref = sizes.get("48x48")
        if ref is None:
            continue
        for size, path in sizes.items():
            if size == "48x48":
                continue
            total[size] += 1
            found[size] += group.get(ref) is not None and group.get(ref) == group.get(path)
    print(f"{sum(len(v) for v in by_icon.values())} icons, {len(report['groups'])} groups")
    name_of = lambda p: (p.split("/")[0], p.split("/")[1].split("_", 1)[1])
    links = [l for g in report["groups"] for l in g["links"]]
    other = [l for l in links if name_of(l["a"]) != name_of(l["b"])]
    print(f"{len(links)} links, {len(other)} between different icon names")
    for size in SIZES:
        if total[size]:
            print(f"{size} against 48x48: {found[size]}/{total[size]} = {found[size] / total[size]:.3f}")


if __name__ == "__main__":
    main()
