"""Tests of the standalone HTML report (mixchart.report) and the ``snapshot`` command."""

from __future__ import annotations

import html
import os
import re
from pathlib import Path

import pytest

from mixchart import cli, report
from mixchart.analysis import evaluate
from mixchart.errors import MixchartError
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
    from bokeh.models import BoxEditTool

    layout = report._snapshot_chart(fm[1], report.ViewOptions())
    assert not any(isinstance(m, BoxEditTool) for m in layout.references())


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
