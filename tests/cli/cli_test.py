#!/usr/bin/python3
"""End-to-end tests of the tamis binary: exit statuses, outputs, hostile file names.

The manifest is read back with Python's csv module (an RFC 4180 reader independent
of tamis) and report.json with Python's json module.
Usage: cli_test.py PATH_TO_TAMIS
"""
import csv
import io
import json
import os
import subprocess
import sys
import re
import shutil
import tempfile
import unittest

TAMIS = None


def run(*args, **kw):
    return subprocess.run([TAMIS, *args], capture_output=True, text=True, **kw)


def one_image_tree(t):
    """t/data/c/a.png, one tiny image in one class: returns t/data."""
    root = os.path.join(t, "data")
    os.makedirs(os.path.join(root, "c"))
    with open(os.path.join(root, "c", "a.png"), "wb") as f:
        f.write(tiny_png())
    return root


def snapshot(root):
    """Every entry under root with its size and mtime: to prove nothing was written there."""
    out = {}
    for d, dirs, files in os.walk(root):
        for n in dirs + files:
            p = os.path.join(d, n)
            st = os.lstat(p)
            out[p] = (st.st_size, st.st_mtime_ns)
    return out


def load_json(path):
    with open(path, encoding="utf-8") as f:
        return json.load(f)


def read_bytes(path):
    with open(path, "rb") as f:
        return f.read()


def read_text(path):
    with open(path, encoding="utf-8", newline="") as f:
        return f.read()


_png_counter = [0]


def tiny_png():
    """A valid 8x8 gray PNG (ISO/IEC 15948) of seeded noise, built with Python's zlib;
    every call gives a different picture, so no two test files are duplicates."""
    import random
    import struct
    import zlib
    _png_counter[0] += 1
    rng = random.Random(_png_counter[0])
    def chunk(t, d):
        return struct.pack(">I", len(d)) + t + d + struct.pack(">I", zlib.crc32(t + d) & 0xFFFFFFFF)
    ihdr = struct.pack(">IIBBBBB", 8, 8, 8, 0, 0, 0, 0)
    raw = b"".join(b"\x00" + bytes(rng.randrange(256) for _ in range(8)) for _ in range(8))
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b"")


class ExitStatus(unittest.TestCase):
    def test_help_and_version_exit_0(self):
        for args in (["--help"], ["--version"], ["audit", "--help"], ["demo", "--help"], ["split", "--help"]):
            self.assertEqual(run(*args).returncode, 0, args)

    def test_bad_command_lines_exit_2(self):
        with tempfile.TemporaryDirectory() as t:
            self.assertEqual(run("audit", t).returncode, 2)                      # no --out
            self.assertEqual(run("audit", t, "--out", t + "/o", "--bogus").returncode, 2)
            self.assertEqual(run("audit", t, "--out", t + "/o", "--split", "70/20").returncode, 2)
            self.assertEqual(run("audit", t, "--out", t + "/o", "--split", "a/b/c").returncode, 2)
            r = run("audit", t, "--out", os.path.join(t, "inside"))
            self.assertEqual(r.returncode, 2)
            self.assertIn("inside", r.stderr)
            self.assertFalse(os.path.exists(os.path.join(t, "inside")))
            self.assertEqual(run("frobnicate").returncode, 2)
            # Control inputs refused, never wrapped or taken outside ROOT.
            for seed in ("-1", "18446744073709551616", "1e3", "0x10"):
                r = run("audit", t, "--out", t + "/o", "--seed", seed)
                self.assertEqual(r.returncode, 2, seed)
                self.assertIn("--seed", r.stderr)
            for folder in ("../x", "/etc", "a/../../b"):
                for option in ("--mask-folder", "--not-mask-folder"):
                    r = run("audit", t, "--out", t + "/o", option, folder)
                    self.assertEqual(r.returncode, 2, (option, folder))
                    self.assertIn("inside ROOT", r.stderr)
            self.assertFalse(os.path.exists(t + "/o"))

    def test_missing_root_exits_3(self):
        with tempfile.TemporaryDirectory() as t:
            self.assertEqual(run("audit", os.path.join(t, "nope"), "--out", os.path.join(t, "o")).returncode, 3)

    def test_unwritable_output_exits_3(self):
        with tempfile.TemporaryDirectory() as t:
            os.makedirs(os.path.join(t, "data", "c"))
            with open(os.path.join(t, "data", "c", "a.png"), "wb") as f:
                f.write(tiny_png())
            with open(os.path.join(t, "file"), "w") as f:
                f.write("x")
            self.assertEqual(run("audit", os.path.join(t, "data"), "--out", os.path.join(t, "file", "o")).returncode, 3)

    def test_clean_tree_exits_0_and_broken_file_exits_1(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            for c in ("a", "b"):
                os.makedirs(os.path.join(root, c))
                with open(os.path.join(root, c, "x.png"), "wb") as f:
                    f.write(tiny_png())
            self.assertEqual(run("audit", root, "--out", os.path.join(t, "o"), "--quiet").returncode, 0)
            with open(os.path.join(root, "a", "broken.png"), "wb") as f:
                f.write(tiny_png()[:60])
            r = run("audit", root, "--out", os.path.join(t, "o"), "--quiet")
            self.assertEqual(r.returncode, 1)
            self.assertEqual(r.stdout, "")

    def test_timings_name_every_stage_on_stderr_and_change_no_output(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            make_clean_tree(root, per_class=3)
            plain, timed = os.path.join(t, "plain"), os.path.join(t, "timed")
            self.assertEqual(run("audit", root, "--out", plain, "--quiet", "--no-cache").returncode, 0)
            r = run("audit", root, "--out", timed, "--quiet", "--no-cache", "--timings")
            self.assertEqual(r.returncode, 0)
            self.assertEqual(r.stdout, "")
            stages, pieces = {}, {}
            for line in r.stderr.splitlines():
                m = re.fullmatch(r"tamis: ( *)(.+?) +(-?[0-9]+\.[0-9]{3}) s( \(since the process started\))?", line)
                self.assertIsNotNone(m, line)
                (pieces if m.group(1) else stages)[m.group(2)] = float(m.group(3))
            for stage in ("walk", "read", "masks", "labels", "groups", "checks + split", "outputs", "other", "total"):
                self.assertIn(stage, stages)
            # The output files, written two at a time, are shown under "outputs", not added up.
            self.assertEqual(set(pieces), {"manifest.csv", "report.json", "report.html", "index.cbor"})
            self.assertGreaterEqual(stages["other"], 0.0)
            self.assertNotIn("cache load", stages)  # no cache, no such stage
            self.assertGreaterEqual(stages["total"], stages["read"])
            for name in ("manifest.csv", "report.json", "report.html"):
                self.assertEqual(read_text(os.path.join(plain, name)), read_text(os.path.join(timed, name)), name)


class Messages(unittest.TestCase):
    """What a person reads: plain sentences behind 'tamis:', never a library's
    exception text; help without parser type annotations; progress in a pipe as
    plain lines. The fixtures are built by the test (its own truth)."""

    LIBRARY_TEXT = ("json.exception", "filesystem error", "Run with --help", "terminate called", "what():",
                    "basic_string", "std::")

    def assert_plain(self, r, status):
        self.assertEqual(r.returncode, status, r.stderr)
        self.assertTrue(r.stderr.startswith("tamis: "), r.stderr)
        for text in self.LIBRARY_TEXT:
            self.assertNotIn(text, r.stderr)

    def test_mistakes_are_told_in_plain_sentences(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            run("demo", root)
            not_json = os.path.join(t, "notes.txt")
            with open(not_json, "w") as f:
                f.write("plain words, not JSON\n")
            huge = os.path.join(t, "huge.json")
            with open(huge, "w") as f:
                f.write('{"fail_on": 1E400}')
            out = os.path.join(t, "o")
            self.assert_plain(run(), 2)
            self.assert_plain(run("frobnicate"), 2)
            self.assert_plain(run("audit", root), 2)
            self.assert_plain(run("audit", root, "--out", out, "--bogus"), 2)
            self.assert_plain(run("audit", root, "--out", out, "--threads", "5000"), 2)
            self.assert_plain(run("audit", root, "--out", out, "--format", "xml"), 2)
            for flag, value in (("--policy", not_json), ("--policy", huge), ("--policy", t), ("--baseline", not_json),
                                ("--baseline", t), ("--keep", t)):
                r = run("audit", root, "--out", out, flag, value)
                self.assert_plain(r, 2)
            self.assertIn("not valid JSON (line 1, column 1", run("audit", root, "--out", out, "--policy", not_json).stderr)
            self.assert_plain(run("split", not_json, "--out", out), 3)  # no index there: cannot run
            self.assert_plain(run("split", t, "--out", out), 3)
            self.assert_plain(run("demo", os.path.join(not_json, "below")), 3)
            self.assert_plain(run("demo", not_json), 2)
            self.assert_plain(run("audit", root, "--out", os.path.join(not_json, "o")), 3)
            self.assertFalse(os.path.exists(out))

    def test_help_names_values_for_people_and_gives_an_example(self):
        for command in ("audit", "split", "export", "scan", "join", "merge", "demo", None):
            r = run(command, "--help") if command else run("--help")
            self.assertEqual(r.returncode, 0)
            self.assertIn("Example: tamis", r.stdout, command)
            for parser_text in ("UINT", "TEXT", "REQUIRED", " in [", ":{", "VALUE"):
                self.assertNotIn(parser_text, r.stdout, (command, parser_text))
        self.assertIn("--out DIR (required)", run("audit", "--help").stdout)
        self.assertIn("--threads N", run("audit", "--help").stdout)

    def test_the_manual_page_names_every_option_and_installs(self):
        import re
        page = read_text(os.path.join(REPO, "docs", "tamis.1"))
        text = page.replace("\\-", "-")  # troff's escaped hyphens
        for command in ("audit", "split", "export", "scan", "join", "merge", "demo"):
            self.assertTrue(".B tamis " + command in page, command)
            for option in re.findall(r"^\s+(--[a-z-]+)", run(command, "--help").stdout, re.M):
                if option != "--help":
                    self.assertTrue(option in text, (command, option))
        # cmake --install (the build tree TAMIS was built in) places it in share/man/man1.
        build = os.path.dirname(TAMIS)
        with tempfile.TemporaryDirectory() as t:
            r = subprocess.run(["cmake", "--install", build, "--prefix", t], capture_output=True, text=True)
            self.assertEqual(r.returncode, 0, r.stderr)
            self.assertEqual(read_bytes(os.path.join(t, "share", "man", "man1", "tamis.1")),
                             read_bytes(os.path.join(REPO, "docs", "tamis.1")))
            self.assertTrue(os.access(os.path.join(t, "bin", "tamis"), os.X_OK))
        # groff (when the machine has it) formats it without a warning.
        if shutil.which("groff"):
            r = subprocess.run(["groff", "-man", "-Tutf8", "-ww", "-z", os.path.join(REPO, "docs", "tamis.1")],
                               capture_output=True, text=True)
            self.assertEqual((r.returncode, r.stderr), (0, ""))

    def test_demo_refuses_a_folder_it_did_not_write(self):
        with tempfile.TemporaryDirectory() as t:
            mine = os.path.join(t, "mine")
            os.makedirs(os.path.join(mine, "gingham"))
            with open(os.path.join(mine, "gingham", "keep.jpg"), "wb") as f:
                f.write(b"someone's file")
            before = snapshot(mine)
            r = run("demo", mine)
            self.assert_plain(r, 2)
            self.assertIn("not a demo tamis wrote", r.stderr)
            self.assertEqual(snapshot(mine), before)
            # An empty folder, and a demo written before, are written (again).
            empty = os.path.join(t, "empty")
            os.makedirs(empty)
            self.assertEqual(run("demo", empty).returncode, 0)
            first = {p: read_bytes(p) for p in snapshot(empty) if os.path.isfile(p)}
            self.assertEqual(run("demo", empty).returncode, 0)
            self.assertEqual({p: read_bytes(p) for p in snapshot(empty) if os.path.isfile(p)}, first)

    def test_progress_in_a_pipe_is_plain_lines(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            run("demo", root)
            r = run("audit", root, "--out", os.path.join(t, "o"), "--no-cache", "--progress")
            self.assertLessEqual(r.returncode, 1)
            lines = [l for l in r.stderr.splitlines() if l.startswith("tamis: read ")]
            self.assertGreaterEqual(len(lines), 2, r.stderr)
            self.assertLessEqual(len(lines), 12)
            self.assertIn("(100%)", lines[-1])
            self.assertNotIn("\033", r.stderr)
            self.assertNotIn("\r", r.stderr)
            # Without --progress a pipe gets none.
            r = run("audit", root, "--out", os.path.join(t, "o2"), "--no-cache")
            self.assertNotIn("tamis: read ", r.stderr)


REPO = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SCHEMA = os.path.join(REPO, "docs", "report.schema.json")


def validate_report(testcase, path):
    """report.json against docs/report.schema.json with python3-jsonschema (draft 2020-12)."""
    import jsonschema
    schema = load_json(SCHEMA)
    jsonschema.Draft202012Validator.check_schema(schema)
    errors = list(jsonschema.Draft202012Validator(schema).iter_errors(load_json(path)))
    testcase.assertEqual([e.message for e in errors], [])


class Outputs(unittest.TestCase):
    NAMES = [
        "with space.png", 'quote"d.png', "comma,name.png", "semi;colon.png", "new\nline.png",
        "crlf\r\nname.png", "caf\u00e9 \u6728.png", "<script>alert(1)<script>.png",
        "<img src=x onerror=alert(1)>.png", "amp&lt;.png", "'single'.png",
    ]

    def test_hostile_names_survive_into_the_manifest(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            labels = ["plain", "class, with comma", 'class "quoted"', "<b>bold<b>"]
            expect = {}
            for i, name in enumerate(self.NAMES):
                label = labels[i % len(labels)]
                os.makedirs(os.path.join(root, label), exist_ok=True)
                with open(os.path.join(root, label, name), "wb") as f:
                    f.write(tiny_png())
                expect[label + "/" + name] = label
            before = snapshot(root)
            out = os.path.join(t, "out")
            r = run("audit", root, "--out", out, "--no-progress")
            self.assertEqual(r.returncode, 0, r.stderr)
            self.assertEqual(snapshot(root), before, "the audit wrote inside ROOT")
            with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
                rows = list(csv.DictReader(f))
            got = {row["path"]: row["label"] for row in rows}
            self.assertEqual(got, expect)
            paths = [row["path"] for row in rows]
            self.assertEqual(paths, sorted(paths, key=lambda p: p.encode("utf-8")))
            raw = read_bytes(os.path.join(out, "manifest.csv"))
            header = raw.split(b"\n", 1)[0].decode()
            # The interface's columns, with mode and flags under names that are not
            # pandas DataFrame attributes (docs/outputs.md); LF line ends: the only
            # CR in the file is the one inside a quoted name.
            self.assertTrue(header.startswith(
                "path,label,split,group,width,height,color_mode,bit_depth,format,mask_path,finding_codes"))
            self.assertEqual(raw.count(b"\r"), sum(n.count("\r") for n in self.NAMES))
            self.assertFalse(any(c in ("mode", "flags") for c in header.split(",")))
            validate_report(self, os.path.join(out, "report.json"))
            report = load_json(os.path.join(out, "report.json"))
            tot = report["totals"]
            self.assertEqual(tot["files_seen"], tot["images"] + tot["masks"] + tot["unreadable"] + tot["ignored"])
            self.assertEqual(tot["images"], len(self.NAMES))
            html = read_text(os.path.join(out, "report.html"))
            self.assertNotIn("<script>alert", html)  # the page has one script of its own, never a name
            self.assertNotIn("<img src=x", html)
            self.assertEqual([n for n in os.listdir(out) if ".tmp" in n], [])

    def test_thumbnail_budget_is_a_setting(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            run("demo", root)
            sizes = {}
            for kb in ("0", "300"):
                out = os.path.join(t, kb)
                run("audit", root, "--out", out, "--thumbnails-kb", kb, "--quiet")
                sizes[kb] = read_text(os.path.join(out, "report.html")).count("data:image/jpeg")
            self.assertEqual(sizes["0"], 0)
            self.assertGreater(sizes["300"], 0)

    def test_split_reproduces_the_audit_and_keeps_a_python_written_manifest(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            for i, name in enumerate(self.NAMES * 3):
                label = ["plain", "class, with comma"][i % 2]
                os.makedirs(os.path.join(root, label), exist_ok=True)
                with open(os.path.join(root, label, f"{i}-{name}"), "wb") as f:
                    f.write(tiny_png())
            a, b = os.path.join(t, "a"), os.path.join(t, "b")
            self.assertEqual(run("audit", root, "--out", a, "--seed", "4", "--quiet").returncode, 0)
            self.assertEqual(run("split", a, "--out", b, "--seed", "4", "--quiet").returncode, 0)
            for name in ("manifest.csv", "report.json"):
                with open(os.path.join(a, name), "rb") as fa, open(os.path.join(b, name), "rb") as fb:
                    self.assertEqual(fa.read(), fb.read(), name)
            # A manifest written by Python's csv module (every field quoted, LF line ends)
            # with made-up splits: --keep must hand every one of them back.
            with open(os.path.join(a, "manifest.csv"), newline="", encoding="utf-8") as f:
                rows = list(csv.DictReader(f))
            wanted = {row["path"]: ["train", "val", "test"][k % 3] for k, row in enumerate(rows)}
            keep = os.path.join(t, "keep.csv")
            with open(keep, "w", newline="", encoding="utf-8") as f:
                w = csv.writer(f, quoting=csv.QUOTE_ALL, lineterminator="\n")
                w.writerow(["split", "path"])
                for path, split in wanted.items():
                    w.writerow([split, path])
            c = os.path.join(t, "c")
            r = run("split", a, "--out", c, "--keep", keep, "--seed", "77", "--quiet")
            self.assertEqual(r.returncode, 0, r.stderr)
            with open(os.path.join(c, "manifest.csv"), newline="", encoding="utf-8") as f:
                got = {row["path"]: row["split"] for row in csv.DictReader(f)}
            self.assertEqual(got, wanted)
            validate_report(self, os.path.join(c, "report.json"))

    def test_split_command_exit_statuses(self):
        with tempfile.TemporaryDirectory() as t:
            self.assertEqual(run("split", t, "--out", os.path.join(t, "o")).returncode, 3)  # no index
            with open(os.path.join(t, "index.cbor"), "wb") as f:
                f.write(b"\xa1garbage")
            self.assertEqual(run("split", t, "--out", os.path.join(t, "o")).returncode, 3)
            self.assertEqual(run("split", t, "--out", os.path.join(t, "o"), "--keep", os.path.join(t, "nope.csv")).returncode, 2)
            self.assertEqual(run("split", t, "--out", os.path.join(t, "o"), "--folds", "1").returncode, 2)
            self.assertEqual(run("split", "--help").returncode, 0)

    def test_no_command_writes_inside_root(self):
        # Whichever command writes (audit, split) and whichever file (--out, --junit),
        # a target inside the audited ROOT exits 2 with a message and writes nothing.
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            audit_out = os.path.join(t, "a")
            self.assertEqual(run("audit", root, "--out", audit_out).returncode, 0)
            before = snapshot(root)
            cases = [("audit", root, "--out", os.path.join(root, "o")),
                     ("audit", root, "--out", os.path.join(t, "b"), "--junit", os.path.join(root, "j.xml")),
                     ("split", audit_out, "--out", os.path.join(root, "o")),
                     ("split", audit_out, "--out", os.path.join(t, "s"), "--junit", os.path.join(root, "j.xml")),
                     ("split", audit_out, "--out", os.path.join(t, "s"), "--junit", os.path.join(root, "c", "j.xml")),
                     ("export", audit_out, "--to", os.path.join(root, "tree")),
                     ("export", audit_out, "--to", os.path.join(root, "c", "tree"), "--mode", "copy")]
            for args in cases:
                r = run(*args)
                self.assertEqual(r.returncode, 2, args)
                self.assertIn("inside ROOT", r.stderr, args)
                self.assertEqual(snapshot(root), before, args)
            self.assertFalse(os.path.exists(os.path.join(t, "b")))
            self.assertFalse(os.path.exists(os.path.join(t, "s")))  # refused before the output folder is made

    def test_root_seen_through_a_bind_mount_is_still_root(self):
        # ROOT bind-mounted elsewhere (mount(8) --bind; needs root and CAP_SYS_ADMIN,
        # else skipped): --out, --junit and --cache through the other path are inside
        # ROOT (the same folder by device and inode) and refused, nothing written.
        if os.geteuid() != 0:
            self.skipTest("bind mounts need root")
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            other = os.path.join(t, "other")
            os.mkdir(other)
            m = subprocess.run(["mount", "--bind", root, other], capture_output=True)
            if m.returncode != 0:
                self.skipTest("mount --bind not permitted here")
            try:
                before = snapshot(root)
                for extra in (["--out", os.path.join(other, "o")],
                              ["--out", os.path.join(t, "o"), "--junit", os.path.join(other, "j.xml")],
                              ["--out", os.path.join(t, "o"), "--cache", os.path.join(other, "c", "x.sqlite")]):
                    r = run("audit", root, *extra)
                    self.assertEqual(r.returncode, 2, extra)
                    self.assertIn("inside ROOT", r.stderr, extra)
                    self.assertEqual(snapshot(root), before, extra)
            finally:
                subprocess.run(["umount", other], capture_output=True)

    def test_names_from_the_data_set_reach_the_terminal_escaped(self):
        # A class folder named with a terminal escape and a newline, holding a byte
        # copy of a file in another class: the label-conflict line of the summary
        # names both classes, with the control characters written as \\xNN.
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            bad = "bad\x1b[31mred\nline"
            os.makedirs(os.path.join(root, bad))
            shutil.copy(os.path.join(root, "c", "a.png"), os.path.join(root, bad, "a.png"))
            r = run("audit", root, "--out", os.path.join(t, "o"), "--no-cache")
            self.assertEqual(r.returncode, 1, r.stderr)
            self.assertNotIn("\x1b", r.stdout)
            line = [l for l in r.stdout.splitlines() if "label-conflict" in l and "labels" in l]
            self.assertEqual(len(line), 1)
            self.assertIn("bad\\x1b[31mred\\x0aline", line[0])

    def test_fifos_are_reported_and_never_opened(self):
        # A FIFO among the images (os.mkfifo): opening it to read would wait for a
        # writer forever; the walk reports it and leaves it alone, with and without
        # the cache, and tamis split keeps the finding from the saved index.
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            os.mkfifo(os.path.join(root, "c", "pipe.png"))
            for k, cache in enumerate((["--cache", os.path.join(t, "c.sqlite")], ["--no-cache"])):
                out = os.path.join(t, "out%d" % k)
                r = run("audit", root, "--out", out, *cache, timeout=60)
                self.assertEqual(r.returncode, 0, r.stderr)
                findings = {f["code"]: f for f in load_json(os.path.join(out, "report.json"))["findings"]}
                self.assertEqual(findings["special-file"]["paths"], ["c/pipe.png"])
                self.assertEqual(load_json(os.path.join(out, "report.json"))["totals"]["files_seen"], 1)
            r = run("split", os.path.join(t, "out0"), "--out", os.path.join(t, "s"), timeout=60)
            self.assertEqual(r.returncode, 0, r.stderr)
            codes = [f["code"] for f in load_json(os.path.join(t, "s", "report.json"))["findings"]]
            self.assertIn("special-file", codes)

    def test_manifest_is_utf8_and_names_that_are_not_come_back_exactly(self):
        # File and folder names with bytes that are not UTF-8 (Latin-1 bytes, a
        # lone continuation byte, a UTF-8-encoded surrogate, which RFC 3629 and
        # Python's codec reject) beside valid names with '%'. The manifest must
        # decode with Python's strict UTF-8 codec (what pandas' read_csv uses), the
        # escaped rows say "percent" in name_escape, and percent-decoding (Python's
        # urllib.parse.unquote_to_bytes, a reference independent of tamis) gives
        # the bytes os.listdir gives; --keep with that manifest keeps every row.
        import urllib.parse
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data").encode()
            names = [(b"caf\xe9", b"a\xff.png"), (b"caf\xe9", b"b.png"), (b"ok", b"100%.png"),
                     (b"ok", b"x\xed\xa0\x80.png"), (b"ok", b"\x80lone.png"), (b"ok", "é.png".encode())]
            for d, n in names:
                os.makedirs(os.path.join(root, d), exist_ok=True)
                with open(os.path.join(root, d, n), "wb") as f:
                    f.write(tiny_png())
            out = os.path.join(t, "out")
            r = run("audit", root.decode("utf-8", "surrogateescape"), "--out", out, "--no-cache", timeout=60)
            self.assertEqual(r.returncode, 0, r.stderr)
            with open(os.path.join(out, "manifest.csv"), "rb") as f:
                text = f.read().decode("utf-8")  # strict: raises on any invalid byte
            rows = list(csv.DictReader(io.StringIO(text, newline="")))
            self.assertEqual(len(rows), len(names))
            got = {}
            for row in rows:
                if row["name_escape"] == "percent":
                    got[urllib.parse.unquote_to_bytes(row["path"])] = urllib.parse.unquote_to_bytes(row["label"])
                else:
                    self.assertEqual(row["name_escape"], "")
                    got[row["path"].encode()] = row["label"].encode()
            want = {d + b"/" + n: d for d, n in names}
            self.assertEqual(got, want)
            escaped = sorted(row["path"] for row in rows if row["name_escape"] == "percent")
            # Valid names stay as they are (a '%' in a valid row is not escaped).
            self.assertIn("ok/100%.png", [row["path"] for row in rows])
            self.assertIn("ok/é.png", [row["path"] for row in rows])
            self.assertEqual(len(escaped), 4)
            self.assertIn("caf%E9/a%FF.png", escaped)
            # --keep reads the escaped paths back: every image keeps its split.
            out2 = os.path.join(t, "out2")
            r = run("audit", root.decode("utf-8", "surrogateescape"), "--out", out2, "--no-cache",
                    "--keep", os.path.join(out, "manifest.csv"), "--seed", "99", timeout=60)
            self.assertEqual(r.returncode, 0, r.stderr)
            with open(os.path.join(out2, "manifest.csv"), encoding="utf-8", newline="") as f:
                rows2 = {row["path"]: row["split"] for row in csv.DictReader(f)}
            self.assertEqual(rows2, {row["path"]: row["split"] for row in rows})

    def test_library_messages_never_reach_the_terminal(self):
        # Files that make the decoding libraries talk: a 16-bit PNG (ISO/IEC 15948,
        # built here with Python's zlib) whose iCCP chunk is too short (libpng
        # warns; OpenCV decodes 16-bit PNGs), and a Pillow TIFF whose
        # PhotometricInterpretation tag (262) is renamed (OpenCV prints "can't read
        # header" on std::cerr). With --quiet, stderr stays empty and both files
        # are accounted for: the PNG read, the TIFF unreadable with its reason.
        import struct
        import zlib
        from PIL import Image
        def chunk(kind, data):
            return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            os.makedirs(os.path.join(root, "a"))
            rows = b"".join(b"\0" + bytes([1, 100]) * 8 for _ in range(8))
            png = (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 8, 8, 16, 0, 0, 0, 0)) +
                   chunk(b"iCCP", b"bogus\0\0" + zlib.compress(b"not a profile" * 10)) +
                   chunk(b"IDAT", zlib.compress(rows)) + chunk(b"IEND", b""))
            with open(os.path.join(root, "a", "deep.png"), "wb") as f:
                f.write(png)
            tif = os.path.join(root, "a", "nophoto.tif")
            Image.new("RGB", (40, 30), (200, 10, 10)).save(tif)
            b = bytearray(read_bytes(tif))
            self.assertEqual(b[:2], b"II")
            ifd = struct.unpack("<I", b[4:8])[0]
            for k in range(struct.unpack("<H", b[ifd:ifd + 2])[0]):
                e = ifd + 2 + 12 * k
                if struct.unpack("<H", b[e:e + 2])[0] == 262:
                    b[e:e + 2] = struct.pack("<H", 263)
            with open(tif, "wb") as f:
                f.write(bytes(b))
            out = os.path.join(t, "out")
            r = run("audit", root, "--out", out, "--no-cache", "--quiet", "--threads", "2", timeout=60)
            self.assertIn(r.returncode, (0, 1), r.stderr)
            self.assertEqual(r.stderr, "")
            with open(os.path.join(out, "manifest.csv"), encoding="utf-8", newline="") as f:
                rows = {row["path"]: row for row in csv.DictReader(f)}
            self.assertEqual(rows["a/deep.png"]["reason"], "")
            self.assertEqual(rows["a/deep.png"]["bit_depth"], "16")
            self.assertEqual(rows["a/nophoto.tif"]["reason"], "decode-failed")
            # Without --quiet, tamis's own lines still reach stderr (the silencing is
            # limited to the libraries).
            r = run("audit", root, "--out", os.path.join(t, "out2"), "--no-cache", "--timings", timeout=60)
            self.assertIn("tamis:", r.stderr)
            self.assertNotIn("imdecode", r.stderr)
            self.assertNotIn("libpng", r.stderr)

    def test_one_large_image_stays_within_its_memory_budget(self):
        # A 9000 x 9000 RGBA PNG (ISO/IEC 15948, written here with Python's zlib)
        # needs 648 MB decoded in full (pixels and one copy); decoded a row at a
        # time it fits in far less: the whole audit's peak resident memory (the
        # child's own, from wait4) stays under 200 MB. A 3000 x 3000 palette PNG
        # (Pillow) must be decoded in full (libpng): under --image-memory-mb 16 it
        # is reported (reason and finding over-memory-budget, a warning) and left
        # out, not read; under the default budget it is read.
        import struct
        import zlib
        from PIL import Image
        def chunk(kind, data):
            return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
        w = h = 9000
        co = zlib.compressobj(1)
        rows = [b"\0" + bytes([(x * 7 + y * 13) % 256 for x in range(60)]) * (w * 4 // 60) for y in range(16)]
        data = b"".join(co.compress(rows[(y // 250) % 16]) for y in range(h)) + co.flush()
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            for c in ("a", "b"):
                os.makedirs(os.path.join(root, c))
            with open(os.path.join(root, "a", "large.png"), "wb") as f:
                f.write(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 6, 0, 0, 0)) +
                        chunk(b"IDAT", data) + chunk(b"IEND", b""))
            pal = Image.new("P", (3000, 3000), 3)
            pal.putpalette([v for i in range(256) for v in (i, 255 - i, (i * 5) % 256)])
            pal.save(os.path.join(root, "b", "palette.png"))
            out = os.path.join(t, "out")
            child = subprocess.Popen([TAMIS, "audit", root, "--out", out, "--no-cache", "--quiet", "--threads", "2"],
                                     stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
            _, status, usage = os.wait4(child.pid, 0)
            child.returncode = os.waitstatus_to_exitcode(status)
            self.assertEqual(child.returncode, 0, child.stderr.read())
            if "ASAN_OPTIONS" not in os.environ:  # AddressSanitizer's shadow and quarantine are not tamis's
                self.assertLess(usage.ru_maxrss * 1024, 200 << 20)
            with open(os.path.join(out, "manifest.csv"), encoding="utf-8", newline="") as f:
                rows = {row["path"]: row for row in csv.DictReader(f)}
            self.assertEqual((rows["a/large.png"]["reason"], rows["a/large.png"]["width"]), ("", "9000"))
            self.assertEqual(rows["b/palette.png"]["reason"], "")
            out2 = os.path.join(t, "out2")
            r = run("audit", root, "--out", out2, "--no-cache", "--image-memory-mb", "16", "--format", "json",
                    timeout=120)
            self.assertEqual(r.returncode, 0, r.stderr)
            with open(os.path.join(out2, "manifest.csv"), encoding="utf-8", newline="") as f:
                rows = {row["path"]: row for row in csv.DictReader(f)}
            self.assertEqual(rows["a/large.png"]["reason"], "")
            self.assertEqual(rows["b/palette.png"]["reason"], "over-memory-budget")
            report = load_json(os.path.join(out2, "report.json"))
            found = [f for f in report["findings"] if f["code"] == "over-memory-budget"]
            self.assertEqual(len(found), 1)
            self.assertEqual((found[0]["severity"], found[0]["paths"]), ("warning", ["b/palette.png"]))
            self.assertEqual(report["settings"]["max_image_bytes"], 16 << 20)
            validate_report(self, os.path.join(out2, "report.json"))
            self.assertEqual(run("audit", root, "--out", out2, "--image-memory-mb", "8").returncode, 2)

    def test_thumbnails_in_a_scratch_file_change_no_output_and_never_land_in_root(self):
        # --thumbnail-memory-mb 0 keeps every thumbnail in an unnamed scratch file in
        # $TMPDIR: the four outputs equal those of a run that keeps them in memory
        # (truth: the same build), the scratch folder is empty afterwards, and a
        # $TMPDIR inside ROOT is not used (ROOT unchanged, same outputs).
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            scratch = os.path.join(t, "scratch")
            os.mkdir(scratch)
            inside = os.path.join(root, "gingham")
            before = snapshot(root)
            outs = {}
            for name, mb, tmpdir in (("memory", "1024", scratch), ("spilled", "0", scratch), ("inside", "0", inside)):
                outs[name] = os.path.join(t, name)
                r = run("audit", root, "--out", outs[name], "--no-cache", "--thumbnail-memory-mb", mb,
                        env=dict(os.environ, TMPDIR=tmpdir), timeout=120)
                self.assertIn(r.returncode, (0, 1), r.stderr)
            for f in ("manifest.csv", "report.json", "report.html", "index.cbor"):
                for name in ("spilled", "inside"):
                    self.assertEqual(read_bytes(os.path.join(outs[name], f)), read_bytes(os.path.join(outs["memory"], f)),
                                     f"{name}: {f}")
            self.assertEqual(os.listdir(scratch), [])
            self.assertEqual(snapshot(root), before)
            self.assertEqual(run("audit", root, "--out", outs["memory"], "--thumbnail-memory-mb", "-1").returncode, 2)

    def test_report_records_root_as_an_absolute_path(self):
        # ROOT given relative (with a trailing slash, and through "..") is recorded
        # absolute in report.json (schema: python3-jsonschema) and the manifest's
        # paths joined onto it name the files; a ROOT whose name is not UTF-8 is
        # recorded in the manifest's percent escape.
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            os.makedirs(os.path.join(t, "work"))
            out = os.path.join(t, "out")
            r = subprocess.run([TAMIS, "audit", "../data/", "--out", out, "--no-cache"], cwd=os.path.join(t, "work"),
                               capture_output=True, text=True)
            self.assertIn(r.returncode, (0, 1), r.stderr)
            report = load_json(os.path.join(out, "report.json"))
            # the working folder as the kernel gives it (links resolved), then "../data"
            self.assertEqual(report["root"], {"path": os.path.realpath(root), "escaped": False})
            validate_report(self, os.path.join(out, "report.json"))
            with open(os.path.join(out, "manifest.csv"), encoding="utf-8", newline="") as f:
                for row in csv.DictReader(f):
                    self.assertTrue(os.path.isfile(os.path.join(report["root"]["path"], row["path"])))
            odd = os.path.join(t.encode(), b"caf\xe9")
            os.rename(root.encode(), odd)
            r = subprocess.run([TAMIS.encode(), b"audit", odd, b"--out", out.encode(), b"--no-cache"], capture_output=True)
            self.assertIn(r.returncode, (0, 1), r.stderr)
            report = load_json(os.path.join(out, "report.json"))
            self.assertEqual(report["root"], {"path": t + "/caf%E9", "escaped": True})  # as given: absolute already

    def test_output_sets_stay_whole_under_faults_and_kills(self):
        # Fault injection (TAMIS_FAULT, atomic_file.cc) at every step of writing
        # the outputs: each temporary's write, its fsync, the removal of the old
        # set file, each rename, the set file's rename; each made to fail (exit 3,
        # the cause named, the previous set untouched, no temporary left) and
        # killed with SIGKILL there (each file is the old one or the new one; the
        # set file, when present, lists exactly the files there, checked with
        # python3-xxhash's XXH3-64, the reference implementation's binding; the
        # next run completes the new set and removes the dead run's temporaries).
        import xxhash
        names = ["index.cbor", "manifest.csv", "report.html", "report.json"]
        def files(d):
            return {n: read_bytes(os.path.join(d, n)) for n in names}
        def set_ok(d):
            path = os.path.join(d, "tamis-set.json")
            if not os.path.exists(path):
                return False
            listed = {f["name"]: f for f in load_json(path)["files"]}
            self.assertEqual(sorted(listed), names)
            for n, f in listed.items():
                data = read_bytes(os.path.join(d, n))
                if len(data) != f["bytes"] or xxhash.xxh3_64(data).hexdigest() != f["xxh3_64"]:
                    return False
            return True
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            old_dir, new_dir = os.path.join(t, "old"), os.path.join(t, "new")
            self.assertEqual(run("audit", root, "--out", old_dir, "--no-cache", "--quiet").returncode, 0)
            with open(os.path.join(root, "c", "b.png"), "wb") as f:
                f.write(tiny_png())
            self.assertEqual(run("audit", root, "--out", new_dir, "--no-cache", "--quiet").returncode, 0)
            old, new = files(old_dir), files(new_dir)
            self.assertTrue(set_ok(old_dir) and set_ok(new_dir))
            self.assertNotEqual(old["manifest.csv"], new["manifest.csv"])
            steps = [("write", n) for n in range(1, 5)] + [("sync", n) for n in range(1, 5)] + \
                    [("unlink", 1)] + [("rename", n) for n in range(1, 5)] + [("set", 1)]
            checked = 0
            for step, n in steps:
                for action in ("fail", "kill"):
                    out = os.path.join(t, "out-%s-%d-%s" % (step, n, action))
                    shutil.copytree(old_dir, out)
                    env = dict(os.environ, TAMIS_FAULT="%s:%d:%s" % (step, n, action))
                    r = subprocess.run([TAMIS, "audit", root, "--out", out, "--no-cache", "--quiet"],
                                       capture_output=True, text=True, env=env, timeout=60)
                    now = files(out)
                    leftovers = [e for e in os.listdir(out) if ".tmp-" in e]
                    what = "%s %d %s" % (step, n, action)
                    if action == "fail":
                        if step == "set":  # the four are in place; only the set file is missing
                            self.assertEqual(r.returncode, 3, what)
                            self.assertEqual(now, new, what)
                            self.assertFalse(os.path.exists(os.path.join(out, "tamis-set.json")), what)
                        elif step == "rename" and n > 1:  # some renamed: no set file says so
                            self.assertEqual(r.returncode, 3, what)
                            self.assertFalse(os.path.exists(os.path.join(out, "tamis-set.json")), what)
                        else:
                            self.assertEqual(r.returncode, 3, what + r.stderr)
                            self.assertEqual(now, old, what)
                            self.assertTrue(set_ok(out), what)
                        self.assertIn("Input/output error", r.stderr, what)
                        self.assertEqual(leftovers, [], what)
                    else:
                        self.assertEqual(r.returncode, -9, what)
                    for k in names:
                        self.assertIn(now[k], (old[k], new[k]), what + " " + k)
                    if os.path.exists(os.path.join(out, "tamis-set.json")):
                        self.assertTrue(set_ok(out), what)
                        self.assertTrue(now == old or now == new, what)
                    else:
                        self.assertTrue(step in ("rename", "set") or (step == "unlink" and action == "kill"), what)
                    r = run("audit", root, "--out", out, "--no-cache", "--quiet")
                    self.assertEqual(r.returncode, 0, what + r.stderr)
                    self.assertEqual(files(out), new, what)
                    self.assertTrue(set_ok(out), what)
                    self.assertEqual([e for e in os.listdir(out) if ".tmp-" in e], [], what)
                    checked += 1
            self.assertEqual(checked, 28)

    def test_a_folder_named_like_an_output_leaves_the_set_untouched(self):
        # report.html is a folder in --out: nothing is renamed, exit 3 names it.
        with tempfile.TemporaryDirectory() as t:
            root = one_image_tree(t)
            out = os.path.join(t, "out")
            self.assertEqual(run("audit", root, "--out", out, "--no-cache", "--quiet").returncode, 0)
            before = {n: read_bytes(os.path.join(out, n)) for n in ("manifest.csv", "report.json", "index.cbor")}
            os.remove(os.path.join(out, "report.html"))
            os.mkdir(os.path.join(out, "report.html"))
            with open(os.path.join(root, "c", "b.png"), "wb") as f:
                f.write(tiny_png())
            r = run("audit", root, "--out", out, "--no-cache", "--quiet")
            self.assertEqual(r.returncode, 3)
            self.assertIn("a folder has that name", r.stderr)
            after = {n: read_bytes(os.path.join(out, n)) for n in before}
            self.assertEqual(after, before)
            self.assertEqual([e for e in os.listdir(out) if ".tmp-" in e], [])

    def test_schema_rejects_a_report_that_breaks_it(self):
        import jsonschema
        schema = load_json(SCHEMA)
        bad = {"schema_version": 1, "tool": {"name": "tamis", "version": "0"}, "settings": {"seed": 1},
               "totals": {"files_seen": -1}, "classes": [], "groups": [], "findings": [{"code": "Bad Code"}],
               "ignored": [], "unreadable": []}
        errors = list(jsonschema.Draft202012Validator(schema).iter_errors(bad))
        self.assertGreaterEqual(len(errors), 3)

    def test_opencv_codecs_are_loaded_only_when_a_file_needs_them(self):
        # The binary does not link libopencv_imgcodecs (about 120 libraries more to
        # map at start-up); a TIFF and a 16-bit PNG (written by Pillow) still decode,
        # through the library opened on demand.
        ldd = subprocess.run(["ldd", TAMIS], capture_output=True, text=True)
        self.assertEqual(ldd.returncode, 0)
        self.assertNotIn("libopencv_imgcodecs", ldd.stdout)
        from PIL import Image
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            os.makedirs(os.path.join(root, "a"))
            Image.new("RGB", (40, 30), (200, 10, 10)).save(os.path.join(root, "a", "red.tif"))
            Image.new("I;16", (20, 50), 4000).save(os.path.join(root, "a", "deep.png"))
            out = os.path.join(t, "out")
            run("audit", root, "--out", out, "--quiet", "--no-cache")
            with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
                rows = {r["path"]: r for r in csv.DictReader(f)}
            self.assertEqual((rows["a/red.tif"]["width"], rows["a/red.tif"]["height"], rows["a/red.tif"]["reason"]),
                             ("40", "30", ""))
            self.assertEqual((rows["a/deep.png"]["width"], rows["a/deep.png"]["height"], rows["a/deep.png"]["reason"]),
                             ("20", "50", ""))
            self.assertEqual(rows["a/deep.png"]["bit_depth"], "16")

    def test_the_index_is_one_well_formed_cbor_item(self):
        # cbor2 (Debian python3-cbor2), an independent RFC 8949 decoder, reads the
        # index that tamis writes record by record: one item, nothing after it.
        import cbor2
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            out = os.path.join(t, "out")
            run("audit", root, "--out", out, "--quiet")
            with open(os.path.join(out, "index.cbor"), "rb") as f:
                data = f.read()
            stream = io.BytesIO(data)
            index = cbor2.CBORDecoder(stream).decode()
            self.assertEqual(stream.tell(), len(data))
            self.assertEqual(list(index), sorted(index))  # keys in sorted order, as one coded object
            report = load_json(os.path.join(out, "report.json"))
            self.assertEqual(len(index["records"]), report["totals"]["files_seen"])
            with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
                manifest = {row["path"] for row in csv.DictReader(f)}
            paths = {r[0].decode("utf-8") for r in index["records"]}
            self.assertTrue(manifest <= paths)
            self.assertEqual([r[0] for r in index["records"]], sorted(r[0] for r in index["records"]))

    # Every problem the demo plants (src/demo/demo.cc; README.md's tour), as
    # (code, paths): the audit must report each of them and nothing else. The
    # truth is the demo writer's own (it planted them); the facts that do not
    # rest on tamis's judgement are checked against Pillow below.
    DEMO_FINDINGS = [
        ("unreadable", ("gingham/swatch_091.jpg",)),                   # a JPEG cut off halfway
        ("unreadable", ("pinstripe/swatch_092.png",)),                 # a text file named like an image
        ("byte-identical", ("houndstooth/swatch_001.jpg", "houndstooth/swatch_090.jpg")),
        ("byte-identical", ("gingham/swatch_001.jpg", "pinstripe/swatch_090.jpg")),
        ("label-conflict", ("gingham/swatch_001.jpg", "pinstripe/swatch_090.jpg")),  # the copy under another class
        ("look-alike", ("polka_dots/swatch_001.jpg", "polka_dots/swatch_090.jpg")),  # mirrored, JPEG 70
        ("look-alike", ("houndstooth/swatch_002.jpg", "houndstooth/swatch_094.png")),  # re-encoded as PNG
        ("look-alike", ("gingham/swatch_002.jpg", "gingham/swatch_090.jpg")),  # Gaussian blur, sigma 1 px
        ("mask-size-mismatch", ("tartan/images/swatch_005.jpg", "tartan/masks/swatch_005.png")),
        ("mask-empty", ("tartan/masks/swatch_006.png",)),
        ("mask-orphan", ("tartan/masks/swatch_031.png",)),
        ("gray-as-rgb", ("gingham/swatch_092.jpg",)),
        ("alpha-unused", ("pinstripe/swatch_093.png",)),
        ("deep-bit-depth", ("houndstooth/swatch_092.png",)),
        ("tiny-image", ("polka_dots/swatch_091.jpg",)),
        ("below-input-size", ("polka_dots/swatch_091.jpg",)),          # 24x21: under 224 px as well
        ("near-uniform", ("gingham/swatch_093.jpg",)),                 # a blank frame
        ("underexposed", ("polka_dots/swatch_093.jpg",)),              # a dark frame...
        ("unsharp", ("houndstooth/swatch_095.jpg", "polka_dots/swatch_093.jpg")),  # ...is flat too; a blurred frame
        ("exif-rotated", ("polka_dots/swatch_092.jpg",)),
        ("gps-location", ("gingham/swatch_094.jpg",)),
        ("label-variants", None),                                      # polka_dots and polka-dots
        ("small-class", None),                                         # herringbone (4)
        ("small-class", None),                                         # polka-dots (4)
        ("class-imbalance", ()),                                       # gingham 60+ against 4
        ("split-without-class", ()),                                   # 4 images cannot fill 70/15/15...
        ("split-without-class", ()),                                   # ...in both small classes
        ("stray-file", ("README.txt", "gingham/.thumbs.db")),
    ]

    def test_demo_audit_reports_every_planted_problem_and_nothing_else(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            out = os.path.join(t, "out")
            r = run("audit", root, "--out", out, "--threads", "2", "--no-cache")
            self.assertEqual(r.returncode, 1, r.stderr)
            validate_report(self, os.path.join(out, "report.json"))
            report = load_json(os.path.join(out, "report.json"))
            found = [(f["code"], None if f["code"] in ("label-variants", "small-class") else tuple(sorted(f["paths"])))
                     for f in report["findings"]]
            from collections import Counter
            self.assertEqual(Counter(found), Counter(self.DEMO_FINDINGS))
            small = sorted(tuple(sorted(f["paths"])) for f in report["findings"] if f["code"] == "small-class")
            self.assertEqual([p[0].split("/")[0] for p in small], ["herringbone", "polka-dots"])
            self.assertEqual([len(p) for p in small], [4, 4])
            variants = [f for f in report["findings"] if f["code"] == "label-variants"]
            self.assertEqual({p.split("/")[0] for p in variants[0]["paths"]}, {"polka_dots", "polka-dots"})
            # Masks: the sibling-folder layout found, every photograph of tartan paired.
            self.assertEqual(report["totals"]["masks"], 31)
            self.assertEqual(len(report["masks"]["pairs"]), 30)
            self.assertEqual(report["totals"]["unreadable"], 2)
            ignored = {e["path"]: e["reason"] for e in report["ignored"]}
            self.assertEqual(ignored, {"README.txt": "not-an-image", "gingham/.thumbs.db": "hidden"})
            # The 4:1:1 JPEG is read, with no finding (a rare layout is not an error).
            rows = {row["path"]: row for row in csv.DictReader(io.StringIO(read_text(os.path.join(out, "manifest.csv"))))}
            self.assertEqual((rows["houndstooth/swatch_091.jpg"]["finding_codes"], rows["houndstooth/swatch_091.jpg"]["width"]),
                             ("", "256"))
            # The planted facts, as Pillow (the reference decoder) sees them.
            from PIL import Image
            def sampling(path):
                with Image.open(path) as im:
                    return [(c[1], c[2]) for c in im.layer]  # (h, v) per component
            with Image.open(os.path.join(root, "houndstooth/swatch_091.jpg")) as im:
                im.load()
                self.assertEqual((im.size, im.mode), ((256, 224), "RGB"))
            self.assertEqual(sampling(os.path.join(root, "houndstooth/swatch_091.jpg")), [(4, 1), (1, 1), (1, 1)])
            with Image.open(os.path.join(root, "polka_dots/swatch_092.jpg")) as im:
                self.assertEqual(im.getexif().get(0x0112), 6)
            with Image.open(os.path.join(root, "gingham/swatch_094.jpg")) as im:
                gps = im.getexif().get_ifd(0x8825)
                self.assertEqual((gps.get(1), gps.get(3)), ("N", "W"))
                self.assertEqual(len(gps.get(2)), 3)
            with open(os.path.join(root, "houndstooth/swatch_092.png"), "rb") as f:
                self.assertEqual(f.read(26)[24], 16)  # IHDR bit depth (ISO/IEC 15948): 16 bits a sample
            with Image.open(os.path.join(root, "pinstripe/swatch_093.png")) as im:
                self.assertEqual(im.mode, "RGBA")
                self.assertEqual(im.getchannel("A").getextrema(), (255, 255))
            with Image.open(os.path.join(root, "tartan/masks/swatch_005.png")) as mask, \
                    Image.open(os.path.join(root, "tartan/images/swatch_005.jpg")) as photo:
                self.assertNotEqual(mask.size, photo.size)
            with Image.open(os.path.join(root, "tartan/masks/swatch_006.png")) as mask:
                self.assertEqual(mask.getextrema(), (0, 0))
            with Image.open(os.path.join(root, "polka_dots/swatch_091.jpg")) as im:
                self.assertLess(min(im.size), 32)
            with self.assertRaises(OSError):
                with Image.open(os.path.join(root, "gingham/swatch_091.jpg")) as im:
                    im.load()
            with self.assertRaises(OSError):
                Image.open(os.path.join(root, "pinstripe/swatch_092.png"))
            self.assertFalse(os.path.exists(os.path.join(root, "tartan/images/swatch_031.jpg")))
            # A few hundred images, and small enough to commit.
            self.assertGreaterEqual(report["totals"]["images"], 200)
            size = sum(os.path.getsize(os.path.join(d, n)) for d, _, ns in os.walk(root) for n in ns)
            self.assertLess(size, 3_000_000)

    def test_readme_tour_is_what_the_demo_gives(self):
        # README.md's tour: its summary lines are the demo audit's own, and its pandas
        # snippet runs on the outputs (pandas, Debian python3-pandas).
        readme = read_text(os.path.join(REPO, "README.md"))
        tour = readme[readme.index("## A first run: the demo"):readme.index("## Exit status")]
        with tempfile.TemporaryDirectory() as t:
            root, out = os.path.join(t, "swatches"), os.path.join(t, "swatches-audit")
            self.assertEqual(run("demo", root).returncode, 0)
            r = run("audit", root, "--out", out, "--no-cache")
            self.assertEqual(r.returncode, 1)
            shown = re.search(r"```\n(files seen .*?)```", tour, re.S).group(1).splitlines()
            for line in shown:
                if line.strip() != "...":
                    self.assertIn(line, r.stdout.splitlines())
            snippet = re.search(r"```python\n(.*?)```", tour, re.S).group(1)
            code = snippet + "\nassert len(train) > 100 and len(flagged) > 10 and len(copies) == 5\n"
            p = subprocess.run([sys.executable, "-c", code], cwd=t, capture_output=True, text=True)
            self.assertEqual(p.returncode, 0, p.stderr)

    def test_demo_writes_exactly_the_committed_demo_data(self):
        # tamis demo regenerates demo_data/ byte for byte, whatever the compiler
        # (a clang build drew the demo's colours in another order once: function
        # arguments are evaluated in an unspecified order); compared file by file.
        committed = os.path.join(REPO, "demo_data")
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            def tree(d):
                out = {}
                for base, _, files in os.walk(d):
                    for n in files:
                        p = os.path.join(base, n)
                        with open(p, "rb") as f:
                            out[os.path.relpath(p, d)] = f.read()
                return out
            made, kept = tree(root), tree(committed)
            self.assertEqual(sorted(made), sorted(kept))
            for name in kept:
                self.assertEqual(made[name], kept[name], name)

def make_clean_tree(root, per_class=12):
    for c in ("alder", "birch"):
        os.makedirs(os.path.join(root, c), exist_ok=True)
        for i in range(per_class):
            with open(os.path.join(root, c, f"{i}.png"), "wb") as f:
                f.write(tiny_png())


class Policy(unittest.TestCase):
    def audit(self, root, out, *extra):
        return run("audit", root, "--out", out, "--quiet", *extra)

    def write_policy(self, t, obj):
        path = os.path.join(t, "policy.json")
        with open(path, "w") as f:
            f.write(obj if isinstance(obj, str) else json.dumps(obj))
        return path

    def test_severities_and_thresholds_change_the_exit_status(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            make_clean_tree(root)
            out = os.path.join(t, "o")
            self.assertEqual(self.audit(root, out).returncode, 0)
            # 8x8 images are below the default min_side of 32: tiny-image, a warning by default.
            p = self.write_policy(t, {"severity": {"tiny-image": "error"}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 1)
            p = self.write_policy(t, {"severity": {"tiny-image": "error"}, "thresholds": {"min_side": 8}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 0)
            # small-class: 12 images, min_class 20 -> warning; made an error -> fails.
            p = self.write_policy(t, {"severity": {"small-class": "error"}, "thresholds": {"min_class": 20}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 1)
            # class-imbalance: 12 vs 3 images is a ratio of 4.
            for i in range(9):
                os.remove(os.path.join(root, "birch", f"{i}.png"))
            p = self.write_policy(t, {"severity": {"class-imbalance": "error"}, "thresholds": {"max_imbalance": 3}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 1)
            p = self.write_policy(t, {"severity": {"class-imbalance": "error"}, "thresholds": {"max_imbalance": 5}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 0)
            # An unreadable file is an error by default; off, or a tolerated share, passes.
            with open(os.path.join(root, "alder", "broken.png"), "wb") as f:
                f.write(tiny_png()[:50])
            self.assertEqual(self.audit(root, out).returncode, 1)
            p = self.write_policy(t, {"severity": {"unreadable": "off"}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 0)
            p = self.write_policy(t, {"severity": {"unreadable": "warning"}, "thresholds": {"max_unreadable_share": 0.2}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 0)
            p = self.write_policy(t, {"severity": {"unreadable": "warning"}, "thresholds": {"max_unreadable_share": 0.01}})
            self.assertEqual(self.audit(root, out, "--policy", p).returncode, 1)
            validate_report(self, os.path.join(out, "report.json"))

    def test_the_lookalike_section_reaches_the_groups_and_the_cache_key(self):
        # The demo holds two byte-identical pairs and three look-alike pairs (mirrored,
        # re-encoded, blurred copies). A policy that asks for a perfect match keeps the
        # first two only, with the cache as without it (the groups' cache key holds the
        # look-alike settings).
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            cache = os.path.join(t, "cache.sqlite")
            strict = self.write_policy(t, {"lookalike": {"min_correlation": 1.0, "max_local": 0}})
            kinds = {}
            for name, extra in (("default", []), ("strict", ["--policy", strict]), ("default-again", [])):
                out = os.path.join(t, name)
                self.audit(root, out, "--cache", cache, *extra)
                report = load_json(os.path.join(out, "report.json"))
                kinds[name] = sorted(g["kind"] for g in report["groups"])
                if name == "strict":
                    self.assertEqual(report["settings"]["lookalike_max_local"], 0)
                    self.assertEqual(report["settings"]["lookalike_min_correlation"], 1.0)
            self.assertEqual(kinds["default"], ["exact", "exact", "near", "near", "near"])
            self.assertEqual(kinds["strict"], ["exact", "exact"])
            self.assertEqual(kinds["default-again"], ["exact", "exact", "near", "near", "near"])

    def test_a_bad_policy_exits_2_naming_the_key(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            make_clean_tree(root, 2)
            cases = {
                '{"severty": {}}': "severty",
                '{"severity": {"no-such-code": "error"}}': "no-such-code",
                '{"severity": {"tiny-image": "fatal"}}': "tiny-image",
                '{"thresholds": {"min_sid": 3}}': "min_sid",
                '{"thresholds": {"max_imbalance": "ten"}}': "max_imbalance",
                '{"fail_on": "some"}': "fail_on",
                '[1, 2]': "object",
                '{"severity": ': "JSON",
                '{"thresholds": {"min_side": 1E400}}': "JSON",  # found by fuzz_policy: a number too large for a double
            }
            for text, key in cases.items():
                p = self.write_policy(t, text)
                r = run("audit", root, "--out", os.path.join(t, "o"), "--policy", p)
                self.assertEqual(r.returncode, 2, text)
                self.assertIn(key, r.stderr, text)
                self.assertFalse(os.path.exists(os.path.join(t, "o")), "nothing may be written on exit 2")

    def test_baseline_fails_only_the_new_duplicate(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            make_clean_tree(root)
            with open(os.path.join(root, "alder", "broken.png"), "wb") as f:
                f.write(tiny_png()[:50])  # a known problem, present in the baseline
            old = os.path.join(t, "old")
            self.assertEqual(run("audit", root, "--out", old, "--quiet").returncode, 1)
            gate = self.write_policy(t, {"fail_on": "new", "severity": {"byte-identical": "error"}})
            self.assertEqual(run("audit", root, "--out", os.path.join(t, "same"), "--quiet", "--policy", gate,
                                 "--baseline", os.path.join(old, "report.json")).returncode, 0)
            # Add a byte copy of one image: only that finding is new, and it fails the gate.
            with open(os.path.join(root, "alder", "0.png"), "rb") as f:
                data = f.read()
            with open(os.path.join(root, "alder", "0 copy.png"), "wb") as f:
                f.write(data)
            new = os.path.join(t, "new")
            junit = os.path.join(t, "junit.xml")
            r = run("audit", root, "--out", new, "--quiet", "--policy", gate, "--junit", junit,
                    "--baseline", os.path.join(old, "report.json"))
            self.assertEqual(r.returncode, 1)
            report = load_json(os.path.join(new, "report.json"))
            validate_report(self, os.path.join(new, "report.json"))
            self.assertEqual(report["baseline"]["files_added"], ["alder/0 copy.png"])
            self.assertEqual(report["baseline"]["files_removed"], [])
            new_findings = [f for f in report["findings"] if f["baseline"] == "new"]
            self.assertIn("byte-identical", [f["code"] for f in new_findings])
            for f in new_findings:  # everything new concerns the added file
                self.assertIn("alder/0 copy.png", f["paths"], f["code"])
            failing = [f["code"] for f in new_findings if f["severity"] == "error"]
            self.assertEqual(failing, ["byte-identical"])
            unreadable = [f for f in report["findings"] if f["code"] == "unreadable"]
            self.assertEqual(unreadable[0]["baseline"], "known")
            # JUnit XML, read with Python's xml.etree (a general-purpose XML parser).
            import xml.etree.ElementTree as ET
            suite = ET.parse(junit).getroot()
            cases = {c.get("name"): c for c in suite.iter("testcase")}
            self.assertIn("unreadable", cases)
            self.assertIsNotNone(cases["byte-identical"].find("failure"))
            self.assertIn("alder/0 copy.png", cases["byte-identical"].find("failure").text)
            self.assertIsNone(cases["unreadable"].find("failure"))  # known from the baseline
            self.assertEqual(int(suite.get("failures")), 1)

    def test_summary_as_json_and_no_colour_in_a_pipe(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            make_clean_tree(root, 3)
            r = run("audit", root, "--out", os.path.join(t, "o"), "--format", "json")
            summary = json.loads(r.stdout)
            self.assertEqual(summary["images"], 6)
            self.assertEqual(summary["exit_status"], r.returncode)
            # Every code with its counts, checked against report.json (read with Python's json).
            with open(os.path.join(t, "o", "report.json")) as f:
                report = json.load(f)
            want = {}
            for f in report["findings"]:
                if f["severity"] in ("error", "warning", "info"):
                    n = want.setdefault(f["code"], [f["severity"], 0, 0])
                    n[1] += 1
                    n[2] += len(f.get("paths", []))
            self.assertEqual({c["code"]: [c["severity"], c["findings"], c["files"]] for c in summary["codes"]}, want)
            self.assertEqual(summary["failing_codes"], [])
            r = run("audit", root, "--out", os.path.join(t, "o"))
            self.assertNotIn("\033[", r.stdout)
            # The text summary lists warnings and infos by code too, in singular or plural.
            for code, (severity, findings, files) in want.items():
                line = [l for l in r.stdout.splitlines() if l.split()[:2] == [severity, code]]
                self.assertEqual(len(line), 1, (code, r.stdout))
                self.assertIn(f"{findings} finding" + ("" if findings == 1 else "s"), line[0])
            # A copy under another class breaks the policy: its code is named.
            shutil.copy(os.path.join(root, "alder", "0.png"), os.path.join(root, "birch", "copied.png"))
            r = run("audit", root, "--out", os.path.join(t, "o2"), "--format", "json")
            summary = json.loads(r.stdout)
            self.assertEqual(r.returncode, 1)
            self.assertIn("label-conflict", summary["failing_codes"])


def mask_twin_tree(root):
    """Photographs with mask twins (Pillow-drawn; the truth is constructed here):
    oak/ and birch/ hold images/ beside masks/ (sibling folders); elm/ holds
    NNNN.jpg beside NNNN_mask.png; pine/ holds the same names in five subfolders
    (colliding names within one class); returns the number of images."""
    import random
    from PIL import Image, ImageDraw
    rng = random.Random(7)
    n = 0

    def photo(path, fmt):
        im = Image.new("RGB", (64, 48))
        px = im.load()
        base = [rng.randrange(256) for _ in range(3)]
        for y in range(48):
            for x in range(64):
                px[x, y] = tuple((b + rng.randrange(-60, 61) + x + y) % 256 for b in base)
        im.save(path, fmt, **({"quality": 92} if fmt == "JPEG" else {}))

    def mask(path):
        m = Image.new("L", (64, 48), 0)
        x, y = rng.randrange(5, 40), rng.randrange(5, 25)
        ImageDraw.Draw(m).ellipse([x, y, x + 20, y + 18], fill=255)
        m.save(path, "PNG")

    for cls in ("oak", "birch"):
        os.makedirs(os.path.join(root, cls, "images"))
        os.makedirs(os.path.join(root, cls, "masks"))
        for k in range(10):
            photo(os.path.join(root, cls, "images", f"{k:04d}.png"), "PNG")
            mask(os.path.join(root, cls, "masks", f"{k:04d}.png"))
            n += 1
    os.makedirs(os.path.join(root, "elm"))
    for k in range(10):
        photo(os.path.join(root, "elm", f"{k:04d}.jpg"), "JPEG")
        mask(os.path.join(root, "elm", f"{k:04d}_mask.png"))
        n += 1
    for sub in "abcde":
        os.makedirs(os.path.join(root, "pine", sub))
        for k in range(2):
            photo(os.path.join(root, "pine", sub, f"{k:04d}.png"), "PNG")
            n += 1
    return n


class Export(unittest.TestCase):
    """tamis export: every placed manifest row under TREE/<split>/<label>/ with its
    bytes (links followed), masks in TREE/masks/, lists per split. Names that
    collide in one class folder get stem~XXH3-64(path)ext, recomputed here with
    python3-xxhash (the reference implementation's binding); images opened with Pillow."""

    def expected_entries(self, rows):
        import collections
        import xxhash
        by_folder = collections.Counter((r["split"], r["label"], os.path.basename(r["path"])) for r in rows)
        out = {}
        for r in rows:
            name = os.path.basename(r["path"])
            stem, ext = os.path.splitext(name)
            mask_ext = os.path.splitext(r["mask_path"])[1] if r["mask_path"] else ""
            if by_folder[(r["split"], r["label"], name)] > 1:
                stem = stem + "~" + xxhash.xxh3_64(r["path"].encode()).hexdigest()
            out[r["path"]] = (os.path.join(r["split"], r["label"], stem + ext),
                              os.path.join("masks", r["split"], r["label"], stem + mask_ext) if r["mask_path"] else None)
        return out

    def check_export(self, t, root, out, rows):
        """Exports `out` in all three modes into t/tree-MODE and checks every entry."""
        expected = self.expected_entries(rows)
        before = snapshot(root)
        for mode in ("symlink", "hardlink", "copy"):
            tree = os.path.join(t, "tree-" + mode)
            r = run("export", out, "--to", tree, "--mode", mode)
            self.assertEqual(r.returncode, 0, r.stderr)
            files = set()
            for d, _, fs in os.walk(tree):
                files.update(os.path.relpath(os.path.join(d, f), tree) for f in fs)
            want = {"train.txt", "val.txt", "test.txt", "tamis-export.json"}
            for p, (entry, mask_entry) in expected.items():
                want.add(entry)
                src = os.path.join(root, p)
                dst = os.path.join(tree, entry)
                self.assertEqual(read_bytes(dst), read_bytes(src), (mode, p))
                if mode == "symlink":
                    self.assertEqual(os.readlink(dst), src)
                else:
                    self.assertFalse(os.path.islink(dst))
                    self.assertEqual(os.stat(dst).st_ino == os.stat(src).st_ino, mode == "hardlink")
                if mask_entry:
                    want.add(mask_entry)
                    mask_src = os.path.join(root, [row for row in rows if row["path"] == p][0]["mask_path"])
                    self.assertEqual(read_bytes(os.path.join(tree, mask_entry)), read_bytes(mask_src), (mode, p))
            self.assertEqual(files, want, mode)  # nothing else, nothing excluded
            for split in ("train", "val", "test"):
                listed = read_text(os.path.join(tree, split + ".txt")).splitlines()
                self.assertEqual(sorted(listed), sorted(os.path.join(tree, e) for p, (e, _) in expected.items()
                                                        if e.startswith(split + "/")))
            self.assertEqual(snapshot(root), before, mode)
        return expected

    def test_the_demo_exports_in_three_modes(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            out = os.path.join(t, "out")
            self.assertEqual(run("audit", root, "--out", out, "--no-cache", "--quiet").returncode, 1)
            with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
                rows = [row for row in csv.DictReader(f) if row["split"] != "excluded"]
            self.assertGreater(len(rows), 40)
            self.check_export(t, root, out, rows)

    def test_export_lays_out_the_split_in_three_modes(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            n = mask_twin_tree(root)
            out = os.path.join(t, "out")
            r = run("audit", root, "--out", out, "--no-cache", "--quiet")
            self.assertIn(r.returncode, (0, 1), r.stderr)
            with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
                all_rows = list(csv.DictReader(f))
            self.assertEqual(len(all_rows), n)
            rows = [row for row in all_rows if row["split"] in ("train", "val", "test")]
            self.assertGreater(len(rows), n - 3)
            self.assertEqual(sum(1 for row in rows if row["mask_path"]), 30)  # oak, birch, elm
            expected = self.check_export(t, root, out, rows)
            collided = sum(1 for p, (e, _) in expected.items() if "~" in e)
            self.assertGreater(collided, 1)  # pine's names collide
            # A second export into the same folder is refused; --replace replaces it.
            tree = os.path.join(t, "tree-symlink")
            r = run("export", out, "--to", tree)
            self.assertEqual(r.returncode, 2)
            self.assertIn("--replace", r.stderr)
            r = run("export", out, "--to", tree, "--replace", "--mode", "copy")
            self.assertEqual(r.returncode, 0, r.stderr)
            self.assertFalse(any(os.path.islink(os.path.join(d, f)) for d, _, fs in os.walk(tree) for f in fs))
            self.assertEqual(sorted(os.listdir(t)), ["data", "out", "tree-copy", "tree-hardlink", "tree-symlink"])
            # A folder it did not make is never replaced.
            foreign = os.path.join(t, "foreign")
            os.makedirs(foreign)
            with open(os.path.join(foreign, "notes.txt"), "w") as f:
                f.write("mine")
            for extra in ((), ("--replace",)):
                r = run("export", out, "--to", foreign, *extra)
                self.assertEqual(r.returncode, 2)
                self.assertIn("not made by tamis export", r.stderr)
            self.assertEqual(os.listdir(foreign), ["notes.txt"])
            # A folder that holds ROOT or the outputs is refused.
            self.assertEqual(run("export", out, "--to", t, "--replace").returncode, 2)
            # Hard links across file systems: a clear error, no silent copy, nothing left.
            if os.path.isdir("/dev/shm") and os.stat("/dev/shm").st_dev != os.stat(t).st_dev:
                shm = tempfile.mkdtemp(dir="/dev/shm")
                try:
                    r = run("export", out, "--to", os.path.join(shm, "tree"), "--mode", "hardlink")
                    self.assertEqual(r.returncode, 3)
                    self.assertIn("cross file systems", r.stderr)
                    self.assertEqual(os.listdir(shm), [])
                finally:
                    shutil.rmtree(shm)
            # An outputs folder whose manifest changed after the audit is refused.
            with open(os.path.join(out, "manifest.csv"), "a", encoding="utf-8") as f:
                f.write("x\n")
            r = run("export", out, "--to", os.path.join(t, "late"))
            self.assertEqual(r.returncode, 3)
            self.assertFalse(os.path.exists(os.path.join(t, "late")))

    def test_pandas_reads_the_manifest_and_its_paths_open(self):
        # The loader side: pandas.read_csv with default arguments (python3-pandas),
        # ROOT from report.json, every placed row opened with Pillow.
        import pandas
        from PIL import Image
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            n = mask_twin_tree(root)
            # One empty mask: its image's row carries the mask's finding (the mask has no row).
            Image.new("L", (64, 48), 0).save(os.path.join(root, "oak", "masks", "0003.png"))
            out = os.path.join(t, "out")
            self.assertIn(run("audit", root, "--out", out, "--no-cache", "--quiet").returncode, (0, 1))
            df = pandas.read_csv(os.path.join(out, "manifest.csv"))
            codes = dict(zip(df["path"], df["finding_codes"].fillna("")))
            self.assertIn("mask-empty", codes["oak/images/0003.png"].split(";"))
            self.assertNotIn("mask-empty", codes["oak/images/0002.png"].split(";"))
            self.assertEqual(len(df), n)
            self.assertIn("color_mode", df.columns)
            self.assertIn("finding_codes", df.columns)
            report_root = load_json(os.path.join(out, "report.json"))["root"]["path"]
            placed = df[df["split"] != "excluded"]
            self.assertGreater(len(placed), n - 3)
            for path, label in zip(placed["path"], placed["label"]):
                with Image.open(os.path.join(report_root, path)) as im:
                    im.load()
                self.assertEqual(path.split("/")[0], label)
            for split, part in placed.groupby("split"):
                self.assertIn(split, ("train", "val", "test"))
                self.assertGreater(len(part), 0)
            # docs/outputs.md's example, as written there.
            root_doc = json.load(open(os.path.join(out, "report.json")))["root"]["path"]
            df2 = pandas.read_csv(os.path.join(out, "manifest.csv"), keep_default_na=False, dtype={"group": str, "fold": str})
            train = df2[df2.split == "train"].assign(file=lambda d: d.path.map(lambda p: os.path.join(root_doc, p)))
            self.assertGreater(len(train), 0)
            self.assertTrue(all(os.path.isfile(p) for p in train.file))
            self.assertTrue((df2.mask_path == "").any())  # empty cells stay empty strings


def largest_remainder(n, percent):
    """Hamilton's method (docs/splits.md): floor shares, then one each to the largest
    fractional parts, ties to the earlier split."""
    base = [n * p // 100 for p in percent]
    order = sorted(range(3), key=lambda k: (-(n * percent[k] % 100), k))
    for k in order[:n - sum(base)]:
        base[k] += 1
    return base


class LeaveOut(unittest.TestCase):
    """--exclude-flagged and --one-per-group (docs/splits.md, Leaving images out)."""

    def read(self, out):
        with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
            return list(csv.DictReader(f))

    def test_flagged_images_and_extra_group_members_stay_out_of_the_split(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            out = os.path.join(t, "out")
            r = run("audit", root, "--out", out, "--no-cache", "--exclude-flagged", "label-conflict", "--one-per-group")
            self.assertEqual(r.returncode, 1, r.stderr)
            validate_report(self, os.path.join(out, "report.json"))
            report = load_json(os.path.join(out, "report.json"))
            self.assertEqual(report["settings"]["exclude_flagged"], ["label-conflict"])
            self.assertTrue(report["settings"]["one_per_group"])
            rows = self.read(out)
            by_path = {row["path"]: row for row in rows}
            conflicted = {p for f in report["findings"] if f["code"] == "label-conflict" for p in f["paths"]}
            self.assertGreater(len(conflicted), 1)
            for p in conflicted:
                self.assertEqual(by_path[p]["split"], "excluded")
                self.assertEqual(by_path[p]["exclusion"], "flagged:label-conflict")
            for row in rows:  # every excluded row says why; a placed one says nothing
                self.assertEqual(row["split"] == "excluded", row["exclusion"] != "", row)
            kept_one = 0
            for g in report["groups"]:
                members = [by_path[p] for p in g["paths"]]
                placed = [m for m in members if m["split"] != "excluded"]
                self.assertLessEqual(len(placed), 1, g["id"])
                others = [m for m in members if m["exclusion"] == "one-per-group"]
                if others:
                    kept_one += 1
                    self.assertEqual(len(placed), 1)
                    # The one kept: the most pixels, then the first path.
                    best = min(placed + others, key=lambda m: (-int(m["width"]) * int(m["height"]), m["path"].encode()))
                    self.assertEqual(placed[0]["path"], best["path"])
            self.assertGreater(kept_one, 0)
            # Stratified among what is left: every placed unit is one image now, so
            # each class meets its largest-remainder targets exactly.
            per_class = {}
            for row in rows:
                if row["split"] != "excluded":
                    per_class.setdefault(row["label"], [0, 0, 0])[("train", "val", "test").index(row["split"])] += 1
            for label, counts in per_class.items():
                self.assertEqual(counts, largest_remainder(sum(counts), (70, 15, 15)), label)
            # The policy keys give the same; so does `tamis split` from the saved index.
            policy = os.path.join(t, "policy.json")
            with open(policy, "w") as f:
                json.dump({"exclude_flagged": ["label-conflict"], "one_per_group": True}, f)
            out2 = os.path.join(t, "out2")
            self.assertEqual(run("audit", root, "--out", out2, "--no-cache", "--policy", policy).returncode, 1)
            self.assertEqual(read_bytes(os.path.join(out2, "manifest.csv")), read_bytes(os.path.join(out, "manifest.csv")))
            out3 = os.path.join(t, "out3")
            self.assertEqual(run("split", out2, "--out", out3, "--exclude-flagged", "label-conflict", "--one-per-group").returncode, 1)
            self.assertEqual(read_bytes(os.path.join(out3, "manifest.csv")), read_bytes(os.path.join(out, "manifest.csv")))
            # Without the options nothing is left out for these reasons.
            out4 = os.path.join(t, "out4")
            run("audit", root, "--out", out4, "--no-cache")
            self.assertFalse(any(row["exclusion"].startswith(("flagged", "one-per-group")) for row in self.read(out4)))
            # A code the split makes itself, or none at all: exit 2, nothing read.
            for code in ("class-capped", "no-such-code"):
                r = run("audit", root, "--out", os.path.join(t, "bad"), "--exclude-flagged", code)
                self.assertEqual(r.returncode, 2, code)
                self.assertIn(code, r.stderr)
                with open(policy, "w") as f:
                    json.dump({"exclude_flagged": [code]}, f)
                self.assertEqual(run("audit", root, "--out", os.path.join(t, "bad"), "--policy", policy).returncode, 2)
            self.assertFalse(os.path.exists(os.path.join(t, "bad")))


class ClassMapping(unittest.TestCase):
    """--class-alias and --exclude-class (docs/labels.md): the run's classes change,
    the data set and the saved index's labels do not."""

    def test_aliases_and_left_out_classes_reach_every_output(self):
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            before = snapshot(root)
            plain, out = os.path.join(t, "plain"), os.path.join(t, "out")
            run("audit", root, "--out", plain, "--no-cache")
            r = run("audit", root, "--out", out, "--no-cache", "--class-alias", "polka-dots=polka_dots",
                    "--exclude-class", "herringbone", "--exclude-class", "no_such_class")
            self.assertIn(r.returncode, (0, 1), r.stderr)
            self.assertEqual(snapshot(root), before)
            validate_report(self, os.path.join(out, "report.json"))
            report, plain_report = load_json(os.path.join(out, "report.json")), load_json(os.path.join(plain, "report.json"))
            with open(os.path.join(out, "manifest.csv"), newline="", encoding="utf-8") as f:
                rows = list(csv.DictReader(f))
            folder = lambda row: row["path"].split("/")[0]
            moved = [row for row in rows if folder(row) == "polka-dots"]
            left = [row for row in rows if folder(row) == "herringbone"]
            self.assertTrue(moved and left)
            for row in moved:
                self.assertEqual(row["label"], "polka_dots")
            for row in left:
                self.assertEqual((row["label"], row["split"], row["exclusion"]), ("herringbone", "excluded", "class-excluded"))
            self.assertEqual(report["class_mapping"], {
                "aliases": [{"from": "polka-dots", "to": "polka_dots", "images": len(moved)}],
                "excluded": [{"label": "herringbone", "images": len(left)}, {"label": "no_such_class", "images": 0}]})
            self.assertEqual(report["settings"]["class_aliases"], {"polka-dots": "polka_dots"})
            labels = [c["label"] for c in report["classes"]]
            self.assertNotIn("herringbone", labels)
            self.assertNotIn("polka-dots", labels)
            codes = {f["code"] for f in report["findings"]}
            plain_codes = {f["code"] for f in plain_report["findings"]}
            self.assertIn("label-variants", plain_codes)  # the two spellings, before the alias
            self.assertNotIn("label-variants", codes)
            self.assertNotIn("no-label", codes)  # a left-out class still has its folder
            with open(os.path.join(out, "report.html"), encoding="utf-8") as f:
                self.assertIn("counted as", f.read())
            # The saved index keeps the classes as read: a re-split without the map has them all.
            resplit = os.path.join(t, "resplit")
            run("split", out, "--out", resplit)
            self.assertEqual(read_bytes(os.path.join(resplit, "manifest.csv")), read_bytes(os.path.join(plain, "manifest.csv")))
            again = os.path.join(t, "again")
            run("split", out, "--out", again, "--class-alias", "polka-dots=polka_dots", "--exclude-class", "herringbone",
                "--exclude-class", "no_such_class")
            self.assertEqual(read_bytes(os.path.join(again, "manifest.csv")), read_bytes(os.path.join(out, "manifest.csv")))
            # The policy keys give the same.
            policy = os.path.join(t, "policy.json")
            with open(policy, "w") as f:
                json.dump({"class_aliases": {"polka-dots": "polka_dots"}, "exclude_classes": ["herringbone", "no_such_class"]}, f)
            by_policy = os.path.join(t, "by_policy")
            run("audit", root, "--out", by_policy, "--no-cache", "--policy", policy)
            self.assertEqual(read_bytes(os.path.join(by_policy, "manifest.csv")), read_bytes(os.path.join(out, "manifest.csv")))
            # Maps that cannot mean one thing: exit 2 before anything is read.
            for bad in (("--class-alias", "polka-dots"), ("--class-alias", "a=b", "--class-alias", "b=c"),
                        ("--class-alias", "gingham=gingham")):
                self.assertEqual(run("audit", root, "--out", os.path.join(t, "bad"), *bad).returncode, 2, bad)
            with open(policy, "w") as f:
                json.dump({"class_aliases": {"a": 3}}, f)
            self.assertEqual(run("audit", root, "--out", os.path.join(t, "bad"), "--policy", policy).returncode, 2)
            self.assertFalse(os.path.exists(os.path.join(t, "bad")))


class Accept(unittest.TestCase):
    """The policy's accept list: accepted findings stay in every report, marked,
    and no longer break the policy; entries that accept nothing are listed."""

    def test_accepted_findings_pass_the_gate_and_stay_visible(self):
        import xml.etree.ElementTree as ET  # Python's XML parser reads the JUnit file
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "demo")
            self.assertEqual(run("demo", root).returncode, 0)
            plain = os.path.join(t, "plain")
            self.assertEqual(run("audit", root, "--out", plain, "--no-cache").returncode, 1)
            report = load_json(os.path.join(plain, "report.json"))
            errors = [f for f in report["findings"] if f["severity"] == "error"]
            self.assertTrue(errors)
            near = [f for f in report["findings"] if f["code"] == "look-alike"]
            self.assertTrue(near)
            accept = []
            for f in errors:
                accept.append({"code": f["code"], "paths": f["paths"], "reason": "reviewed: " + f["code"]})
            accept.append({"code": "look-alike", "group": near[0]["details"]["group"], "reason": "two takes of one swatch"})
            accept.append({"code": "unreadable", "paths": ["gone/file.png"], "reason": "stale"})
            policy = os.path.join(t, "policy.json")
            with open(policy, "w") as f:
                json.dump({"accept": accept}, f)
            out, junit = os.path.join(t, "out"), os.path.join(t, "junit.xml")
            r = run("audit", root, "--out", out, "--no-cache", "--policy", policy, "--junit", junit)
            self.assertEqual(r.returncode, 0, r.stdout + r.stderr)
            validate_report(self, os.path.join(out, "report.json"))
            got = load_json(os.path.join(out, "report.json"))
            self.assertEqual(got["policy"]["exit_status"], 0)
            by_code = {}
            for f in got["findings"]:
                by_code.setdefault(f["code"], []).append(f)
            for f in errors:
                self.assertEqual([g.get("accepted") for g in by_code[f["code"]] if g["paths"] == f["paths"]],
                                 ["reviewed: " + f["code"]])
            self.assertEqual(by_code["look-alike"][0].get("accepted"), "two takes of one swatch")
            self.assertEqual(got["accept_unused"], [{"code": "unreadable", "paths": ["gone/file.png"], "reason": "stale"}])
            suite = ET.parse(junit).getroot()
            self.assertEqual(suite.get("failures"), "0")
            bodies = "".join(tc.findtext("system-out") or "" for tc in suite.iter("testcase"))
            self.assertIn("accepted: reviewed: label-conflict", bodies)
            with open(os.path.join(out, "report.html"), encoding="utf-8") as f:
                self.assertIn("accepted: reviewed", f.read())
            # A new error that no entry accepts still fails the run.
            with open(os.path.join(root, "gingham", "late.png"), "wb") as f:
                f.write(b"\x89PNG\r\n\x1a\n broken")
            self.assertEqual(run("audit", root, "--out", os.path.join(t, "o2"), "--no-cache", "--policy", policy).returncode, 1)
            # Entries that cannot mean one thing: exit 2.
            for bad in ([{"code": "label-conflict", "paths": ["a"]}],
                        [{"code": "nope", "paths": ["a"], "reason": "x"}],
                        [{"code": "look-alike", "reason": "x"}],
                        [{"code": "look-alike", "group": "g1", "paths": ["a"], "reason": "x"}]):
                with open(policy, "w") as f:
                    json.dump({"accept": bad}, f)
                self.assertEqual(run("audit", root, "--out", os.path.join(t, "bad"), "--policy", policy).returncode, 2, bad)


class Netpbm(unittest.TestCase):
    """PGM/PPM samples run to the file's maxval, and a PAM's RGB is red first (Netpbm's
    own specification). References: Pillow (python3-pil 9.4, which scales PGM and PPM to
    8 bits against maxval) on libjxl-testdata's flower at every depth from 1 to 8 bits, and
    pictures the test writes byte by byte with numpy (its own truth) for 10 and 12 bits
    and for PAM, which Pillow does not read."""

    FLOWER = "/usr/share/libjxl-testdata/jxl/flower"

    def audit_rows(self, root, out):
        r = run("audit", root, "--out", out, "--no-cache", "--quiet")
        self.assertIn(r.returncode, (0, 1), r.stderr)
        return {row["path"]: row for row in csv.DictReader(io.StringIO(read_text(os.path.join(out, "manifest.csv"))))}

    def test_low_and_high_maxval_are_scaled_as_pillow_and_netpbm_say(self):
        import numpy as np
        from PIL import Image
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data")
            os.makedirs(os.path.join(root, "flower"))
            names = [f"flower_small.{kind}.depth{d}.{ext}" for kind, ext in (("g", "pgm"), ("rgb", "ppm")) for d in range(1, 9)]
            for n in names:
                shutil.copyfile(os.path.join(self.FLOWER, n), os.path.join(root, "flower", n))
            # 10 and 12 bits, written by the test: a gradient whose 8-bit values it knows.
            rng = np.random.default_rng(5)
            os.makedirs(os.path.join(root, "deep"))
            expected = {}
            for maxval in (1023, 4095):
                v = (np.linspace(0, maxval, 64 * 48).reshape(48, 64) * rng.uniform(0.3, 1.0)).astype(">u2")
                with open(os.path.join(root, "deep", f"g{maxval}.pgm"), "wb") as f:
                    f.write(f"P5\n64 48\n{maxval}\n".encode() + v.tobytes())
                expected[f"deep/g{maxval}.pgm"] = float(np.floor(v.astype(float) * 255 / maxval + 0.5).mean())
            rows = self.audit_rows(root, os.path.join(t, "o"))
            for n in names:
                with Image.open(os.path.join(self.FLOWER, n)) as im:
                    want = float(np.asarray(im.convert("L"), dtype=float).mean())
                got = float(rows["flower/" + n]["brightness"])
                self.assertLess(abs(got - want), 1.0, (n, got, want))  # the reduced image's mean against Pillow's
                self.assertNotIn("near-uniform", rows["flower/" + n]["finding_codes"], n)
            for path, want in expected.items():
                self.assertLess(abs(float(rows[path]["brightness"]) - want), 0.6, path)

    def test_a_pam_and_a_png_of_one_picture_are_one_group_with_its_colours(self):
        import numpy as np
        from PIL import Image
        with tempfile.TemporaryDirectory() as t:
            root = os.path.join(t, "data", "c")
            os.makedirs(root)
            a = np.zeros((64, 64, 3), np.uint8)
            a[...] = (220, 40, 30)
            a[20:40, 20:40] = (30, 60, 200)
            Image.fromarray(a).save(os.path.join(root, "red.png"))
            def pam(name, arr, tupltype, maxval=255):
                h, w, d = arr.shape
                data = arr.astype(">u2" if maxval > 255 else np.uint8).tobytes()
                with open(os.path.join(root, name), "wb") as f:
                    f.write(f"P7\nWIDTH {w}\nHEIGHT {h}\nDEPTH {d}\nMAXVAL {maxval}\nTUPLTYPE {tupltype}\nENDHDR\n".encode() + data)
            pam("red_rgb.pam", a, "RGB")
            pam("red_rgba.pam", np.dstack([a, np.full((64, 64), 255, np.uint8)]), "RGB_ALPHA")
            pam("red_rgba10.pam", np.dstack([a.astype(np.uint32) * 1023 // 255, np.full((64, 64), 1023)]), "RGB_ALPHA", 1023)
            out = os.path.join(t, "o")
            rows = self.audit_rows(os.path.join(t, "data"), out)
            groups = {rows[p]["group"] for p in ("c/red.png", "c/red_rgb.pam", "c/red_rgba.pam", "c/red_rgba10.pam")}
            self.assertEqual(len(groups), 1)
            self.assertNotEqual(groups, {""})
            self.assertNotIn("transparency", rows["c/red_rgba10.pam"]["finding_codes"])  # alpha against maxval too

class PixelsAgreeWithPillow(unittest.TestCase):
    """Every image that Pillow (python3-pil, the reference decoder) reads in Debian's
    libjxl-testdata and visp-images-data: the mean luminance tamis measures (manifest
    `brightness`, on its reduced image) is Pillow's (ITU-R 601 'L', 16-bit gray as
    round(v / 257), a transparent image laid over white or black by alpha_composite)
    within 1.5 levels. Found two decoder defects when first
    run (Netpbm maxval, a brightening rule for 16-bit samples)."""

    def check_tree(self, root):
        import numpy as np
        from PIL import Image
        with tempfile.TemporaryDirectory() as t:
            r = run("audit", root, "--out", os.path.join(t, "o"), "--no-cache", "--quiet")
            self.assertIn(r.returncode, (0, 1), r.stderr)
            rows = csv.DictReader(io.StringIO(read_text(os.path.join(t, "o", "manifest.csv"))))
            compared, far = 0, []
            for row in rows:
                if row["brightness"] == "":
                    continue
                try:
                    with Image.open(os.path.join(root, row["path"])) as im:
                        if row["color_mode"] in ("rgba", "graya") or "transparency" in im.info:
                            # Transparent: laid over white, or over black where white would
                            # hide it (docs/decoding.md); Pillow's alpha_composite on both.
                            if im.mode in ("I;16", "I;16B", "I"):
                                continue
                            rgba = im.convert("RGBA")
                            grounds = [Image.alpha_composite(Image.new("RGBA", rgba.size, g), rgba).convert("L")
                                       for g in ((255, 255, 255, 255), (0, 0, 0, 255))]
                            means = [float(np.asarray(g, dtype=float).mean()) for g in grounds]
                        elif im.mode in ("I;16", "I;16B", "I"):
                            means = [float(np.floor(np.asarray(im, dtype=float) / 257 + 0.5).mean())]
                        else:
                            means = [float(np.asarray(im.convert("RGB").convert("L"), dtype=float).mean())]
                except Exception:  # a file Pillow does not read is no reference
                    continue
                compared += 1
                if min(abs(float(row["brightness"]) - m) for m in means) > 1.5:
                    far.append((row["path"], row["brightness"], [round(m, 1) for m in means]))
            return compared, far

    def test_libjxl_testdata(self):
        compared, far = self.check_tree("/usr/share/libjxl-testdata")
        self.assertGreaterEqual(compared, 115)
        self.assertEqual(far, [])

    def test_visp_images(self):
        compared, far = self.check_tree("/usr/share/visp-images-data/ViSP-images")
        self.assertGreaterEqual(compared, 1000)
        self.assertEqual(far, [])


class Cache(unittest.TestCase):
    def test_a_killed_run_then_a_clean_rerun_gives_identical_outputs(self):
        import signal
        import time
        tree = os.path.join(os.environ.get("TAMIS_TEST_DATA", ""), "cache", "fashion-mnist-png")
        if not os.path.isdir(tree):  # built by the Fashion-MNIST C++ tests; make a tree of our own otherwise
            tree = tempfile.mkdtemp()
            make_clean_tree(tree, 400)
        with tempfile.TemporaryDirectory() as t:
            cache = os.path.join(t, "records.sqlite")
            p = subprocess.Popen([TAMIS, "audit", tree, "--out", os.path.join(t, "killed"), "--cache", cache, "--quiet"])
            time.sleep(1.5)
            p.send_signal(signal.SIGKILL)
            p.wait()
            r1 = run("audit", tree, "--out", os.path.join(t, "after"), "--cache", cache, "--quiet")
            r2 = run("audit", tree, "--out", os.path.join(t, "clean"), "--no-cache", "--quiet")
            self.assertEqual(r1.returncode, r2.returncode)
            for name in ("manifest.csv", "report.json", "report.html"):
                with open(os.path.join(t, "after", name), "rb") as a, open(os.path.join(t, "clean", name), "rb") as b:
                    self.assertEqual(a.read(), b.read(), name)
            # a warm run now reads nothing
            r3 = run("audit", tree, "--out", os.path.join(t, "warm"), "--cache", cache, "--format", "json")
            self.assertEqual(json.loads(r3.stdout)["read"], 0)


if __name__ == "__main__":
    TAMIS = os.path.abspath(sys.argv.pop(1))
    unittest.main(verbosity=1)
