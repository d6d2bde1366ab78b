"""The planner's mixer pieces: a heat map of the level table and the circuit-model controls.

- :func:`level_table_map` builds a small Bokeh figure ("level_table_map") of a
  :class:`~mixchart.levels.LevelTable`: m rows by n columns, colour by dBc, hover with the
  value; :func:`update_level_map` only assigns its source's ``.data``.
- :func:`circuit_controls` builds the widgets (model, diode figures, one diode's mismatch, the
  LO balun's imbalance); :func:`circuit_changes` turns their values into plan changes (pure,
  tested without widgets); :func:`make_circuit_handler` applies them with
  ``state.try_update`` and shows the one-line error; :func:`sync_circuit_controls` shows a
  plan in them without firing the handler.

The LO drive control is the Mixer tab's own (``mixer.lo_drive_dbm``): a change re-solves the
circuit (cached by its parameters) and the map and the margins follow.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .levels import FLOOR_DBC, LevelTable

__all__ = ["LevelMapHandle", "level_map_data", "level_table_map", "update_level_map", "CircuitControls",
           "circuit_controls", "circuit_changes", "make_circuit_handler", "sync_circuit_controls",
           "MAP_LOW_DBC", "MAP_NAME"]

#: Colour scale of the map, dBc: -120 (dark) to 0 (bright); lower levels take the darkest colour.
MAP_LOW_DBC = -120.0
MAP_NAME = "level_table_map"
_DIODES = {"double_balanced": 4, "single_balanced": 2, "single_ended": 1}


@dataclass
class LevelMapHandle:
    """The heat map's figure and its one source (named ``level_table_map_source``)."""

    figure: Any
    source: Any


def level_map_data(table: LevelTable, max_order: int) -> dict[str, list]:
    """Columns of the heat map: one cell per (m, n) with 0 < m + n <= max_order.

    Parameters
    ----------
    table : LevelTable
    max_order : int
        Highest order m + n shown.

    Returns
    -------
    dict
        ``m``, ``n`` (ints), ``level_dbc`` (the table's value, dBc; NaN where it vanished, drawn
        grey), ``colour_dbc`` (clipped to the scale) and ``text`` (for the hover).
    """
    h = min(max_order, table.max_harmonic)
    m, n = np.meshgrid(np.arange(h + 1), np.arange(h + 1), indexing="ij")
    keep = ((m + n) <= max_order) & ((m + n) > 0)
    m, n = m[keep], n[keep]
    level = table.level_dbc[m, n]
    vanished = level <= FLOOR_DBC
    shown = np.where(vanished, np.nan, level)
    text = ["vanished (floor)" if v else f"{x:.1f} dBc" for v, x in zip(vanished, level, strict=True)]
    text = [t + (" (wanted)" if (a, b) == (1, 1) else "") for t, a, b in zip(text, m, n, strict=True)]
    return {"m": m.tolist(), "n": n.tolist(), "level_dbc": shown.tolist(),
            "colour_dbc": np.clip(shown, MAP_LOW_DBC, 0.0).tolist(), "text": text}


def level_table_map(table: LevelTable, max_order: int, *, width: int = 300, height: int = 260) -> LevelMapHandle:
    """A small heat map of ``table``: rows m (signal harmonic), columns n (LO harmonic), colour dBc.

    Parameters
    ----------
    table : LevelTable
    max_order : int
        Highest order m + n shown.
    width, height : int
        Figure size, pixels.

    Returns
    -------
    LevelMapHandle
        The figure (named :data:`MAP_NAME`) and its source; nothing is shown.
    """
    from bokeh.models import ColorBar, ColumnDataSource, HoverTool, LinearColorMapper
    from bokeh.palettes import Viridis256
    from bokeh.plotting import figure

    source = ColumnDataSource(level_map_data(table, max_order), name=f"{MAP_NAME}_source")
    mapper = LinearColorMapper(palette=Viridis256, low=MAP_LOW_DBC, high=0.0, nan_color="#dddddd")
    fig = figure(name=MAP_NAME, width=width, height=height, title="Level table (dBc)", tools="",
                 toolbar_location=None, x_axis_label="n (LO harmonic)", y_axis_label="m (signal harmonic)",
                 x_range=(-0.5, max_order + 0.5), y_range=(max_order + 0.5, -0.5))
    fig.rect(x="n", y="m", width=0.95, height=0.95, source=source, line_color=None,
             fill_color={"field": "colour_dbc", "transform": mapper})
    fig.add_tools(HoverTool(tooltips=[("(m,n)", "(@m,@n)"), ("level", "@text")]))
    fig.add_layout(ColorBar(color_mapper=mapper, width=8, title="dBc"), "right")
    fig.xaxis.ticker = fig.yaxis.ticker = list(range(max_order + 1))
    fig.grid.visible = False
    return LevelMapHandle(figure=fig, source=source)


def update_level_map(handle: LevelMapHandle, table: LevelTable, max_order: int) -> None:
    """Show ``table`` in the map: assigns the source's data when it changed (and the ranges when the
    order changed), so a plan change that leaves the table alone sends nothing."""
    data = level_map_data(table, max_order)
    if data != dict(handle.source.data):
        handle.source.data = data
    fig = handle.figure
    if fig.x_range.end != max_order + 0.5:
        fig.x_range.end, fig.y_range.start = max_order + 0.5, max_order + 0.5
        fig.xaxis.ticker = fig.yaxis.ticker = list(range(max_order + 1))


# ---------------------------------------------------------------------------- controls
@dataclass
class CircuitControls:
    """The circuit-model widgets, the error line, the summary line and the box holding them."""

    model: Any
    is_a: Any
    ideality: Any
    rs_ohm: Any
    mismatch_pct: Any
    lo_amp_db: Any
    lo_phase_deg: Any
    error: Any
    summary: Any
    box: Any
    syncing: list[bool] = field(default_factory=lambda: [False])


def circuit_controls(plan: Any) -> CircuitControls:
    """The widgets, showing ``plan``'s mixer (see :func:`sync_circuit_controls`)."""
    import ipywidgets as w

    style = {"description_width": "130px"}
    row = w.Layout(width="300px")
    c = CircuitControls(
        model=w.Dropdown(options=[("switching rules", "switching"), ("diode circuit", "diode_circuit")],
                         value="switching", description="level model", layout=row, style=style),
        is_a=w.Text(value="", description="diode Is (A)", placeholder="blank: 5e-9 (typical)", layout=row,
                    style=style, continuous_update=False),
        ideality=w.Text(value="", description="diode ideality", placeholder="blank: 1.08 (typical)", layout=row,
                        style=style, continuous_update=False),
        rs_ohm=w.Text(value="", description="diode Rs (ohm)", placeholder="blank: 6 (typical)", layout=row,
                      style=style, continuous_update=False),
        mismatch_pct=w.FloatText(value=0.0, description="D1 Is mismatch (%)", layout=row, style=style),
        lo_amp_db=w.FloatText(value=0.0, description="LO balun ampl. (dB)", layout=row, style=style),
        lo_phase_deg=w.FloatText(value=0.0, description="LO balun phase (°)", layout=row, style=style),
        error=w.HTML(value="", layout=w.Layout(width="300px")),
        summary=w.HTML(value="", layout=w.Layout(width="300px")),
        box=None,
    )
    c.box = w.VBox([c.model, c.is_a, c.ideality, c.rs_ohm, c.mismatch_pct, c.lo_amp_db, c.lo_phase_deg, c.error,
                    c.summary])
    for name in ("model", "is_a", "ideality", "rs_ohm", "mismatch_pct", "lo_amp_db", "lo_phase_deg"):
        getattr(c, name).add_class(f"mixchart-circuit-{name.replace('_', '-')}")
    sync_circuit_controls(c, plan)
    return c


def _optional(text: str, path: str) -> tuple[float | None, str | None]:
    text = str(text).strip()
    if not text:
        return None, None
    try:
        value = float(text)
    except ValueError:
        return None, f"{path}: {text!r} is invalid; give a number, or leave it blank for the typical value"
    return (value, None) if math.isfinite(value) else (None, f"{path}: {text!r} is invalid; give a finite number")


def circuit_changes(values: dict[str, Any], topology: str) -> tuple[dict[str, Any], str | None]:
    """Plan changes (dotted paths) for the circuit widgets' values.

    Parameters
    ----------
    values : dict
        ``model`` ("switching" or "diode_circuit"), ``is_a``, ``ideality``, ``rs_ohm`` (text,
        blank for the typical value), ``mismatch_pct`` (D1's saturation-current error, %),
        ``lo_amp_db`` and ``lo_phase_deg`` (the LO balun's imbalance, dB and degrees).
    topology : str
        The plan's topology (how many diodes a mismatch list has).

    Returns
    -------
    changes : dict
        For ``state.try_update``; the switching model drops the circuit.
    error : str or None
        A one-line message naming the field when a text is not a number (changes are then empty).
    """
    if values["model"] != "diode_circuit":
        return {"mixer.model": "switching", "mixer.circuit": None}, None
    changes: dict[str, Any] = {"mixer.model": "diode_circuit"}
    for key in ("is_a", "ideality", "rs_ohm"):
        value, error = _optional(values[key], f"mixer.circuit.{key}")
        if error:
            return {}, error
        changes[f"mixer.circuit.{key}"] = value
    pct = round(float(values["mismatch_pct"]), 3)
    count = _DIODES[topology]
    changes["mixer.circuit.mismatch"] = (None if pct == 0 else
                                         [{"is_ratio": 1.0 + pct / 100.0}] + [{}] * (count - 1))
    changes["mixer.circuit.lo_balun.amplitude_imbalance_db"] = round(float(values["lo_amp_db"]), 3)
    changes["mixer.circuit.lo_balun.phase_imbalance_deg"] = round(float(values["lo_phase_deg"]), 3)
    return changes, None


def _values(c: CircuitControls) -> dict[str, Any]:
    return {name: getattr(c, name).value for name in ("model", "is_a", "ideality", "rs_ohm", "mismatch_pct",
                                                     "lo_amp_db", "lo_phase_deg")}


def make_circuit_handler(state: Any, controls: CircuitControls):
    """A widget observer that applies the circuit widgets to ``state`` (a :class:`~mixchart.state.PlanState`).

    Observe every circuit widget's ``value`` with it.  A refused change leaves the plan as it was
    and shows the one-line message (escaped) in ``controls.error``.
    """
    def handler(_change: dict | None = None) -> None:
        if controls.syncing[0]:
            return
        changes, error = circuit_changes(_values(controls), state.plan.mixer.topology)
        if error is None:
            error = state.try_update(changes)
        controls.error.value = "" if not error else f"<span style='color:#b00020'>{html.escape(error)}</span>"
        show_summary(controls, state)

    return handler


def show_summary(controls: CircuitControls, state: Any) -> None:
    """One line under the controls: the table's source, conversion loss and reference drives."""
    table = state.evaluation.level_table
    controls.summary.value = (f"<span style='font-size:12px;color:#444'>{html.escape(table.description)}; "
                              f"conversion loss {table.conversion_loss_db:.2f} dB</span>")


def sync_circuit_controls(controls: CircuitControls, plan: Any) -> None:
    """Show ``plan``'s mixer in the widgets without applying them back."""
    mixer = plan.mixer
    spec = mixer.circuit
    controls.syncing[0] = True
    try:
        controls.model.value = mixer.model
        for key in ("is_a", "ideality", "rs_ohm"):
            value = None if spec is None else getattr(spec, key)
            getattr(controls, key).value = "" if value is None else f"{value:g}"
        first = None if spec is None or not spec.mismatch else spec.mismatch[0]
        controls.mismatch_pct.value = 0.0 if first is None else round((first.is_ratio - 1.0) * 100.0, 3)
        balun = None if spec is None else spec.lo_balun
        controls.lo_amp_db.value = 0.0 if balun is None else balun.amplitude_imbalance_db
        controls.lo_phase_deg.value = 0.0 if balun is None else balun.phase_imbalance_deg
        circuit = mixer.model == "diode_circuit"
        for name in ("is_a", "ideality", "rs_ohm", "mismatch_pct", "lo_amp_db", "lo_phase_deg"):
            getattr(controls, name).disabled = not circuit
    finally:
        controls.syncing[0] = False
