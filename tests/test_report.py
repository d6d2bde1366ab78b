"""Tests of the standalone HTML report (mixchart.report) and the ``snapshot`` command."""

from __future__ import annotations

import html
import io
import json
import os
import re
from contextlib import redirect_stdout
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from mixchart import cli, report
from mixchart.analysis import evaluate
from mixchart.chart import CATEGORIES, CLOSE_DB
from mixchart.errors import MixchartError
from mixchart.levels import FLOOR_DBC
from mixchart.plan import dumps_plan, load_plan, loads_plan

CAUTION = "emission limits are set by local rules and licensed practice"
PRE_JSON = re.compile(r'<pre id="plan-json">(.*?)</pre>', re.S)


@pytest.fixture(scope="module", params=sorted(cli.EXAMPLES))
def rendered(request):
    """(plan, evaluation, html) of a built-in example."""
    path = cli.example_path(request.param)
    plan = load_plan(path)
    ev = evaluate(plan, base_dir=path.parent)
    return plan, ev, report.report_html(plan, evaluation=ev)


@pytest.fixture(scope="module")
def fm():
    path = cli.example_path("fm_receiver")
    plan = load_plan(path)
    return plan, evaluate(plan, base_dir=path.parent)


def test_self_contained(rendered):
    _, _, page = rendered
    assert page.startswith("<!DOCTYPE html>")
    assert not re.search(r"<script[^>]*\ssrc\s*=\s*[\"']?\s*(https?:)?//", page, re.I)
    assert not re.search(r"<link[^>]*\shref\s*=\s*[\"']?\s*(https?:)?//", page, re.I)
    assert "Bokeh" in page and "data-root-id" in page  # BokehJS inline and the chart's root


def _shows_card(page: str, ev) -> bool:
    """Whether the page shows ev's summary card: the verdict once, then the rest of the status line."""
    state, rest = ev.summary.line().split(": ", 1)
    assert state == ("PASS" if ev.summary.worst_margin_db >= 0 else "FAIL")
    return f'<span class="state">{state}</span>' in page and f'<p class="line">{html.escape(rest)}</p>' in page


def test_contents(rendered):
    plan, ev, page = rendered
    assert _shows_card(page, ev)
    assert CAUTION in page.lower()
    worst = ev.to_frame().iloc[0]
    assert f"<td>{html.escape(worst['label'])}</td>" in page
    assert f"({worst['rf_harmonic']},{worst['lo_harmonic']})" in page
    assert html.escape(plan.name) in page
    assert "snapshot" in page and "mixchart " in page  # the static-chart note and the version footer


def test_plan_json_round_trips(rendered):
    plan, _, page = rendered
    (text,) = PRE_JSON.findall(page)
    assert loads_plan(html.unescape(text)) == plan


def test_failing_channels_listed(fm):
    plan, ev = fm
    page = report.report_html(plan, evaluation=ev)
    s = ev.summary
    assert f"{s.n_failing_channels} of {s.n_channels} channels fail" in page


def test_snapshot_chart_has_no_band_editing(fm):
    from bokeh.models import BoxAnnotation, BoxEditTool

    layout = report._snapshot_chart(fm[1], report.ViewOptions())
    assert not any(isinstance(m, BoxEditTool) for m in layout.references())
    boxes = [m for m in layout.references() if isinstance(m, BoxAnnotation) and (m.name or "").endswith("band_box")]
    assert len(boxes) == 3 and not any(b.editable for b in boxes)


MALICIOUS = [
    "</script><script>alert(1)</script>",
    "<img src=x onerror=alert(1)>",
    'say "hi" & <b>bye</b>',
]


@pytest.mark.parametrize("text", MALICIOUS)
def test_user_text_is_escaped(fm, text):
    plan, _ = fm
    # (file paths are checked when the plan is evaluated, so the hostile text goes in the free-text fields)
    hostile = plan.with_changes({"name": text, "notes": f"notes: {text}"})
    page = report.report_html(hostile, base_dir=cli.example_path().parent)
    assert text not in page
    assert html.escape(text) in page
    assert f"<title>{html.escape(text)}" in page
    (json_text,) = PRE_JSON.findall(page)
    assert loads_plan(html.unescape(json_text)) == hostile
    assert dumps_plan(hostile) not in page  # the raw JSON never appears unescaped


def test_reference_side_by_side(fm):
    plan, ev = fm
    low = plan.with_changes({"lo.side": "low", "name": "low side & <b>"})
    ev_low = evaluate(low, base_dir=cli.example_path().parent)
    page = report.report_html(plan, evaluation=ev, reference=(low, ev_low))
    assert _shows_card(page, ev) and _shows_card(page, ev_low)
    assert page.count('class="card"') == 2
    assert page.count("data-root-id") == 2  # one chart per plan
    assert "<tr class=differs><th>LO</th>" in page
    ref = re.search(r'<pre id="reference-json">(.*?)</pre>', page, re.S)
    assert loads_plan(html.unescape(ref.group(1))) == low


def test_evaluation_of_another_plan_is_refused(fm):
    plan, ev = fm
    other = plan.with_changes({"name": "other"})
    with pytest.raises(MixchartError, match="evaluation"):
        report.report_html(other, evaluation=ev)


def test_write_report(fm, tmp_path):
    plan, ev = fm
    target = tmp_path / "r.html"
    assert report.write_report(plan, target, evaluation=ev) == target
    assert target.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert os.listdir(tmp_path) == ["r.html"]
    assert target.stat().st_mode & 0o777 == 0o644


def test_write_is_atomic(fm, tmp_path, monkeypatch):
    plan, ev = fm
    target = tmp_path / "r.html"
    target.write_text("previous report", encoding="utf-8")

    def fail(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(report.os, "replace", fail)
    with pytest.raises(MixchartError, match="cannot be written"):
        report.write_report(plan, target, evaluation=ev)
    assert target.read_text(encoding="utf-8") == "previous report"
    assert os.listdir(tmp_path) == ["r.html"]


def test_write_to_missing_folder(fm, tmp_path):
    plan, ev = fm
    with pytest.raises(MixchartError, match="cannot be written"):
        report.write_report(plan, tmp_path / "no" / "r.html", evaluation=ev)


def test_cli_snapshot(tmp_path, capsys):
    out = tmp_path / "r.html"
    assert cli.main(["snapshot", "-o", str(out)]) == 0
    page = out.read_text(encoding="utf-8")
    assert CAUTION in page.lower()
    assert loads_plan(html.unescape(PRE_JSON.findall(page)[0])) == load_plan(cli.example_path())
    assert str(out) in capsys.readouterr().out


@pytest.mark.parametrize("content", [None, "{not json", '{"rf": {}}'])
def test_cli_snapshot_bad_plan(tmp_path, capsys, content):
    plan_path: Path = tmp_path / "plan.json"
    if content is not None:
        plan_path.write_text(content, encoding="utf-8")
    out = tmp_path / "r.html"
    assert cli.main(["snapshot", str(plan_path), "-o", str(out)]) == 2
    assert not out.exists()
    err = capsys.readouterr().err
    assert err.startswith("mixchart: error:") and "Traceback" not in err


def test_a_file_name_with_markup_is_escaped(fm, tmp_path):
    plan, _ = fm
    name = 'lo <b>&"filter".s2p'  # a legal Linux file name carrying HTML markup
    # a flat 2-port in the Touchstone 1.0 layout: freq, then S11 S21 S12 S22 as (dB, angle) pairs
    (tmp_path / name).write_text("# MHz S DB R 50\n50 -30 0 -1 0 -1 0 -30 0\n200 -30 0 -1 0 -1 0 -30 0\n")
    hostile = plan.with_changes({"filters.lo": {"kind": "touchstone", "path": name}})
    page = report.report_html(hostile, base_dir=tmp_path)
    assert name not in page
    assert html.escape(name) in page


# --- display floor, collapsed tail and print CSS --------------------------------------------------

FLOOR_TEXT = "< −150 dBc"  # U+2212, as the report writes every other minus it shows in words
ROW = re.compile(r"<tr><td>.*?</tr>", re.S)
CAT = re.compile(r'--cat:(#[0-9A-Fa-f]{6})">([^<]*)</td>')


def _tables(page: str) -> tuple[list[str], list[str], str | None]:
    """(listed rows, collapsed rows, the collapsed count line) of the first worst-case table."""
    start = page.index("<table class=worst>")
    end = page.index("</table>", start)
    listed = ROW.findall(page[start:end])
    details = re.match(r"<details class=tail><summary>(.*?)</summary>(.*?)</details>", page[end + 8:], re.S)
    if details is None:
        return listed, [], None
    return listed, ROW.findall(details.group(2)), details.group(1)


@pytest.mark.parametrize(
    ("level_dbc", "shown"),
    [
        (-200.0, FLOOR_TEXT),  # below the floor: the floor, never the number
        (-150.01, FLOOR_TEXT),
        (-150.0, "-150.0 dBc"),  # at the floor: "below" is strict
        (-149.9, "-149.9 dBc"),  # above it: the number as before
        (-60.0, "-60.0 dBc"),
        (FLOOR_DBC, "vanishes"),  # the model's own floor (an ideal cancellation) keeps its word
    ],
)
def test_display_floor(level_dbc, shown):
    # the report's rule (DISPLAY_FLOOR_DBC = -150 dBc; common practice, no source)
    assert report.DISPLAY_FLOOR_DBC == -150.0
    assert html.unescape(report._db(level_dbc, "dBc")) == shown


def test_the_floor_applies_to_levels_only():
    # margins, rejections and filter losses are in dB and keep their numbers, however large
    assert report._db(-200.0, sign=True) == "-200.0 dB"
    assert report._db(180.0) == "180.0 dB"


def _example_report(name: str):
    """(evaluation, report HTML, the evaluation's frame) of a built-in example."""
    path = cli.example_path(name)
    plan = load_plan(path)
    ev = evaluate(plan, base_dir=path.parent)
    return ev, report.report_html(plan, evaluation=ev), ev.to_frame()


@pytest.mark.parametrize("name", sorted(cli.EXAMPLES))
def test_levels_under_the_floor_are_shown_as_the_floor_and_margins_keep_the_true_level(name):
    _, page, frame = _example_report(name)
    assert page.count("Levels below −150 dBc are shown as &lt; −150 dBc") == 1  # stated once
    under = frame[(frame["level_dbc"] < report.DISPLAY_FLOOR_DBC - 0.05) & (frame["level_dbc"] > FLOOR_DBC + 1)]
    for v in under["level_dbc"]:
        assert f">{v:.1f} dBc<" not in page
    listed, hidden, _ = _tables(page)
    rows = listed + hidden
    assert len(rows) == len(frame)
    # every row in margin order: its level cell follows the floor, its margin is the evaluation's
    for row, r in zip(rows, frame.itertuples(index=False), strict=True):
        assert f"<td>{html.escape(r.label)}</td><td>({r.rf_harmonic},{r.lo_harmonic})&nbsp;" in row
        floored = FLOOR_DBC + 1 < r.level_dbc < report.DISPLAY_FLOOR_DBC
        assert ("<td class=num>&lt; −150 dBc</td>" in row) == floored
        assert f">{r.margin_db:+.1f} dB</td>" in row  # from the true level, not from the floor shown
    if name == "fm_receiver":  # the example has a listed response whose level is under the floor
        assert any("&lt; −150 dBc" in row for row in listed)


@pytest.mark.parametrize("name", sorted(cli.EXAMPLES))
def test_the_long_tail_is_collapsed_and_no_failing_or_close_row_is(name):
    _, page, frame = _example_report(name)
    listed, hidden, summary = _tables(page)
    assert len(listed) + len(hidden) == len(frame)
    assert hidden, "every built-in example has rows clear by 40 dB or more"
    count, bound = re.fullmatch(r"and (\d+) more rows?, all clear by ≥ ([\d.]+) dB", summary).groups()
    assert int(count) == len(hidden)  # the count line counts what it hides
    assert float(bound) <= report.COLLAPSE_MARGIN_DB
    margins = frame["margin_db"].to_numpy()
    assert float(bound) <= margins[len(listed):].min()  # listed first, in margin order: the words hold
    # every failing or close row is listed (by its category colour), and none is collapsed
    colour = {c: CATEGORIES[c][1] for c in ("violates", "close", "clear")}
    shown = [CAT.search(row).group(1) for row in listed]
    assert shown.count(colour["violates"]) == int((margins < 0).sum())
    assert shown.count(colour["close"]) == int(((margins >= 0) & (margins < CLOSE_DB)).sum())
    assert all(CAT.search(row).group(1) == colour["clear"] for row in hidden)
    # rows clear by 40 dB or more are never listed one by one
    assert len(listed) == int((margins < report.COLLAPSE_MARGIN_DB).sum()) or len(listed) >= report.TOP_ROWS
    assert len(listed) <= max(report.TOP_ROWS, int((margins < CLOSE_DB).sum()))


@pytest.mark.parametrize(
    ("margins", "top", "listed"),
    [
        # derived by hand from the rule: fail/close/NaN always; then clear rows under 40 dB up to `top` in all
        ([-1.0] * 2 + [20.0] * 50 + [45.0] * 5, 40, 40),
        ([-1.0] * 50 + [5.0] * 10 + [20.0] * 30 + [50.0] * 20, 40, 60),  # more failing than `top`: all listed
        ([-3.0, 9.99, 10.0, 39.99, 40.0, np.inf], 40, 4),  # 40 dB and +inf are collapsed, 39.99 is not
        ([np.nan, 60.0], 40, 1),  # an unjudged row is never collapsed
        ([50.0] * 3, 40, 0),
    ],
)
def test_split_rule(margins, top, listed):
    frame = pd.DataFrame({"margin_db": margins})
    shown, hidden = report._split_rows(frame, top)
    assert len(shown) == listed and len(shown) + len(hidden) == len(frame)
    assert not (hidden["margin_db"] < CLOSE_DB).any() and not hidden["margin_db"].isna().any()
    assert list(shown.index) + list(hidden.index) == sorted(shown.index.tolist() + hidden.index.tolist())


def test_collapse_is_far_beyond_close():
    assert report.COLLAPSE_MARGIN_DB > CLOSE_DB  # so "clear by ≥ 40 dB" never covers a close row


@pytest.mark.parametrize("name", ["fm_receiver", "uplink_transmitter"])
def test_json_and_csv_outputs_are_untouched_by_the_display_rules(name):
    """The floor and the collapse are the page's: the CLI's JSON and CSV keep every row and true level."""
    path = cli.example_path(name)
    frame = evaluate(load_plan(path), base_dir=path.parent).to_frame()
    assert (frame["level_dbc"] < report.DISPLAY_FLOOR_DBC).any()
    out = io.StringIO()
    with redirect_stdout(out):
        assert cli.main(["sweep", "--example", name, "--format", "json"]) == 0
    rows = json.loads(out.getvalue())["worst_by_product"]
    assert len(rows) == len(frame)
    np.testing.assert_allclose([r["level_dbc"] for r in rows], frame["level_dbc"].to_numpy())
    out = io.StringIO()
    with redirect_stdout(out):
        assert cli.main(["sweep", "--example", name, "--format", "csv"]) == 0
    csv = pd.read_csv(io.StringIO(out.getvalue()))
    assert len(csv) == len(frame)
    np.testing.assert_allclose(csv["level_dbc"].to_numpy(), frame["level_dbc"].to_numpy(), rtol=1e-8)


def test_print_css(fm):
    plan, ev = fm
    page = report.report_html(plan, evaluation=ev)
    css = page[page.index("<style>"):page.index("</style>")]
    printed = css[css.index("@media print"):]
    assert "@page { size: portrait;" in printed  # the paper the printer holds, A4 or Letter, upright
    assert "thead { display: table-header-group; }" in printed  # headers repeat on each page
    assert "tr, .card, .caution, li, .key, summary { break-inside: avoid; }" in printed
    assert "h2 {" in printed and "break-after: avoid" in printed
    assert "details.tail > :not(summary) { display: none; }" in printed  # collapsed rows stay collapsed
    # the chart, inside BokehJS's shadow roots, carries its own print rule: scaled to the printable width
    layout = report._snapshot_chart(ev, report.ViewOptions())
    rules = [s.css for s in layout.stylesheets if hasattr(s, "css")]
    legend = layout.select_one({"name": "chart_legend"})  # as wide as the two planes, plus its margin
    width = max(layout.select_one({"name": "margin_plot"}).width, legend.width + 2 * legend.margin)
    assert width > report.PRINT_WIDTH_PX
    assert any(f"transform: scale({report.PRINT_WIDTH_PX / width:.4f})" in r and r.startswith("@media print")
               for r in rules)
    assert f"transform: scale({report.PRINT_WIDTH_PX / width:.4f})" in page  # it travels in the page


def test_the_verdict_colour_is_never_the_wanted_blue_and_a_circuit_table_is_named_as_such(fm):
    # "Blue means one thing" (the wanted conversion): the PASS / FAIL card has its own colour.
    from mixchart.chart_style import VERDICT_COLOURS

    plan, ev = fm
    states = []
    for relaxed in (plan.with_changes({"requirement.min_rejection_db": 1.0, "requirement.output_spur_dbc": -1.0}),
                    plan):
        e = evaluate(relaxed)
        state = "PASS" if e.summary.worst_margin_db >= 0 else "FAIL"
        states.append(state)
        page = report.report_html(relaxed, evaluation=e)
        assert f'--state:{VERDICT_COLOURS[state]}' in page
        assert f'--state:{CATEGORIES["wanted"][1]}' not in page
    assert states == ["PASS", "FAIL"]  # both verdicts seen
    # a level table solved from the diode circuit is not called the built-in table
    circuit = plan.with_changes({"mixer.model": "diode_circuit"})
    page = report.report_html(circuit, evaluation=evaluate(circuit))
    assert "level table solved from the diode circuit at -30 dBm RF drive" in page
    assert "built-in level table" not in page
    assert "built-in level table" in report.report_html(plan, evaluation=ev)
