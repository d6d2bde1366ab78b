"""A standalone HTML report of a plan: a snapshot to show at a design meeting.

:func:`report_html` renders one self-contained page: the plan in words, the
summary and warnings, the chart (BokehJS inlined, so the file opens offline),
the worst-case table, the failing channels and the plan JSON itself.  An
optional reference plan (e.g. the other LO side) is shown beside it.
:func:`write_report` writes the page atomically.

Every piece of user text (plan name, notes, file paths, JSON) is escaped with
:func:`html.escape`; the plan JSON appears only as escaped text inside a
``<pre>``, never inside a ``<script>``.
"""

from __future__ import annotations

import html
import math
import os
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from . import __version__
from .analysis import Evaluation, evaluate
from .chart import CATEGORIES, CLOSE_DB, ViewOptions, build_chart, chart_data
from .chart_style import VERDICT_COLOURS
from .errors import MixchartError
from .fileio import atomic_write_text
from .levels import FLOOR_DBC
from .plan import Plan, dumps_plan
from .requirements import resolve_limits
from .units import format_frequency

__all__ = ["report_html", "write_report", "TOP_ROWS", "DISPLAY_FLOOR_DBC", "COLLAPSE_MARGIN_DB"]

#: Rows of the worst-case table listed one by one, unless more rows fail or are close (those are always listed).
TOP_ROWS = 40
#: Levels below this are shown as "< −150 dBc", dBc.  Display only: every margin is computed from the true
#: level.  Common practice, no source: a model's numbers far below any measurable level mean nothing more.
DISPLAY_FLOOR_DBC = -150.0
#: Worst-case rows clear of their requirement by this much or more are collapsed under a count, dB.
#: (Far above :data:`~mixchart.chart.CLOSE_DB`, so a failing or close row is never collapsed.)
COLLAPSE_MARGIN_DB = 40.0
#: Printable width the print layout is made for: A4's 190 mm between 10 mm side margins, in CSS px
#: (96 px/in).  US Letter's is wider (196 mm).
PRINT_WIDTH_PX = 718
#: Failing-channel runs listed before the rest are only counted.
MAX_RUNS = 20

_CSS = """
:root { --ink:#111; --muted:#444; --rule:#bbb; --zebra:#f3f3f3; } * { box-sizing: border-box; }
body { margin: 0 auto; padding: 1.5rem 2rem 3rem; max-width: 1440px; background: #fff; color: var(--ink);
  font: 20px/1.45 "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; }
h1 { font-size: 2.1rem; line-height: 1.2; margin: 0 0 .3rem; }
h2 { font-size: 1.45rem; margin: 2rem 0 .6rem; padding-bottom: .2rem; border-bottom: 3px solid var(--ink); }
p, li { max-width: 70rem; } .meta, .note { color: var(--muted); font-size: .85rem; }
.notes { white-space: pre-wrap; font-style: italic; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(26rem, 1fr)); gap: 1rem; }
.card { border: 2px solid var(--rule); border-left: 12px solid var(--state); padding: .7rem 1rem; }
.card .state { font-weight: bold; font-size: 1.5rem; color: var(--state); margin-right: .6rem; }
.card .line { font-size: 1.05rem; margin: .3rem 0 0; }
table { border-collapse: collapse; margin: .4rem 0; font-size: .9rem; }
th, td { padding: .3rem .6rem; border-bottom: 1px solid var(--rule); text-align: left; vertical-align: top; }
th { background: #222; color: #fff; font-weight: 600; } tbody tr:nth-child(even) { background: var(--zebra); }
table.words th { background: none; color: var(--ink); white-space: nowrap; }
table.words tbody th { border-right: 2px solid var(--ink); } \
table.words thead th { border-bottom: 2px solid var(--ink); }
tr.differs td { font-weight: 700; } tr.differs th::after { content: " ≠"; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.cat { border-left: 10px solid var(--cat); background: color-mix(in srgb, var(--cat) 22%, white); font-weight: 600; }
.key span { display: inline-block; margin-right: 1.2rem; }
.key b { display: inline-block; width: 1em; height: 1em; vertical-align: -.12em; margin-right: .3em; }
.caution { border: 3px solid var(--ink); padding: .7rem 1rem; font-weight: 600; margin: 1.5rem 0; }
.chart { overflow-x: auto; margin: .5rem 0; }
details.tail summary { cursor: pointer; margin: .4rem 0; font-weight: 600; }
pre { font-size: .8rem; background: var(--zebra); border: 1px solid var(--rule); padding: .8rem;
  white-space: pre-wrap; word-break: break-all; }
footer { margin-top: 2rem; border-top: 1px solid var(--rule); padding-top: .5rem; }
@media print {
  /* portrait on the paper the printer holds (A4 or US Letter); the width planned for is A4's
     190 mm between the side margins (718 px at 96 px/in); Letter's is 196 mm */
  @page { size: portrait; margin: 12mm 10mm; }
  body { font-size: 10pt; max-width: none; padding: 0; } h1 { font-size: 17pt; }
  h2 { font-size: 13pt; margin-top: 1.2rem; break-after: avoid; }
  .card .state { font-size: 13pt; } .card .line { font-size: 10pt; } .cards { grid-template-columns: 1fr; }
  tr, .card, .caution, li, .key, summary { break-inside: avoid; } thead { display: table-header-group; }
  table { width: 100%; font-size: 7.5pt; } table.words { font-size: 8.5pt; }
  th, td { padding: .15rem .3rem; overflow-wrap: break-word; } td .note { font-size: .9em; }
  td.band { white-space: normal; } td.cat { border-left-width: 6px; }
  .chart { overflow: visible; break-inside: avoid; } .note:has(+ .chart) { break-after: avoid; }
  pre { font-size: 7pt; }
  details.tail > :not(summary) { display: none; } details.tail summary { list-style: none; }
  details.tail summary::-webkit-details-marker { display: none; }
  details.tail summary::after { content: " (listed in the HTML file)"; color: var(--muted); }
  th, td.cat, .card, .key b { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
"""


def _e(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _minus(value: float) -> str:
    """A number as the reader sees it: a real minus sign (U+2212), not a hyphen."""
    return f"{value:g}".replace("-", "−")


def _db(value: float, unit: str = "dB", *, sign: bool = False) -> str:
    """A level or margin for the page; a dBc level below :data:`DISPLAY_FLOOR_DBC` as "< −150 dBc"."""
    if not math.isfinite(value):
        return ("+∞" if value > 0 else "−∞") + f" {unit}"
    if unit == "dBc" and value <= FLOOR_DBC + 1:
        return "vanishes"
    if unit == "dBc" and value < DISPLAY_FLOOR_DBC:
        return f"&lt; {_minus(DISPLAY_FLOOR_DBC)} dBc"
    return f"{value:+.1f} {unit}" if sign else f"{value:.1f} {unit}"


def _band(f_low_hz: float, f_high_hz: float) -> str:
    # a no-break space inside each frequency: a narrow (printed) column breaks only around the dash
    low, high = (format_frequency(f, 7).replace(" ", "\u00a0") for f in (f_low_hz, f_high_hz))
    return low if low == high else f"{low} – {high}"


def _category(margin_db: float) -> str:
    return "violates" if margin_db < 0 else "close" if margin_db < CLOSE_DB else "clear"


def _filter_words(spec: Any) -> str:
    """A filter spec in words (frequencies formatted, defaults left out)."""
    if spec is None:
        return "none"
    if spec.kind == "cascade":
        return " then ".join(f"[{_filter_words(s)}]" for s in spec.stages)
    names = {"f_center_hz": "centre", "f_edge_hz": "edge", "bandwidth_hz": "bandwidth", "q_loaded": "loaded Q",
             "ripple_db": "ripple", "stop_atten_db": "stopband loss"}
    kinds = {"butterworth": "Butterworth", "chebyshev1": "Chebyshev type I", "elliptic": "elliptic (Cauer)",
             "tuned": "tuned circuit", "brickwall": "ideal brick-wall", "touchstone": "measured (Touchstone)"}
    parts = [kinds.get(spec.kind, spec.kind)]
    for key, value in spec.model_dump(exclude_defaults=True).items():
        if key == "kind":
            continue
        if key == "tracks_channel":  # only ever True here: False is the default
            parts.append("tracks the channel")
        elif key == "response":
            parts[0] += f" {value}"
        elif key.endswith("_hz"):
            parts.append(f"{names.get(key, key)} {format_frequency(value)}")
        elif key.endswith("_db"):
            parts.append(f"{names.get(key, key)} {value:g} dB")
        elif key == "path":
            parts.append(f"file {value!r}")
        elif key == "stages":
            parts.append(f"{value} stages")
        else:
            parts.append(f"{names.get(key, key.replace('_', ' '))} "
                         f"{f'{value:g}' if isinstance(value, float) else value}")
    return ", ".join(parts)


def _plan_words(plan: Plan, ev: Evaluation) -> list[tuple[str, str]]:
    """(field, plain words) rows describing a plan."""
    rf, lo, if_, sig, mx = plan.rf, plan.lo, plan.if_, plan.signal, plan.mixer
    down = plan.direction == "down"
    band = f"{format_frequency(rf.start_hz)} to {format_frequency(rf.stop_hz)}"
    if rf.step_hz is not None and rf.n_channels > 1:
        band += f" in {format_frequency(rf.step_hz)} steps"
    band += f" ({rf.n_channels} channel{'s' if rf.n_channels != 1 else ''})"
    lo_text = f"fixed at {format_frequency(lo.fixed_hz)}" if lo.mode == "fixed" else f"tracking, {lo.side} side"
    lo_text += f", {format_frequency(lo.step_hz)} step" if lo.step_hz is not None else ", no step grid"
    lo_text += f"; spans {format_frequency(float(np.min(ev.lo_hz)))} to {format_frequency(float(np.max(ev.lo_hz)))}"
    signal = f"bandwidth {format_frequency(sig.bandwidth_hz)}, level {sig.level_dbm:g} dBm ahead of the input filter"
    if sig.interferer_level_dbm is not None:
        signal += f"; unwanted inputs assumed at {sig.interferer_level_dbm:g} dBm"
    if mx.table == "builtin" and mx.model == "diode_circuit":
        table = f"level table solved from the diode circuit at {ev.level_table.rf_ref_dbm:g} dBm RF drive"
    elif mx.table == "builtin":
        table = "built-in level table"
        ref = "" if mx.rf_ref_dbm is not None else " (10 dB under the LO drive)"
        table += f" stated at {ev.level_table.rf_ref_dbm:g} dBm RF drive{ref}"
    else:
        table = f"level table {mx.table!r} stated at {ev.level_table.rf_ref_dbm:g} dBm RF drive"
    mixer = (f"{mx.topology.replace('_', '-')}; {table}; LO drive {mx.lo_drive_dbm:g} dBm; "
             f"balance {mx.balance_db:g} dB; {ev.level_table.description}")
    if mx.conversion_loss_db is not None:
        mixer += f"; conversion loss {mx.conversion_loss_db:g} dB"
    filters = f"RF: {_filter_words(plan.filters.rf)}. IF: {_filter_words(plan.filters.if_)}."
    if plan.filters.lo is not None:
        filters += f" LO (not applied to levels): {_filter_words(plan.filters.lo)}."
    limits = resolve_limits(plan.requirement, plan.direction)
    # a receiver: its response rejection and output-spur limit; a transmitter: its output-spur
    # limit and mask segments (each named once)
    requirement = "; ".join(([limits.texts[0]] if down else []) + list(dict.fromkeys(limits.texts[1:])))
    return [
        ("Direction",
         "down-conversion (receiver: RF in, IF out)" if down else "up-conversion (transmitter: IF in, RF out)"),
        ("RF band", band),
        ("LO", lo_text),
        ("IF", f"centre {format_frequency(if_.center_hz)}, bandwidth {format_frequency(if_.bandwidth_hz)}"),
        ("Signal", signal),
        ("Max order", f"m + n ≤ {plan.max_order}"),
        ("Mixer", mixer),
        ("Filters", filters),
        ("Requirement", requirement + " (responses: input-referred rejection; products: output level after "
                        "the output filter)"),
    ]


def _summary_card(title: str | None, ev: Evaluation) -> str:
    s = ev.summary
    state = "PASS" if s.worst_margin_db >= 0 else "FAIL"
    colour = VERDICT_COLOURS[state]  # blue is the wanted conversion's alone
    name = "" if title is None else f" <b>{_e(title)}</b>"
    return (f'<div class="card" style="--state:{colour}"><div><span class="state">{state}</span>{name}</div>'
            f'<p class="line">{_e(s.line().split(": ", 1)[1])}</p></div>')  # the state is shown above it


def _split_rows(frame: Any, top: int) -> tuple[Any, Any]:
    """Split the worst-case rows into (listed, collapsed), each in margin order.

    Collapsed: every row clear by :data:`COLLAPSE_MARGIN_DB` or more, and the clear rows beyond the
    first ``top`` listed.  A failing or close row (margin under ``CLOSE_DB``, or not a number) is
    always listed, however many there are.
    """
    margin = frame["margin_db"].to_numpy(dtype=float)
    keep = ~(margin >= CLOSE_DB)  # failing, close or NaN: always listed
    keep |= (margin < COLLAPSE_MARGIN_DB) & (np.cumsum(~keep) <= max(top - int(keep.sum()), 0))
    return frame[keep], frame[~keep]


def _row_cells(r: Any) -> str:
    cat = _category(r.margin_db)
    extra = ["" if not math.isfinite(v) else _db(v) for v in (r.extra_rf_db, r.extra_if_db)]
    # responses: the input-referred rejection; products: the output level is the figure judged
    rejection = _db(r.rejection_db) if r.kind == "response" else ""
    drive = "" if r.drive_ok else " <span class=note>(drive beyond the table)</span>"
    if r.loss_limit:  # a filter floor or a data-span policy set the filter loss (user text escaped)
        drive += f" <span class=note>(filter loss set by {_e(r.loss_limit)})</span>"
    cells = [
        f"<td>{_e(r.label)}</td><td>({r.rf_harmonic},{r.lo_harmonic})&nbsp;{'+' if r.sign > 0 else '−'}</td>",
        f"<td>{_e(r.kind)}</td><td class=num>{_e(format_frequency(r.channel_hz, 7))}</td>",
        f'<td class="num band">{_e(_band(r.f_low_hz, r.f_high_hz))}</td>',
        f"<td class=num>{_db(r.level_dbc, 'dBc')}</td><td class=num>{rejection}</td>",
        f"<td>{_e(r.requirement)}{drive}</td>",
        f'<td class="num cat" style="--cat:{CATEGORIES[cat][1]}">{_db(r.margin_db, sign=True)}</td>',
        f"<td class=num>{extra[0]}</td><td class=num>{extra[1]}</td>",
    ]
    return "<tr>" + "".join(cells) + "</tr>"


def _worst_table(ev: Evaluation, top: int) -> str:
    head = ["label", "(m,n)", "kind", "channel", "spur / input band", "level", "rejection", "requirement",
            "margin", "extra RF", "extra IF"]
    thead = "<thead><tr>" + "".join(f"<th>{h}</th>" for h in head) + "</tr></thead>"
    listed, tail = _split_rows(ev.to_frame(), top)
    page = (f"<table class=worst>{thead}<tbody>"
            + "".join(_row_cells(r) for r in listed.itertuples(index=False)) + "</tbody></table>")
    if len(tail):
        # the collapsed rows are all clear by at least this (rounded down, so the words stay true)
        bound = min(COLLAPSE_MARGIN_DB, float(np.floor(tail["margin_db"].min() * 10) / 10))
        page += (f"<details class=tail><summary>and {len(tail)} more row{'s' if len(tail) != 1 else ''}, "
                 f"all clear by ≥ {bound:g} dB</summary><table class=worst>{thead}<tbody>"
                 + "".join(_row_cells(r) for r in tail.itertuples(index=False)) + "</tbody></table></details>")
    return page


def _failing_runs(ev: Evaluation) -> str:
    s = ev.summary
    if s.n_failing_channels == 0:
        return f"<p>No failing channels: all {s.n_channels} pass.</p>"
    fail = ev.worst_margin_db < 0
    edges = np.flatnonzero(np.diff(np.concatenate([[0], fail.astype(np.int8), [0]])))
    runs = list(zip(edges[::2], edges[1::2], strict=True))
    items = []
    for a, b in runs[:MAX_RUNS]:
        k = a + int(np.argmin(ev.worst_margin_db[a:b]))
        row = ev.worst_row.iloc[k]
        span = format_frequency(ev.channels_hz[a]) + (
            "" if b - a == 1 else f" to {format_frequency(ev.channels_hz[b - 1])}"
        )
        items.append(f"<li>{_e(span)} ({b - a} channel{'s' if b - a != 1 else ''}): "
                     f"worst {_db(ev.worst_margin_db[k], sign=True)}, "
                     f"{_e(row['label'])} ({row['rf_harmonic']},{row['lo_harmonic']}) "
                     f"at {_e(format_frequency(ev.channels_hz[k]))}</li>")
    rest = f"<li>… and {len(runs) - MAX_RUNS} more runs</li>" if len(runs) > MAX_RUNS else ""
    return (f"<p>{s.n_failing_channels} of {s.n_channels} channels fail "
            f"({s.n_failing_rows} failing channel/product pairs), "
            f"in {len(runs)} run{'s' if len(runs) != 1 else ''}:</p>"
            f"<ul>{''.join(items)}{rest}</ul>")


def _snapshot_chart(ev: Evaluation, view: ViewOptions) -> Any:
    """The chart's layout, with bands that cannot be dragged (nothing recomputes in a static file)."""
    from bokeh.models import InlineStyleSheet

    handle = build_chart(chart_data(ev, view), editable=False)

    def add(model: Any, css: str) -> None:  # a print rule inside the model's shadow root (page CSS stops outside)
        model.stylesheets = [*model.stylesheets, InlineStyleSheet(css=f"@media print {{ {css} }}")]

    # Print: the chart as drawn, scaled down to the printable width.  A transform, because BokehJS
    # watches its boxes' sizes and redraws a plot at the size it measures, and a transform changes no
    # box (a zoom or a changed layout would have the plots redrawn small, then shrunk again).  The
    # negative margins hand the space the scaled chart no longer covers back to the page (the legend's
    # few pixels excepted: its height is the browser's).  contain: (empty) overlay boxes BokehJS places
    # off a plot (clipped on screen) would otherwise widen the printed page, so that Chromium shrinks all
    # of it, or add blank pages at the end.  Toolbars do nothing on paper.
    margin = 0 if handle.legend is None or handle.legend.margin is None else handle.legend.margin
    sides = 2 * margin if isinstance(margin, int | float) else margin[1] + margin[3]  # (top, right, bottom, left)
    legend_width = 0 if handle.legend is None else (handle.legend.width or 0) + sides  # the Div's margin widens it
    width = max(handle.tuning.width + handle.output.width, handle.margin.width, legend_width)
    height = max(handle.tuning.height, handle.output.height) + handle.margin.height
    scale = min(1.0, PRINT_WIDTH_PX / width)
    add(handle.layout, f":host {{ transform: scale({scale:.4f}); transform-origin: 0 0;"
                       f" margin: 0 {(scale - 1) * width:.1f}px {(scale - 1) * height:.1f}px 0 !important; }}")
    for fig in (handle.tuning, handle.output, handle.margin):
        add(fig, ":host { contain: size layout; }")  # the figures' sizes are fixed: size containment changes none
        add(fig.toolbar, ":host { visibility: hidden; }")
    return handle.layout


def _bokeh_components(layouts: list[Any]) -> list[str]:
    """The BokehJS bundles the layouts need (the full inline set is ~4 MB; most plans need ~1.3 MB)."""
    from bokeh.models import MathText, Plot, TableWidget, Widget

    refs = set().union(*(layout.references() for layout in layouts))
    wanted = {
        "bokeh-gl": any(isinstance(m, Plot) and m.output_backend == "webgl" for m in refs),
        "bokeh-widgets": any(isinstance(m, Widget) for m in refs),
        "bokeh-tables": any(isinstance(m, TableWidget) for m in refs),
        "bokeh-mathjax": any(isinstance(m, MathText) for m in refs),
    }
    return ["bokeh"] + [name for name, used in wanted.items() if used]


def _evaluated(plan: Plan, ev: Evaluation | None, base_dir: str | os.PathLike[str] | None, field: str) -> Evaluation:
    if ev is None:
        return evaluate(plan, base_dir=base_dir)
    if ev.plan != plan:
        raise MixchartError(f"{field}: an evaluation of {ev.plan.name!r} is invalid for plan {plan.name!r}; "
                            "pass the evaluation of the plan reported, or none")
    return ev


def report_html(plan: Plan, *, base_dir: str | os.PathLike[str] | None = None, evaluation: Evaluation | None = None,
                view: ViewOptions | None = None, reference: tuple[Plan, Evaluation | None] | None = None) -> str:
    """Render the standalone HTML report of a plan.

    Parameters
    ----------
    plan : Plan
        The plan reported.
    base_dir : path-like, optional
        Folder for relative file paths in the plan (the plan file's folder);
        used only when an evaluation must be computed.
    evaluation : Evaluation, optional
        ``evaluate(plan)``, if already computed.
    view : ViewOptions, optional
        What the chart shows (default: the worst channel, everything).
    reference : (Plan, Evaluation or None), optional
        A second plan shown beside for comparison (e.g. the other LO side);
        evaluated with ``base_dir`` when its evaluation is None.

    Returns
    -------
    str
        One HTML document; BokehJS is inline, so it opens offline.

    Raises
    ------
    MixchartError
        If an evaluation is not of its plan, or the plan's filters or tables are invalid.
    """
    from bokeh.embed import components
    from bokeh.resources import INLINE

    view = ViewOptions() if view is None else view
    ev = _evaluated(plan, evaluation, base_dir, "evaluation")
    entries = [("this plan", plan, ev)]
    if reference is not None:
        ref_plan, ref_ev = reference
        entries.append(("reference", ref_plan, _evaluated(ref_plan, ref_ev, base_dir, "reference")))
    layouts = [_snapshot_chart(e, view) for _, _, e in entries]
    script, divs = components(layouts)
    resources = INLINE.clone(components=_bokeh_components(layouts))  # inline, only what is used: no CDN
    cards = "".join(_summary_card(None if reference is None else f"{role}: {p.name}", e) for role, p, e in entries)
    words = [_plan_words(p, e) for _, p, e in entries]
    head = "".join(f"<th>{_e(role)}: {_e(p.name)}</th>" for role, p, _ in entries) if reference else ""
    word_rows = "".join(
        f"<tr{' class=differs' if len({w[i][1] for w in words}) > 1 else ''}><th>{_e(k)}</th>"
        + "".join(f"<td>{_e(w[i][1])}</td>" for w in words) + "</tr>"
        for i, (k, _) in enumerate(words[0]))
    key = "".join(f'<span><b style="background:{CATEGORIES[c][1]}"></b>margin: {_e(CATEGORIES[c][0])}</span>'
                  for c in ("violates", "close", "clear"))
    body = [f"<h1>{_e(plan.name)}</h1>"]
    if reference is not None:
        body.append(f"<p class=meta>compared with <b>{_e(entries[1][1].name)}</b></p>")
    if plan.notes:
        body.append(f'<p class="notes">{_e(plan.notes)}</p>')
    body += [f'<section class="cards">{cards}</section>', "<h2>The plan</h2>",
             f'<table class="words">{"<thead><tr><th></th>" + head + "</tr></thead>" if head else ""}'
             f"<tbody>{word_rows}</tbody></table>"]
    rules = (f"<p class=note>Levels below {_minus(DISPLAY_FLOOR_DBC)} dBc are shown as &lt; "
             f"{_minus(DISPLAY_FLOOR_DBC)} dBc (margins are computed from the true levels). Rows clear of "
             f"their requirement by {COLLAPSE_MARGIN_DB:g} dB or more, and clear rows past the first {TOP_ROWS}, "
             f"are collapsed under a count; a failing row, or one within {CLOSE_DB:g} dB, is always listed.</p>")
    for (role, p, e), div in zip(entries, divs, strict=True):
        tag = "" if reference is None else f" ({_e(role)}: {_e(p.name)})"
        warns = "".join(f"<li>{_e(w)}</li>" for w in e.warnings) or "<li>none</li>"
        body += [f"<h2>Warnings{tag}</h2><ul class=warn>{warns}</ul>", f"<h2>Chart{tag}</h2>",
                 "<p class=note>A snapshot: pan, zoom and hover work here, but nothing is recomputed. "
                 "To change the channel, the bands or the plan, use the live app (<code>mixchart serve</code>).</p>",
                 f'<div class="chart">{div}</div>',
                 f"<h2>Worst cases{tag}</h2><p class=\"key\">{key}</p>{rules}", _worst_table(e, TOP_ROWS),
                 f"<h2>Failing channels{tag}</h2>", _failing_runs(e)]
        rules = ""  # stated once
    body.append('<p class="caution">Caution: levels here are estimates from a mixer model and the filters as '
                "described, meant to guide spurious-emission decisions. Emission limits are set by local rules "
                "and licensed practice; check the plan, and the built hardware, against them.</p>")
    for role, p, _ in entries:
        ident = "plan-json" if role == "this plan" else "reference-json"
        body.append(f'<h2>Plan JSON ({_e(role)})</h2><pre id="{ident}">{_e(dumps_plan(p))}</pre>')
    stamp = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
    body.append(f"<footer class=meta>Generated {stamp} by mixchart {_e(__version__)}.</footer>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(plan.name)} · mixchart"
            f"</title><style>{_CSS}</style>{resources.render_css()}{resources.render_js()}{script}</head>"
            "<body>\n" + "\n".join(body) + "\n</body></html>\n")


def write_report(plan: Plan, path: str | os.PathLike[str], *, base_dir: str | os.PathLike[str] | None = None,
                 evaluation: Evaluation | None = None, view: ViewOptions | None = None,
                 reference: tuple[Plan, Evaluation | None] | None = None) -> Path:
    """Write :func:`report_html` to ``path`` atomically (temporary file, fsync, rename).

    Parameters
    ----------
    plan, base_dir, evaluation, view, reference
        As :func:`report_html`.
    path : path-like
        Destination HTML file; an existing file is replaced only once the new one is complete.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    MixchartError
        If the report cannot be rendered or the file cannot be written.
    """
    path = Path(path)
    text = report_html(plan, base_dir=base_dir, evaluation=evaluation, view=view, reference=reference)
    return atomic_write_text(path, text, error=MixchartError, field="output")
