"""The chart's axes, legend and tooltips in a real browser.

Voila serves ``notebooks/planner.ipynb`` with a copy of the built-in uplink transmitter
example (an up-converter: a 140 MHz IF input, a 2.31-2.39 GHz RF output), loaded once for
the module as in ``test_planner.py``.  Its IF input axis and its RF axes read in different
units, so each axis's own unit shows here.  The tests read what BokehJS holds (axis labels,
the tick labels its formatter makes, source data) and what the page shows (the legend's
entries, the tooltips), and take screenshots to look at.

Order: the tests share one page.  The drag of the IF band changes the plan and is last.
"""

from __future__ import annotations

import re
import shutil
import time
from pathlib import Path
from types import SimpleNamespace

import helpers as bh
import pytest

from mixchart.analysis import evaluate
from mixchart.chart import CATEGORIES, ViewOptions, chart_data
from mixchart.chart_style import PALETTE, STRIP_HATCH
from mixchart.plan import load_plan
from mixchart.units import parse_frequency

pytestmark = pytest.mark.browser

REPO = Path(__file__).resolve().parents[2]
NOTEBOOK = REPO / "notebooks" / "planner.ipynb"
EXAMPLE = REPO / "mixchart" / "examples" / "uplink_transmitter.json"
VIEWPORT = {"width": 1600, "height": 1250}  # as test_planner.py: the whole app in one row
UNIT_HZ = {"Hz": 1.0, "kHz": 1e3, "MHz": 1e6, "GHz": 1e9}

# every axis of each figure in BokehJS: its label and the labels its formatter gives the major ticks
_AXES_JS = """
(name) => {
  const pv = window.__mxt.plot(name);
  return pv.axis_views.map((av) => {
    const ticks = av.tick_coords.major[av.dimension];
    return {dim: av.dimension, label: av.model.axis_label, ticks: av.model.formatter.doFormat(ticks, av),
            values: Array.from(ticks), start: av.ranges[0].start, end: av.ranges[0].end};
  });
}
"""

# the tooltips on screen: .bk-Tooltip hosts (inside shadow roots) that are displayed, with their text
_TOOLTIPS_JS = """
() => {
  const out = [];
  const walk = (root) => {
    for (const el of root.querySelectorAll("*")) {
      if (el.classList.contains("bk-Tooltip")) {
        const style = getComputedStyle(el);
        const box = el.getBoundingClientRect();
        if (style.display !== "none" && style.visibility !== "hidden" && box.width > 0 && box.height > 0) {
          const parts = el.shadowRoot ? [...el.shadowRoot.children].filter((c) => c.tagName !== "STYLE") : [el];
          out.push(parts.map((c) => c.innerText || c.textContent).join(" ").trim());
        }
      }
      if (el.shadowRoot) walk(el.shadowRoot);
    }
  };
  walk(document);
  return out;
}
"""


@pytest.fixture(scope="module")
def app(tmp_path_factory, voila_server, browser_page_factory, artifacts_dir):
    root = tmp_path_factory.mktemp("chart-view")
    plan_path = root / "plan.json"
    shutil.copy(EXAMPLE, plan_path)
    server = voila_server(NOTEBOOK, plan=plan_path)
    page = browser_page_factory()
    page.set_viewport_size(VIEWPORT)
    bh.open_planner(page, server)
    ev = evaluate(load_plan(plan_path), base_dir=root)
    return SimpleNamespace(page=page, server=server, root=root, plan_path=plan_path, shots=artifacts_dir,
                           ev=ev)


_wait_until = bh.wait_until


def _axes(page, figure: str) -> dict[str, dict]:
    bh.figure_names(page)  # installs the page-side helpers
    return {"x" if a["dim"] == 0 else "y": a for a in page.evaluate(_AXES_JS, figure)}


def _tooltips(page) -> list[str]:
    return page.evaluate(_TOOLTIPS_JS)


def _hover(page, figure: str, x: float, y: float) -> list[str]:
    """Move the pointer onto data point (x, y) of a figure; the tooltips shown once they settle."""
    page.mouse.move(5, 5)
    _wait_until(lambda: not _tooltips(page), "no tooltip before the hover", 10.0)
    (sx, sy), = bh.data_to_screen(page, figure, [(x, y)])
    page.mouse.move(sx - 3, sy - 2)
    page.mouse.move(sx, sy)  # two moves: a hover tool answers to a move inside the frame
    shown = _wait_until(lambda: _tooltips(page), f"a tooltip over {figure} at ({x}, {y})", 10.0)
    time.sleep(0.3)  # any second tooltip would come with the same mouse event
    return _tooltips(page) or shown


def _field(page, key: str) -> str:
    return page.locator(f".mixchart-{key} input").input_value()


def _assert_clean(page) -> None:
    assert bh.unexpected_console_errors(page) == []
    assert bh.notebook_errors(page) == []
    assert "Traceback" not in page.locator("body").inner_text()


# --------------------------------------------------------------------------- tests


def test_each_axis_reads_in_its_own_unit(app):
    # Issue "Axes, units, clutter": no "0.14 GHz" IF axis.  The uplink's IF input axis spans 0-380 MHz
    # (chart_axes.plane_windows: 0 to 2.5 x the IF's top edge, 152 MHz) and reads in MHz; its RF axes
    # (1.99-2.43 GHz and the LO 2.16-2.26 GHz) in GHz.  BokehJS holds what Python computed.
    page = app.page
    meta = chart_data(app.ev, ViewOptions()).meta
    want = {("tuning_plane", "x"): "RF output (GHz)", ("tuning_plane", "y"): "LO (GHz)",
            ("output_plane", "x"): "IF input (MHz)", ("output_plane", "y"): "RF output (GHz)",
            ("margin_plot", "x"): "RF output (GHz)"}
    assert meta["output_x_label"] == "IF input (MHz)" and meta["tuning_y_label"] == "LO (GHz)"
    for (figure, dim), label in want.items():
        axis = _axes(page, figure)[dim]
        assert axis["label"] == label, (figure, dim, axis["label"])
        unit = UNIT_HZ[re.search(r"\((\w+)\)$", label).group(1)]
        # every tick label is a number the formatter wrote for its tick, below 1000 in the axis unit,
        # and the largest reads 1 or more: the unit suits the axis (no 0.14 GHz)
        values = [float(t) for t in axis["ticks"]]
        assert values == pytest.approx(axis["values"], rel=1e-9, abs=1e-9), axis["ticks"]
        assert len(values) >= 3 and max(abs(v) for v in values) < 1000 and max(abs(v) for v in values) >= 1, axis
        # the axis in Hz covers what it must: the IF band (128-152 MHz) on the IF axis, the RF band
        # (2.30-2.40 GHz, channels 2.31-2.39 GHz with a 20 MHz signal) on the RF axes
        lo, hi = axis["start"] * unit, axis["end"] * unit
        if label.startswith("IF"):
            assert lo <= 128e6 and hi >= 152e6, (lo, hi)
        elif label.startswith("RF"):
            assert lo <= 2.30e9 and hi >= 2.40e9, (lo, hi)
    # the band sources are in their own axis's unit: the IF band in MHz, the RF band in GHz
    assert [bh.source_data(page, "out_input_band")[k][0] for k in ("x0", "x1")] == pytest.approx([128.0, 152.0])
    assert [bh.source_data(page, "out_output_band")[k][0] for k in ("y0", "y1")] == pytest.approx([2.30, 2.40])
    assert [bh.source_data(page, "rf_band")[k][0] for k in ("x0", "x1")] == pytest.approx([2.30, 2.40])
    bh.screenshot(page, app.shots / "chart-view-page.png")
    page.locator(".mixchart-legend").first.evaluate("(el) => el.scrollIntoView({block: 'start'})")
    page.screenshot(path=str(app.shots / "chart-view-uplink.png"))  # the legend, both planes, the margin plot
    _assert_clean(page)


def test_the_legend_shows_every_colour_hatch_and_mark_drawn(app):
    page = app.page
    legend = page.locator(".mixchart-legend").first
    legend.wait_for()
    entries = legend.locator(".mixchart-legend-entry")
    meanings = entries.evaluate_all("(els) => els.map((e) => e.dataset.meaning)")
    assert set(meanings) >= {*CATEGORIES, "plan", "channel", "response", "dot", "offchart", "band", "filter"}
    assert all(entries.nth(i).locator("svg").count() >= 1 for i in range(entries.count()))
    # a transmitter's diamonds are its output products at the current LO (the legend follows the plan)
    assert "an output product at the current LO" in legend.inner_text()
    # each category's strip swatch is hatched with the pattern and the colour its strips are drawn with
    strips = bh.source_data(page, "tuning_strips")
    assert strips["category"], "the uplink draws strips"
    for category in set(strips["category"]):
        # the renderer that draws this category's strips, as BokehJS has it
        hatch, colour = page.evaluate(
            "(n) => { const g = window.__mxt.model(n).glyph; return [g.hatch_pattern.value, g.hatch_color.value]; }",
            f"strips_{category}")
        swatch = legend.locator(f'[data-meaning="{category}"] svg[data-hatch]')
        assert swatch.get_attribute("data-hatch") == hatch == STRIP_HATCH[category][0]
        assert swatch.locator("path").get_attribute("stroke") == colour == CATEGORIES[category][1]
    # every colour a line, dot or mark is drawn in is a colour of the legend, with the meaning drawn
    drawn = set()
    for name in ("out_lines", "out_points", "tuning_points", "tuning_marks", "margin_channels"):
        data = bh.source_data(page, name)
        drawn |= set(zip(data["category"], data["color"], strict=True))
    for category, colour in drawn:
        line = legend.locator(f'[data-meaning="{category}"] svg line')
        assert line.get_attribute("stroke") == colour, (category, colour)
    # the shading swatch is the filter green, and nothing else in the legend is
    html = legend.inner_html()
    assert PALETTE["filter"] in legend.locator('[data-meaning="filter"]').inner_html()
    assert html.count(PALETTE["filter"]) == legend.locator('[data-meaning="filter"]').inner_html().count(
        PALETTE["filter"])
    legend.screenshot(path=str(app.shots / "chart-view-legend.png"))
    _assert_clean(page)


def test_one_tooltip_at_a_time(app):
    # Issue "Tooltips": a dot lies on its strip (tuning plane) or its line (output plane); hovering it
    # shows one tooltip, the dot's, not one per renderer under the pointer.
    page = app.page
    pts = bh.source_data(page, "tuning_points")
    strips = bh.source_data(page, "tuning_strips")
    assert pts["x"] and strips["xs"]
    k = pts["label"].index("unwanted sideband")  # LO - IF, 2.11 GHz: inside the (1,1) difference strip
    shown = _hover(page, "tuning_plane", pts["x"][k], pts["y"][k])
    assert len(shown) == 1, shown
    assert "unwanted sideband" in shown[0] and "judged against" in shown[0], shown
    page.screenshot(path=str(app.shots / "chart-view-tooltip-tuning.png"))

    out = bh.source_data(page, "out_points")
    w = out["label"].index("wanted")  # on the wanted line, inside the passband, on the IF band
    shown = _hover(page, "output_plane", out["x"][w], out["y"][w])
    assert len(shown) == 1 and "wanted" in shown[0] and "judged against" in shown[0], shown
    page.screenshot(path=str(app.shots / "chart-view-tooltip-output.png"))

    # away from every dot a line's own tooltip shows, still one: the wanted line half-way up to its end
    lines = bh.source_data(page, "out_lines")
    i = lines["label"].index("(1,1) wanted")
    x = lines["x0"][i] + 0.8 * (lines["x1"][i] - lines["x0"][i])
    y = lines["y0"][i] + 0.8 * (lines["y1"][i] - lines["y0"][i])
    shown = _hover(page, "output_plane", x, y)
    assert len(shown) == 1 and "(1,1) wanted" in shown[0] and "judged against" not in shown[0], shown
    page.mouse.move(5, 5)
    _assert_clean(page)


def test_dragging_the_if_band_on_its_mhz_axis_moves_the_if(app):
    # The output plane's IF input axis is in MHz while its RF axis is in GHz: the app converts the
    # dragged band with the band's own axis unit (meta["source_scales"]), so 10 MHz right is 10 MHz.
    page = app.page
    page.locator(".mixchart-app .lm-TabBar-tab").filter(has_text=re.compile(r"^\s*Plan\s*$")).click()
    if0_text = _field(page, "if-center")
    if0 = parse_frequency(if0_text)
    band = bh.source_data(page, "out_input_band")
    x_mid = 0.5 * (band["x0"][0] + band["x1"][0])
    assert x_mid * 1e6 == pytest.approx(if0, rel=1e-9)
    x_handle, y = bh.band_handle(page, "output_plane", "input_band_box", "move")  # the band's move handle
    assert x_handle == pytest.approx(x_mid)
    (sx0, _), (sx1, _) = bh.data_to_screen(page, "output_plane", [(x_mid, y), (x_mid + 1.0, y)])
    mhz_per_px = 1.0 / abs(sx1 - sx0)
    bh.drag(page, "output_plane", (x_mid, y), (x_mid + 10.0, y))
    text = _wait_until(lambda: (t := _field(page, "if-center")) != if0_text and t, "a new IF centre in the field")
    # derived by hand: 140 MHz + 10 MHz = 150 MHz, within two screen pixels of the drag
    assert parse_frequency(text) == pytest.approx(if0 + 10e6, abs=2 * mhz_per_px * 1e6), text
    _wait_until(lambda: abs(bh.source_data(page, "out_input_band")["x0"][0] - (parse_frequency(text) - 12e6) / 1e6)
                < 1e-6, "the moved IF band in the chart")
    bh.screenshot(page, app.shots / "chart-view-after-if-drag.png")
    _assert_clean(page)
