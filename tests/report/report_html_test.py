#!/usr/bin/python3
"""report.html in headless Chromium (Debian chromium): hostile file names never run
as script or become markup, the page's own script runs under its Content-Security-
Policy hash, the hash is right (Python's hashlib), and the page renders (a screenshot
that is not blank, checked with Pillow). Usage: report_html_test.py TAMIS
"""
import base64
import hashlib
import os
import re
import shutil
import subprocess
import sys
import tempfile
import unittest

TAMIS = None
CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]

HOSTILE = [
    "<script>document.body.setAttribute('data-pwned','1')<script>.png",
    "<img src=x onerror=\"document.body.setAttribute('data-pwned','2')\">.png",
    "\" onmouseover=\"document.body.setAttribute('data-pwned','3').png",
    "'><svg onload=document.body.setAttribute('data-pwned','4')>.png",
    "&amp;lt;b&amp;gt;.png",
]


def tiny_png(seed):
    import random
    import struct
    import zlib
    rng = random.Random(seed)
    def chunk(t, d):
        return struct.pack(">I", len(d)) + t + d + struct.pack(">I", zlib.crc32(t + d) & 0xFFFFFFFF)
    raw = b"".join(b"\x00" + bytes(rng.randrange(256) for _ in range(8)) for _ in range(8))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 8, 8, 8, 0, 0, 0, 0)) +
            chunk(b"IDAT", zlib.compress(raw)) + chunk(b"IEND", b""))


def chromium(*args, cwd):
    profile = tempfile.mkdtemp(dir=cwd)
    r = subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *args], capture_output=True, text=True,
                       timeout=120, cwd=cwd)
    return r


class AuditedPage(unittest.TestCase):
    """A test class whose setUpClass builds a tree in cls.tmp and audits it."""

    @classmethod
    def audit(cls, root, *extra):
        cls.out = os.path.join(cls.tmp, "out")
        r = subprocess.run([TAMIS, "audit", root, "--out", cls.out, "--quiet", *extra], capture_output=True, text=True)
        assert r.returncode in (0, 1), r.stderr
        cls.page = os.path.join(cls.out, "report.html")
        with open(cls.page, encoding="utf-8") as f:
            cls.html = f.read()

    @classmethod
    def tearDownClass(cls):
        shutil.rmtree(cls.tmp, ignore_errors=True)


class ReportInBrowser(AuditedPage):
    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.mkdtemp()
        root = os.path.join(cls.tmp, "data")
        for i, name in enumerate(HOSTILE):
            label = ["<b>class</b>", "plain"][i % 2].replace("/", "")
            os.makedirs(os.path.join(root, label), exist_ok=True)
            with open(os.path.join(root, label, name), "wb") as f:
                f.write(tiny_png(i))
        # a byte copy too, so the groups section (with thumbnails) is on the page
        with open(os.path.join(root, "plain", HOSTILE[1]), "rb") as f:
            data = f.read()
        with open(os.path.join(root, "plain", "copy " + HOSTILE[0]), "wb") as f:
            f.write(data)
        cls.audit(root)

    def test_no_hostile_name_runs_and_each_appears_as_text(self):
        r = chromium("--virtual-time-budget=3000", "--dump-dom", "file://" + self.page, cwd=self.tmp)
        dom = r.stdout
        self.assertIn("<main>", dom, r.stderr[-2000:])
        self.assertNotIn("data-pwned", dom.split("<main>", 1)[0] + re.sub(r"&[a-z#0-9]+;", "", ""))
        self.assertIsNone(re.search(r"<body[^>]*data-pwned", dom))
        self.assertIsNone(re.search(r"<(img|svg)[^>]*(onerror|onload)=", dom))
        self.assertEqual(len(re.findall(r"<script", dom)), 1)  # only the page's own script element
        self.assertRegex(dom, r'<body[^>]*data-ready="1"')      # ...and it ran under the CSP hash
        for name in HOSTILE:
            escaped = name.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
            self.assertIn(escaped, dom, name)

    def test_csp_hash_matches_the_inline_script(self):
        scripts = re.findall(r"<script>(.*?)</script>", self.html, re.S)
        self.assertEqual(len(scripts), 1)
        digest = base64.b64encode(hashlib.sha256(scripts[0].encode("utf-8")).digest()).decode()
        csp = re.search(r'Content-Security-Policy" content="([^"]*)"', self.html).group(1)
        self.assertIn(f"script-src 'sha256-{digest}'", csp)
        self.assertIn("default-src 'none'", csp)
        # nothing loads from anywhere: no remote or file references, no imports
        self.assertIsNone(re.search(r"(src|href)=\"(?!data:)|url\(|@import|https?://", self.html))

    def test_page_renders_something(self):
        shot = os.path.join(self.tmp, "shot.png")
        r = chromium("--window-size=1200,1600", f"--screenshot={shot}", "file://" + self.page, cwd=self.tmp)
        self.assertTrue(os.path.exists(shot), r.stderr[-2000:])
        from PIL import Image
        im = Image.open(shot).convert("RGB")
        colours = im.getcolors(maxcolors=1 << 20)
        self.assertGreater(len(colours), 50)  # text, bars and tiles, not a blank page
        teal = sum(n for n, c in colours if c == (15, 76, 92))  # the header's colour, #0f4c5c
        self.assertGreater(teal, 1200 * 30)


class ReportLayout(AuditedPage):
    """The page names ROOT and the settings, tallies each code once, folds long
    path lists, shows five findings a code until a code is chosen, and gives a
    sentence instead of a chart when every image has one size. The fixture is
    built here: 7 byte-identical pairs of 8x8 PNGs in one class (its truth)."""

    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.mkdtemp()
        cls.root = os.path.join(cls.tmp, "bolts & nuts")
        os.makedirs(os.path.join(cls.root, "hex"))
        for i in range(7):
            data = tiny_png(100 + i)
            for copy in ("a", "b"):
                with open(os.path.join(cls.root, "hex", f"{i}{copy}.png"), "wb") as f:
                    f.write(data)
        cls.audit(cls.root, "--no-cache")

    def test_header_names_root_and_settings(self):
        header = re.search(r"<header>(.*?)</header>", self.html, re.S).group(1)
        self.assertIn(self.root.replace("&", "&amp;"), header)
        for text in ("split 70/15/15", "seed 1", "within 8 bits", "correlation 0.995"):
            self.assertIn(text, header)

    def test_codes_are_tallied_once_and_never_broken(self):
        tally = re.search(r'<div class="bycode">(.*?)</div>', self.html, re.S).group(1)
        self.assertEqual(tally.count('data-code="byte-identical"'), 1)
        self.assertIn("14 files", tally)
        self.assertIn("code.code{word-break:normal;white-space:nowrap}", self.html)

    def test_one_size_gives_a_sentence_not_a_chart(self):
        section = re.search(r'<section id="sizes">(.*?)</section>', self.html, re.S).group(1)
        self.assertIn("All 14 images are 8 x 8 px.", section)
        self.assertNotIn("<svg", section)

    def test_five_findings_a_code_until_a_code_is_chosen(self):
        r = chromium("--virtual-time-budget=3000", "--dump-dom", "file://" + self.page, cwd=self.tmp)
        table = re.search(r'<table id="findings-table">(.*?)</table>', r.stdout, re.S).group(1)
        rows = re.findall(r'<tr data-sev="[^"]*" data-code="byte-identical"[^>]*>', table)
        self.assertEqual(len(rows), 7)
        self.assertEqual(sum('display: none' in row for row in rows), 2)
        self.assertIn("five a code", r.stdout)


class ColourThumbnails(AuditedPage):
    """The groups' and the mask pairs' thumbnails are in colour: their mean colour is
    the original file's as Pillow (python3-pil, the reference decoder) reads it, within
    4 levels a channel; an image shown with its mask is tinted where the mask is."""

    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.mkdtemp()
        cls.root = os.path.join(cls.tmp, "swatches")
        r = subprocess.run([TAMIS, "demo", cls.root], capture_output=True, text=True)
        assert r.returncode == 0, r.stderr
        cls.audit(cls.root, "--no-cache")

    def figures(self, html=None):
        """(picture, path) of every figure of a page (the audit's by default)."""
        import io
        from PIL import Image
        found = re.findall(r'<figure><img alt="" tabindex="0" width="160" height="160" src="data:image/jpeg;base64,([^"]+)">'
                           r'<figcaption class="path">([^<]+)</figcaption>', self.html if html is None else html)
        return [(Image.open(io.BytesIO(base64.b64decode(b))).convert("RGB"), p) for b, p in found]

    @staticmethod
    def groups_section(html):
        return html[html.index('<section id="groups">'):html.index('<section id="masks">')]

    def resplit(self, name):
        """report.html of `tamis split` from the audit's saved index, into tmp/name."""
        out = os.path.join(self.tmp, name)
        r = subprocess.run([TAMIS, "split", self.out, "--out", out, "--quiet"], capture_output=True, text=True,
                           timeout=120)
        self.assertIn(r.returncode, (0, 1), r.stderr)
        with open(os.path.join(out, "report.html"), encoding="utf-8") as f:
            return f.read()

    def test_group_thumbnails_have_the_files_colours(self):
        from PIL import Image
        groups = self.groups_section(self.html)
        self.assertIn("the first mirror, correlation", groups)
        self.assertIn("byte-identical", groups)
        checked = 0
        for im, path in self.figures():
            if f">{path}<" not in groups or "/masks/" in path:
                continue
            with Image.open(os.path.join(self.root, path)) as original:
                want = [sum(c) / len(c) for c in zip(*original.convert("RGB").getdata())]
            got = [sum(c) / len(c) for c in zip(*im.getdata())]
            self.assertTrue(all(abs(a - b) <= 4 for a, b in zip(got, want)), (path, got, want))
            self.assertGreater(max(got) - min(got), 8, path)  # colour, not gray
            # A picture from the file (256x224 in the demo), not the 32x32 thumbnail.
            self.assertEqual(im.size, (256, 224), path)
            checked += 1
        self.assertGreaterEqual(checked, 8)

    def test_without_the_files_the_pictures_come_from_the_saved_thumbnails(self):
        # `tamis split` from the saved index when ROOT is gone: the page still has its
        # pictures, drawn from the index's 32x32 thumbnails, each still in the file's
        # colours (mean within 8 levels of Pillow's: a 32x32 JPEG of a 256x224 swatch).
        from PIL import Image
        moved = self.root + "-moved"
        os.rename(self.root, moved)
        try:
            html = self.resplit("resplit")
            found = self.figures(html)
            self.assertGreaterEqual(len(found), 8)
            groups = self.groups_section(html)
            checked = 0
            for im, path in found:
                self.assertEqual(im.size, (32, 32), path)
                if f">{path}<" not in groups:
                    continue  # the masks section's pictures are tinted by their masks
                with Image.open(os.path.join(moved, path)) as original:
                    want = [sum(c) / len(c) for c in zip(*original.convert("RGB").getdata())]
                got = [sum(c) / len(c) for c in zip(*im.getdata())]
                self.assertTrue(all(abs(a - b) <= 8 for a, b in zip(got, want)), (path, got, want))
                checked += 1
            self.assertGreaterEqual(checked, 8)
        finally:
            os.rename(moved, self.root)

    def shown_after_replacing(self, replace, name):
        """A group's shown picture replaced by `replace(target)` after the audit:
        the re-split's picture of that path (the file is put back afterwards)."""
        groups = self.groups_section(self.html)
        path = next(p for _, p in self.figures() if f">{p}<" in groups)
        target = os.path.join(self.root, path)
        kept = target + ".kept"
        os.rename(target, kept)
        replace(target)
        try:
            return path, {p: im for im, p in self.figures(self.resplit(name))}[path]
        finally:
            os.remove(target)
            os.rename(kept, target)

    def test_a_file_replaced_by_a_link_is_not_followed(self):
        # After the audit, a shown picture is replaced by a symbolic link to another
        # image: the re-split's page shows that path by its saved 32x32 thumbnail,
        # never the linked file (the walk follows no link, nor does the report).
        path, shown = self.shown_after_replacing(
            lambda target: os.symlink(os.path.join(self.root, "gingham", "swatch_003.jpg"), target), "linked")
        self.assertEqual(shown.size, (32, 32), path)

    def test_a_file_replaced_by_a_fifo_does_not_stop_the_page(self):
        # A FIFO with no writer where a shown picture was: opening it for reading
        # must not wait (the read stage's discipline, file_bytes.h); the page shows
        # the path by its saved thumbnail.
        path, shown = self.shown_after_replacing(os.mkfifo, "fifo")
        self.assertEqual(shown.size, (32, 32), path)

    def test_flagged_frames_are_pictured_in_their_findings(self):
        # The demo's blank, dark and blurred frames: each quality finding's row shows
        # its images, the blank one nearly flat in the picture too.
        import io
        from PIL import Image
        for code, paths in (("near-uniform", ["gingham/swatch_093.jpg"]), ("underexposed", ["polka_dots/swatch_093.jpg"]),
                            ("unsharp", ["houndstooth/swatch_095.jpg", "polka_dots/swatch_093.jpg"])):
            row = re.search(r'<tr data-sev="[^"]*" data-code="' + code + r'".*?</tr>', self.html, re.S).group(0)
            shown = re.findall(r'<img alt="" tabindex="0" width="128" height="128" title="([^"]+)" src="data:image/jpeg;base64,([^"]+)"', row)
            self.assertEqual([p for p, _ in shown], paths, code)
            if code == "near-uniform":
                im = Image.open(io.BytesIO(base64.b64decode(shown[0][1]))).convert("L")
                lo, hi = im.getextrema()
                self.assertLessEqual(hi - lo, 6)

    def test_masks_are_drawn_over_their_images(self):
        from PIL import Image
        masks = self.html[self.html.index('<section id="masks">'):]
        pairs = [(im, p) for im, p in self.figures() if f">{p}<" in masks]
        self.assertGreaterEqual(len(pairs), 8)
        for (shown, image_path), (_, mask_path) in zip(pairs[0::2], pairs[1::2]):
            shown = shown.resize((32, 32), Image.BOX)  # compared at the thumbnails' 32x32
            self.assertEqual(os.path.basename(image_path)[:-4], os.path.basename(mask_path)[:-4])
            with Image.open(os.path.join(self.root, mask_path)) as m:
                if m.getextrema()[1] == 0 or m.size != (256, 224):
                    continue  # the planted empty and wrongly sized masks
                on = m.convert("L").resize((32, 32), Image.BOX)
            with Image.open(os.path.join(self.root, image_path)) as photo:
                plain = photo.convert("RGB").resize((32, 32), Image.BOX)
            # Where the mask covers the pixel, the shown image is nearer the ochre (227, 100, 20).
            ochre = (227, 100, 20)
            def dist(c):
                return sum((a - b) ** 2 for a, b in zip(c, ochre))
            top = on.getextrema()[1]
            nearer = [dist(shown.getpixel((x, y))) < dist(plain.getpixel((x, y)))
                      for y in range(32) for x in range(32) if on.getpixel((x, y)) > 0.5 * top]
            self.assertGreater(len(nearer), 10, image_path)
            self.assertGreater(sum(nearer) / len(nearer), 0.9, image_path)


if __name__ == "__main__":
    TAMIS = os.path.abspath(sys.argv.pop(1))
    unittest.main(verbosity=1)
