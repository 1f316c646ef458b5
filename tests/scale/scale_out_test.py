#!/usr/bin/python3
"""Scale-out end to end: tamis scan in 4 processes (+ tamis join in 2) + tamis merge
equals one tamis audit, byte for byte (manifest.csv, report.json, report.html,
index.cbor), on the planted-copy tree (planted_tree.py) and on Fashion-MNIST
(Debian dataset-fashion-mnist); refusals; the part file read by an independent
reader written from docs/scale-out.md's layout (checksums with python3-xxhash,
the meta block with python3-cbor2).
Usage: scale_out_test.py PATH_TO_TAMIS
"""
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import unittest

import cbor2
import xxhash

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from planted_tree import planted_copy_tree  # noqa: E402

TAMIS = None
OUTPUTS = ("manifest.csv", "report.json", "report.html", "index.cbor")


def run(*args, env=None):
    e = dict(os.environ)
    for k in list(e):
        if k.startswith("SLURM_") or k == "JOB_COMPLETION_INDEX":
            del e[k]
    e.update(env or {})
    return subprocess.run([TAMIS, *args], capture_output=True, text=True, env=e)


def same_outputs(testcase, a, b):
    for name in OUTPUTS:
        with open(os.path.join(a, name), "rb") as x, open(os.path.join(b, name), "rb") as y:
            testcase.assertTrue(x.read() == y.read(), f"{name} differs between {a} and {b}")


def scan_join_merge(testcase, root, t, shards=4, slices=2, threads=("1", "2")):
    """Audit, then scans + merge and scans + joins + merge; all compared. Returns the part files."""
    a = run("audit", root, "--out", os.path.join(t, "audit"), "--no-cache")
    testcase.assertIn(a.returncode, (0, 1), a.stderr)
    parts = []
    for k in range(shards):
        p = os.path.join(t, "parts", f"{k}.part")
        r = run("scan", root, "--shard", f"{k}/{shards}", "--out", p, "--no-cache", "--threads", threads[k % len(threads)])
        testcase.assertEqual(r.returncode, 0, r.stderr)
        parts.append(p)
    m = run("merge", *parts, "--out", os.path.join(t, "merged"))
    testcase.assertEqual(m.returncode, a.returncode, m.stderr)
    same_outputs(testcase, os.path.join(t, "audit"), os.path.join(t, "merged"))
    joins = []
    for k in range(slices):
        j = os.path.join(t, "joins", f"{k}.join")
        r = run("join", *parts, "--slice", f"{k}/{slices}", "--out", j, "--threads", threads[k % len(threads)])
        testcase.assertEqual(r.returncode, 0, r.stderr)
        joins.append(j)
    m = run("merge", *reversed(parts), *joins, "--out", os.path.join(t, "merged-joined"), "--threads", "1")
    testcase.assertEqual(m.returncode, a.returncode, m.stderr)
    same_outputs(testcase, os.path.join(t, "audit"), os.path.join(t, "merged-joined"))
    return parts, joins


def read_part(path):
    """The part file as docs/scale-out.md lays it out, checked on the way."""
    with open(path, "rb") as f:
        data = f.read()
    assert data[:16] == b"\x89tamis-part\r\n\x1a\n\0", "signature"
    version, zero, meta_n, count, recs_n, thumbs_n, zero2 = struct.unpack_from("<IIQQQQQ", data, 16)
    assert version == 3 and zero == 0 and zero2 == 0
    thumbs_at = 64 + meta_n + recs_n + 16 * thumbs_n
    table_at = 64 + meta_n + recs_n
    gray_only = 1 << 63  # a thumbnail stored as its gray plane alone (1,024 bytes)
    entries = [struct.unpack_from("<QQ", data, table_at + 16 * k) for k in range(thumbs_n)]
    sizes = [1024 if rec & gray_only else 3072 for rec, _ in entries]
    assert len(data) == thumbs_at + sum(sizes) + 24, "length"
    head_sum, file_sum = struct.unpack_from("<QQ", data, len(data) - 24)
    assert data[-8:] == b"tamisend"
    assert xxhash.xxh3_64_intdigest(data[:thumbs_at]) == head_sum, "first checksum"
    assert xxhash.xxh3_64_intdigest(data[:-24]) == file_sum, "second checksum"
    meta = cbor2.loads(data[64:64 + meta_n])
    at, paths = 64 + meta_n, []
    for _ in range(count):
        (n,) = struct.unpack_from("<I", data, at)
        paths.append(data[at + 4:at + 4 + n])
        at += 4 + n + 24
        at += 1 + data[at]
    assert at == 64 + meta_n + recs_n
    offset = thumbs_at
    for k, (rec, s) in enumerate(entries):
        thumb = data[offset:offset + sizes[k]]
        assert xxhash.xxh3_64_intdigest(thumb) == s, "a thumbnail's checksum"
        offset += sizes[k]
    return meta, paths


class ScaleOut(unittest.TestCase):
    def test_planted_tree_scan_join_merge_equals_audit(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            planted = planted_copy_tree(root)
            parts, _ = scan_join_merge(self, root, t)
            # The planted copies are found: every copy shares a group with its source (report.json).
            import json
            with open(os.path.join(t, "merged-joined", "report.json")) as f:
                report = json.load(f)
            group_of = {path: g["id"] for g in report["groups"] for path in g["paths"]}
            for copy, src in planted.items():
                self.assertIn(copy, group_of, copy)
                self.assertEqual(group_of.get(copy), group_of.get(src), copy)
            # The independent reader: each part's paths are its shard's (XXH3-64 of the
            # path mod N, python3-xxhash), and together they are the tree's regular files.
            seen = []
            for k, p in enumerate(parts):
                meta, paths = read_part(p)
                self.assertEqual(meta["shard"], [k, 4])
                self.assertEqual(paths, sorted(paths))
                for path in paths:
                    self.assertEqual(xxhash.xxh3_64_intdigest(path) % 4, k, path)
                seen += paths
            files = []
            for d, dirs, names in os.walk(root):
                for n in names:
                    full = os.path.join(d, n)
                    if os.path.isfile(full) and not os.path.islink(full):
                        files.append(os.path.relpath(full, root).encode())
            self.assertEqual(sorted(seen), sorted(files))

    def test_fashion_mnist_scan_join_merge_equals_audit(self):
        tree = os.path.join(os.environ["TAMIS_TEST_DATA"], "cache", "fashion-mnist-png")
        self.assertTrue(os.path.isdir(tree), "the fashion_mnist_export fixture makes it")
        with tempfile.TemporaryDirectory() as t:
            scan_join_merge(self, tree, t, threads=("2",))

    def test_a_rescan_with_its_cache_reads_no_image_and_merges_the_same(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            planted_copy_tree(root)
            a = run("audit", root, "--out", os.path.join(t, "audit"), "--no-cache")
            for rnd in ("cold", "warm"):
                parts, read = [], 0
                for k in range(2):
                    p = os.path.join(t, rnd, f"{k}.part")
                    r = run("scan", root, "--shard", f"{k}/2", "--out", p, "--cache", os.path.join(t, f"cache-{k}.sqlite"))
                    self.assertEqual(r.returncode, 0, r.stderr)
                    read += int(re.search(r"; read (\d+), \d+ from the cache", r.stdout).group(1))
                    parts.append(p)
                # Warm, nothing is read; the hidden file (set aside by its name) is never opened.
                self.assertEqual(read, 0 if rnd == "warm" else 103)  # 104 regular files, one hidden
                m = run("merge", *parts, "--out", os.path.join(t, rnd + "-merged"))
                self.assertEqual(m.returncode, a.returncode, m.stderr)
                same_outputs(self, os.path.join(t, "audit"), os.path.join(t, rnd + "-merged"))

    def test_the_engine_environment_chooses_the_shard(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            planted_copy_tree(root)
            run("scan", root, "--shard", "2/4", "--out", os.path.join(t, "given.part"), "--no-cache")
            slurm = {"SLURM_ARRAY_TASK_ID": "3", "SLURM_ARRAY_TASK_COUNT": "4", "SLURM_ARRAY_TASK_MIN": "1",
                     "SLURM_ARRAY_TASK_MAX": "4", "SLURM_ARRAY_TASK_STEP": "1"}
            r = run("scan", root, "--out", os.path.join(t, "slurm.part"), "--no-cache", env=slurm)
            self.assertEqual(r.returncode, 0, r.stderr)
            r = run("scan", root, "--shards", "4", "--out", os.path.join(t, "k8s.part"), "--no-cache",
                    env={"JOB_COMPLETION_INDEX": "2"})
            self.assertEqual(r.returncode, 0, r.stderr)
            with open(os.path.join(t, "given.part"), "rb") as f:
                given = f.read()
            for name in ("slurm.part", "k8s.part"):
                with open(os.path.join(t, name), "rb") as f:
                    self.assertEqual(f.read(), given, name)
            # An array with a step, or an index without the count: refused before reading.
            r = run("scan", root, "--out", os.path.join(t, "x.part"), "--no-cache",
                    env=dict(slurm, SLURM_ARRAY_TASK_STEP="2"))
            self.assertEqual(r.returncode, 2)
            self.assertIn("plain range", r.stderr)
            r = run("scan", root, "--out", os.path.join(t, "y.part"), env={"JOB_COMPLETION_INDEX": "2"})
            self.assertEqual(r.returncode, 2)
            self.assertIn("--shards", r.stderr)
            self.assertFalse(os.path.exists(os.path.join(t, "x.part")) or os.path.exists(os.path.join(t, "y.part")))
            # Never inside ROOT.
            r = run("scan", root, "--shard", "0/2", "--out", os.path.join(root, "p.part"), "--no-cache")
            self.assertEqual(r.returncode, 2)
            self.assertFalse(os.path.exists(os.path.join(root, "p.part")))

    def test_a_thousand_parts_merge_within_the_usual_open_file_limit(self):
        # 1,030 shards of the planted tree (most of them empty parts) merged and joined
        # under RLIMIT_NOFILE 256 (the usual soft limit is 1,024): each part is opened for
        # a read and closed after it, so the merge never holds them all; same outputs.
        import resource
        def low_limit():
            resource.setrlimit(resource.RLIMIT_NOFILE, (256, resource.getrlimit(resource.RLIMIT_NOFILE)[1]))
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "tree")
            planted_copy_tree(root)
            a = run("audit", root, "--out", os.path.join(t, "audit"), "--no-cache")
            shards = 1030
            parts = [os.path.join(t, "parts", f"{k}.part") for k in range(shards)]
            for k, p in enumerate(parts):
                r = run("scan", root, "--shard", f"{k}/{shards}", "--out", p, "--no-cache", "--threads", "1")
                self.assertEqual(r.returncode, 0, r.stderr)
            m = subprocess.run([TAMIS, "merge", *parts, "--out", os.path.join(t, "merged")], capture_output=True,
                               text=True, preexec_fn=low_limit)
            self.assertEqual(m.returncode, a.returncode, m.stderr)
            same_outputs(self, os.path.join(t, "audit"), os.path.join(t, "merged"))
            j = subprocess.run([TAMIS, "join", *parts, "--out", os.path.join(t, "all.join")], capture_output=True,
                               text=True, preexec_fn=low_limit)
            self.assertEqual(j.returncode, 0, j.stderr)

    def test_bad_sets_of_parts_are_refused_with_exit_2(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            planted_copy_tree(root)
            p = [os.path.join(t, f"{k}.part") for k in range(3)]
            for k in range(3):
                self.assertEqual(run("scan", root, "--shard", f"{k}/3", "--out", p[k], "--no-cache").returncode, 0)
            other = os.path.join(t, "other.part")
            run("scan", root, "--shard", "1/3", "--out", other, "--no-cache", "--max-pixels", "1000000")
            with open(p[1], "rb") as f:
                good = f.read()
            cut = os.path.join(t, "cut.part")
            with open(cut, "wb") as f:
                f.write(good[:len(good) // 2])
            flipped = os.path.join(t, "flipped.part")
            with open(flipped, "wb") as f:  # a bit in a thumbnail: only the whole-file checksum sees it
                f.write(good[:-500] + bytes([good[-500] ^ 4]) + good[-499:])
            j = [os.path.join(t, f"{k}.join") for k in range(2)]
            for k in range(2):
                self.assertEqual(run("join", *p, "--slice", f"{k}/2", "--out", j[k]).returncode, 0)
            policy = os.path.join(t, "policy.json")
            with open(policy, "w") as f:
                f.write('{"lookalike": {"radius": 10}}')
            cases = {
                "missing shard": ([p[0], p[2]], "missing"),
                "repeated shard": ([p[0], p[1], p[1], p[2]], "twice"),
                "other settings": ([p[0], other, p[2]], "different settings"),
                "truncated": ([p[0], cut, p[2]], "truncated"),
                "bit flipped": ([p[0], flipped, p[2]], "checksum"),
                "missing slice": (p + [j[0]], "missing"),
                "repeated slice": (p + [j[0], j[0], j[1]], "twice"),
                "other parts": ([p[0], other, p[2]] + j, "different settings"),
            }
            for name, (inputs, words) in cases.items():
                out = os.path.join(t, "out-" + name.replace(" ", "-"))
                r = run("merge", *inputs, "--out", out)
                self.assertEqual(r.returncode, 2, f"{name}: {r.stderr}")
                self.assertIn(words, r.stderr, name)
                self.assertTrue(r.stderr.startswith("tamis: "), name)
                self.assertFalse(os.path.exists(out), name)
            r = run("merge", *p, *j, "--out", os.path.join(t, "out-policy"), "--policy", policy)
            self.assertEqual(r.returncode, 2, r.stderr)
            self.assertIn("other look-alike or mask settings", r.stderr)
            r = run("merge", *p, *j, "--out", os.path.join(t, "out-masks"), "--not-mask-folder", "plover_masks")
            self.assertEqual(r.returncode, 2, r.stderr)


if __name__ == "__main__":
    TAMIS = os.path.abspath(sys.argv.pop(1))
    unittest.main(verbosity=1)
