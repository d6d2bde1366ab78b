"""The HTML snapshot printed through Chromium's own PDF printing, on A4 and US Letter.

For a receiver and a transmitter example the report is written with
:func:`mixchart.report.write_report`, served from 127.0.0.1 (the browser
fixtures abort every other request, ``file://`` included) and printed with
``page.pdf``; poppler's ``pdfinfo``/``pdftoppm``/``pdftotext`` read the PDF
back.  The checks:

* every page has the paper's size (ISO 216: A4 is 210 × 297 mm; ANSI/ASME
  Y14.1: Letter is 8.5 × 11 in);
* nothing reaches into the right-hand page margin on any page (the margin strip
  of each rendered page is blank), and in print media, at the printable width of
  A4 (190 mm = 718 px at 96 px/in, the narrower of the two), no table, canvas or
  chart box ends to the right of the page width;
* the levels under the display floor read "< −150 dBc", the count line of the
  collapsed rows prints and the collapsed rows do not.

The rendered pages go to ``tests/browser/artifacts/report-print-*.png``.
"""

from __future__ import annotations

import functools
import os
import re
import shutil
import subprocess
import threading
from http.server import SimpleHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import helpers as bh
import numpy as np
import pytest
from PIL import Image

from mixchart import cli, report
from mixchart.analysis import evaluate
from mixchart.levels import FLOOR_DBC
from mixchart.plan import load_plan

pytestmark = pytest.mark.browser

#: A receiver and a transmitter: the two directions the report words differently.
EXAMPLES = ["fm_receiver", "uplink_transmitter"]
#: Paper sizes in PDF points (1/72 in): A4 210 × 297 mm (ISO 216), Letter 8.5 × 11 in (ANSI/ASME Y14.1).
PAPER_PT = {"A4": (210 / 25.4 * 72, 297 / 25.4 * 72), "Letter": (8.5 * 72, 11 * 72)}
#: The report's @page side margin, mm (mixchart/report.py, "@page { ... margin: 12mm 10mm }").
SIDE_MARGIN_MM = 10.0
#: A4's printable width at 96 px/in (CSS px): 190 mm.
A4_CONTENT_PX = round((210 - 2 * SIDE_MARGIN_MM) / 25.4 * 96)
DPI = 100
POPPLER = ("pdfinfo", "pdftoppm", "pdftotext")


def _in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() in {"1", "true", "yes", "on"}


@pytest.fixture(scope="module")
def poppler() -> None:
    missing = [tool for tool in POPPLER if shutil.which(tool) is None]
    if missing:
        reason = f"{', '.join(missing)} missing (apt-get install -y poppler-utils; tools/install-test-deps does)"
        if _in_ci():
            pytest.fail(f"CI=true but {reason}", pytrace=False)
        pytest.skip(reason)


class _Quiet(SimpleHTTPRequestHandler):
    def log_message(self, format, *args):  # the base class's signature
        pass


@pytest.fixture(scope="module")
def served(tmp_path_factory):
    """{example: (url, evaluation)} of reports written to a folder served on 127.0.0.1."""
    folder = tmp_path_factory.mktemp("reports")
    out = {}
    for name in EXAMPLES:
        path = cli.example_path(name)
        plan = load_plan(path)
        ev = evaluate(plan, base_dir=path.parent)
        report.write_report(plan, folder / f"{name}.html", evaluation=ev)
        out[name] = ev
    server = ThreadingHTTPServer(("127.0.0.1", 0), functools.partial(_Quiet, directory=str(folder)))
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    base = f"http://127.0.0.1:{server.server_address[1]}/"
    try:
        yield {name: (f"{base}{name}.html", ev) for name, ev in out.items()}
    finally:
        server.shutdown()
        server.server_close()


def _open(page, url: str) -> None:
    page.goto(url)
    bh.wait_for_bokeh_idle(page)
    assert page.blocked_requests == [] and page.console_errors == []


def _run(*command: str) -> str:
    return subprocess.run(command, check=True, capture_output=True, text=True, timeout=120).stdout


def _expected_level_text(level_dbc: float) -> str:
    """What the report must show for a level (its own rule, restated: the floor and the vanished level)."""
    if level_dbc <= FLOOR_DBC + 1:
        return "vanishes"
    if level_dbc < report.DISPLAY_FLOOR_DBC:
        return "< −150 dBc"
    return f"{level_dbc:.1f} dBc"


@pytest.mark.parametrize("paper", sorted(PAPER_PT))
@pytest.mark.parametrize("name", EXAMPLES)
def test_printed_pdf(browser_page, served, poppler, artifacts_dir: Path, name: str, paper: str):
    url, ev = served[name]
    page = browser_page
    _open(page, url)
    pdf = artifacts_dir / f"report-print-{name}-{paper}.pdf"
    pdf.write_bytes(page.pdf(format=paper, print_background=True))

    # every page has the paper's size
    info = _run("pdfinfo", "-f", "1", "-l", "999", str(pdf))
    sizes = [(float(w), float(h)) for w, h in re.findall(r"Page +\d+ size: +([\d.]+) x ([\d.]+) pts", info)]
    assert len(sizes) >= 2, info
    want_w, want_h = PAPER_PT[paper]
    for w, h in sizes:  # Chromium rounds the paper to whole CSS pixels: within 1 pt
        assert abs(w - want_w) < 1.0 and abs(h - want_h) < 1.0, (w, h, paper)

    # render at 100 dpi; the right-hand margin strip of every page stays blank (nothing runs off the right)
    for old in artifacts_dir.glob(f"report-print-{name}-{paper}-*.png"):
        old.unlink()
    _run("pdftoppm", "-r", str(DPI), "-png", str(pdf), str(artifacts_dir / f"report-print-{name}-{paper}"))
    pngs = sorted(artifacts_dir.glob(f"report-print-{name}-{paper}-*.png"))
    assert len(pngs) == len(sizes)
    margin_px = int(SIDE_MARGIN_MM / 25.4 * DPI) - 2  # a hair inside the margin, off antialiased edges
    for png in pngs:
        pixels = np.asarray(Image.open(png).convert("L"))
        assert abs(pixels.shape[1] - want_w / 72 * DPI) <= 1.5
        strip = pixels[:, -margin_px:]
        assert strip.min() >= 250, f"{png.name}: ink in the right margin (something is cut off there)"
        assert pixels[:, :-margin_px].min() < 128  # and the page itself is not blank
        if png == pngs[0]:  # nothing made Chromium shrink the pages to fit: the headings' rules reach the margin
            ink = np.flatnonzero((pixels < 128).any(axis=0))
            assert ink.max() >= pixels.shape[1] - margin_px - 6, f"{png.name}: the page was shrunk to fit"

    # the printed text: the floor, the count line, and none of the collapsed rows
    text = _run("pdftotext", "-layout", str(pdf), "-")
    frame = ev.to_frame()
    listed, tail = report._split_rows(frame, report.TOP_ROWS)
    assert "Levels below −150 dBc are shown as < −150 dBc" in " ".join(text.split())
    if (listed["level_dbc"].between(FLOOR_DBC + 1, report.DISPLAY_FLOOR_DBC, inclusive="neither")).any():
        assert "< −150 dBc" in text.replace("Levels below −150 dBc are shown as < −150 dBc", "")
    under = re.findall(r"-(?:150\.[1-9]|15[1-9]\.\d|1[6-9]\d\.\d|[2-9]\d\d\.\d) dBc", text)
    assert under == [], "a level under the floor printed as a number"
    assert len(tail) > 0, "the example has a long tail to collapse"
    match = re.search(r"and (\d+) more rows, all clear by ≥ ([\d.]+) dB", text)
    assert match and int(match.group(1)) == len(tail)
    assert float(match.group(2)) <= tail["margin_db"].min()  # the words hold for every collapsed row
    rows = len(re.findall(r"^\s*\S.*\(\d+,\d+\)[ \u00a0][+−]", text, re.M))  # a row's "(m,n) ±" cell
    assert rows == len(listed), "each listed row prints once; the collapsed rows do not print"


@pytest.mark.parametrize("name", EXAMPLES)
def test_print_media_fits_the_a4_width(browser_page, served, artifacts_dir: Path, name: str):
    url, ev = served[name]
    page = browser_page
    page.set_viewport_size({"width": A4_CONTENT_PX, "height": 1000})
    _open(page, url)
    page.emulate_media(media="print")
    page.wait_for_timeout(300)  # time for BokehJS to react, were any of its boxes to change size
    boxes = page.evaluate(
        """() => {
          const out = [];
          const walk = (root) => {
            for (const el of root.querySelectorAll('*')) {
              const tag = el.tagName.toLowerCase(), cls = String(el.className || '');
              if (tag === 'table' || tag === 'canvas' || tag === 'pre' || tag === 'details'
                  || /(^| )(chart|bk-Column|bk-Row|bk-Figure|bk-Div)( |$)/.test(cls)) {
                const r = el.getBoundingClientRect();
                if (r.width > 0) out.push({what: tag + '.' + cls, right: r.right});
              }
              if (el.shadowRoot) walk(el.shadowRoot);
            }
          };
          walk(document);
          return {boxes: out, scroll: document.documentElement.scrollWidth, inner: window.innerWidth};
        }"""
    )
    kinds = {b["what"].split(".")[0] for b in boxes["boxes"]}
    assert {"table", "canvas", "pre"} <= kinds
    assert sum("bk-Figure" in b["what"] for b in boxes["boxes"]) == 3  # the two planes and the margin plot
    over = [b for b in boxes["boxes"] if b["right"] > boxes["inner"] + 1]
    assert over == [], f"ends beyond the {boxes['inner']} px printable width: {over[:5]}"
    assert boxes["scroll"] <= boxes["inner"] + 1

    # the displayed level of each listed row follows the floor (the margin is from the true level)
    frame = ev.to_frame()
    listed, _ = report._split_rows(frame, report.TOP_ROWS)
    cells = page.locator("table.worst").first.locator("tbody tr").all()
    assert len(cells) == len(listed)
    shown = [row.locator("td").nth(5).inner_text() for row in cells]
    assert shown == [_expected_level_text(v) for v in listed["level_dbc"]]
    # the collapsed rows are not displayed in print, only their count line
    summary = page.locator("details.tail summary")
    assert summary.is_visible()
    assert not page.locator("details.tail table").is_visible()
    # (an element shot: a full-page shot resizes the window, and BokehJS redraws for it)
    page.locator(".chart").first.screenshot(path=str(artifacts_dir / f"report-print-media-{name}-chart.png"))
