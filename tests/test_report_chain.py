"""The HTML report of a chain plan: what it says, that it opens offline, that user text is escaped."""

from __future__ import annotations

import html
import json
import re

from mixchart.chains import analyse_chain
from mixchart.cli import example_path, main
from mixchart.models import chain_from_dict, load_any
from mixchart.report_chain import chain_report_html

SCANNER = example_path("scanner_double_conversion")


def test_the_report_states_the_verdict_the_chain_the_nodes_and_the_worst_paths():
    plan = load_any(SCANNER)
    page = chain_report_html(plan)
    result = analyse_chain(plan)
    assert html.escape(result.summary.worst_path) in page and "Limited by <b>mixer 1</b>" in page
    for name in ("preselector", "LNA", "first-IF filter", "second-IF filter"):
        assert f"<td>{name}</td>" in page
    assert "100 MHz to 500 MHz" in page and "inverted" in page and "1.15 GHz to 1.55 GHz" in page
    assert "local rules and licensed practice" in page
    assert "cdn.bokeh.org" not in page and "Bokeh.embed" in page  # BokehJS inline: opens offline
    # the plan JSON is in the page, escaped, and reads back to the same plan
    text = html.unescape(re.search(r'<pre id="plan-json">(.*?)</pre>', page, flags=re.S).group(1))
    assert load_any.__module__ and chain_from_dict(json.loads(text)) == plan


def test_user_text_is_escaped():
    data = json.loads(SCANNER.read_text())
    data["name"] = "<img src=x onerror=alert(1)>"
    data["notes"] = "</pre><script>alert(2)</script>"
    data["chain"][1]["name"] = "<b>LNA</b>"
    page = chain_report_html(chain_from_dict(data))
    assert "<img src=x" not in page and "<script>alert(2)" not in page and "<b>LNA</b>" not in page
    assert "&lt;img src=x onerror=alert(1)&gt;" in page


def test_snapshot_of_a_chain_writes_the_report_where_asked(tmp_path, capsys):
    out = tmp_path / "meeting" / "scanner.html"
    out.parent.mkdir()
    assert main(["snapshot", "--example", "scanner_double_conversion", "-o", str(out)]) == 0
    assert str(out) in capsys.readouterr().out
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert sorted(p.name for p in out.parent.iterdir()) == ["scanner.html"]  # nothing else left behind
