"""The app's widgets: :func:`build_controls`, a pure function from a plan to a :class:`Controls` bundle.

Also the two-way mapping between a filter's widgets and its spec
(:func:`_filter_spec_from_controls`, :func:`_show_filter`).  No callbacks: the wiring
is :class:`mixchart.app.PlannerApp`'s.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .plan import MAX_ORDER, Plan
from .units import format_frequency

__all__ = ["FilterControls", "Controls", "build_controls"]


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
