#!/usr/bin/env python3
"""report_check.py: every report holds what the terminal shows, and reads as it should.

For run, poles, response, compare, sweep, montecarlo and steady on bundled examples, the
command is run twice with the same options, once plain (the terminal text) and once
with --report FILE.pdf / FILE.html. Then:
- PDF: the text read back by pdftotext (poppler-utils, an independent reader) holds
  every word of the terminal text, in order (the report wraps long lines, so words
  are compared, not lines); the file ends with %%EOF.
- HTML: the text of the page (tags stripped, entities decoded by Python's
  html.parser) holds every word of the terminal text, in order; every <svg> is
  complete (as many </svg> as <svg).
- With --screenshot: headless Chromium renders the HTML report of `run` and of
  `compare`; a copy of the page with a small script measures where the table and
  each inline SVG sit (read back with --dump-dom), and in the screenshot each of
  those boxes must be drawn: large enough, with dark ink on at least 0.5 % of its
  pixels and more than a handful of colours (a blank or broken image has neither).

Usage: report_check.py RINGUP SOURCE_DIR [--screenshot]
"""
import html.parser
import json
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

FAILS = []


def fail(msg):
    FAILS.append(msg)
    print("FAIL: " + msg)


def run(args, env=None):
    p = subprocess.run(args, capture_output=True, text=True, timeout=600, env=env)
    return p.returncode, p.stdout, p.stderr


WALL = re.compile(r"(rtol \S+|steps|last state), [0-9.]+ s\b")


def words(text):
    """The words of a text, the solver's and the polishing Newton's wall-clock
    times masked (they differ between the plain run and the run that writes the
    report)."""
    return WALL.sub(r"\1, WALL s", text).split()


def in_order(need, have):
    """Index of the first word of need not found in order in have, or -1."""
    j = 0
    for i, w in enumerate(need):
        while j < len(have) and have[j] != w:
            j += 1
        if j == len(have):
            return i
        j += 1
    return -1


class TextOf(html.parser.HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.parts, self.skip = [], 0

    def handle_starttag(self, tag, attrs):
        if tag in ("svg", "style", "script"):
            self.skip += 1

    def handle_endtag(self, tag):
        if tag in ("svg", "style", "script"):
            self.skip -= 1

    def handle_data(self, data):
        if not self.skip:
            self.parts.append(data)


def check_text(name, terminal, report_text):
    need = words(terminal)
    k = in_order(need, words(report_text))
    if not need:
        fail("%s: the command printed nothing" % name)
    elif k >= 0:
        fail("%s: terminal word %d (%r, near %r) is missing from the report" %
             (name, k, need[k], " ".join(need[max(0, k - 5):k + 5])))
    else:
        print("ok: %s holds all %d words of the terminal text" % (name, len(need)))


# ---- PNG reading (zlib only): enough for Chromium's 8-bit RGB/RGBA screenshots ----

def read_png(path):
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, w = 8, b"", None
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            w, h, depth, ctype, _, _, interlace = struct.unpack(">IIBBBBB", body)
            assert depth == 8 and ctype in (2, 6) and interlace == 0, "PNG kind"
            bpp = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + n
    raw = zlib.decompress(idat)
    stride = w * bpp
    rows, prev = [], bytearray(stride)
    for y in range(h):
        f = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for x in range(stride):
            a = line[x - bpp] if x >= bpp else 0
            b = prev[x]
            c = prev[x - bpp] if x >= bpp else 0
            if f == 1:
                line[x] = (line[x] + a) & 255
            elif f == 2:
                line[x] = (line[x] + b) & 255
            elif f == 3:
                line[x] = (line[x] + (a + b) // 2) & 255
            elif f == 4:  # Paeth (PNG specification, filter type 4)
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[x] = (line[x] + (a if pa <= pb and pa <= pc else
                                      b if pb <= pc else c)) & 255
        rows.append(bytes(line))
        prev = line
    return w, h, bpp, rows


def box_ink(png, box):
    w, h, bpp, rows = png
    x0, y0 = max(0, int(box["x"])), max(0, int(box["y"]))
    x1, y1 = min(w, int(box["x"] + box["w"])), min(h, int(box["y"] + box["h"]))
    dark, total, colours = 0, 0, set()
    for y in range(y0, y1, 2):
        r = rows[y]
        for x in range(x0, x1, 2):
            px = r[x * bpp:x * bpp + 3]
            total += 1
            if sum(px) < 3 * 160:
                dark += 1
            if len(colours) < 64:
                colours.add(bytes(px))
    return (dark / total if total else 0.0), len(colours), (x1 - x0, y1 - y0)


LAYOUT_SCRIPT = """<script>
(function () {
  var out = {height: document.documentElement.scrollHeight, boxes: []};
  var els = document.querySelectorAll('svg, table, pre');
  for (var i = 0; i < els.length; i++) {
    var r = els[i].getBoundingClientRect();
    out.boxes.push({tag: els[i].tagName.toLowerCase(), x: r.left + window.scrollX,
                    y: r.top + window.scrollY, w: r.width, h: r.height});
  }
  var p = document.createElement('div');
  p.id = 'ru-layout';
  p.textContent = JSON.stringify(out);
  document.body.appendChild(p);
})();
</script>"""

CHROME_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                "--no-first-run", "--disable-background-networking",
                "--disable-component-update", "--disable-sync", "--hide-scrollbars"]


def screenshot_check(name, page, tmp):
    chrome = shutil.which("chromium")
    copy = os.path.join(tmp, "layout-" + os.path.basename(page))
    text = open(page, encoding="utf-8").read()
    open(copy, "w", encoding="utf-8").write(
        text.replace("</body>", LAYOUT_SCRIPT + "</body>"))
    prof = tempfile.mkdtemp(dir=tmp)
    rc, dom, err = run([chrome] + CHROME_FLAGS + ["--user-data-dir=" + prof,
                                                  "--window-size=1100,2000",
                                                  "--dump-dom", "file://" + copy])
    m = re.search(r'<div id="ru-layout">(.*?)</div>', dom)
    if rc != 0 or not m:
        fail("%s: chromium could not lay out the page (exit %d)" % (name, rc))
        return
    layout = json.loads(html.unescape(m.group(1)))
    height = int(layout["height"]) + 20
    shot = os.path.join(tmp, name + ".png")
    prof = tempfile.mkdtemp(dir=tmp)
    rc, _, err = run([chrome] + CHROME_FLAGS + ["--user-data-dir=" + prof,
                                                "--window-size=1100,%d" % height,
                                                "--screenshot=" + shot, "file://" + page])
    if rc != 0 or not os.path.exists(shot):
        fail("%s: chromium took no screenshot (exit %d)" % (name, rc))
        return
    png = read_png(shot)
    nsvg = text.count("<svg")
    svgs = [b for b in layout["boxes"] if b["tag"] == "svg"]
    tables = [b for b in layout["boxes"] if b["tag"] in ("table", "pre")]
    if len(svgs) != nsvg or nsvg == 0:
        fail("%s: %d inline SVGs in the file, %d laid out" % (name, nsvg, len(svgs)))
    if not tables:
        fail("%s: no table or text block laid out" % name)
    for i, b in enumerate(tables + svgs):
        ink, ncol, size = box_ink(png, b)
        what = "%s %d" % (b["tag"], i)
        # A figure is at least 300 x 150 px (a broken-image icon is 16 x 16) and
        # has ink and colour; a table/text block has dark text on 0.5 % at least.
        big = size[0] >= 300 and size[1] >= (150 if b["tag"] == "svg" else 20)
        if not big or ink < 0.005 or (b["tag"] == "svg" and ncol < 8):
            fail("%s: %s at %dx%d is blank or broken (ink %.3f, %d colours)" %
                 (name, what, size[0], size[1], ink, ncol))
        else:
            print("ok: %s %s drawn, %dx%d px, ink %.3f, %d colours" %
                  (name, what, size[0], size[1], ink, ncol))


def main():
    ringup, src = sys.argv[1], sys.argv[2]
    shots = "--screenshot" in sys.argv[3:]
    ex = os.path.join(src, "examples")
    vdp = os.path.join(ex, "vdp-tank.yaml")
    colp = os.path.join(ex, "follower-colpitts.yaml")
    cases = [
        ("run", ["run", vdp]),
        ("poles", ["poles", vdp, "--amplitude"]),
        ("response", ["response", colp, "--from", "tap", "--to", "top"]),
        ("compare", ["compare", colp, "--part", "A1", "--models",
                     "soft-follower,emitter-follower"]),
        ("sweep", ["sweep", vdp, "--vary", "L1.value=5m:20m:3", "--log"]),
        ("montecarlo", ["montecarlo", colp, "--samples", "6"]),
        ("steady", ["steady", vdp]),
    ]
    tmp = tempfile.mkdtemp()
    try:
        for name, args in cases:
            rc, terminal, err = run([ringup] + args)
            if rc != 0:
                fail("%s: exit %d: %s" % (name, rc, err.strip()))
                continue
            pdf = os.path.join(tmp, name + ".pdf")
            page = os.path.join(tmp, name + ".html")
            for rep in (pdf, page):
                rc, _, err = run([ringup] + args + ["--report", rep])
                if rc != 0 or not os.path.exists(rep):
                    fail("%s --report %s: exit %d: %s" % (name, rep, rc, err.strip()))
            if os.path.exists(pdf):
                if not open(pdf, "rb").read().rstrip().endswith(b"%%EOF"):
                    fail("%s: the PDF has no %%%%EOF" % name)
                rc, text, err = run(["pdftotext", "-layout", pdf, "-"])
                if rc != 0:
                    fail("%s: pdftotext failed: %s" % (name, err.strip()))
                else:
                    check_text(name + ".pdf", terminal, text)
            if os.path.exists(page):
                body = open(page, encoding="utf-8").read()
                t = TextOf()
                t.feed(body)
                check_text(name + ".html", terminal, "".join(t.parts))
                if body.count("<svg") != body.count("</svg>"):
                    fail("%s: an inline SVG is cut off" % name)
                if shots and name in ("run", "compare"):
                    screenshot_check(name, page, tmp)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    if FAILS:
        print("%d failures" % len(FAILS))
        sys.exit(1)
    print("all reports hold their terminal text")


if __name__ == "__main__":
    main()
