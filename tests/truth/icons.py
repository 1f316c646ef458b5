"""Shared by the icon tests and bench/icon_sizes.py: Debian's adwaita-icon-theme
copied into a class-folder tree (one class per category, each file named
SIZE_NAME), the share of each icon's renderings found in its 48 px rendering's
look-alike group, and an independent look-alike measure in numpy."""
import collections
import os
import shutil

import numpy as np

THEME = "/usr/share/icons/Adwaita"


def copy_icon_tree(root, sizes, categories):
    """The theme's PNGs at `sizes` (e.g. "48x48") in `categories` as root/CATEGORY/SIZE_NAME."""
    shutil.rmtree(root, ignore_errors=True)
    for size in sizes:
        for category in categories:
            src = os.path.join(THEME, size, category)
            if not os.path.isdir(src):
                continue
            os.makedirs(os.path.join(root, category), exist_ok=True)
            for f in sorted(os.listdir(src)):
                if f.endswith(".png"):
                    shutil.copyfile(os.path.join(src, f), os.path.join(root, category, f"{size}_{f}"))


def name_of(path):
    """(category, icon name) of a tree path CATEGORY/SIZE_NAME."""
    category, file = path.split("/", 1)
    return category, file.split("_", 1)[1]


def recall_against_48(report, root):
    """{size: (found, total)}: renderings sharing their 48 px rendering's group."""
    group = {}
    for g in report["groups"]:
        for link in g["links"]:
            group[link["a"]] = group[link["b"]] = g["id"]
    by_icon = collections.defaultdict(dict)
    for category in sorted(os.listdir(root)):
        for f in os.listdir(os.path.join(root, category)):
            by_icon[name_of(f"{category}/{f}")][f.split("_", 1)[0]] = f"{category}/{f}"
    found, total = collections.Counter(), collections.Counter()
    for sizes in by_icon.values():
        ref = sizes.get("48x48")
        if ref is None:
            continue
        for size, path in sizes.items():
            if size != "48x48":
                total[size] += 1
                found[size] += group.get(ref) is not None and group.get(ref) == group.get(path)
    return {s: (found[s], total[s]) for s in total}


def name_pairs(report):
    """Pairs of different icon names that share a group."""
    pairs = set()
    for g in report["groups"]:
        names = sorted({name_of(p) for link in g["links"] for p in (link["a"], link["b"])})
        pairs.update((a, b) for i, a in enumerate(names) for b in names[i + 1:])
    return pairs


def best_turn_correlation(a, b):
    """Pearson correlation of two planes, the best of the eight flips/turns of a."""
    best = -1.0
    for k in range(4):
        for flip in (False, True):
            t = np.rot90(a, k)
            if flip:
                t = np.fliplr(t)
            if t.shape != b.shape:
                continue
            x, y = t.ravel() - t.mean(), b.ravel() - b.mean()
            den = np.sqrt((x * x).sum() * (y * y).sum())
            best = max(best, float((x * y).sum() / den) if den > 0 else (1.0 if (x == y).all() else 0.0))
    return best
