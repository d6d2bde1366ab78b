"""The planning app: ipywidgets controls around the chart, in Jupyter or Voila.

Three parts, kept apart so the logic is testable without a browser:

:class:`~mixchart.state.PlanState` (in :mod:`mixchart.state`)
    The state: the plan being edited, an optional reference plan, the view
    options and the current evaluation.  It validates every change (a bad
    change leaves the last valid plan in place and returns the message), and
    tells its listeners what changed.  No widgets.
:func:`build_controls`
    A pure function from a plan to the widgets (a :class:`Controls` bundle).
:class:`PlannerApp`
    The wiring: widget events go to the state; state changes go to the chart
    sources, the table, the status line and the widgets.  Dragging the bands in
    the chart edits the plan on mouse release.

``planner(plan)`` in a notebook cell shows the app.
"""

from __future__ import annotations

import base64
import html
import math
import os
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .analysis import Evaluation
from .app_compare import ReferencePanel, compare_html
from .app_keys import attach_keys
from .app_messages import on_screen, screen_labels
from .app_mixer import (
    circuit_controls,
    level_table_map,
    make_circuit_handler,
    show_summary,
    sync_circuit_controls,
    update_level_map,
)
from .chart import ChartHandle, build_chart, chart_data, update_chart
from .chart_style import VERDICT_COLOURS
from .errors import MixchartError
from .plan import MAX_ORDER, Plan, dumps_plan, load_plan
from .state import PlanState, example_plan
from .units import format_frequency, parse_frequency
from .widget import BatchedBokehModel

__all__ = ["PlanState", "Controls", "build_controls", "PlannerApp", "planner", "example_plan"]

# ==================================================================== widgets


@dataclass
class FilterControls:
    """Widgets of one filter."""

    kind: Any
    order: Any
    centre: Any
    bandwidth: Any
    q: Any
    ripple: Any
    stop: Any
    spec_json: Any
    error: Any
    box: Any


@dataclass
class Controls:
    """Every widget of the app, by role."""

    direction: Any
    lo_mode: Any
    side: Any
    lo_fixed: Any
    lo_step: Any
    interferer: Any
    name: Any
    notes: Any
    rf_start: Any
    rf_stop: Any
    rf_step: Any
    if_center: Any
    if_bandwidth: Any
    sig_bandwidth: Any
    sig_level: Any
    max_order: Any
    requirement: Any
    topology: Any
    balance: Any
    table_path: Any
    rf_ref: Any
    lo_drive: Any
    rf_filter: FilterControls
    if_filter: FilterControls
    channel: Any
    channel_text: Any
    normalised: Any
    orders_shown: Any
    show_clear: Any
    keep_ref: Any
    clear_ref: Any
    ref_name: Any
    ref_pick: Any
    save_path: Any
    undo: Any
    redo: Any
    save: Any
    upload: Any
    load_path: Any
    load: Any
    snapshot: Any
    file_msg: Any
    errors: dict[str, Any]
    panel: Any


_FILTER_KINDS = [
    ("none", "none"),
    ("single tuned circuit", "tuned"),
    ("Butterworth band-pass", "butterworth"),
    ("Chebyshev I band-pass", "chebyshev1"),
    ("elliptic band-pass", "elliptic"),
    ("ideal band-pass", "brickwall"),
    ("other (edit the JSON)", "custom"),
]

_TEXT_FIELDS = {
    "rf_start": ("rf.start_hz", "RF start"),
    "rf_stop": ("rf.stop_hz", "RF stop"),
    "rf_step": ("rf.step_hz", "channel step"),
    "if_center": ("if.center_hz", "IF centre"),
    "if_bandwidth": ("if.bandwidth_hz", "IF bandwidth"),
    "sig_bandwidth": ("signal.bandwidth_hz", "signal bandwidth"),
    "lo_fixed": ("lo.fixed_hz", "fixed LO"),
    "lo_step": ("lo.step_hz", "LO step"),
}


def _plan_value(plan: Plan, path: str) -> Any:
    """The plan's value at a dotted JSON path such as ``"if.center_hz"``."""
    node: Any = plan
    for key in path.split("."):
        node = getattr(node, "if_" if key == "if" else key)
    return node


def _freq_text(f_hz: float | None) -> str:
    return "" if f_hz is None else format_frequency(f_hz, 9)


def _row() -> Any:
    """A fresh 300 px layout: each widget needs its own, or hiding one hides all that share it."""
    import ipywidgets as w

    return w.Layout(width="300px")


#: Which filter fields each kind uses (the rest are hidden).
_FILTER_FIELDS = {
    "none": (),
    "tuned": ("order", "centre", "q"),
    "butterworth": ("order", "centre", "bandwidth"),
    "chebyshev1": ("order", "centre", "bandwidth", "ripple"),
    "elliptic": ("order", "centre", "bandwidth", "ripple", "stop"),
    "brickwall": ("centre", "bandwidth"),
    "custom": (),
}


def _show_filter_fields(fc: FilterControls) -> None:
    """Show only the fields the chosen filter kind uses; the JSON box is always there."""
    used = _FILTER_FIELDS.get(fc.kind.value, ())
    for field in ("order", "centre", "bandwidth", "q", "ripple", "stop"):
        getattr(fc, field).layout.display = None if field in used else "none"
    fc.order.description = "stages" if fc.kind.value == "tuned" else "order"


def _filter_controls(name: str, label: str, tracking_default: bool) -> FilterControls:
    import ipywidgets as w

    style = {"description_width": "92px"}
    kind = w.Dropdown(options=_FILTER_KINDS, value="none", description=label, layout=_row(), style=style)
    order = w.BoundedIntText(value=3, min=1, max=20, description="order", layout=_row(), style=style)
    centre = w.Text(
        value="track" if tracking_default else "", description="centre", layout=_row(), style=style,
        continuous_update=False, placeholder="'track' or e.g. 10.7 MHz",
    )
    bandwidth = w.Text(value="", description="bandwidth", layout=_row(), style=style, continuous_update=False)
    q = w.BoundedFloatText(value=50.0, min=0.1, max=1e6, description="loaded Q", layout=_row(), style=style)
    ripple = w.BoundedFloatText(value=0.5, min=0.001, max=10, description="ripple dB", layout=_row(), style=style)
    stop = w.BoundedFloatText(value=60.0, min=1, max=300, description="stop dB", layout=_row(), style=style)
    spec_json = w.Textarea(
        value="", description="JSON", layout=w.Layout(width="300px", height="70px"), style=style,
        continuous_update=False,
    )
    error = w.HTML(value="", layout=w.Layout(width="300px"))
    box = w.VBox([kind, order, centre, bandwidth, q, ripple, stop, spec_json, error])
    box.add_class(f"mixchart-filter-{name}")
    controls = FilterControls(kind, order, centre, bandwidth, q, ripple, stop, spec_json, error, box)
    kind.observe(lambda _change: _show_filter_fields(controls), names="value")
    _show_filter_fields(controls)
    return controls


def build_controls(plan: Plan, n_channels: int) -> Controls:
    """Build every widget for a plan (values from the plan; no callbacks).

    Parameters
    ----------
    plan : Plan
        Gives the initial values.
    n_channels : int
        Number of channels (for the channel slider).

    Returns
    -------
    Controls
    """
    import ipywidgets as w

    style = {"description_width": "112px"}

    def text(key: str, value: float | None) -> Any:
        _, label = _TEXT_FIELDS[key]
        return w.Text(value=_freq_text(value), description=label, layout=_row(), style=style, continuous_update=False)

    errors = {key: w.HTML(value="", layout=w.Layout(width="300px")) for key in _TEXT_FIELDS}
    c: dict[str, Any] = {}
    c["direction"] = w.ToggleButtons(
        options=[("down (Rx)", "down"), ("up (Tx)", "up")], value=plan.direction,
        description="conversion", style={"description_width": "112px", "button_width": "92px"},
    )
    c["lo_mode"] = w.ToggleButtons(
        options=[("tracking", "tracking"), ("fixed", "fixed")], value=plan.lo.mode, description="LO",
        style={"description_width": "112px", "button_width": "92px"},
    )
    c["side"] = w.ToggleButtons(
        options=[("high side", "high"), ("low side", "low")], value=plan.lo.side, description="injection",
        style={"description_width": "112px", "button_width": "92px"},
    )
    for key, (path, _label) in _TEXT_FIELDS.items():
        c[key] = text(key, _plan_value(plan, path))
    c["sig_level"] = w.FloatSlider(
        value=plan.signal.level_dbm, min=-120, max=20, step=1, description="signal (dBm)", layout=_row(), style=style,
        continuous_update=False, readout_format=".0f",
    )
    # a plain number field, not a slider: a value beyond the limits (max order 999) is refused with
    # the plan's message, never silently clamped by the widget
    c["max_order"] = w.IntText(
        value=plan.max_order, description="max order", layout=_row(), style=style, continuous_update=False,
        tooltip=f"2 to {MAX_ORDER}",
    )
    c["requirement"] = w.FloatSlider(
        value=plan.requirement.min_rejection_db, min=0, max=150, step=1, description="required (dB)", layout=_row(),
        style=style, continuous_update=False, readout_format=".0f",
    )
    c["topology"] = w.Dropdown(
        options=[("double-balanced", "double_balanced"), ("single-balanced", "single_balanced"),
                 ("single-ended", "single_ended")],
        value=plan.mixer.topology, description="topology", layout=_row(), style=style,
    )
    c["balance"] = w.FloatSlider(
        value=plan.mixer.balance_db, min=0, max=80, step=1, description="balance (dB)", layout=_row(), style=style,
        continuous_update=False, readout_format=".0f",
    )
    c["table_path"] = w.Text(
        value=plan.mixer.table, description="level table", layout=_row(), style=style, continuous_update=False,
        placeholder="builtin or a .csv path",
    )
    c["rf_ref"] = w.Text(value="" if plan.mixer.rf_ref_dbm is None else f"{plan.mixer.rf_ref_dbm:g}",
                         description="table ref (dBm)", layout=_row(), style=style, continuous_update=False,
                         placeholder="blank: LO drive - 10 dB")
    c["lo_drive"] = w.FloatText(value=plan.mixer.lo_drive_dbm, description="LO drive (dBm)", layout=_row(), style=style)
    errors["mixer"] = w.HTML(value="", layout=w.Layout(width="300px"))
    errors["plan"] = w.HTML(value="", layout=w.Layout(width="300px"))
    rf_label = "preselector" if plan.direction == "down" else "output filter"
    rf_filter = _filter_controls("rf", rf_label, tracking_default=True)
    if_filter = _filter_controls("if", "IF filter", tracking_default=False)
    c["channel"] = w.IntSlider(
        value=0, min=0, max=max(n_channels - 1, 0), description="channel", layout=_row(), style=style,
        readout=False, continuous_update=True,
    )
    c["channel_text"] = w.HTML(value="")
    c["normalised"] = w.Checkbox(value=False, description="normalise to LO", indent=False)
    c["orders_shown"] = w.IntSlider(
        value=plan.max_order, min=2, max=plan.max_order, description="orders shown", layout=_row(), style=style,
    )
    c["show_clear"] = w.Checkbox(value=True, description="show clear products", indent=False)
    c["ref_name"] = w.Text(value="", placeholder="name (blank: the plan's)", layout=w.Layout(width="170px"),
                           continuous_update=False)
    c["ref_name"].add_class("mixchart-ref-name")
    c["keep_ref"] = w.Button(description="Keep as reference", icon="thumb-tack",
                             layout=w.Layout(width="auto", min_width="150px"),
                             tooltip="Keep the plan as it is now, under the name on the left, to compare with")
    c["ref_pick"] = w.Dropdown(options=[], value=None, description="compare with", layout=w.Layout(width="334px"),
                               style={"description_width": "90px"}, disabled=True)
    c["clear_ref"] = w.Button(description="Drop reference", layout=w.Layout(width="auto", min_width="128px"),
                              disabled=True, tooltip="Forget the reference shown")
    c["interferer"] = w.Text(
        value="" if plan.signal.interferer_level_dbm is None else f"{plan.signal.interferer_level_dbm:g}",
        description="interferer (dBm)", layout=_row(), style=style, continuous_update=False,
        placeholder="blank: same as the signal",
    )
    c["name"] = w.Text(value=plan.name, description="plan name", layout=_row(), style=style, continuous_update=False)
    c["notes"] = w.Textarea(
        value=plan.notes, description="notes", layout=w.Layout(width="300px", height="60px"), style=style,
        continuous_update=False,
    )
    c["undo"] = w.Button(description="Undo", tooltip="Undo the last plan change (Ctrl+Z)", disabled=True,
                         layout=w.Layout(width="100px"))
    c["redo"] = w.Button(description="Redo", tooltip="Redo the change last undone (Ctrl+Shift+Z)", disabled=True,
                         layout=w.Layout(width="100px"))
    c["save_path"] = w.Text(value="plan.json", description="file", layout=_row(), style=style,
                            placeholder="name, or a full path")
    c["save"] = w.Button(description="Save plan", button_style="primary", layout=w.Layout(width="146px"))
    c["upload"] = w.FileUpload(accept=".json", multiple=False, description="Open plan…", layout=w.Layout(width="146px"))
    c["load_path"] = w.Text(
        value="", description="load file", layout=_row(), style=style, placeholder="path on the server"
    )
    c["load"] = w.Button(description="Load", layout=w.Layout(width="146px"))
    c["snapshot"] = w.Button(description="HTML snapshot", layout=w.Layout(width="146px"))
    c["file_msg"] = w.HTML(value="", layout=w.Layout(width="300px"))
    for key, widget in c.items():  # stable CSS hooks for tests and styling: .mixchart-if-center etc.
        widget.add_class(f"mixchart-{key.replace('_', '-')}")

    def rows(*keys: str) -> list[Any]:
        out = []
        for key in keys:
            out.append(c[key])
            if key in errors:
                out.append(errors[key])
        return out

    plan_tab = w.VBox(
        rows("direction", "rf_start", "rf_stop", "rf_step", "if_center", "if_bandwidth", "lo_mode", "side",
             "lo_fixed", "lo_step", "sig_bandwidth", "sig_level", "interferer", "max_order", "requirement")
        + [errors["plan"]]
    )
    filter_tab = w.VBox([rf_filter.box, if_filter.box])
    mixer_tab = w.VBox([c["topology"], c["balance"], c["table_path"], c["rf_ref"], c["lo_drive"], errors["mixer"]])
    view_tab = w.VBox([c["channel"], c["channel_text"], c["orders_shown"], c["normalised"], c["show_clear"]])
    file_tab = w.VBox(
        [
            c["name"],
            c["notes"],
            c["save_path"],
            w.HBox([c["save"], c["snapshot"]]),
            w.HBox([c["upload"]]),
            c["load_path"],
            c["load"],
            c["file_msg"],
        ]
    )
    tabs = w.Tab(children=[plan_tab, filter_tab, mixer_tab, view_tab, file_tab])
    for i, title in enumerate(["Plan", "Filters", "Mixer", "View", "File"]):
        tabs.set_title(i, title)
    tabs.layout.width = "340px"
    # Compare sits under the tabs, always in view: it is what a design meeting reaches for.
    compare = w.VBox([w.HBox([c["ref_name"], c["keep_ref"]]), c["ref_pick"]], layout=w.Layout(margin="6px 0 0 0"))
    history = w.HBox([c["clear_ref"], c["undo"], c["redo"]], layout=w.Layout(margin="4px 0 0 0"))
    panel = w.VBox([tabs, compare, history], layout=w.Layout(width="340px"))
    return Controls(rf_filter=rf_filter, if_filter=if_filter, errors=errors, panel=panel, **c)


# ===================================================================== wiring


def _error_html(text: str) -> str:
    return (f'<span class="mixchart-error" style="color:#B33000;font-size:12px">{html.escape(text)}</span>'
            if text else "")


def _filter_spec_from_controls(fc: FilterControls, tracking_allowed: bool) -> dict[str, Any] | str | None:
    """Build a filter spec dict from its widgets; returns "custom" to mean: use the JSON box."""
    kind = fc.kind.value
    if kind == "none":
        return None
    if kind == "custom":
        return "custom"
    centre = fc.centre.value.strip()
    track = centre.lower() in ("track", "tracking", "") and tracking_allowed
    spec: dict[str, Any] = {"kind": kind}
    if not track:
        spec["f_center_hz"] = centre
    else:
        spec["tracks_channel"] = True
    if kind == "tuned":
        spec.update(q_loaded=float(fc.q.value), stages=int(fc.order.value))
        return spec
    spec.update(response="bandpass", bandwidth_hz=fc.bandwidth.value.strip())
    if kind != "brickwall":
        spec["order"] = int(fc.order.value)
    if kind in ("chebyshev1", "elliptic"):
        spec["ripple_db"] = float(fc.ripple.value)
    if kind == "elliptic":
        spec["stop_atten_db"] = float(fc.stop.value)
    return spec


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


class PlannerApp:
    """Widgets and chart wired to a :class:`PlanState`.

    Parameters
    ----------
    state : PlanState
        The state to show and edit.
    chart_width : int
        Width of each chart plane, screen pixels.

    Attributes
    ----------
    widget : ipywidgets.VBox
        What to display.
    chart : ChartHandle
        The chart of the current plan.
    """

    def __init__(self, state: PlanState, *, chart_width: int = 600) -> None:
        import ipywidgets as w

        self.state = state
        self._syncing = False
        self.chart: ChartHandle = build_chart(chart_data(state.evaluation, state.view), width=chart_width,
                                              height=430, fit_width=True)
        self.controls = build_controls(state.plan, state.evaluation.channels_hz.size)
        self.controls.save_path.value = state.file_name  # the file-name field follows the opened plan
        # the circuit model's fields and the level table's heat map, in the Mixer tab (mixchart.app_mixer)
        self.circuit = circuit_controls(state.plan)
        circuit_handler = make_circuit_handler(state, self.circuit)
        for name in ("model", "is_a", "ideality", "rs_ohm", "mismatch_pct", "lo_amp_db", "lo_phase_deg"):
            getattr(self.circuit, name).observe(circuit_handler, names="value")
        self.level_map = level_table_map(state.evaluation.level_table, state.plan.max_order)
        self.level_map_widget = BatchedBokehModel(self.level_map.figure)
        mixer_tab = self.controls.panel.children[0].children[2]
        mixer_tab.children = (*mixer_tab.children, self.circuit.box, self.level_map_widget)
        from bokeh.events import Tap

        # before the widget is made: the browser learns which UI events to send from its first render
        self.chart.tuning.on_event(Tap, self._on_tap)
        self.chart.margin.on_event(Tap, self._on_tap)  # the margin plot shares the tuning plane's RF axis
        self.key_commands = attach_keys(self.chart.layout, self._on_key)
        self.bokeh = BatchedBokehModel(self.chart.layout)
        # the chart takes the width beside the controls, down to two half-width planes; narrower, it
        # wraps under the controls and takes the whole width there
        self.bokeh.layout.flex = "1 1 0%"
        self.bokeh.layout.min_width = f"{chart_width + 60}px"
        self.bokeh.layout.width = "auto"
        self.status = w.HTML(value="")
        self.status.add_class("mixchart-status")
        self.warnings = w.HTML(value="", layout=w.Layout(max_height="104px", overflow="auto"))
        self.warnings.add_class("mixchart-warnings")
        self.table = w.HTML(value="")
        self.table.add_class("mixchart-worst-table")
        self.channel_table = w.HTML(value="", layout=w.Layout(max_height="360px", overflow="auto"))
        self.channel_table.add_class("mixchart-channel-table")
        self.compare = w.HTML(value="")
        self.compare.add_class("mixchart-compare")
        self.reference_panel = ReferencePanel(self.chart, width=chart_width, height=470)
        self.reference_box = w.VBox([])
        title = w.HTML(
            "<div style='font-size:20px;font-weight:bold'>mixchart frequency planner</div>"
            "<div style='font-size:12px;color:#555'>Levels are model estimates. Emission limits are set by local "
            "rules and licensed practice; check the plan against them.</div>"
        )
        # the verdict and the warnings stay in view while the page scrolls (a sticky banner)
        self.banner = w.VBox([self.status, self.warnings], layout=w.Layout(overflow="visible"))
        self.banner.add_class("mixchart-banner")
        style = w.HTML(_APP_CSS, layout=w.Layout(height="0px", overflow="hidden", margin="0"))
        self.widget = w.VBox(
            [
                style,
                title,
                self.banner,
                # wraps the chart below the controls on narrow screens instead of cutting it off
                w.HBox([self.controls.panel, self.bokeh], layout=w.Layout(flex_flow="row wrap")),
                self.compare,
                self.reference_box,
                self.table,
                self.channel_table,
            ]
        )
        self.widget.layout.overflow = "visible"  # so the banner sticks to the page's scrolling, not the box's
        self.widget.add_class("mixchart-app")
        self._wire()
        for box in self.controls.errors.values():
            box.observe(lambda _change: self._mark_stale(), names="value")
        state.observe(self._on_state)
        self._refresh_all()

    def _on_key(self, command: str) -> None:
        """Ctrl+Z / Ctrl+Shift+Z from the page: as the Undo and Redo buttons."""
        self._history_result(self.state.undo() if command == "undo" else self.state.redo())

    def _error(self, text: str) -> str:
        """A message as HTML, led by the on-screen label of the field it names."""
        return _error_html(on_screen(text, screen_labels(self.controls)) if text else "")

    # ---------------------------------------------------------------- wiring
    def _wire(self) -> None:
        c = self.controls
        for key, (path, _label) in _TEXT_FIELDS.items():
            c.__dict__[key].observe(self._text_handler(key, path), names="value")
        c.interferer.observe(self._interferer_handler, names="value")
        simple = {
            "name": "name",
            "notes": "notes",
            "direction": "direction",
            "side": "lo.side",
            "max_order": "max_order",
            "topology": "mixer.topology",
            "table_path": "mixer.table",
        }
        for key, path in simple.items():
            c.__dict__[key].observe(self._value_handler(path, "plan" if key != "topology" else "mixer"), names="value")
        for key, path, digits in (
            ("sig_level", "signal.level_dbm", 1),
            ("requirement", "requirement.min_rejection_db", 1),
            ("balance", "mixer.balance_db", 1),
            ("lo_drive", "mixer.lo_drive_dbm", 2),
        ):
            c.__dict__[key].observe(self._float_handler(path, digits), names="value")
        for name, fc in (("rf", c.rf_filter), ("if", c.if_filter)):
            for widget in (fc.kind, fc.order, fc.centre, fc.bandwidth, fc.q, fc.ripple, fc.stop):
                widget.observe(self._filter_handler(name, fc), names="value")
            fc.spec_json.observe(self._filter_json_handler(name, fc), names="value")
        c.rf_ref.observe(self._optional_float_handler("mixer.rf_ref_dbm", "mixer"), names="value")
        c.lo_mode.observe(self._lo_mode_handler, names="value")
        c.channel.observe(self._on_channel, names="value")
        c.normalised.observe(lambda ch: self._view(normalised=bool(ch["new"])), names="value")
        c.show_clear.observe(lambda ch: self._view(show_clear=bool(ch["new"])), names="value")
        c.orders_shown.observe(lambda ch: self._view(max_order_shown=int(ch["new"])), names="value")
        c.undo.on_click(lambda _b: self._history_result(self.state.undo()))
        c.redo.on_click(lambda _b: self._history_result(self.state.redo()))
        c.keep_ref.on_click(lambda _b: self.state.keep_reference(c.ref_name.value))
        c.clear_ref.on_click(lambda _b: self.state.clear_reference())
        c.ref_pick.observe(self._on_ref_pick, names="value")
        c.save.on_click(lambda _b: self.save(c.save_path.value))
        c.load.on_click(lambda _b: self._load_file(c.load_path.value.strip()))
        c.snapshot.on_click(lambda _b: self.snapshot())
        c.upload.observe(self._on_upload, names="value")
        for name in ("out_output_band", "out_input_band", "rf_band"):
            self.chart.sources[name].on_change("data", self._drag_handler(name))

    def _text_handler(self, key: str, path: str) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            text = str(change["new"]).strip()
            if text == "" and key in ("rf_step", "lo_step", "lo_fixed"):
                value: Any = None
            else:
                try:
                    value = parse_frequency(text, _TEXT_FIELDS[key][1])
                except MixchartError as exc:
                    self.controls.errors[key].value = self._error(str(exc))
                    return
            error = self.state.try_update({path: value})
            self.controls.errors[key].value = self._error(error or "")
            if error is None:
                self.controls.errors["plan"].value = ""

        return handler

    def _value_handler(self, path: str, error_key: str) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            error = self.state.try_update({path: change["new"]})
            self.controls.errors[error_key].value = self._error(error or "")

        return handler

    def _lo_mode_handler(self, change: dict) -> None:
        """Switch the LO mode both ways: "fixed" takes the current channel's LO as its value,
        "tracking" drops the fixed value and keeps the injection side last used."""
        if self._syncing:
            return
        if change["new"] == "fixed":
            lo_hz = float(self.state.evaluation.lo_hz[self.state.channel_index])
            changes = {"lo.mode": "fixed", "lo.fixed_hz": lo_hz}
        else:
            changes = {"lo.mode": "tracking", "lo.fixed_hz": None}
        error = self.state.try_update(changes)
        self.controls.errors["plan"].value = self._error(error or "")
        if error:
            with self._sync():
                self.controls.lo_mode.value = self.state.plan.lo.mode

    def _interferer_handler(self, change: dict) -> None:
        self._optional_float_handler("signal.interferer_level_dbm", "plan")(change)

    def _optional_float_handler(self, path: str, box: str) -> Callable[[dict], None]:
        """A text field holding a level in dBm, or blank for the model's default (None)."""
        def handler(change: dict) -> None:
            if self._syncing:
                return
            text = str(change["new"]).strip()
            try:
                value = None if text == "" else round(float(text), 2)
            except ValueError:
                self.controls.errors[box].value = self._error(
                    f"{path}: {text!r} is invalid; give a level in dBm, or leave it blank"
                )
                return
            error = self.state.try_update({path: value})
            self.controls.errors[box].value = self._error(error or "")

        return handler

    def _float_handler(self, path: str, digits: int) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            value = round(float(change["new"]), digits)  # sliders drift: 1.9999999999999998
            key = "mixer" if path.startswith("mixer") else "plan"
            error = self.state.try_update({path: value})
            self.controls.errors[key].value = self._error(error or "")

        return handler

    def _filter_defaults(self, name: str, fc: FilterControls) -> None:
        """Fill the empty fields a newly chosen filter kind needs with values derived from the plan.

        The IF filter sits on the IF passband, 1.2 times as wide; a receiver's preselector tracks
        the channel (10 % of the top channel wide); a transmitter's output filter sits on the RF
        band, 1.2 times as wide.  Fields the user filled keep their values.
        """
        plan = self.state.plan
        rf_low = plan.rf.start_hz - plan.signal.bandwidth_hz / 2
        rf_high = plan.rf.stop_hz + plan.signal.bandwidth_hz / 2
        if name == "if":
            centre, width = format_frequency(plan.if_.center_hz), 1.2 * plan.if_.bandwidth_hz
        elif plan.direction == "down":
            centre, width = "track", 0.1 * plan.rf.stop_hz
        else:
            centre, width = format_frequency(0.5 * (rf_low + rf_high)), 1.2 * (rf_high - rf_low)
        with self._sync():
            if not fc.centre.value.strip():
                fc.centre.value = centre
            if not fc.bandwidth.value.strip():
                fc.bandwidth.value = format_frequency(width)

    def _filter_handler(self, name: str, fc: FilterControls) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            if change.get("owner") is fc.kind and change["new"] not in ("none", "custom"):
                self._filter_defaults(name, fc)
            spec = _filter_spec_from_controls(fc, tracking_allowed=(name == "rf"))
            if spec == "custom":
                return
            self._apply_filter(name, fc, spec)

        return handler

    def _filter_json_handler(self, name: str, fc: FilterControls) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            import json

            text = str(change["new"]).strip()
            if not text or text == "null":
                self._apply_filter(name, fc, None)
                return
            try:
                spec = json.loads(text)
            except json.JSONDecodeError as exc:
                fc.error.value = self._error(f"filters.{name}: malformed JSON ({exc.msg} at column {exc.colno})")
                return
            self._apply_filter(name, fc, spec)

        return handler

    def _apply_filter(self, name: str, fc: FilterControls, spec: dict[str, Any] | None) -> None:
        error = self.state.try_update({f"filters.{name}": spec})
        fc.error.value = self._error(error or "")

    def _on_channel(self, change: dict) -> None:
        if self._syncing:
            return
        index = int(change["new"])
        channels = self.state.evaluation.channels_hz
        index = min(max(index, 0), channels.size - 1)
        self.state.set_view(channel_hz=float(channels[index]))

    def _view(self, **changes: Any) -> None:
        if not self._syncing:
            self.state.set_view(**changes)

    def _on_tap(self, event: Any) -> None:
        if event.x is None:
            return
        f_hz = float(event.x) * self._scale("tuning")
        index = self.state.evaluation.nearest_channel(f_hz)
        self.state.set_view(channel_hz=float(self.state.evaluation.channels_hz[index]))

    def _scale(self, plane: str) -> float:
        return self._last_meta["scale"] if plane == "tuning" else self._last_meta["out_scale"]

    def _drag_handler(self, name: str) -> Callable[[str, Any, Any], None]:
        def handler(_attr: str, _old: Any, new: dict[str, Any]) -> None:
            if self._syncing:
                return  # our own push into the source
            self.chart.last.pop(name, None)  # the browser changed it: our copy is stale
            keys = ("y0", "y1") if name == "out_output_band" else ("x0", "x1")
            try:
                low, high = float(new[keys[0]][-1]), float(new[keys[1]][-1])
            except (KeyError, IndexError, TypeError, ValueError):
                return
            scale = self._last_meta["source_scales"][name]  # Hz per unit of this band's own axis
            down = self.state.plan.direction == "down"
            if name == "rf_band":
                band = "rf"
            elif name == "out_output_band":
                band = "if" if down else "rf"
            else:
                band = "rf" if down else "if"
            error = self.state.apply_band_drag(band, low * scale, high * scale)
            self.controls.errors["plan"].value = self._error(error or "")
            if error is not None:
                self._refresh_chart()  # put the band back where the plan has it

        return handler

    def _on_upload(self, change: dict) -> None:
        value = change["new"]
        if not value:
            return
        item = value[0] if isinstance(value, (list, tuple)) else next(iter(value.values()))
        content = item["content"]
        data = bytes(content) if not isinstance(content, bytes) else content
        name = str(item.get("name", "plan.json"))
        self._file_result(self.state.load_text(data, name), f"opened {name}; saves go to {self.state.save_dir}")

    #: The mark the banner and both chart titles carry while a field holds an invalid entry.
    STALE_MARK = "showing the last valid plan: an entry is invalid"

    def _mark_stale(self) -> None:
        """While any field holds an invalid entry, say on the banner and on the charts that they show
        the last valid plan; clear the mark when every entry is valid again."""
        self._mark_titles_stale()
        self._mark_banner_stale()

    def _stale(self) -> bool:
        return any(box.value for box in self.controls.errors.values())

    def _mark_titles_stale(self) -> None:
        stale, mark = self._stale(), f" — {self.STALE_MARK}"
        for title in (self.chart.tuning.title, self.chart.output.title):
            base = title.text.split(mark)[0]
            text = base + mark if stale else base
            if title.text != text:
                with self.bokeh.batch():
                    title.text = text

    def _mark_banner_stale(self) -> None:
        stale = self._stale()
        status = self.status.value.split("<div class='mixchart-stale'")[0]
        if stale:
            status += (f"<div class='mixchart-stale' style='color:#8A5A00;font-weight:bold'>&#9888; "
                       f"{html.escape(self.STALE_MARK)} (see the message under it)</div>")
        self.status.value = status

    def _history_result(self, error: str | None) -> None:
        self.controls.errors["plan"].value = self._error(error or "")

    def _load_file(self, path: str) -> None:
        error = self.state.load_path(path)
        self._file_result(error, f"loaded {self.state.save_dir / self.state.file_name}")

    def _file_result(self, error: str | None, done: str) -> None:
        if error is None:
            with self._sync():
                self.controls.save_path.value = self.state.file_name  # the file-name field follows the plan
        self.controls.file_msg.value = self._error(error) if error else html.escape(done)

    # ------------------------------------------------------------ actions
    def save(self, path: str | None = None) -> Path | None:
        """Save the plan atomically next to the opened plan (or in the working directory) and offer it
        as a download; a relative ``path`` is taken in that folder, an absolute one as given."""
        try:
            written = self.state.save(path or self.controls.save_path.value.strip() or None)
        except (MixchartError, OSError) as exc:
            self.controls.file_msg.value = self._error(f"save: {exc}")
            return None
        self.controls.file_msg.value = (
            f"saved <code class='mixchart-saved-path'>{html.escape(str(written))}</code><br>"
            + _download_html(self.state.plan, written.name)
        )
        return written

    def snapshot(self, path: str | None = None) -> Path | None:
        """Write a standalone HTML snapshot beside where the plan is saved, and offer it as a download."""
        from .report import write_report

        name = Path(path or self.controls.save_path.value.strip() or self.state.file_name)
        target = self.state.resolve(name if name.suffix.lower() == ".html" else name.with_suffix(".html"))
        ref = self.state.reference
        try:
            written = write_report(
                self.state.plan, target, base_dir=self.state.base_dir, evaluation=self.state.evaluation,
                view=self.state.view, reference=ref,
            )
            data = written.read_bytes()
        except (MixchartError, OSError) as exc:
            self.controls.file_msg.value = self._error(f"snapshot: {exc}")
            return None
        self.controls.file_msg.value = (
            f"wrote <code class='mixchart-saved-path'>{html.escape(str(written))}</code><br>"
            + _download_link(data, written.name, "text/html")
        )
        return written

    # ------------------------------------------------------------ refresh
    def _on_state(self, state: PlanState, what: str) -> None:
        if what == "plan":
            self._refresh_all()
        elif what == "view":
            self._refresh_chart()
        elif what == "reference":
            self._refresh_reference()

    @contextmanager
    def _sync(self) -> Iterator[None]:
        self._syncing, old = True, self._syncing
        try:
            yield
        finally:
            self._syncing = old

    def _refresh_chart(self) -> None:
        data = chart_data(self.state.evaluation, self.state.view)
        self._last_meta = data.meta
        with self._sync(), self.bokeh.batch():
            update_chart(self.chart, data)
            self._mark_titles_stale()  # the titles were just reset from the data
        if self.state.reference is not None:  # the reference follows the channel (and, by its panel, the zoom)
            self.reference_panel.show(self.state.reference[1], self.state.view, data.meta)
            if self.reference_box.children:
                self.reference_box.children[0].value = self._reference_label()
        ev = self.state.evaluation
        i = data.meta["channel_index"]
        with self._sync():
            self.controls.channel.value = i
        margin = ev.worst_margin_db[i]
        self.channel_table.value = _channel_table_html(ev, i)
        self.controls.channel_text.value = (
            f"<span class='mixchart-channel-text'>channel {html.escape(format_frequency(ev.channels_hz[i]))}, "
            f"LO {html.escape(format_frequency(ev.lo_hz[i]))}, worst margin {margin:+.1f} dB</span>"
        )

    def _refresh_all(self) -> None:
        ev = self.state.evaluation
        # the chart first: its one message leaves before the tables are made, and the page applies it
        # before the HTML updates that follow (which restyle the page and would delay the repaint)
        self._refresh_chart()
        self.status.value = _summary_html("Plan", ev)
        self._mark_banner_stale()  # the banner was just reset from the plan
        self.warnings.value = _warnings_html(ev)
        self.controls.undo.disabled = not self.state.can_undo
        self.controls.redo.disabled = not self.state.can_redo
        self.table.value = _table_html(ev)
        self._sync_widgets()
        with self.level_map_widget.batch():
            update_level_map(self.level_map, ev.level_table, self.state.plan.max_order)
        sync_circuit_controls(self.circuit, self.state.plan)
        show_summary(self.circuit, self.state)
        self._refresh_compare()

    def _refresh_compare(self) -> None:
        self.compare.value = compare_html(self.state.evaluation, self.state.references, self.state.reference_name)

    def _on_ref_pick(self, change: dict) -> None:
        if not self._syncing and change["new"] in self.state.references:
            self.state.select_reference(change["new"])

    def _reference_label(self) -> str:
        name, plan = self.state.reference_name or "", self.state.reference[0]
        return (f"<b>Reference \u201c{html.escape(name)}\u201d</b> ({html.escape(plan.name)}): "
                f"{html.escape(self.reference_panel.note())}")

    def _refresh_reference(self) -> None:
        c, state = self.controls, self.state
        with self._sync():
            c.ref_pick.options = list(state.references)
            c.ref_pick.value = state.reference_name
            c.ref_pick.disabled = c.clear_ref.disabled = not state.references
            c.ref_name.value = ""
        ref = state.reference
        if ref is None:
            self.reference_box.children = ()
        else:
            import ipywidgets as w

            self.reference_panel.show(ref[1], state.view, self._last_meta)
            label = w.HTML(f"<b>Reference “{html.escape(state.reference_name or '')}”</b> "
                           f"({html.escape(ref[0].name)}): {html.escape(self.reference_panel.note())}")
            label.add_class("mixchart-reference-label")
            table = w.HTML(_table_html(ref[1], caption="Reference: worst case of each product"),
                           layout=w.Layout(margin="0 0 0 16px"))
            table.add_class("mixchart-reference-table")
            body = w.HBox([self.reference_panel.widget, table], layout=w.Layout(flex_flow="row wrap"))
            self.reference_box.children = (label, body)
        self._refresh_compare()

    def _sync_widgets(self) -> None:
        """Show the current plan in the widgets without firing their handlers."""
        plan, c = self.state.plan, self.controls
        with self._sync():
            c.direction.value = plan.direction
            c.lo_mode.value = plan.lo.mode
            c.side.value = plan.lo.side
            for key, (path, _label) in _TEXT_FIELDS.items():
                c.__dict__[key].value = _freq_text(_plan_value(plan, path))
            c.lo_fixed.disabled = plan.lo.mode != "fixed"
            c.side.disabled = plan.lo.mode != "tracking"
            c.sig_level.value = plan.signal.level_dbm
            c.max_order.value = plan.max_order
            c.requirement.value = plan.requirement.min_rejection_db
            level = plan.signal.interferer_level_dbm
            c.interferer.value = "" if level is None else f"{level:g}"
            c.name.value = plan.name
            c.notes.value = plan.notes
            c.topology.value = plan.mixer.topology
            c.balance.value = plan.mixer.balance_db
            c.table_path.value = plan.mixer.table
            c.rf_ref.value = "" if plan.mixer.rf_ref_dbm is None else f"{plan.mixer.rf_ref_dbm:g}"
            c.lo_drive.value = plan.mixer.lo_drive_dbm
            c.orders_shown.max = plan.max_order
            c.orders_shown.value = min(self.state.view.max_order_shown or plan.max_order, plan.max_order)
            c.channel.max = max(self.state.evaluation.channels_hz.size - 1, 0)
            c.rf_filter.kind.description = "preselector" if plan.direction == "down" else "output filter"
            for fc, spec in ((c.rf_filter, plan.filters.rf), (c.if_filter, plan.filters.if_)):
                _show_filter(fc, spec)


def _show_filter(fc: FilterControls, spec: Any) -> None:
    import json

    if spec is None:
        fc.kind.value = "none"
        fc.spec_json.value = ""
        return
    data = spec.model_dump(mode="json", exclude_none=True)
    fc.spec_json.value = json.dumps(data)
    kind = data.get("kind")
    simple = kind == "tuned" or (
        kind in ("butterworth", "chebyshev1", "elliptic", "brickwall") and data.get("response") == "bandpass"
    )
    if not simple:
        fc.kind.value = "custom"
        return
    fc.kind.value = kind
    fc.centre.value = "track" if data.get("tracks_channel") else _freq_text(data.get("f_center_hz"))
    if kind == "tuned":
        fc.q.value = data["q_loaded"]
        fc.order.value = data.get("stages", 1)
    else:
        fc.bandwidth.value = _freq_text(data.get("bandwidth_hz"))
        fc.order.value = data.get("order", fc.order.value)
        fc.ripple.value = data.get("ripple_db", fc.ripple.value)
        fc.stop.value = data.get("stop_atten_db", fc.stop.value)


# =================================================================== entry


def planner(plan: Plan | str | os.PathLike[str] | None = None, *, chart_width: int = 600) -> Any:
    """Show the planning app in a notebook: ``planner("my_plan.json")``.

    Parameters
    ----------
    plan : Plan, path-like or None
        A plan, a plan file, or None for the built-in receiver example.
    chart_width : int
        Width of each chart plane, pixels.

    Returns
    -------
    ipywidgets.VBox
        The app widget (displayed when it is the cell's last expression); the
        :class:`PlannerApp` is available as its ``.app`` attribute.  Each display
        of it puts BokehJS, inline, in an output just before the app (the page
        loads it once; see :mod:`mixchart.notebook_js`); a Voila page's title
        follows the plan's name.
    """
    if plan is None:
        loaded, folder = example_plan()
        state = PlanState(loaded, folder, file_name="fm_receiver.json")  # saved to the working directory
    elif isinstance(plan, Plan):
        state = PlanState(plan, None)
    else:
        path = Path(plan).resolve()
        state = PlanState(load_plan(path), path.parent, save_dir=path.parent, file_name=path.name)
    from .notebook_js import show_with_bokehjs, title_follows_plan

    app = PlannerApp(state, chart_width=chart_width)
    title_follows_plan(app)  # the tab title of a Voila page
    app.widget.app = app
    # Each display of the app brings BokehJS to the page in an output of its own, just before the app.
    return show_with_bokehjs(app.widget)
