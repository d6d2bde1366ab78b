"""The app's HTML fragments: the tables, the summary and warnings banner, download links, page styles."""

from __future__ import annotations

import base64
import html
import math
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from .analysis import Evaluation
from .chart_style import VERDICT_COLOURS
from .plan import Plan, dumps_plan
from .units import format_frequency


def _error_html(text: str) -> str:
    return (f'<span class="mixchart-error" style="color:#B33000;font-size:12px">{html.escape(text)}</span>'
            if text else "")


def _rows(frame: Any, columns: tuple[str, ...]) -> Iterator[Any]:
    """The frame's rows as named tuples of plain Python values (far quicker than ``itertuples``)."""
    from collections import namedtuple

    row = namedtuple("row", columns)
    return (row(*values) for values in zip(*(frame[c].to_numpy().tolist() for c in columns), strict=True))


def _table_html(
    ev: Evaluation, rows: int = 12, caption: str = "Worst case of each product across the tuning range"
) -> str:
    from .chart import CATEGORIES, CLOSE_DB

    frame = ev.worst_by_product.head(rows)
    head = (
        "<tr><th>response / product</th><th>(m,n)</th><th>at channel</th><th>frequency</th>"
        "<th>level dBc</th><th>margin dB</th><th>extra RF</th><th>extra IF</th></tr>"
    )
    body = []
    columns = ("kind", "label", "rf_harmonic", "lo_harmonic", "channel_hz", "f_center_hz", "level_dbc", "margin_db",
               "extra_rf_db", "extra_if_db")
    for r in _rows(frame, columns):
        colour = CATEGORIES["violates" if r.margin_db < 0 else "close" if r.margin_db < CLOSE_DB else "clear"][1]
        extra_rf = "" if not math.isfinite(r.extra_rf_db) else f"{r.extra_rf_db:.1f}"
        extra_if = "" if not math.isfinite(r.extra_if_db) else f"{r.extra_if_db:.1f}"
        body.append(
            f"<tr><td>{html.escape(r.kind)}: {html.escape(r.label)}</td><td>({r.rf_harmonic},{r.lo_harmonic})</td>"
            f"<td>{html.escape(format_frequency(r.channel_hz, 7))}</td>"
            f"<td>{html.escape(format_frequency(r.f_center_hz, 7))}</td><td>{r.level_dbc:.1f}</td>"
            f'<td style="color:{colour};font-weight:bold">{r.margin_db:+.1f}</td>'
            f"<td>{extra_rf}</td><td>{extra_if}</td></tr>"
        )
    return (
        "<style>.mixchart-table td,.mixchart-table th{padding:2px 10px;text-align:left}"
        ".mixchart-table tr:nth-child(even){background:#F3F5F7}</style>"
        '<table class="mixchart-table" style="border-collapse:collapse;font-size:13px">'
        f"<caption style='text-align:left;font-weight:bold'>{html.escape(caption)}</caption>"
        f"{head}{''.join(body)}</table>"
    )


def _channel_table_html(ev: Evaluation, index: int) -> str:
    """Every product and response of one channel, worst first, with the filter losses behind each level."""
    from .chart import CATEGORIES, CLOSE_DB

    frame = ev.channel_frame(index)  # sorted by margin
    frame = frame[frame["label"] != "wanted"]
    head = ("<tr><th>response / product</th><th>(m,n) ±</th><th>band</th><th>table dBc</th><th>RF filter dB</th>"
            "<th>IF filter dB</th><th>level dBc</th><th>rejection dB</th><th>judged against</th><th>margin dB</th>"
            "<th>filter loss set by</th></tr>")
    body = []
    columns = ("kind", "label", "rf_harmonic", "lo_harmonic", "sign", "f_low_hz", "f_high_hz", "table_dbc",
               "rf_atten_db", "if_atten_db", "level_dbc", "rejection_db", "requirement", "margin_db", "loss_limit")
    for r in _rows(frame, columns):
        colour = CATEGORIES["violates" if r.margin_db < 0 else "close" if r.margin_db < CLOSE_DB else "clear"][1]
        margin = f"{r.margin_db:+.1f}" if math.isfinite(r.margin_db) else "—"
        rejection = f"{r.rejection_db:.1f}" if r.kind == "response" else "—"
        band = f"{format_frequency(r.f_low_hz, 7)} – {format_frequency(r.f_high_hz, 7)}"
        body.append(
            f"<tr><td>{html.escape(r.kind)}: {html.escape(r.label)}</td>"
            f"<td>({r.rf_harmonic},{r.lo_harmonic}) {'+' if r.sign > 0 else '−'}</td><td>{html.escape(band)}</td>"
            f"<td>{r.table_dbc:.1f}</td><td>{r.rf_atten_db:.1f}</td><td>{r.if_atten_db:.1f}</td>"
            f"<td>{r.level_dbc:.1f}</td><td>{rejection}</td><td>{html.escape(r.requirement)}</td>"
            f'<td style="color:{colour};font-weight:bold">{margin}</td><td>{html.escape(r.loss_limit)}</td></tr>'
        )
    channel, lo = format_frequency(float(ev.channels_hz[index])), format_frequency(float(ev.lo_hz[index]))
    caption = f"Channel {channel} (LO {lo}): every product and response, worst first ({len(frame)} rows)"
    return (
        '<table class="mixchart-table" style="border-collapse:collapse;font-size:12px">'
        f"<caption style='text-align:left;font-weight:bold'>{html.escape(caption)}</caption>"
        f"{head}{''.join(body)}</table>"
    )


def _summary_html(label: str, ev: Evaluation) -> str:
    s = ev.summary
    colour = VERDICT_COLOURS["FAIL" if s.worst_margin_db < 0 else "PASS"]
    plan = ev.plan
    side = (plan.lo.side + "-side" if plan.lo.mode == "tracking"
            else f"fixed LO {format_frequency(plan.lo.fixed_hz or 0)}")
    return (
        f"<div class='mixchart-summary'><b>{html.escape(label)}</b> — {html.escape(plan.name)}: "
        f"{html.escape(plan.direction)}-conversion, {html.escape(side)}, "
        f"IF {html.escape(format_frequency(plan.if_.center_hz))}<br>"
        f"<span style='color:{colour};font-weight:bold'>{html.escape(s.line())}</span></div>"
    )


def _download_html(plan: Plan, filename: str) -> str:
    return _download_link(dumps_plan(plan).encode("utf-8"), filename or "plan.json", "application/json")


def _download_link(data: bytes, filename: str, mime: str) -> str:
    """An anchor that hands ``data`` to the browser as a download named ``filename``."""
    payload = base64.b64encode(data).decode("ascii")
    name = html.escape(Path(filename).name, quote=True)
    return (f'<a class="mixchart-download" download="{name}" href="data:{mime};base64,{payload}">'
            f"Download {name}</a>")


def _warnings_html(ev: Evaluation) -> str:
    """Every warning the CLI and the snapshot print, as a list under the PASS/FAIL line."""
    if not ev.warnings:
        return "<div class='mixchart-warnings-empty' style='font-size:12px;color:#555'>No warnings.</div>"
    items = "".join(f"<li>{html.escape(text)}</li>" for text in ev.warnings)
    return (f"<details open class='mixchart-warnings-list' style='font-size:12px'><summary><b>"
            f"{len(ev.warnings)} warning{'s' if len(ev.warnings) != 1 else ''}</b> (assumptions and concerns: "
            f"check them before trusting a margin)</summary><ul style='margin:2px 0 0 0;padding-left:18px'>"
            f"{items}</ul></details>")


#: Page styles of the app: the sticky banner (verdict and warnings).
_APP_CSS = """<style>
.mixchart-banner { position: sticky; top: 0; z-index: 20; background: #FFFFFF;
                   border-bottom: 1px solid #D5DAE0; padding: 2px 0 4px 0; margin-top: 14px !important;
                   box-shadow: 0 -14px 0 #FFFFFF; /* covers the scroller's top padding (its own margin
                                                     when not stuck, so nothing above it is hidden) */ }
.mixchart-app, .mixchart-app > .widget-box { overflow: visible !important; }
/* the notebook's output area scrolls its own overflow, which would hold the banner: let the page scroll */
.jp-OutputArea:has(.mixchart-app), .jp-OutputArea-child:has(.mixchart-app),
.jp-OutputArea-output:has(.mixchart-app) { overflow: visible !important; }
</style>"""
