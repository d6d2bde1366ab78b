"""The chain planner in a real browser: the diagram, the end-to-end plane, a mixer's planes, a re-plan.

Voila serves ``notebooks/planner.ipynb`` with a copy of the built-in scanner chain
(``MIXCHART_PLAN``); headless Debian Chromium drives it as an engineer would: reads the
frequency plan off the diagram, looks at the end-to-end plane, clicks the second mixer to see
its planes, and moves the first mixer's IF in its own planner to see the chain follow.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import helpers as bh
import pytest

pytestmark = pytest.mark.browser

REPO = Path(__file__).resolve().parents[2]
NOTEBOOK = REPO / "notebooks" / "planner.ipynb"
EXAMPLE = REPO / "mixchart" / "examples" / "chains" / "scanner_double_conversion.json"
VIEWPORT = {"width": 1600, "height": 1000}


@pytest.fixture(scope="module")
def page(tmp_path_factory, voila_server, browser_page_factory):
    root = tmp_path_factory.mktemp("chain")
    plan_path = root / "scanner.json"
    shutil.copy(EXAMPLE, plan_path)
    server = voila_server(NOTEBOOK, plan=plan_path)
    page = browser_page_factory()
    page.set_viewport_size(VIEWPORT)
    try:
        bh.open_voila(page, server.url, min_roots=2)
        page.locator(".mixchart-chain-paths td").first.wait_for()
    except Exception as exc:
        raise AssertionError(f"the chain planner never became idle: {exc}\nvoila log:\n{server.log_text()}") from exc
    return page


def test_the_diagram_labels_every_node_and_the_plane_draws_the_paths(page, artifacts_dir):
    diagram = page.locator(".mixchart-chain-diagram").inner_text()
    for text in ("preselector", "LNA", "mixer 1", "first-IF filter", "mixer 2", "second-IF filter",
                 "100 MHz to 500 MHz", "1.05 GHz", "10.7 MHz", "inverted", "normal sense"):
        assert text in diagram
    assert bh.has_figure(page, "end_to_end")
    tracks = bh.source_data(page, "e2e_tracks")
    assert len(tracks["xs"]) >= 1 and any("IF/3 feedthrough" in p for p in tracks["path"])  # the worst channel
    banner = page.locator(".mixchart-chain").inner_text()
    assert "FAIL" in banner and "limited by mixer 1" in banner
    assert bh.unexpected_console_errors(page) == []
    bh.screenshot(page, artifacts_dir / "chain_planner.png")


def test_clicking_the_second_mixer_shows_its_planes(page, artifacts_dir):
    page.get_by_role("button", name="mixer 2").click()
    bh.wait_until(lambda: "mixer 2" in page.locator(".mixchart-chain b").first.inner_text()
                  or "mixer 2</b>" in page.content(), "mixer 2's title")
    bh.wait_until(lambda: "mixer 2" in page.locator(".mixchart-app").first.inner_text(), "mixer 2's planner")
    bh.wait_for_bokeh_idle(page)
    bh.screenshot(page, artifacts_dir / "chain_planner_mixer2.png")
    assert bh.unexpected_console_errors(page) == []
