"""The planner app in a real browser, used as an RF engineer would use it.

Voila serves ``notebooks/planner.ipynb`` with a copy of the built-in FM
receiver example (``MIXCHART_PLAN``); headless Debian Chromium loads the page
once for the whole module (a Voila page load costs 5-10 s).  Each test drives
the page through the widgets and the chart, then reads back what BokehJS holds
and what the page shows.

Order: the tests share one page and one kernel.  Each one reads the state it
starts from off the page and checks changes relative to it, and the tests that
change the plan only as a side step (requirement slider, bad entry, injection
side) put it back, so they pass in any order.  The IF drag deliberately leaves
its change in place, and the channel test leaves the view on another channel;
the save test then saves whatever the page shows.  The RF-band drag and the
click on the tuning plane also leave their changes; they read their start
from the page too.

The page is 1600 px wide: at the harness's default 1280 px the output plane is
clipped (the controls and both planes do not fit in one row and the row does
not wrap or scroll), so it could not be dragged.

Source data is compared through JSON (``_canon``): the points' ``margin``
column holds NaN for the wanted row, and NaN != NaN would make a plain ``!=``
report a change that did not happen.
"""

from __future__ import annotations

import base64
import json
import re
import shutil
import time
from pathlib import Path
from types import SimpleNamespace

import helpers as bh
import pytest

from mixchart.analysis import evaluate
from mixchart.chart import CLOSE_DB
from mixchart.plan import load_plan, loads_plan
from mixchart.units import format_frequency, parse_frequency

pytestmark = pytest.mark.browser

REPO = Path(__file__).resolve().parents[2]
NOTEBOOK = REPO / "notebooks" / "planner.ipynb"
EXAMPLE = REPO / "mixchart" / "examples" / "fm_receiver.json"
#: Wide and tall enough for the whole app (controls, both planes, the table).
VIEWPORT = {"width": 1600, "height": 1250}
MHZ = 1e6  # the FM example's display unit on both planes

SOURCES = ("tuning_strips", "tuning_plan", "tuning_marks", "rf_band", "out_lines", "out_points",
           "out_output_band", "out_input_band")


# --------------------------------------------------------------------------- fixture and page helpers


@pytest.fixture(scope="module")
def app(tmp_path_factory, voila_server, browser_page_factory, artifacts_dir):
    root = tmp_path_factory.mktemp("planner")
    plan_path = root / "plan.json"
    shutil.copy(EXAMPLE, plan_path)
    server = voila_server(NOTEBOOK, plan=plan_path)
    page = browser_page_factory()
    page.set_viewport_size(VIEWPORT)
    bh.open_planner(page, server)
    return SimpleNamespace(page=page, server=server, root=root, plan_path=plan_path, shots=artifacts_dir)


_wait_until = bh.wait_until


def _open_tab(page, title: str) -> None:
    """Click a tab of the control panel (a hidden tab's widgets cannot be used)."""
    tab = page.locator(".mixchart-app .lm-TabBar-tab").filter(has_text=re.compile(rf"^\s*{title}\s*$"))
    tab.click()
    page.locator(".mixchart-app .lm-TabBar-tab.lm-mod-current").filter(has_text=title).wait_for()


def _field(page, key: str) -> str:
    """Text shown in a text field, e.g. ``_field(page, "if-center")`` -> ``"10.7 MHz"``."""
    return page.locator(f".mixchart-{key} input").input_value()


def _status(page) -> str:
    return page.locator(".mixchart-status").inner_text().strip()


def _status_line(page) -> str:
    """The PASS/FAIL line of the status."""
    lines = [line for line in _status(page).splitlines() if re.match(r"(PASS|FAIL):", line)]
    assert len(lines) == 1, _status(page)
    return lines[0]


def _table_rows(page, table: str = ".mixchart-worst-table") -> list[list[str]]:
    """Body rows of a worst-case table (the edited plan's by default), as cell texts."""
    return page.evaluate(
        """(table) => [...document.querySelectorAll(`${table} table tr`)]
                 .filter((tr) => tr.querySelector('td'))
                 .map((tr) => [...tr.querySelectorAll('td')].map((td) => td.innerText.trim()))""",
        table,
    )


def _margins(rows: list[list[str]]) -> list[float]:
    return [float(r[5]) for r in rows]  # column 6: "margin dB"


def _sources(page, names=SOURCES) -> dict[str, dict]:
    return {name: bh.source_data(page, name) for name in names}


def _canon(data) -> str:
    """Comparable form of source data: NaN (e.g. the wanted row's margin) equals NaN here."""
    return json.dumps(data, sort_keys=True)


def _source_changed(page, name: str, before: dict, *, timeout_s: float = 45.0) -> dict:
    """Wait until a source differs from ``before`` (NaN-aware, unlike a plain ``!=``); return it."""
    old = _canon(before)
    return _wait_until(
        lambda: (d := bh.source_data(page, name)) and _canon(d) != old and d, f"a change of {name!r}", timeout_s
    )


def _figure_attr(page, figure: str, js_path: str):
    """A property of a named figure model in BokehJS, e.g. ``title.text``."""
    bh.figure_names(page)  # installs the page-side helpers
    return page.evaluate(f"(n) => window.__mxt.model(n).{js_path}", figure)


def _assert_clean(page) -> None:
    """No console errors we did not expect, no Python output on stderr, no traceback text."""
    assert bh.unexpected_console_errors(page) == []
    assert bh.notebook_errors(page) == []
    assert "Traceback" not in page.locator("body").inner_text()
    assert page.blocked_requests == []  # nothing left 127.0.0.1 (no CDN font, no icon stylesheet)


def _nums(values) -> list:
    """Source numbers with NaN (sent by BokehJS as NaN or null) as None."""
    return [None if v is None or (isinstance(v, float) and v != v) else float(v) for v in values]


def _category(margin_db: float) -> str:
    # as chart.py documents: below 0 violates, below CLOSE_DB close, else clear
    return "violates" if margin_db < 0 else "close" if margin_db < CLOSE_DB else "clear"


# --------------------------------------------------------------------------- tests


def test_page_loads_and_draws_the_plan(app):
    page = app.page
    names = bh.figure_names(page)
    assert "tuning_plane" in names and "output_plane" in names, names
    data = _sources(page)
    for name, cols in data.items():
        assert cols and all(len(col) > 0 for col in cols.values()), (name, cols)
    # The output plane's IF band is the plan's IF passband, in MHz.
    if_c = parse_frequency(_field(page, "if-center"))
    if_bw = parse_frequency(_field(page, "if-bandwidth"))
    band = data["out_output_band"]
    assert band["y0"][0] * MHZ == pytest.approx(if_c - if_bw / 2, rel=1e-9)
    assert band["y1"][0] * MHZ == pytest.approx(if_c + if_bw / 2, rel=1e-9)
    # The tuning plane's RF band spans the channels plus half the signal bandwidth each side.
    rf_lo = parse_frequency(_field(page, "rf-start")) - parse_frequency(_field(page, "sig-bandwidth")) / 2
    assert data["rf_band"]["x0"][0] * MHZ == pytest.approx(rf_lo, rel=1e-9)
    assert re.fullmatch(r"(PASS|FAIL): worst margin [+-]\d+\.\d dB \(.+\); spur-free .*", _status_line(page))
    rows = _table_rows(page)
    assert len(rows) >= 3, rows
    assert all(re.fullmatch(r"[+-]\d+\.\d", r[5]) for r in rows), rows
    assert _margins(rows) == sorted(_margins(rows))  # worst first
    # the File tab's name field follows the opened plan (saves go next to it)
    assert page.locator(".mixchart-save-path input").input_value() == app.plan_path.name
    shot = bh.screenshot(page, app.shots / "planner-initial.png")
    assert shot.stat().st_size > 50_000
    _assert_clean(page)


def test_requirement_slider_moves_every_margin_and_recolours_the_chart(app):
    page = app.page
    _open_tab(page, "Plan")
    req0 = float(bh.slider_value(page, ".mixchart-requirement"))
    rows0 = _table_rows(page)
    before = _sources(page, ("tuning_strips", "tuning_marks"))
    status0 = _status_line(page)
    worst0 = float(re.search(r"worst margin ([+-]\d+\.\d) dB", status0).group(1))

    # continuous_update=False: each key press commits one value (on key release).
    # One press at a time, as a user watching the table would: derived by hand,
    # margin = rejection - requirement and the rejection does not depend on the
    # requirement, so every margin drops by exactly 1 dB a press (the table keeps
    # its rows and order; the display rounds to 0.1 dB).
    for k in (1, 2, 3):
        bh.press_slider_key(page, ".mixchart-requirement", "ArrowRight")
        expected = [m - k for m in _margins(rows0)]
        rows = _wait_until(
            lambda expected=expected: (r := _table_rows(page))
            and all(abs(a - b) < 0.11 for a, b in zip(_margins(r), expected, strict=True))
            and r,
            f"every margin {k} dB lower",
        )
    assert float(bh.slider_value(page, ".mixchart-requirement")) == req0 + 3
    assert [r[:5] for r in rows] == [r[:5] for r in rows0]  # same products, same levels
    assert f"worst margin {worst0 - 3.0:+.1f} dB" in _wait_until(
        lambda: (s := _status_line(page)) != status0 and s, "a new status line"
    )

    # A strip's colour is its after-filter margin, the table's verdict (chart.py): every margin
    # drops by 3 dB and the colours follow.  (The table is sent before the chart, so wait for
    # the chart's own final state.)
    def moved(strips: dict) -> bool:
        return all(
            (a is None and b is None) or (a is not None and b is not None and abs(b - (a - 3.0)) < 1e-6)
            for a, b in zip(_nums(before["tuning_strips"]["margin"]), _nums(strips["margin"]), strict=True)
        )

    strips = _wait_until(
        lambda: (d := bh.source_data(page, "tuning_strips")) and moved(d) and d,
        "strip margins 3 dB lower",
    )
    for margin, cat in zip(_nums(strips["margin"]), strips["category"], strict=True):
        assert cat == ("wanted" if cat == "wanted" else "clear" if margin is None else _category(margin))
    # a strip whose margin crosses a colour boundary changes colour, and only such a strip
    crossing = [_category(a) != _category(a - 3.0) for a in _nums(before["tuning_strips"]["margin"])
                if a is not None]
    assert (strips["category"] != before["tuning_strips"]["category"]) == any(crossing)
    worst_mark0 = min(before["tuning_marks"]["margin"])
    _wait_until(
        lambda: abs(min(bh.source_data(page, "tuning_marks")["margin"]) - (worst_mark0 - 3.0)) < 1e-6,
        "channel marks 3 dB worse",
    )

    # Back to where it was: the table and the chart return too.
    for k in (2, 1, 0):
        bh.press_slider_key(page, ".mixchart-requirement", "ArrowLeft")
        expected = [m - k for m in _margins(rows0)]
        _wait_until(lambda expected=expected: all(
                        abs(a - b) < 0.11 for a, b in zip(_margins(_table_rows(page)), expected, strict=True)),
                    f"every margin {k} dB below the original")
    _wait_until(lambda: _table_rows(page) == rows0, "the original table")
    _wait_until(
        lambda: _canon(bh.source_data(page, "tuning_strips")) == _canon(before["tuning_strips"]), "the original strips"
    )
    assert _status_line(page) == status0
    _assert_clean(page)


_SENT_HOOK = """() => {
  if (window.__mxt_sent) { window.__mxt_sent.length = 0; return; }
  window.__mxt_sent = [];
  const send = WebSocket.prototype.send;
  WebSocket.prototype.send = function (d) {
    try { window.__mxt_sent.push(typeof d === 'string' ? d : new TextDecoder().decode(d)); } catch (e) {}
    return send.call(this, d);
  };
}"""


def test_the_page_sends_the_kernels_own_changes_back_never(app):
    # jupyter_bokeh 4.1's view re-sends every change it applied from the kernel (widget.py,
    # ECHO_GUARD_JS): a plan change made each column travel back.  Watch what the page sends
    # while one plan change arrives: the slider's value, and nothing of the chart's data.
    page = app.page
    _open_tab(page, "Plan")
    before = bh.source_data(page, "tuning_strips")
    page.evaluate(_SENT_HOOK)
    bh.press_slider_key(page, ".mixchart-requirement", "ArrowRight")
    _source_changed(page, "tuning_strips", before)
    time.sleep(1.0)  # an echo would leave right after the patch is applied
    sent = page.evaluate("() => window.__mxt_sent")
    assert any('"method":"update"' in m and '"value"' in m for m in sent), sent  # the slider reached the kernel
    echoed = [m[-300:] for m in sent if '"kind":"ModelChanged"' in m and '"attr":"data"' in m]
    assert echoed == []
    after = bh.source_data(page, "tuning_strips")
    bh.press_slider_key(page, ".mixchart-requirement", "ArrowLeft")  # leave the plan as it was
    _source_changed(page, "tuning_strips", after)
    _assert_clean(page)


def _title_channel(page) -> tuple[float, float]:
    """(LO, channel) in Hz from the output plane's title."""
    title = _figure_attr(page, "output_plane", "title.text")
    match = re.search(r"at LO (.+?) \(channel (.+?)\)", title)
    assert match, title
    return parse_frequency(match.group(1)), parse_frequency(match.group(2))


def test_channel_slider_moves_the_output_plane(app):
    page = app.page
    lo0, ch0 = _title_channel(page)
    step = parse_frequency(_field(page, "rf-step"))
    start = parse_frequency(_field(page, "rf-start"))
    before = _sources(page, ("out_lines", "out_points", "tuning_now"))
    _open_tab(page, "View")
    presses = 3
    key, sign = ("ArrowLeft", -1) if ch0 - presses * step >= start - 1 else ("ArrowRight", +1)
    for k in range(1, presses + 1):  # one press at a time, each seen in the title before the next
        bh.press_slider_key(page, ".mixchart-channel", key)
        ch_want = ch0 + sign * k * step
        lo, ch = _wait_until(
            lambda ch_want=ch_want: (t := _title_channel(page)) and abs(t[1] - ch_want) < 1.0 and t,
            f"channel {ch_want} Hz in the title",
        )
    # Tracking LO on a grid that divides the channel step: it moves as the channel does.
    assert lo - lo0 == pytest.approx(ch - ch0, abs=1.0)
    expected_text = f"channel {format_frequency(ch)}, LO {format_frequency(lo)}"
    _wait_until(lambda: expected_text in page.locator("span.mixchart-channel-text").inner_text(), expected_text)

    lines = _source_changed(page, "out_lines", before["out_lines"])
    _source_changed(page, "out_points", before["out_points"])
    now = _source_changed(page, "tuning_now", before["tuning_now"])
    assert now["x"][0] * MHZ == pytest.approx(ch, rel=1e-9)
    # derived by hand: the wanted down-conversion is the difference |f_RF - f_LO|,
    # so both ends of the wanted line lie on y = |x - LO| for the new LO.
    wanted = [i for i, c in enumerate(lines["category"]) if c == "wanted"]
    assert len(wanted) == 1, lines["label"]
    (i,) = wanted
    for x, y in ((lines["x0"][i], lines["y0"][i]), (lines["x1"][i], lines["y1"][i])):
        assert y == pytest.approx(abs(x - lo / MHZ), abs=1e-6)
    _assert_clean(page)


def test_dragging_the_if_band_changes_the_plan_in_python(app):
    page = app.page
    _open_tab(page, "Plan")
    if0_text = _field(page, "if-center")
    if0 = parse_frequency(if0_text)
    if_bw = parse_frequency(_field(page, "if-bandwidth"))
    status0 = _status(page)
    band = bh.source_data(page, "out_output_band")
    y_mid = 0.5 * (band["y0"][0] + band["y1"][0])
    assert y_mid * MHZ == pytest.approx(if0, rel=1e-9)
    # Grab the band by its move handle (the square in its middle).
    x, y_handle = bh.band_handle(page, "output_plane", "output_band_box", "move")
    assert y_handle == pytest.approx(y_mid)
    (_, sy0), (_, sy1) = bh.data_to_screen(page, "output_plane", [(x, y_mid), (x, y_mid + 1.0)])
    mhz_per_px = 1.0 / abs(sy1 - sy0)

    # up by 0.5 MHz: the IF axis shows the passband and three widths each side (10.7 MHz +/- 0.805 MHz,
    # chart_axes.output_axis_window), so the drag ends inside the plot
    bh.drag(page, "output_plane", (x, y_mid), (x, y_mid + 0.5))

    # The kernel received the edit, applied it, snapped it and showed it in the IF field.
    text = _wait_until(lambda: (t := _field(page, "if-center")) != if0_text and t, "a new IF centre in the field")
    if1 = parse_frequency(text)
    assert if1 == pytest.approx(if0 + 0.5 * MHZ, abs=2 * mhz_per_px * MHZ), text
    assert if1 == float(f"{if1:.6g}")  # snapped to 6 significant digits: no float drift
    status = _wait_until(lambda: (s := _status(page)) != status0 and s, "a new status")
    assert f"IF {format_frequency(if1)}" in status
    # Python re-evaluated and pushed the snapped band (same width) back to the browser.
    _wait_until(
        lambda: (b := bh.source_data(page, "out_output_band"))
        and abs(b["y0"][0] * MHZ - (if1 - if_bw / 2)) < 1e-3
        and abs(b["y1"][0] * MHZ - (if1 + if_bw / 2)) < 1e-3,
        "the snapped IF band in the chart",
    )
    assert _field(page, "if-bandwidth") == format_frequency(if_bw, 9)
    bh.screenshot(page, app.shots / "planner-after-if-drag.png")
    _assert_clean(page)


def test_save_writes_the_plan_the_page_shows(app):
    page = app.page
    target = app.root / "saved by the browser.json"
    target.unlink(missing_ok=True)
    _open_tab(page, "File")
    path_field = page.locator(".mixchart-save-path input")
    path_field.fill(str(target))
    path_field.press("Tab")
    page.locator("button.mixchart-save").click()
    msg = page.locator(".mixchart-file-msg")
    _wait_until(lambda: f"saved {target}" in msg.inner_text(), "the 'saved' message")

    saved = load_plan(target)
    # The file holds what the page shows ...
    assert format_frequency(saved.if_.center_hz, 9) == _field(page, "if-center")
    assert format_frequency(saved.rf.start_hz, 9) == _field(page, "rf-start")
    assert f"{saved.requirement.min_rejection_db:.0f}" == bh.slider_value(page, ".mixchart-requirement")
    active_side = page.locator(".mixchart-side button.mod-active").inner_text().strip()
    assert active_side == f"{saved.lo.side} side"
    # ... and re-evaluates to the status line the page shows.
    assert evaluate(saved, base_dir=target.parent).summary.line() == _status_line(page)

    link = msg.locator("a.mixchart-download")
    assert link.get_attribute("download") == target.name
    href = link.get_attribute("href")
    prefix = "data:application/json;base64,"
    assert href.startswith(prefix)
    text = base64.b64decode(href[len(prefix):]).decode("utf-8")
    assert json.loads(text) == json.loads(target.read_text(encoding="utf-8"))
    assert loads_plan(text) == saved
    _assert_clean(page)


def test_bad_entry_shows_a_message_and_keeps_the_chart(app):
    page = app.page
    _open_tab(page, "Plan")
    field = page.locator(".mixchart-if-center input")
    good = field.input_value()
    before = _sources(page)
    status0 = _status(page)
    error = page.locator(".mixchart-if-center + * .mixchart-error")  # the message right below the field
    assert error.count() == 0

    field.fill("banana")
    field.press("Enter")
    error.wait_for()
    text = error.inner_text()
    assert "banana" in text and "IF centre" in text, text
    assert "Traceback" not in text
    # The handler answered (the message is there): the chart and the plan are untouched, and the
    # banner says it shows the last valid plan (item 10 of the planner issue).
    assert _canon(_sources(page)) == _canon(before)
    _wait_until(lambda: "showing the last valid plan" in _status(page), "the last-valid-plan mark")
    assert _status(page).startswith(status0)

    field.fill(good)  # the user corrects the entry: the message and the mark go, nothing else changes
    field.press("Enter")
    error.wait_for(state="detached")
    _wait_until(lambda: _status(page) == status0, "the banner without the mark")
    assert _canon(_sources(page)) == _canon(before)

    # a value beyond a limit is refused with a message that names the field as the screen does
    order = page.locator(".mixchart-max-order input")
    order.fill("999")
    order.press("Enter")
    plan_error = page.locator(".mixchart-error", has_text="max order")
    plan_error.wait_for()
    assert plan_error.inner_text().startswith("max order (max_order): 999 is invalid; must be <= 25")
    assert _canon(_sources(page)) == _canon(before)  # not clamped: the plan is as it was
    order.fill("7")
    order.press("Enter")
    plan_error.wait_for(state="detached")
    _assert_clean(page)


def test_low_side_injection_moves_the_plan_line(app):
    page = app.page
    _open_tab(page, "Plan")
    if_c = parse_frequency(_field(page, "if-center"))
    lo_step = parse_frequency(_field(page, "lo-step"))
    side = page.locator(".mixchart-side")
    assert side.locator("button.mod-active").inner_text().strip() == "high side"
    before = bh.source_data(page, "tuning_plan")
    # derived by hand: high-side tracking LO = f_RF + f_IF, on the LO grid
    assert all(abs(y * MHZ - (x * MHZ + if_c)) <= lo_step / 2 + 1
               for x, y in zip(before["x"], before["y"], strict=True))

    side.locator("button", has_text="low side").click()
    after = _source_changed(page, "tuning_plan", before)
    assert after["x"] == before["x"]
    # low-side tracking LO = f_RF - f_IF, on the LO grid
    assert all(abs(y * MHZ - (x * MHZ - if_c)) <= lo_step / 2 + 1 for x, y in zip(after["x"], after["y"], strict=True))
    _wait_until(lambda: "low-side" in _status(page), "low-side in the status")

    side.locator("button", has_text="high side").click()
    _wait_until(lambda: _canon(bh.source_data(page, "tuning_plan")) == _canon(before), "the high-side plan line again")
    _wait_until(lambda: "high-side" in _status(page), "high-side in the status")
    _assert_clean(page)


def test_clicking_the_tuning_plane_picks_the_nearest_channel(app):
    page = app.page
    _open_tab(page, "View")
    now = bh.source_data(page, "tuning_now")
    target = 95.03 if abs(now["x"][0] - 95.0) > 1 else 101.03  # somewhere else in the 88-108 MHz band
    (x, y), = bh.data_to_screen(page, "tuning_plane", [(target, now["y"][0])])
    page.mouse.click(x, y)
    # the channel raster is 100 kHz: the nearest channel centre to the click
    expected = round(target * 10) / 10
    after = _wait_until(
        lambda: (d := bh.source_data(page, "tuning_now")) and abs(d["x"][0] - expected) < 0.051 and d,
        "the clicked channel",
    )
    assert after["channel"][0] == format_frequency(after["x"][0] * MHZ)
    assert f"channel {format_frequency(after['x'][0] * MHZ)}" in (
        page.locator(".mixchart-channel-text").first.inner_text()
    )
    _assert_clean(page)


def test_dragging_the_rf_band_moves_the_tuning_range(app):
    page = app.page
    _open_tab(page, "Plan")
    start0 = parse_frequency(_field(page, "rf-start"))
    stop0 = parse_frequency(_field(page, "rf-stop"))
    step = parse_frequency(_field(page, "rf-step"))
    x_mid, y = bh.band_handle(page, "tuning_plane", "rf_band_box", "move")  # the band's move handle
    (sx0, _), (sx1, _) = bh.data_to_screen(page, "tuning_plane", [(x_mid, y), (x_mid + 1.0, y)])
    mhz_per_px = 1.0 / abs(sx1 - sx0)

    bh.drag(page, "tuning_plane", (x_mid, y), (x_mid - 2.0, y))  # left by 2 MHz

    text = _wait_until(lambda: (t := _field(page, "rf-start")) != format_frequency(start0, 9) and t, "a new RF start")
    start1 = parse_frequency(text)
    stop1 = parse_frequency(_field(page, "rf-stop"))
    # the band keeps its width and its 100 kHz raster (derived by hand: 88 MHz - 2 MHz = 86 MHz)
    assert start1 == pytest.approx(start0 - 2.0 * MHZ, abs=2 * mhz_per_px * MHZ + step)
    assert stop1 - start1 == pytest.approx(stop0 - start0)
    assert round(start1 / step) * step == pytest.approx(start1)
    _assert_clean(page)


def test_gestures_pan_unless_they_start_on_a_band_handle(app):
    # Item 3: a plain drag pans (inside the band too), a band moves only from its handles, an edge
    # handle resizes it, a drag across the band's direction never changes it, and the count stays whole.
    page = app.page
    _open_tab(page, "Plan")
    start0, stop0 = _field(page, "rf-start"), _field(page, "rf-stop")
    sources0 = _canon(_sources(page, ("rf_band", "out_output_band", "out_input_band")))
    x0 = _figure_attr(page, "tuning_plane", "x_range.start")
    x1 = _figure_attr(page, "tuning_plane", "x_range.end")
    y0 = _figure_attr(page, "tuning_plane", "y_range.start")
    y1 = _figure_attr(page, "tuning_plane", "y_range.end")
    band = bh.source_data(page, "rf_band")
    inside = (0.5 * (band["x0"][0] + band["x1"][0]) + 0.1 * (band["x1"][0] - band["x0"][0]),
              y0 + 0.15 * (y1 - y0))  # inside the RF band, away from its handles
    bh.drag(page, "tuning_plane", inside, (inside[0] - 0.1 * (x1 - x0), inside[1] + 0.1 * (y1 - y0)))
    _wait_until(lambda: _figure_attr(page, "tuning_plane", "x_range.start") != x0, "the tuning plane panned")
    page.wait_for_timeout(500)
    assert (_field(page, "rf-start"), _field(page, "rf-stop")) == (start0, stop0)  # the plan did not move
    assert _canon(_sources(page, ("rf_band", "out_output_band", "out_input_band"))) == sources0

    # a vertical drag of the move handle (as a shift-drag would be) leaves the band where it is
    y0 = _figure_attr(page, "tuning_plane", "y_range.start")  # the view as panned
    y1 = _figure_attr(page, "tuning_plane", "y_range.end")
    hx, hy = bh.band_handle(page, "tuning_plane", "rf_band_box", "move")
    page.keyboard.down("Shift")
    bh.drag(page, "tuning_plane", (hx, hy), (hx, hy + 0.3 * (y1 - y0)))
    page.keyboard.up("Shift")
    page.wait_for_timeout(800)
    assert (_field(page, "rf-start"), _field(page, "rf-stop")) == (start0, stop0)

    # the upper edge's handle resizes: RF stop moves 2 MHz up on its raster, RF start stays
    ex, ey = bh.band_handle(page, "tuning_plane", "rf_band_box", "high")
    bh.drag(page, "tuning_plane", (ex, ey), (ex + 2.0, ey))
    stop1 = _wait_until(lambda: (t := _field(page, "rf-stop")) != stop0 and t, "a new RF stop")
    assert _field(page, "rf-start") == start0
    step = parse_frequency(_field(page, "rf-step"))
    assert parse_frequency(stop1) == pytest.approx(parse_frequency(stop0) + 2.0 * MHZ, abs=0.3 * MHZ)
    assert round(parse_frequency(stop1) / step) * step == pytest.approx(parse_frequency(stop1))
    bh.screenshot(page, app.shots / "planner_band_handles.png", full_page=False)
    page.locator("button.mixchart-undo").click()
    _wait_until(lambda: _field(page, "rf-stop") == stop0, "the resize undone")
    _assert_clean(page)


def test_keep_as_reference_then_low_side_shows_both_plans(app):
    # Item 16: named references, the reference's chart at the same channel and zoom, a row-by-row
    # table with a delta-margin column, and a headline that says what the edit bought.
    page = app.page
    _open_tab(page, "Plan")
    rows_high = _table_rows(page)
    status_high = _status_line(page)
    # the compare controls sit under the tabs, in view whatever tab is open; the label is whole
    keep = page.get_by_role("button", name="Keep as reference")
    assert keep.evaluate("(b) => b.scrollWidth <= b.clientWidth + 1")  # not truncated
    name_field = page.locator(".mixchart-ref-name input")
    name_field.fill("high side")
    name_field.press("Tab")
    keep.click()
    ref_rows = _wait_until(lambda: _table_rows(page, ".mixchart-reference-table"), "the reference table")
    assert ref_rows == rows_high  # the reference is the plan as it was kept
    _wait_until(lambda: "reference_tuning_plane" in bh.figure_names(page), "a second (reference) tuning plane")
    assert bh.figure_names(page).count("tuning_plane") == 1  # each name finds one figure

    page.locator(".mixchart-side").locator("button", has_text="low side").click()
    compare = page.locator(".mixchart-compare")
    _wait_until(lambda: "low-side" in compare.inner_text(), "the edited plan in the comparison")
    text = compare.inner_text()
    assert "high side (shown)" in text and "high-side" in text and "low-side" in text
    assert "What changed: lo.side high \u2192 low" in text
    headline = page.locator(".mixchart-headline").inner_text()
    assert re.match(r"Edited plan against \u201chigh side\u201d: worst margin \S+ \u2192 \S+ dB \(\u0394 \S+ dB\)",
                    headline), headline
    delta_rows = _table_rows(page, ".mixchart-delta")
    assert delta_rows and all(len(r) == 7 for r in delta_rows[:-1])
    for r in delta_rows[:-1]:  # delta = edited - reference, as shown
        if "\u2014" not in (r[2], r[3]):
            assert float(r[4]) == pytest.approx(float(r[3]) - float(r[2]), abs=0.11)
    assert _table_rows(page, ".mixchart-reference-table") == rows_high  # the reference does not follow the edit
    assert _table_rows(page) != rows_high

    # the reference shows the edited plan's channel, and follows a box zoom of the tuning plane
    _wait_until(lambda: _figure_attr(page, "reference_output_plane", "title.text").split("(channel")[1]
                == _figure_attr(page, "output_plane", "title.text").split("(channel")[1], "the same channel")
    x0, x1 = _figure_attr(page, "tuning_plane", "x_range.start"), _figure_attr(page, "tuning_plane", "x_range.end")
    y0, y1 = _figure_attr(page, "tuning_plane", "y_range.start"), _figure_attr(page, "tuning_plane", "y_range.end")
    bh.data_to_screen(page, "tuning_plane", [(x0, y0)])  # scrolls the plane into view
    page.locator(".bk-tool-icon-box-zoom").first.click()
    bh.drag(page, "tuning_plane", (x0 + 0.2 * (x1 - x0), y0 + 0.2 * (y1 - y0)),
            (x0 + 0.5 * (x1 - x0), y0 + 0.6 * (y1 - y0)))
    zoomed = _wait_until(lambda: (z := _figure_attr(page, "tuning_plane", "x_range.end")) < x1 - 0.1 * (x1 - x0) and z,
                         "the box zoom")
    _wait_until(lambda: abs(_figure_attr(page, "reference_tuning_plane", "x_range.end") - zoomed) < 1e-9,
                "the reference's tuning plane at the same zoom")
    bh.screenshot(page, app.shots / "compare_low_vs_high.png")
    size = page.viewport_size
    page.set_viewport_size({"width": size["width"], "height": 4000})  # the whole app at once, for people to look at
    bh.wait_for_bokeh_idle(page, min_roots=2)
    page.screenshot(path=str(app.shots / "compare_whole_app.png"))
    page.set_viewport_size(size)
    for button in ("Keep as reference", "Drop reference"):
        assert page.get_by_role("button", name=button).evaluate("(b) => b.scrollWidth <= b.clientWidth + 1"), button
    page.locator(".bk-tool-icon-reset").first.click()

    page.get_by_role("button", name="Drop reference").click()
    _wait_until(
        lambda: not _table_rows(page, ".mixchart-reference-table") and not compare.inner_text().strip(),
        "the reference dropped",
    )
    page.locator(".mixchart-side").locator("button", has_text="high side").click()
    _wait_until(lambda: _status_line(page) == status_high, "the high-side plan again")
    _assert_clean(page)


def test_a_bare_file_name_saves_next_to_the_opened_plan_and_the_snapshot_too(app):
    # Issue "a planner you can drive", item 1: the file-name field follows the opened plan, a bare
    # name lands in the plan's folder (never the server's temporary folder), the message shows the
    # full path, and both the plan and the HTML snapshot offer a download.
    page = app.page
    _open_tab(page, "File")
    path_field = page.locator(".mixchart-save-path input")  # (its initial value: test_page_loads...)
    target = app.root / "option b.json"
    target.unlink(missing_ok=True)
    path_field.fill(target.name)
    path_field.press("Tab")
    page.locator("button.mixchart-save").click()
    msg = page.locator(".mixchart-file-msg")
    _wait_until(lambda: f"saved {target}" in msg.inner_text(), "the full path of the saved plan")
    assert target.is_file() and msg.locator("a.mixchart-download").get_attribute("download") == target.name
    page.locator("button.mixchart-snapshot").click()
    snapshot = target.with_suffix(".html")
    _wait_until(lambda: f"wrote {snapshot}" in msg.inner_text(), "the full path of the snapshot", 90.0)
    assert snapshot.is_file() and "<html" in snapshot.read_text(encoding="utf-8")[:400].lower()
    link = msg.locator("a.mixchart-download")
    assert link.get_attribute("download") == snapshot.name
    assert link.get_attribute("href").startswith("data:text/html;base64,")
    page.screenshot(path=str(app.shots / "planner_saved_next_to_plan.png"))
    _assert_clean(page)


def test_every_warning_is_on_screen_under_the_verdict_and_follows_the_plan(app):
    # Item 2: each warning the CLI and the snapshot print is in the box under the PASS/FAIL line.
    page = app.page
    box = page.locator(".mixchart-warnings")
    shown = box.inner_text()
    for text in ("mixer: lo_if_isolation_db", "max_atten_db: not given"):
        assert text in shown, shown
    _open_tab(page, "Plan")
    field = page.locator(".mixchart-if-center input")
    good = field.input_value()
    field.fill("98 MHz")  # the IF inside the RF band: a new warning appears
    field.press("Enter")
    _wait_until(lambda: "overlaps the RF band" in box.inner_text(), "the IF-in-band warning on screen")
    box.screenshot(path=str(app.shots / "planner_warnings_box.png"))
    field.fill(good)
    field.press("Enter")
    _wait_until(lambda: "overlaps the RF band" not in box.inner_text(), "the warning gone again")
    _assert_clean(page)


def test_the_verdict_and_warnings_stay_in_view_while_the_page_scrolls(app):
    # Item 11: a sticky banner. Scroll down to the worst-case table: the PASS/FAIL line is still in view.
    page = app.page
    size = page.viewport_size
    page.set_viewport_size({"width": 1280, "height": 720})
    try:
        page.locator(".mixchart-worst-table").scroll_into_view_if_needed()
        page.mouse.wheel(0, 600)
        page.wait_for_timeout(300)
        table_top = page.locator(".mixchart-worst-table").evaluate("(e) => e.getBoundingClientRect().top")
        banner = page.locator(".mixchart-banner").evaluate(
            "(e) => { const r = e.getBoundingClientRect(); return [r.top, r.bottom]; }")
        scrolled = page.evaluate("() => Math.max(window.scrollY, document.scrollingElement.scrollTop,"
                                 " ...[...document.querySelectorAll('*')].map((e) => e.scrollTop))")
        assert scrolled > 300  # the page did scroll
        assert -1 <= banner[0] <= 16 and banner[1] < 720 * 0.35, banner  # at the top, and not a wall
        assert table_top < 720
        status = page.locator(".mixchart-status")
        x, y = status.evaluate("(e) => { const r = e.getBoundingClientRect(); return [r.left + 20, r.top + 8]; }")
        assert page.evaluate("([x, y]) => !!document.elementFromPoint(x, y).closest('.mixchart-status')", [x, y])
        page.screenshot(path=str(app.shots / "planner_scrolled_banner_1280x720.png"))
    finally:
        page.evaluate("() => { window.scrollTo(0, 0);"
                      " document.querySelectorAll('*').forEach((e) => e.scrollTop = 0); }")
        page.set_viewport_size(size)


def _rects(page) -> dict[str, list[float]]:
    """Screen rectangles [left, top, right, bottom] of the planes, the margin plot and the controls."""
    bh.figure_names(page)
    out = page.evaluate("""() => Object.fromEntries(['tuning_plane', 'output_plane', 'margin_plot'].map((n) => {
        const r = window.__mxt.plot(n).el.getBoundingClientRect();
        return [n, [r.left, r.top, r.right, r.bottom]]; }))""")
    r = page.locator(".mixchart-app .lm-TabBar").first.evaluate(
        "(e) => { const r = e.getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; }")
    out["controls"] = r
    out["app"] = page.locator(".mixchart-app").evaluate(
        "(e) => { const r = e.getBoundingClientRect(); return [r.left, r.top, r.right, r.bottom]; }")
    return out


def test_the_charts_fit_the_width_and_sit_beside_the_controls(app):
    # Item 11: at 1280x720 the charts sit beside the controls, in view; at any width nothing runs past
    # the app's right edge (the planes share the width the page gives them).
    page = app.page
    size = page.viewport_size
    try:
        for width, height in ((1280, 720), (1600, 900), (1000, 720)):
            page.set_viewport_size({"width": width, "height": height})
            page.evaluate("() => { window.scrollTo(0, 0);"
                          " document.querySelectorAll('*').forEach((e) => e.scrollTop = 0); }")
            page.wait_for_timeout(600)
            bh.wait_for_bokeh_idle(page)
            r = _rects(page)
            for name in ("tuning_plane", "output_plane", "margin_plot"):
                assert r[name][2] <= r["app"][2] + 1, (width, name, r)  # never past the right edge
            if width >= 1280:
                assert r["tuning_plane"][0] >= r["controls"][2] - 4, (width, r)  # beside the controls
                assert r["tuning_plane"][1] < height * 0.45 and r["output_plane"][2] <= width, (width, r)
                visible = min(r["tuning_plane"][3], height) - r["tuning_plane"][1]
                assert visible > 0.75 * (r["tuning_plane"][3] - r["tuning_plane"][1]), (width, r)  # not below the fold
            else:
                assert r["tuning_plane"][1] >= r["controls"][1], r  # narrow: wrapped under the controls
            page.screenshot(path=str(app.shots / f"planner_layout_{width}x{height}.png"))
    finally:
        page.set_viewport_size(size)
        bh.wait_for_bokeh_idle(page)


def test_lo_mode_switches_to_fixed_and_back_without_an_error(app):
    # Item 4: "fixed" enables the fixed-LO field and fills it with the current channel's LO;
    # "tracking" drops the fixed value and keeps the injection side.
    page = app.page
    _open_tab(page, "Plan")
    mode = page.locator(".mixchart-lo-mode")
    fixed_field = page.locator(".mixchart-lo-fixed input")
    assert fixed_field.is_disabled()
    channel_text = page.locator(".mixchart-channel-text").first.text_content()  # in the View tab
    lo_shown = re.search(r"LO ([\d.]+ [kMG]?Hz)", channel_text).group(1)
    mode.locator("button", has_text="fixed").click()
    _wait_until(lambda: not fixed_field.is_disabled(), "the fixed-LO field enabled")
    _wait_until(lambda: parse_frequency(fixed_field.input_value()) == parse_frequency(lo_shown),
                "the current channel's LO in the field")
    _wait_until(lambda: "fixed LO" in _status(page), "a fixed LO in the status")
    assert page.locator(".mixchart-app .mixchart-error").count() == 0
    mode.locator("button", has_text="tracking").click()
    _wait_until(lambda: fixed_field.is_disabled(), "the fixed-LO field disabled again")
    _wait_until(lambda: "high-side" in _status(page), "tracking, high side, in the status")
    assert page.locator(".mixchart-app .mixchart-error").count() == 0
    _assert_clean(page)


def test_a_tracking_preselector_is_shaded_along_the_plan_line(app):
    # Item 6: the FM example's tuned circuits track the channel; the tuning plane shades them along
    # the plan line (nested bands at each channel's own LO), with no fixed band at one channel.
    page = app.page
    bh.wait_for_bokeh_idle(page)

    def settled():  # the page may still be taking the previous test's last plan change
        track, plan = bh.source_data(page, "tuning_track"), bh.source_data(page, "tuning_plan")
        ok = track["ys"] and all(abs(min(ys) - min(plan["y"])) < 0.2 for ys in track["ys"])
        return ok and (track, plan)

    track, plan = _wait_until(settled, "the shading along the plan line", timeout_s=10.0)
    assert len(track["xs"]) >= 3  # (the fixed-band source staying empty is checked in tests/test_chart.py)
    for ys in track["ys"]:  # each band runs the length of the plan line
        assert min(ys) == pytest.approx(min(plan["y"]), abs=0.2) and max(ys) == pytest.approx(max(plan["y"]), abs=0.2)
    bh.screenshot(page, app.shots / "planner_tracking_shading.png", full_page=False)
    _assert_clean(page)


def test_a_limiting_row_off_the_output_plane_is_marked_at_its_edge(app):
    # Item 7: rows within 10 dB of their requirement that lie outside the output plane are drawn
    # as edge markers with their label; the page's BokehJS holds them inside the plot's ranges.
    page = app.page
    off = _wait_until(lambda: (d := bh.source_data(page, "out_offchart")) and d["text"] and d, "edge markers")
    assert all("off the chart" in t for t in off["text"])
    assert any(t.startswith("LO leakage (0,1)") for t in off["text"]), off["text"]
    bh.screenshot(page, app.shots / "planner_offchart_markers.png", full_page=False)
    _assert_clean(page)


def test_undo_and_redo_buttons_step_through_plan_changes(app):
    # Item 3 (part): every plan change can be undone and redone with the buttons.
    page = app.page
    _open_tab(page, "Plan")
    side = page.locator(".mixchart-side")
    start = side.locator("button.mod-active").inner_text().strip()
    other = "low side" if start == "high side" else "high side"
    side.locator("button", has_text=other).click()
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == other, "the other side chosen")
    undo, redo = page.locator("button.mixchart-undo"), page.locator("button.mixchart-redo")
    _wait_until(lambda: undo.is_enabled(), "Undo enabled")
    undo.click()
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == start, "the side undone")
    _wait_until(lambda: start.split()[0] + "-side" in _status(page), "the status back")
    _wait_until(lambda: redo.is_enabled(), "Redo enabled")
    redo.click()
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == other, "the side redone")
    undo.click()  # leave the page as it was
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == start, "the side undone again")
    bh.screenshot(page, app.shots / "planner_undo_redo.png", full_page=False)

    # the keys do the same: Ctrl+Z undoes, Ctrl+Shift+Z redoes (after a click on the page, not in a field)
    side.locator("button", has_text=other).click()
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == other, "the other side again")
    page.locator(".mixchart-status").click()
    page.keyboard.press("Control+z")
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == start, "the side undone by Ctrl+Z")
    page.keyboard.press("Control+Shift+z")
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == other, "redone by Ctrl+Shift+Z")
    # in a text field Ctrl+Z is the field's own undo: the plan stays
    field = page.locator(".mixchart-if-center input")
    field.click()
    page.keyboard.press("Control+z")
    page.wait_for_timeout(600)
    assert side.locator("button.mod-active").inner_text().strip() == other
    page.locator(".mixchart-status").click()
    page.keyboard.press("Control+z")
    _wait_until(lambda: side.locator("button.mod-active").inner_text().strip() == start, "the page left as it was")
    _assert_clean(page)


def test_the_margin_plot_shows_every_channel_and_a_click_picks_one(app):
    # Item 14: worst margin against channel under the planes; a click picks the channel, and the
    # one-channel table (item 15) follows with every row of that channel.
    page = app.page
    pts = bh.source_data(page, "margin_channels")
    assert len(pts["x"]) == len(set(pts["x"])) >= 100
    now = bh.source_data(page, "tuning_now")
    target = 95.03 if abs(now["x"][0] - 95.0) > 1 else 101.03
    i = min(range(len(pts["x"])), key=lambda k: abs(pts["x"][k] - target))
    (x, y), = bh.data_to_screen(page, "margin_plot", [(pts["x"][i], pts["y"][i])])
    page.mouse.click(x, y)
    expected = round(target * 10) / 10
    _wait_until(lambda: abs(bh.source_data(page, "tuning_now")["x"][0] - expected) < 0.051, "the clicked channel")
    table = page.locator(".mixchart-channel-table")
    _wait_until(lambda: f"Channel {format_frequency(expected * MHZ)}" in table.inner_text(), "the channel's table")
    assert "every product and response" in table.inner_text()
    bh.screenshot(page, app.shots / "planner_margin_plot.png")
    _assert_clean(page)


def test_the_mixer_tab_shows_the_level_table_and_the_circuit_model_moves_with_lo_drive(app):
    # Issue 12 in the app: the level table as a heat map in the Mixer tab; the diode-circuit model
    # chosen from the dropdown fills it from the solved circuit, and the LO drive moves the verdict.
    page = app.page
    _open_tab(page, "Mixer")
    _wait_until(lambda: "level_table_map" in bh.figure_names(page), "the level-table heat map")
    before = bh.source_data(page, "level_table_map_source")
    status0 = _status_line(page)
    page.locator(".mixchart-circuit-model select").select_option(label="diode circuit")
    _source_changed(page, "level_table_map_source", before, timeout_s=60)
    _wait_until(lambda: _status_line(page) != status0, "the verdict of the circuit model")
    status7 = _status_line(page)
    drive = page.locator(".mixchart-lo-drive input")
    drive.fill("4")
    drive.press("Enter")
    _wait_until(lambda: _status_line(page) != status7, "the verdict at +4 dBm LO")
    page.locator(".mixchart-circuit-model").scroll_into_view_if_needed()
    bh.screenshot(page, app.shots / "planner_mixer_tab_circuit.png", full_page=False)
    # back to the plan as it was: LO drive, then the switching rules
    drive.fill("7")
    drive.press("Enter")
    _wait_until(lambda: _status_line(page) == status7, "the verdict at +7 dBm again")
    page.locator(".mixchart-circuit-model select").select_option(label="switching rules")
    _wait_until(lambda: _status_line(page) == status0, "the switching-rule verdict again")
    _open_tab(page, "Plan")
    _assert_clean(page)
