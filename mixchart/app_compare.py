"""The planner's comparison: named references, the reference's chart at the same channel and zoom, Δmargin.

The data comes from :mod:`mixchart.compare` (pure pandas); this module renders
it and keeps the reference's chart on the edited plan's channel and zoom.  The
zoom is followed plane by plane only where both charts use the same axis units
(a plan whose IF moved by a decade keeps its own output-plane window, and says so).
"""

from __future__ import annotations

import html
import math
from typing import Any

from .analysis import Evaluation
from .chart import CATEGORIES, CLOSE_DB, ChartHandle, ViewOptions, build_chart, chart_data, update_chart
from .compare import compare_frame, headline, plan_differences
from .units import format_frequency
from .widget import BatchedBokehModel

__all__ = ["compare_html", "ReferencePanel", "COMPARE_ROWS"]

#: Rows of the Δmargin table (the rest are counted).
COMPARE_ROWS = 14


def _db(value: float) -> str:
    return "\u2014" if not math.isfinite(value) else f"{value:+.1f}"


def _colour(margin_db: float) -> str:
    if not math.isfinite(margin_db):
        return "#555555"
    return CATEGORIES["violates" if margin_db < 0 else "close" if margin_db < CLOSE_DB else "clear"][1]


def plan_words(plan: Any) -> str:
    """The plan's key choices in words: "down-conversion, high-side, IF 10.7 MHz"."""
    side = (plan.lo.side + "-side" if plan.lo.mode == "tracking"
            else f"fixed LO {format_frequency(plan.lo.fixed_hz or 0)}")
    return f"{plan.direction}-conversion, {side}, IF {format_frequency(plan.if_.center_hz)}"


def _references_html(edited: Evaluation, references: dict[str, tuple[Any, Evaluation]], shown: str | None) -> str:
    rows = []
    s = edited.summary
    rows.append(f"<tr><td><b>edited plan</b></td><td>{html.escape(edited.plan.name)}</td>"
                f"<td style='color:{_colour(s.worst_margin_db)};font-weight:bold'>{_db(s.worst_margin_db)}</td>"
                f"<td>{s.n_failing_channels} of {s.n_channels}</td><td>{html.escape(s.worst_label)}</td><td></td>"
                f"<td>{html.escape(plan_words(edited.plan))}</td></tr>")
    for name, (_plan, ev) in references.items():
        r = ev.summary
        mark = " (shown)" if name == shown else ""
        rows.append(
            f"<tr><td>{html.escape(name)}{mark}</td><td>{html.escape(ev.plan.name)}</td>"
            f"<td style='color:{_colour(r.worst_margin_db)};font-weight:bold'>{_db(r.worst_margin_db)}</td>"
            f"<td>{r.n_failing_channels} of {r.n_channels}</td><td>{html.escape(r.worst_label)}</td>"
            f"<td>{_db(s.worst_margin_db - r.worst_margin_db)}</td><td>{html.escape(plan_words(ev.plan))}</td></tr>"
        )
    return (
        '<table class="mixchart-table mixchart-references" style="border-collapse:collapse;font-size:13px">'
        "<caption style='text-align:left;font-weight:bold'>Kept plans</caption>"
        "<tr><th>reference</th><th>plan name</th><th>worst margin dB</th><th>failing channels</th>"
        "<th>limited by</th><th>\u0394 worst margin dB (edited \u2212 this)</th><th>plan</th></tr>"
        + "".join(rows) + "</table>"
    )


def compare_html(edited: Evaluation, references: dict[str, tuple[Any, Evaluation]], shown: str | None) -> str:
    """The comparison as HTML: a headline, what differs, every kept plan, and the Δmargin table.

    Parameters
    ----------
    edited : Evaluation
        The plan being edited.
    references : dict of str to (Plan, Evaluation)
        The kept references, by name.
    shown : str or None
        The reference lined up row by row (None: only the list of kept plans).

    Returns
    -------
    str
        HTML (all user text escaped); empty when no reference is kept.
    """
    if not references:
        return ""
    parts = [_references_html(edited, references, shown)]
    if shown is not None:
        ref_plan, ref_ev = references[shown]
        parts.insert(0, f"<div class='mixchart-headline' style='font-size:15px;font-weight:bold;margin:4px 0'>"
                        f"Edited plan {html.escape(headline(edited, ref_ev, shown))}</div>")
        diffs = plan_differences(edited.plan, ref_plan)
        if diffs:
            items = "; ".join(f"<code>{html.escape(k)}</code> {html.escape(a)} \u2192 {html.escape(b)}"
                              for k, a, b in diffs[:12])
            more = f"; and {len(diffs) - 12} more" if len(diffs) > 12 else ""
            parts.insert(1, "<div class='mixchart-differences' style='font-size:13px'>"
                            f"What changed: {items}{more}</div>")
        else:
            parts.insert(1, "<div class='mixchart-differences' style='font-size:13px'>What changed: nothing "
                            "(the edited plan equals this reference)</div>")
        parts.append(_delta_table_html(edited, ref_ev, shown))
    return "<div class='mixchart-compare-body'>" + "".join(parts) + "</div>"


def _delta_table_html(edited: Evaluation, reference: Evaluation, name: str) -> str:
    frame = compare_frame(edited, reference)
    shown = frame.head(COMPARE_ROWS)
    body = []
    for r in shown.itertuples(index=False):
        ref_id = ""
        if r.ref_label is not None and isinstance(r.ref_label, str) and (
            (r.ref_rf_harmonic, r.ref_lo_harmonic, r.ref_sign) != (r.rf_harmonic, r.lo_harmonic, r.sign)
        ):
            ref_sign = "+" if r.ref_sign > 0 else "\u2212"
            ref_id = (f" <span style='color:#555'>(reference: ({r.ref_rf_harmonic},{r.ref_lo_harmonic}) "
                      f"{ref_sign})</span>")
        delta = r.delta_margin_db
        d_colour = "#555555" if not math.isfinite(delta) or abs(delta) < 0.05 else (
            CATEGORIES["clear"][1] if delta > 0 else CATEGORIES["violates"][1])
        sign = "+" if r.sign > 0 else "\u2212"
        body.append(
            f"<tr><td>{html.escape(r.kind)}: {html.escape(r.label)}</td>"
            f"<td>({r.rf_harmonic},{r.lo_harmonic}) {sign}{ref_id}</td>"
            f"<td style='color:{_colour(r.ref_margin_db)}'>{_db(r.ref_margin_db)}</td>"
            f"<td style='color:{_colour(r.margin_db)};font-weight:bold'>{_db(r.margin_db)}</td>"
            f"<td style='color:{d_colour};font-weight:bold'>{_db(delta)}</td>"
            f"<td>{_freq(r.ref_channel_hz)}</td><td>{_freq(r.channel_hz)}</td></tr>"
        )
    rest = len(frame) - len(shown)
    tail = f"<tr><td colspan=7>\u2026 and {rest} more rows, each clearer in both plans</td></tr>" if rest > 0 else ""
    return (
        '<div class="mixchart-delta"><table class="mixchart-table mixchart-delta-table" '
        'style="border-collapse:collapse;font-size:13px">'
        f"<caption style='text-align:left;font-weight:bold'>Row by row: worst margin of each product, "
        f"reference \u201c{html.escape(name)}\u201d against the edited plan (\u2014: not in that plan)</caption>"
        "<tr><th>response / product</th><th>(m,n) \u00b1</th><th>reference margin dB</th><th>edited margin dB</th>"
        "<th>\u0394margin dB</th><th>reference worst at</th><th>edited worst at</th></tr>"
        + "".join(body) + tail + "</table></div>"
    )


def _freq(f_hz: float) -> str:
    return "\u2014" if not math.isfinite(f_hz) else html.escape(format_frequency(float(f_hz), 7))


def _axis_scales(meta: dict[str, Any]) -> dict[str, Any]:
    """Each axis's display scale and unit (e.g. ``{"output_y": (1e6, "MHz"), ...}``); a normalised axis's
    scale is the channel's LO, so it differs between plans and the zoom is not followed."""
    scales, units = meta.get("scales", {}), meta.get("units", {})
    return {k: (scales[k], units.get(k)) for k in scales}


class ReferencePanel:
    """The shown reference's chart, kept on the edited plan's channel and zoom.

    Parameters
    ----------
    chart : ChartHandle
        The edited plan's chart, whose ranges the reference follows.
    width, height : int
        Size of each reference plane, pixels (as the edited plan's, so the two line up).
    """

    def __init__(self, chart: ChartHandle, *, width: int, height: int) -> None:
        self.edited = chart
        self.width, self.height = width, height
        self.chart: ChartHandle | None = None
        self.widget: Any = None
        self.same_zoom: dict[str, bool] = {}  # by axis: "tuning_x", "tuning_y", "output_x", "output_y"
        self._edited_meta: dict[str, Any] = {}
        for plane in ("tuning", "output"):
            fig = getattr(chart, plane)
            for rng in (fig.x_range, fig.y_range):
                for attr in ("start", "end"):
                    rng.on_change(attr, lambda _a, _o, _n, plane=plane: self._follow(plane))

    def show(self, reference: Evaluation, view: ViewOptions, edited_meta: dict[str, Any]) -> None:
        """Draw ``reference`` at the edited plan's channel (``view.channel_hz``) and zoom."""
        self._edited_meta = edited_meta
        channel_hz = float(edited_meta.get("channel_hz", math.nan))
        ref_view = ViewOptions(
            normalised=view.normalised, show_clear=view.show_clear, max_order_shown=view.max_order_shown,
            channel_hz=channel_hz if math.isfinite(channel_hz) else None,
        )
        data = chart_data(reference, ref_view)
        if self.chart is None:
            self.chart = build_chart(data, width=self.width, height=self.height, prefix="reference_")
            self.widget = BatchedBokehModel(self.chart.layout)
        else:
            with self.widget.batch():
                update_chart(self.chart, data, reset_ranges=True)
        # an axis follows the edited zoom when it means the same (same units, same normalisation) and
        # the reference's own subject lies in the edited window: its LO at this channel on the tuning
        # plane's LO axis, its output passband on the output axis (a plan whose LO moved to the other
        # side, or whose IF moved, keeps its own window on that axis, and says so)
        mine, theirs = _axis_scales(data.meta), _axis_scales(edited_meta)
        self.same_zoom = {axis: axis in mine and mine[axis] == theirs.get(axis)
                          for axis in ("tuning_x", "tuning_y", "output_x", "output_y")}
        band = data.sources["out_output_band"]
        subjects = {"tuning_y": float(data.meta["lo_hz"]) / data.meta["scales"]["tuning_y"],
                    "output_y": 0.5 * (float(band["y0"][0]) + float(band["y1"][0]))}
        for axis, centre in subjects.items():
            rng = getattr(self.edited, axis.split("_")[0]).y_range
            self.same_zoom[axis] &= min(rng.start, rng.end) <= centre <= max(rng.start, rng.end)
        with self.widget.batch():
            for plane in ("tuning", "output"):
                self._follow(plane)

    def _follow(self, plane: str) -> None:
        if self.chart is None:
            return
        src, dst = getattr(self.edited, plane), getattr(self.chart, plane)
        for axis, a, b in (("x", src.x_range, dst.x_range), ("y", src.y_range, dst.y_range)):
            if self.same_zoom.get(f"{plane}_{axis}") and (b.start, b.end) != (a.start, a.end):
                b.start, b.end = a.start, a.end

    def note(self) -> str:
        """Which planes follow the edited zoom, in words."""
        names = {"tuning_x": "tuning plane's RF axis", "tuning_y": "tuning plane's LO axis",
                 "output_x": "output plane's input axis", "output_y": "output plane's output axis"}
        own = [names[axis] for axis, same in self.same_zoom.items() if not same]
        if not own:
            return "same channel and zoom as the edited plan"
        return ("same channel and zoom, except the " + ", the ".join(own)
                + ": its own window there (its LO, output band or units differ from the edited plan's)")
