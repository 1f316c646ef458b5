#!/usr/bin/python3
"""Distinct pictures of mixed small sizes: do look-alike joins stay honest?

Usage: mixed_sizes.py TAMIS TREE WORKDIR [EVERY] [SIDE]

Copies TREE (for example the Fashion-MNIST tree of 28x28 PNGs) to WORKDIR/mixed and
replaces every EVERY-th image (default 10, in path order) by its own reduction to
SIDE x SIDE pixels (default 14; Pillow, bilinear), so that no reduced picture has a
copy at the other size: every join the reductions add is a join of distinct
pictures. Audits the tree as it is and the mixed one (no cache, 2 threads) and
prints, for each, the confirmed pairs, the groups and the label-conflict errors, then
the mixed tree's links by size pair, blur and whether they cross classes.
docs/lookalikes.md (Limits) records what it measured.
"""
import collections
import json
import os
import shutil
import subprocess
import sys

from PIL import Image


def audit(tamis, root, out):
    r = subprocess.run([tamis, "audit", root, "--out", out, "--no-cache", "--threads", "2", "--quiet"],
                       capture_output=True, text=True)
    if r.returncode not in (0, 1):
        sys.exit(f"audit of {root} exited {r.returncode}: {r.stderr}")
    with open(os.path.join(out, "report.json"), encoding="utf-8") as f:
        return json.load(f)


def summary(name, report):
    conflicts = sum(1 for f in report["findings"] if f["code"] == "label-conflict")
    print(f"{name:8} confirmed pairs {report['lookalike_search']['confirmed_pairs']:6}  "
          f"groups {len(report['groups']):5}  label conflicts {conflicts}")


def main():
    if len(sys.argv) < 4:
        sys.exit(__doc__)
    tamis, tree, work = sys.argv[1], sys.argv[2], sys.argv[3]
    every = int(sys.argv[4]) if len(sys.argv) > 4 else 10
    side = int(sys.argv[5]) if len(sys.argv) > 5 else 14
    mixed = os.path.join(work, "mixed")
    shutil.rmtree(mixed, ignore_errors=True)
    shutil.copytree(tree, mixed)
    files = sorted(os.path.relpath(os.path.join(d, f), mixed) for d, _, fs in os.walk(mixed) for f in fs)
    small = set()
    for k, rel in enumerate(files):
        if k % every == 0:
            p = os.path.join(mixed, rel)
            with Image.open(p) as im:
                im.resize((side, side), Image.BILINEAR).save(p)
            small.add(rel)
    plain = audit(tamis, tree, os.path.join(work, "out-plain"))
    summary("as it is", plain)
    # Pictures grouped in the tree as it is are copies of each other (Fashion-MNIST
    # holds some): a reduced one joined to its copy's partner is a right join.
    plain_group = {p: g["id"] for g in plain["groups"] for p in g["paths"]}
    report = audit(tamis, mixed, os.path.join(work, "out-mixed"))
    summary("mixed", report)
    links = collections.Counter()
    for g in report["groups"]:
        for link in g["links"]:
            sizes = tuple(sorted(side if p in small else 0 for p in (link["a"], link["b"])))
            key = "small-small" if sizes == (side, side) else "small-large" if side in sizes else "large-large"
            cross = link["a"].split("/")[0] != link["b"].split("/")[0]
            pa, pb = plain_group.get(link["a"]), plain_group.get(link["b"])
            copies = pa is not None and pa == pb
            links[(key, link.get("blur_sigma", 0.0), link.get("resampled", False), cross, copies)] += 1
    print(f"{len(small)} of {len(files)} pictures reduced to {side} px; links by sizes, blur sigma, resampled, "
          "across classes, and whether the tree as it is groups the pair (copies):")
    for (key, blur, resampled, cross, copies), n in sorted(links.items()):
        print(f"  {key:12} blur {blur:4.2f} {'resampled ' if resampled else ''}{'across' if cross else 'within'} classes, "
              f"{'copies' if copies else 'distinct'}: {n}")
    wrong = sum(n for (key, _, _, _, copies), n in links.items() if key == "small-large" and not copies)
    print(f"small-large links of pictures the tree as it is does not group: {wrong}")


if __name__ == "__main__":
    main()
