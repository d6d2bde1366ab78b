"""Make docs/screenshot.png (the planner serving the built-in FM example, once idle),
docs/screenshot_compare.png (the same plan kept as a reference, flipped to low-side injection)
and docs/screenshot_chain.png (the chain planner on the built-in scanner chain).

Run from the repository root (needs Voila and /usr/bin/chromium, as the browser tests do)::

    python docs/make_screenshot.py

It serves notebooks/planner.ipynb with no plan file (so the built-in example),
opens it in headless Debian Chromium at 1600 px wide, waits until BokehJS is
idle and the table is drawn, and saves the app's area.  The server is stopped
before the script exits.
"""

from __future__ import annotations

import contextlib
import shutil
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests" / "browser"))
sys.path.insert(0, str(REPO / "benchmarks"))

import conftest as harness  # noqa: E402  Chromium flags, local-only pages, Voila stop
import helpers as bh  # noqa: E402
from bench_app import start_voila  # noqa: E402

OUT = REPO / "docs" / "screenshot.png"
OUT_COMPARE = REPO / "docs" / "screenshot_compare.png"
OUT_CHAIN = REPO / "docs" / "screenshot_chain.png"
CHAIN = REPO / "mixchart" / "examples" / "chains" / "scanner_double_conversion.json"
VIEWPORT = {"width": 1600, "height": 1250}
MARGIN_PX = 12


@contextlib.contextmanager
def served_page(plan: Path | None, min_roots: int = 1):
    """Serve the planner notebook on ``plan`` (None: the built-in example) and yield a loaded page."""
    from playwright.sync_api import sync_playwright

    tmp = Path(tempfile.mkdtemp(prefix="mixchart-shot-"))
    server = None
    try:
        if plan is not None:
            plan = Path(shutil.copy(plan, tmp / plan.name))
        server = start_voila(harness, REPO / "notebooks" / "planner.ipynb", plan, tmp)
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=str(harness.CHROMIUM), headless=True,
                                         args=harness.CHROMIUM_ARGS)
            try:
                page = harness._new_page(browser, 60_000)
                page.set_viewport_size(VIEWPORT)
                bh.open_voila(page, server.url, min_roots=min_roots)
                yield page
            finally:
                browser.close()
    finally:
        if server is not None:
            harness._stop_server(server)
        shutil.rmtree(tmp, ignore_errors=True)


def main() -> int:
    with served_page(None) as page:
        page.locator(".mixchart-worst-table td").first.wait_for()
        page.mouse.move(0, 0)  # no hover tooltip, no focus ring
        time.sleep(1.0)  # let late layout (fonts, tab bar) settle
        box = page.locator(".mixchart-app").bounding_box()
        clip = {
            "x": max(box["x"] - MARGIN_PX, 0),
            "y": max(box["y"] - MARGIN_PX, 0),
            "width": min(box["width"] + 2 * MARGIN_PX, VIEWPORT["width"]),
            "height": min(box["height"] + 2 * MARGIN_PX, VIEWPORT["height"]),
        }
        OUT.parent.mkdir(exist_ok=True)
        page.screenshot(path=str(OUT), clip=clip)
        # the comparison: keep the plan as "high side", flip to low side, show the comparison
        name = page.locator(".mixchart-ref-name input")
        name.fill("high side")
        name.press("Tab")
        page.get_by_role("button", name="Keep as reference").click()
        page.locator(".mixchart-side").locator("button", has_text="low side").click()
        page.wait_for_function("() => (document.querySelector('.mixchart-compare') || {innerText: ''})"
                               ".innerText.includes('low-side')", timeout=60_000)
        page.set_viewport_size({"width": VIEWPORT["width"], "height": 3200})
        bh.wait_for_bokeh_idle(page, min_roots=2)
        page.mouse.move(0, 0)
        time.sleep(1.5)
        top = page.locator(".mixchart-compare").bounding_box()
        ref = page.locator(".mixchart-reference-table").bounding_box()
        clip2 = {"x": max(top["x"] - MARGIN_PX, 0), "y": max(top["y"] - MARGIN_PX, 0),
                 "width": min(box["width"] + 2 * MARGIN_PX, VIEWPORT["width"]),
                 "height": ref["y"] + min(ref["height"], 420) - top["y"] + 2 * MARGIN_PX}
        page.screenshot(path=str(OUT_COMPARE), clip=clip2)
        errors = bh.unexpected_console_errors(page)
    errors += chain_shot()
    print(f"wrote {OUT} ({int(clip['width'])}x{int(clip['height'])} px), {OUT_COMPARE} and {OUT_CHAIN}")
    if errors:
        print(f"console errors: {errors}", file=sys.stderr)
        return 1
    return 0


def chain_shot() -> list[str]:
    """docs/screenshot_chain.png: the diagram, the end-to-end plane and the top of mixer 1's planes."""
    with served_page(CHAIN, min_roots=2) as page:
        page.locator(".mixchart-chain-paths td").first.wait_for()
        page.mouse.move(0, 0)
        time.sleep(1.0)
        box = page.locator(".mixchart-chain").bounding_box()
        clip = {"x": max(box["x"] - MARGIN_PX, 0), "y": max(box["y"] - MARGIN_PX, 0),
                "width": min(box["width"] + 2 * MARGIN_PX, VIEWPORT["width"]), "height": 1000}
        page.screenshot(path=str(OUT_CHAIN), clip=clip)
        return bh.unexpected_console_errors(page)


if __name__ == "__main__":
    sys.exit(main())
