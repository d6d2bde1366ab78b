"""The planning chart: a tuning plane and an output plane, in Bokeh.

Layout follows Bokeh's own app pattern: data, plot, (widgets and callbacks in
:mod:`mixchart.app`), layout.  :func:`chart_data` is a pure function from an
:class:`~mixchart.analysis.Evaluation` to plain column dicts, one per named
``ColumnDataSource``; :func:`build_chart` builds the figures once around those
sources; :func:`update_chart` only assigns ``source.data`` (and axis labels and
ranges when the plotted window really changes).

Tuning plane
    RF frequency across, LO frequency up.  Every (m, n) product that lands in
    the IF passband is a strip; the plan (the LO for each channel) is drawn on
    top, so a crossing of the plan with a strip is a spur hit.  The current
    channel is marked, with its spurious responses (receiver) or output
    products (transmitter) along its LO line.
Output plane
    Input frequency across, output frequency up, for the current channel's LO;
    every product is a line ``|m·x ± n·f_LO|``.  The output passband is a
    horizontal band, the input band a vertical band; lines crossing their
    intersection are in-band products.  The output axis centres on the output
    passband and what lands near it (:func:`mixchart.chart_axes.output_axis_window`).
    It can be normalised (divided by LO).

Each axis has its own engineering unit, chosen from its own window and named in its
label (:mod:`mixchart.chart_axes`); ``meta["scales"]`` holds the Hz per display unit
of each, and ``meta["source_scales"]`` that of each draggable band's source.

Colour follows level against the requirement, one colour for one meaning
(:mod:`mixchart.chart_style`): vermillion violates, orange is within
:data:`CLOSE_DB` of it, grey is clear; the wanted conversion is blue.  Filter
responses shade the axes green, strongest in the passband, fading through the skirts
to nothing where the filter alone meets the requirement.  Strips are hatched and lines
opaque, drawn worst on top, so nothing blends into a colour the legend lacks.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .analysis import Evaluation
from .chart_axes import axis_unit, output_axis_window, plane_windows
from .chart_bands import band_box, set_band
from .chart_style import (
    CATEGORIES,
    CLOSE_DB,
    DOT_SIZE,
    DRAW_ORDER,
    HATCH_SCALE,
    PALETTE,
    STRIP_HATCH,
    STRIP_LINE_WIDTH,
    TINT_MAX_ALPHA,
    category_of,
    draw_rank,
    legend_html,
    style_columns,
)
from .levels import FLOOR_DBC
from .loci import output_plane_loci, tuning_plane_strips
from .products import HALF_IF, IMAGE, LABELS
from .units import format_frequency

__all__ = [
    "CLOSE_DB",
    "CATEGORIES",
    "PALETTE",
    "ViewOptions",
    "ChartData",
    "ChartHandle",
    "chart_data",
    "build_chart",
    "update_chart",
    "legend_html",
]

_MAX_PLAN_POINTS = 2000
#: Room left of each plot's frame, px: wide enough for the y axis's tick labels and title, so the
#: frames keep their place (and the margin plot lines up with the tuning plane above it) when
#: the labels change.
_LEFT_BORDER_PX = 78
_EMPTY_SKIRT: dict[str, Any] = {"x0": np.zeros(0), "x1": np.zeros(0), "alpha": np.zeros(0), "atten_db": np.zeros(0)}
_EMPTY_TRACK: dict[str, Any] = {"xs": [], "ys": [], "alpha": np.zeros(0), "atten_db": np.zeros(0)}
#: The receiver responses whose strip (tuning plane) and arm (output plane) carry the table's name.
_NAMED_RESPONSES = (LABELS[IMAGE], LABELS[HALF_IF])


@dataclass(frozen=True)
class ViewOptions:
    """What the chart shows, beyond the plan itself.

    Attributes
    ----------
    channel_hz : float or None
        Channel whose LO the output plane uses, Hz (nearest channel is taken);
        None picks the worst channel.
    normalised : bool
        Output plane divided by the LO (the classic normalised chart).
    max_order_shown : int or None
        Hide products above this order (None: the plan's maximum order).
    show_clear : bool
        Draw products that are clear of the requirement.
    """

    channel_hz: float | None = None
    normalised: bool = False
    max_order_shown: int | None = None
    show_clear: bool = True


@dataclass(frozen=True)
class ChartData:
    """Column data for every named source, plus axis labels, windows and scales."""

    sources: dict[str, dict[str, Any]]
    meta: dict[str, Any] = field(default_factory=dict)


def _offchart(rows, px: np.ndarray, py: np.ndarray, window: tuple, sx: float, sy: float) -> dict[str, Any]:
    """Edge markers for rows outside the window (Hz): clipped into it, with a text naming what and where.

    ``sx`` and ``sy`` are the x and y axes' Hz per display unit."""
    order = np.argsort(rows["margin_db"].to_numpy(float), kind="stable")[:_MAX_OFFCHART]
    rows, px, py = rows.iloc[order], px[order], py[order]
    pad_x, pad_y = 0.02 * (window[1] - window[0]), 0.03 * (window[3] - window[2])
    x = np.clip(px, window[0] + pad_x, window[1] - pad_x)
    y = np.clip(py, window[2] + pad_y, window[3] - pad_y)
    # markers at the same edge point are stacked inwards, worst at the edge, so their texts stay legible
    step = 0.06 * (window[3] - window[2])
    seen: dict[tuple, int] = {}
    for i in range(len(x)):
        key = (round(float(x[i]), 6), round(float(y[i]), 6))
        k = seen.get(key, 0)
        seen[key] = k + 1
        y[i] += -k * step if py[i] > window[3] else k * step
    # the marker points the way to the row: up, down, right or left of the window
    angle = np.where(py > window[3], 0.0, np.where(py < window[2], np.pi, np.where(px > window[1], -np.pi / 2,
                                                                                      np.pi / 2)))
    margins = rows["margin_db"].to_numpy(float)
    text = [f"{lb} ({m},{n}) at {format_frequency(f)}, off the chart: {mg:+.1f} dB"
            for lb, m, n, f, mg in zip(rows["label"], rows["rf_harmonic"], rows["lo_harmonic"],
                                       np.where(rows["kind"] == "product", py, px), margins, strict=True)]
    right = x > 0.5 * (window[0] + window[1])  # a text right of the middle reads leftwards, staying on the plot
    # beside a marker at the top or bottom edge; above one at a side edge, clear of the dots on the passband
    side = (py <= window[3]) & (py >= window[2])
    return {"x": x / sx, "y": y / sy, "angle": angle.astype(float), "text": text, "margin": margins,
            "align": np.where(right, "right", "left").tolist(), "dx": np.where(right, -9.0, 9.0),
            "dy": np.where(side, -7.0, 0.0), "baseline": np.where(side, "bottom", "middle").tolist(),
            **style_columns(category_of(margins).astype(object))}


def _worst_product_margins(ev, m: np.ndarray, n: np.ndarray, sign: np.ndarray) -> np.ndarray:
    """Worst margin over the tuning range of each product (m, n, sign) of the wanted signal, dB (+inf if none)."""
    wbp = ev.worst_by_product
    product = wbp["kind"].to_numpy() == "product"
    cols = (wbp[k].to_numpy()[product] for k in ("rf_harmonic", "lo_harmonic", "sign", "margin_db"))
    best = {(int(a), int(b), int(c)): float(d) for a, b, c, d in zip(*cols, strict=True)}
    return np.array([best.get((int(a), int(b), int(c)), np.inf) for a, b, c in zip(m, n, sign, strict=True)],
                    dtype=float)


def _worst_label_margin(ev, label: str) -> float:
    """Worst margin over the tuning range of the rows labelled ``label``, dB (+inf if none)."""
    wbp = ev.worst_by_product
    margins = wbp["margin_db"].to_numpy(dtype=float)[wbp["label"].to_numpy() == label]
    return float(margins.min()) if margins.size else float("inf")


def _line_margins(frame, m: np.ndarray, n: np.ndarray, sign: np.ndarray, down: bool) -> np.ndarray:
    """Worst margin at one channel of what each output-plane line |m·x ± n·f_LO| carries, dB (+inf if none)."""
    worst: dict[tuple, float] = {}
    for kind, a, b, c, d in zip(frame["kind"], frame["rf_harmonic"], frame["lo_harmonic"], frame["sign"],
                                frame["margin_db"], strict=True):
        # a product lies on its own line; a response to (n·LO ± IF)/m on the difference line (m, n)
        key = (int(a), int(b), int(c)) if kind == "product" else (int(a), int(b), -1)
        if kind == "response" and not down:
            continue
        worst[key] = min(worst.get(key, np.inf), float(d))
    return np.array([worst.get((int(a), int(b), int(c)), np.inf) for a, b, c in zip(m, n, sign, strict=True)],
                    dtype=float)


def _skirt(
    filt, f_lo: float, f_hi: float, centre: float | None, band: tuple[float, float], req_db: float, scale: float
):
    """Rows of a filter tint between ``f_lo`` and ``f_hi`` (Hz), fine near the passband."""
    b_lo, b_hi = band
    width = max(b_hi - b_lo, 1e-9 * max(abs(f_hi), 1.0))
    grid = [np.linspace(f_lo, f_hi, 81)]
    if math.isfinite(b_lo) and math.isfinite(b_hi):
        offsets = width * np.geomspace(0.005, 60.0, 90)
        grid += [b_lo - offsets, b_hi + offsets, np.linspace(b_lo, b_hi, 9)]
    edges = np.unique(np.clip(np.concatenate(grid), f_lo, f_hi))
    mids = 0.5 * (edges[:-1] + edges[1:])
    if filt is None:
        atten = np.where((mids >= b_lo) & (mids <= b_hi), 0.0, np.inf)
    else:
        c = None if not filt.tracks_channel else np.full(mids.shape, centre)
        atten = filt.atten_db(mids, c)
    alpha = TINT_MAX_ALPHA * np.clip(1.0 - atten / max(req_db, 1.0), 0.0, 1.0)
    keep = alpha > 0.004
    return {
        "x0": edges[:-1][keep] / scale,
        "x1": edges[1:][keep] / scale,
        "alpha": alpha[keep],
        "atten_db": np.round(atten[keep], 1),
    }


#: At most this many off-chart rows are marked at the edge of the output plane (the worst first).
_MAX_OFFCHART = 5
#: Loss levels of a tracking filter's shading along the plan, as fractions of the requirement.
_TRACK_LEVELS = (0.05, 0.15, 0.3, 0.5, 0.75)
#: Plan points the tracking shading follows (the plan line is smooth).
_TRACK_POINTS = 40
#: Sources that depend on the plan but not on the channel shown (the tracking shading, the plan
#: line's marks), kept with the last evaluation they belong to; a new evaluation empties it.
_PLAN_CACHE: dict[str, Any] = {"ev": None, "values": {}}


def _plan_cached(ev, key: tuple, make) -> Any:
    """``make()`` once per evaluation (compared by identity) and ``key``."""
    if _PLAN_CACHE["ev"] is not ev:
        _PLAN_CACHE["ev"], _PLAN_CACHE["values"] = ev, {}
    values = _PLAN_CACHE["values"]
    if key not in values:
        values[key] = make()
    return values[key]


#: Tracking shadings kept across evaluations, by what they depend on (most recent last).
_TRACK_CACHE: dict[tuple, dict[str, Any]] = {}
_TRACK_CACHE_SIZE = 8


def _track_cached(ev, tuning_win: tuple, req: float, sx: float, sy: float, make) -> dict[str, Any]:
    """The tracking shading, reused while its inputs stay the same: the preselector's spec, the
    channels and LOs, the window, the requirement and the axes' scales.  A plan change that leaves
    those alone (a signal level, the IF filter, a requirement slider step) does not recompute it.
    A measured (Touchstone) filter is keyed by its evaluation, since its file may change on disk."""
    spec = ev.plan.filters.rf
    kind = getattr(spec, "kind", None)
    if spec is None or kind in ("touchstone", "cascade"):
        return _plan_cached(ev, ("tuning_track", tuning_win, req, sx, sy), make)
    key = (spec.model_dump_json(), ev.channels_hz.tobytes(), ev.lo_hz.tobytes(), tuple(tuning_win), req, sx, sy)
    if key in _TRACK_CACHE:
        _TRACK_CACHE[key] = _TRACK_CACHE.pop(key)  # most recent last
        return _TRACK_CACHE[key]
    value = _TRACK_CACHE[key] = make()
    while len(_TRACK_CACHE) > _TRACK_CACHE_SIZE:
        del _TRACK_CACHE[next(iter(_TRACK_CACHE))]
    return value


def _tuning_marks(ev, sx: float, sy: float) -> dict[str, Any]:
    """The plan line recoloured where a channel's worst margin is not clear: one short segment per such
    channel, from the midpoint with its left neighbour to the right one (x, y in units of ``sx``, ``sy`` Hz)."""
    worst_cat = category_of(ev.worst_margin_db).astype(object)
    bad = np.flatnonzero(worst_cat != "clear")[:: max(1, int(np.sum(worst_cat != "clear")) // _MAX_PLAN_POINTS)]
    px, py = ev.channels_hz / sx, ev.lo_hz / sy
    left = np.maximum(bad - 1, 0)
    right = np.minimum(bad + 1, px.size - 1)
    wr = ev.worst_row.iloc[bad]
    return {
        "x0": 0.5 * (px[left] + px[bad]),
        "y0": 0.5 * (py[left] + py[bad]),
        "x1": 0.5 * (px[right] + px[bad]),
        "y1": 0.5 * (py[right] + py[bad]),
        "label": [f"{lb} ({m},{n})" for lb, m, n in zip(wr["label"], wr["rf_harmonic"], wr["lo_harmonic"],
                                                          strict=True)],
        "channel": [format_frequency(f) for f in ev.channels_hz[bad]],
        "margin": ev.worst_margin_db[bad].astype(float),
        **style_columns(worst_cat[bad]),
    }


def _tracking_skirt(filt, channels_hz: np.ndarray, lo_hz: np.ndarray, window: tuple, req_db: float,
                    sx: float, sy: float) -> dict[str, Any]:
    """Nested bands along the plan line where a tracking filter loses less than each level.

    For each of a few plan points (channel c, LO) the frequencies around c whose loss, with the
    filter centred on c, is below ``level·req_db`` are found on a grid 2.3 % apart in offset; the band edges of
    all points make one polygon per level, drawn with the alpha of the level (lower loss darker).
    """
    pick = np.unique(np.linspace(0, channels_hz.size - 1, min(_TRACK_POINTS, channels_hz.size)).astype(int))
    c, y = channels_hz[pick], lo_hz[pick]
    span = max(window[1] - window[0], 1e-9)
    # offsets from the channel, 2.3 % apart (geometric), from 1e-4 to 1 of the window's span
    offsets = np.concatenate([-np.geomspace(span, 1e-4 * span, 400), [0.0], np.geomspace(1e-4 * span, span, 400)])
    f = np.maximum(c[:, None] + offsets[None, :], 1e-3)
    atten = np.asarray(filt.atten_db(f, np.broadcast_to(c[:, None], f.shape)), dtype=float)
    xs, ys, alphas, losses = [], [], [], []
    for level in _TRACK_LEVELS:
        inside = atten <= level * max(req_db, 1.0)
        if not inside.any(axis=1).all():
            continue
        lo_edge = np.where(inside, f, np.inf).min(axis=1)
        hi_edge = np.where(inside, f, -np.inf).max(axis=1)
        xs.append(np.concatenate([lo_edge, hi_edge[::-1]]) / sx)
        ys.append(np.concatenate([y, y[::-1]]) / sy)
        alphas.append(TINT_MAX_ALPHA * (1.0 - level) / len(_TRACK_LEVELS) * 2.0)
        losses.append(round(level * max(req_db, 1.0), 1))
    return {"xs": xs, "ys": ys, "alpha": np.asarray(alphas, dtype=float), "atten_db": np.asarray(losses, dtype=float)}


def _named_responses(frame) -> list[tuple[str, int, int, float]]:
    """(label, m, n, input Hz) of each response in :data:`_NAMED_RESPONSES` of one channel's frame, as the
    engine labels them (the table's names, never re-derived here)."""
    rows = frame[(frame["kind"] == "response") & frame["label"].isin(_NAMED_RESPONSES)]
    return [(str(lb), int(m), int(n), float(f)) for lb, m, n, f in
            zip(rows["label"], rows["rf_harmonic"], rows["lo_harmonic"], rows["f_center_hz"], strict=True)]


def _scales(tuning_win: tuple, out_win: tuple, lo_now: float, normalised: bool) -> tuple[dict, dict]:
    """Hz per display unit and the unit's name of each axis (:data:`mixchart.chart_axes.AXES`)."""
    pairs = {"tuning_x": axis_unit(*tuning_win[:2]), "tuning_y": axis_unit(*tuning_win[2:])}
    if normalised:
        pairs["output_x"] = pairs["output_y"] = (lo_now, "× LO")
    else:
        pairs["output_x"], pairs["output_y"] = axis_unit(*out_win[:2]), axis_unit(*out_win[2:])
    return {k: v[0] for k, v in pairs.items()}, {k: v[1] for k, v in pairs.items()}


def chart_data(ev: Evaluation, opts: ViewOptions = ViewOptions()) -> ChartData:
    """Everything the chart draws, as plain column dicts (no Bokeh objects).

    Parameters
    ----------
    ev : Evaluation
        The evaluated plan.
    opts : ViewOptions
        Current channel, normalisation, shown orders.

    Returns
    -------
    ChartData
        ``sources`` maps each source name of :func:`build_chart` to its columns, in display
        units (each axis its own); ``meta`` holds the channel index, the windows (display
        units), the axis labels, ``scales`` and ``units`` (Hz per display unit and its name,
        for each of ``tuning_x``, ``tuning_y``, ``output_x``, ``output_y``), ``source_scales``
        (Hz per unit of each draggable band's source: ``rf_band``, ``out_input_band``,
        ``out_output_band``), and, kept for callers that read one number per plane,
        ``scale``/``unit`` (the tuning plane's RF axis, which the margin plot shares) and
        ``out_scale``/``out_unit`` (the output plane's output axis).
    """
    plan = ev.plan
    down = plan.direction == "down"
    # strips and skirts are judged like the rows they stand for: a receiver's loci by its response
    # rejection, a transmitter's by its output-spur limit (mixchart.requirements)
    req = plan.requirement.rejection_db if down else -plan.requirement.spur_dbc
    index = int(np.argmin(ev.worst_margin_db)) if opts.channel_hz is None else ev.nearest_channel(opts.channel_hz)
    ch = float(ev.channels_hz[index])
    lo_now = float(ev.lo_hz[index])
    max_shown = plan.max_order if opts.max_order_shown is None else max(2, min(opts.max_order_shown, plan.max_order))
    frame = ev.channel_frame(index)
    table = ev.level_table
    ctx_rf, ctx_if = ev.filters
    band = (plan.rf.start_hz - plan.signal.bandwidth_hz / 2, plan.rf.stop_hz + plan.signal.bandwidth_hz / 2)
    if_band = (plan.if_.f_low_hz, plan.if_.f_high_hz)

    # the output plane's rows (products and responses of this channel) and where they sit, Hz
    prod = frame[(frame["order"] <= max_shown) & (frame["level_dbc"] > FLOOR_DBC + 1)]
    f_in_wanted = float(ev.f_wanted_in_hz[index])
    if down:
        px = np.where(prod["kind"] == "product", f_in_wanted, prod["f_center_hz"])
        py = np.where(prod["kind"] == "product", prod["f_center_hz"], plan.if_.center_hz)
    else:
        prod = prod[prod["kind"] == "product"]
        px, py = np.full(len(prod), f_in_wanted), prod["f_center_hz"].to_numpy()
    tuning_win, out_x = plane_windows(ev, lo_now)
    near = (prod["margin_db"].to_numpy(float) < CLOSE_DB) & (prod["label"].to_numpy() != "wanted")
    out_win = (*out_x, *output_axis_window(if_band if down else band, py[near]))
    scales, units = _scales(tuning_win, out_win, lo_now, opts.normalised)
    sx, sy = scales["tuning_x"], scales["tuning_y"]

    sources: dict[str, dict[str, Any]] = {}

    # --------------------------------------------------------- tuning plane
    strips = tuning_plane_strips(plan.direction, max_shown, plan.if_.f_low_hz, plan.if_.f_high_hz, tuning_win)
    intrinsic = table.level_dbc_at(strips.rf_harmonic, strips.lo_harmonic, plan.signal.level_dbm)
    # One story: a strip takes the after-filter verdict of its product, the worst margin over
    # the tuning range (the table's row); a product with no finite margin is drawn clear.
    strip_margin = _plan_cached(ev, ("strip_margin", tuning_win, max_shown), lambda: _worst_product_margins(
        ev, strips.rf_harmonic, strips.lo_harmonic, strips.sign)).copy()  # (named responses' are set below)
    cats = category_of(strip_margin).astype(object)
    # the strip holding the plan line is the wanted conversion; a strip holding a named response of the
    # middle channel (image, half-IF) carries the table's name for it and that response's verdict
    mid = len(ev.channels_hz) // 2
    xm, ym = ev.channels_hz[mid], ev.lo_hz[mid]
    named = _plan_cached(ev, ("named", mid), lambda: ev.responses_at(mid, _NAMED_RESPONSES)) if down else []
    labels = []
    for k in range(len(strips)):
        m, n = int(strips.rf_harmonic[k]), int(strips.lo_harmonic[k])
        xs, ys = strips.xs[k], strips.ys[k]
        text = f"({m},{n}) {'sum' if strips.sign[k] > 0 else 'difference'}"
        if m == 1 and n == 1 and xs.min() <= xm <= xs.max() and _point_in_convex(xs, ys, xm, ym):
            cats[k] = "wanted"
            text = "wanted (1,1)"
        else:
            for label, rm, rn, f_in in named:
                if (rm, rn) == (m, n) and xs.min() <= f_in <= xs.max() and _point_in_convex(xs, ys, f_in, ym):
                    text = f"{label} ({m},{n})"
                    strip_margin[k] = _plan_cached(ev, ("label", label), lambda lb=label: _worst_label_margin(ev, lb))
                    cats[k] = category_of(strip_margin[k:k + 1])[0]
                    break
        labels.append(text)
    vanish = intrinsic <= FLOOR_DBC + 1
    show = ~vanish & ((cats != "clear") | opts.show_clear)
    idx = np.flatnonzero(show)
    idx = idx[np.argsort(draw_rank(cats[idx]), kind="stable")]  # drawn in this order: the worst on top
    sources["tuning_strips"] = {
        "xs": [strips.xs[k] / sx for k in idx],
        "ys": [strips.ys[k] / sy for k in idx],
        "m": strips.rf_harmonic[idx].astype(np.int32),
        "n": strips.lo_harmonic[idx].astype(np.int32),
        "label": [labels[k] for k in idx],
        "level": intrinsic[idx].astype(float),
        "margin": np.where(np.isfinite(strip_margin[idx]), strip_margin[idx], np.nan).astype(float),
        **style_columns(cats[idx]),
    }
    step = max(1, len(ev.channels_hz) // _MAX_PLAN_POINTS)
    sources["tuning_plan"] = {
        "x": ev.channels_hz[::step] / sx,
        "y": ev.lo_hz[::step] / sy,
    }
    # The plan line is recoloured where a channel's worst margin is not clear: one short
    # segment per such channel, from the midpoint with its left neighbour to the right one.
    sources["tuning_marks"] = _plan_cached(ev, ("tuning_marks", sx, sy), lambda: _tuning_marks(ev, sx, sy))
    # margin against channel: where in the band the plan is weak (infinite margins shown at the top)
    step_m = max(1, len(ev.channels_hz) // _MAX_PLAN_POINTS)
    worst = ev.worst_margin_db[::step_m]
    finite = np.isfinite(worst)
    top = float(np.max(worst[finite])) if finite.any() else CLOSE_DB
    sources["margin_channels"] = {
        "x": ev.channels_hz[::step_m] / sx,
        "y": np.where(finite, worst, max(top, CLOSE_DB) + 5.0).astype(float),
        "margin": np.where(finite, worst, np.nan).astype(float),
        "label": ev.worst_row["label"].to_numpy()[::step_m].tolist(),
        **style_columns(category_of(worst).astype(object)),
    }
    m_now = float(ev.worst_margin_db[index])
    sources["margin_now"] = {"x": [ch / sx], "y": [m_now if math.isfinite(m_now) else max(top, CLOSE_DB) + 5.0]}
    margin_window = _margin_window(sources["margin_channels"]["y"], sources["margin_now"]["y"][0])
    sources["tuning_now"] = {
        "x": [ch / sx],
        "y": [lo_now / sy],
        "channel": [format_frequency(ch)],
        "lo": [format_frequency(lo_now)],
    }
    # points along the current LO: responses (down) or output products (up)
    rows = frame[(frame["order"] <= max_shown) & (frame["label"] != "wanted") & (frame["level_dbc"] > FLOOR_DBC + 1)]
    rows = rows[rows["kind"] == ("response" if down else "product")]
    f_pts = rows["f_center_hz"].to_numpy()
    inside = (f_pts >= tuning_win[0]) & (f_pts <= tuning_win[1])
    rows = rows[inside]
    cats_pts = category_of(rows["margin_db"].to_numpy()).astype(object)
    keep = (cats_pts != "clear") | opts.show_clear
    rows, cats_pts = rows[keep], cats_pts[keep]
    order = np.argsort(draw_rank(cats_pts), kind="stable")
    rows, cats_pts = rows.iloc[order], cats_pts[order]
    sources["tuning_points"] = {
        "x": rows["f_center_hz"].to_numpy() / sx,
        "y": np.full(len(rows), lo_now / sy),
        **_point_columns(rows, down),
        **style_columns(cats_pts),
    }
    sources["rf_band"] = {"x0": [band[0] / sx], "x1": [band[1] / sx]}
    rf_pass = band if ctx_rf is None else ctx_rf.passband_hz(ch if ctx_rf.tracks_channel else None)
    if ctx_rf is not None and ctx_rf.tracks_channel:
        # a filter that tracks the channel is shaded where it is: along the plan line, each
        # channel's own passband and skirt at that channel's LO (never a fixed band at one channel)
        sources["tuning_skirt"] = _EMPTY_SKIRT
        # the shading follows the plan, not the view: worked out once per evaluation and window
        sources["tuning_track"] = _track_cached(
            ev, tuning_win, req, sx, sy,
            lambda: _tracking_skirt(ctx_rf, ev.channels_hz, ev.lo_hz, tuning_win, req, sx, sy))
    else:
        sources["tuning_track"] = _EMPTY_TRACK
        if down and ctx_rf is None:
            sources["tuning_skirt"] = _EMPTY_SKIRT
        else:
            sources["tuning_skirt"] = _skirt(ctx_rf, tuning_win[0], tuning_win[1], ch, rf_pass, req, sx)

    # --------------------------------------------------------- output plane
    ox, oy = scales["output_x"], scales["output_y"]
    lines = output_plane_loci(max_shown, lo_now, out_win)  # Hz; each axis scaled below
    line_level = table.level_dbc_at(lines.rf_harmonic, lines.lo_harmonic, plan.signal.level_dbm)
    # a line takes the worst after-filter margin of what it carries at this channel: the wanted
    # signal's product on it and, for a receiver's difference lines, the responses where it
    # crosses the IF (the same verdict as its dots and the table)
    line_margin = _line_margins(frame, lines.rf_harmonic, lines.lo_harmonic, lines.sign, down)
    line_cat = category_of(line_margin).astype(object)
    wanted_sign = int(ev.wanted_sign[index])  # the engine's choice, never re-derived here
    is_wanted = (lines.rf_harmonic == 1) & (lines.lo_harmonic == 1) & (lines.sign == wanted_sign)
    # The difference is a V of two arms; only the arm through the wanted input is the wanted conversion,
    # and the arm through a named response (image, half-IF) carries the table's name for it.
    lo_x, hi_x = np.minimum(lines.x0, lines.x1), np.maximum(lines.x0, lines.x1)

    def through(x_hz: float) -> np.ndarray:
        return (lo_x <= x_hz * (1 + 1e-9)) & (hi_x >= x_hz * (1 - 1e-9))

    on_arm = through(f_in_wanted)
    image_arm = is_wanted & ~on_arm
    is_wanted &= on_arm
    line_cat[is_wanted] = "wanted"
    arm_name = np.full(len(lines.x0), "", dtype=object)
    for label, rm, rn, f_in in (_named_responses(frame) if down else []):
        arm_name[(lines.rf_harmonic == rm) & (lines.lo_harmonic == rn) & (lines.sign < 0) & ~is_wanted
                 & through(f_in)] = label
    arm_name[image_arm & down] = LABELS[IMAGE]
    keep = (line_level > FLOOR_DBC + 1) & ((line_cat != "clear") | opts.show_clear)
    k = np.flatnonzero(keep)
    k = k[np.argsort(draw_rank(line_cat[k]), kind="stable")]  # the worst on top
    sources["out_lines"] = {
        "x0": lines.x0[k] / ox,
        "y0": lines.y0[k] / oy,
        "x1": lines.x1[k] / ox,
        "y1": lines.y1[k] / oy,
        "m": lines.rf_harmonic[k].astype(np.int32),
        "n": lines.lo_harmonic[k].astype(np.int32),
        "label": [
            f"({m},{n}) {'wanted' if w else f'{arm} arm' if arm else 'sum' if s > 0 else 'difference'}"
            for m, n, s, w, arm in zip(
                lines.rf_harmonic[k], lines.lo_harmonic[k], lines.sign[k], is_wanted[k], arm_name[k], strict=True
            )
        ],
        "level": line_level[k].astype(float),
        "margin": np.where(np.isfinite(line_margin[k]), line_margin[k], np.nan).astype(float),
        **style_columns(line_cat[k]),
    }
    # actual products of the current channel and responses, after the filters
    inside = (px >= out_win[0]) & (px <= out_win[1]) & (py >= out_win[2]) & (py <= out_win[3])
    # The limiting rows are never off the chart unseen: a row within CLOSE_DB of its requirement (or
    # past it) outside the window is marked at the window's edge, with its label and where it is.
    off = ~inside & near
    sources["out_offchart"] = _offchart(prod[off], px[off], py[off], out_win, ox, oy)
    prod, px, py = prod[inside], px[inside], py[inside]
    p_cat = np.where(prod["label"] == "wanted", "wanted", category_of(prod["margin_db"].to_numpy())).astype(object)
    keep = (p_cat != "clear") | opts.show_clear
    prod, px, py, p_cat = prod[keep], px[keep], py[keep], p_cat[keep]
    order = np.argsort(draw_rank(p_cat), kind="stable")
    prod, px, py, p_cat = prod.iloc[order], px[order], py[order], p_cat[order]
    sources["out_points"] = {
        "x": px / ox,
        "y": py / oy,
        **_point_columns(prod, down),
        **style_columns(p_cat),
        "size": np.array([DOT_SIZE[c] for c in p_cat], dtype=float),
    }
    if down:
        in_band, out_band = band, if_band
        in_filter, out_filter = ctx_rf, ctx_if
        in_pass, out_pass = rf_pass, (if_band if ctx_if is None else ctx_if.passband_hz())
    else:
        in_band, out_band = if_band, band
        in_filter, out_filter = ctx_if, ctx_rf
        in_pass, out_pass = (if_band if ctx_if is None else ctx_if.passband_hz()), rf_pass
    sources["out_input_band"] = {"x0": [in_band[0] / ox], "x1": [in_band[1] / ox]}
    sources["out_output_band"] = {"y0": [out_band[0] / oy], "y1": [out_band[1] / oy]}
    in_skirt = (
        _skirt(in_filter, out_win[0], out_win[1], ch, in_pass, req, ox)
        if in_filter is not None
        else _EMPTY_SKIRT
    )
    out_skirt = _skirt(out_filter, out_win[2], out_win[3], ch, out_pass, req, oy)
    sources["out_input_skirt"] = in_skirt
    sources["out_output_skirt"] = {
        "y0": out_skirt["x0"], "y1": out_skirt["x1"], "alpha": out_skirt["alpha"], "atten_db": out_skirt["atten_db"]
    }

    in_name, out_name = ("RF input", "IF output") if down else ("IF input", "RF output")
    meta = {
        "channel_index": index,
        "channel_hz": ch,
        "lo_hz": lo_now,
        "scales": scales,
        "units": units,
        "source_scales": {"rf_band": sx, "out_input_band": ox, "out_output_band": oy},
        "scale": sx,
        "unit": units["tuning_x"],
        "out_scale": oy,
        "out_unit": units["output_y"],
        "tuning_window": (tuning_win[0] / sx, tuning_win[1] / sx, tuning_win[2] / sy, tuning_win[3] / sy),
        "margin_y_window": margin_window,
        "output_window": (out_win[0] / ox, out_win[1] / ox, out_win[2] / oy, out_win[3] / oy),
        "tuning_x_label": f"RF {'input' if down else 'output'} ({units['tuning_x']})",
        "tuning_y_label": f"LO ({units['tuning_y']})",
        "output_x_label": f"{in_name} ({units['output_x']})" if not opts.normalised else f"{in_name} / LO",
        "output_y_label": f"{out_name} ({units['output_y']})" if not opts.normalised else f"{out_name} / LO",
        "output_title": (
            f"Output{' ÷ LO' if opts.normalised else ''} at LO {format_frequency(lo_now)} "
            f"(channel {format_frequency(ch)})"
        ),
        "tuning_title": "Tuning plane: RF against LO",
        "direction": plan.direction,
    }
    return ChartData(sources=sources, meta=meta)


def _margin_window(margins_db: np.ndarray, now_db: float) -> tuple[float, float]:
    """The margin plot's y range, dB: every plotted margin and both guide lines (0 dB and
    CLOSE_DB), padded.  Set from Python, not ranged by BokehJS: a range BokehJS fits to the data
    after it paints makes it paint the plot again (and relays the page out when the tick labels
    change width)."""
    values = np.concatenate([np.asarray(margins_db, dtype=float), [now_db, 0.0, CLOSE_DB]])
    lo, hi = float(values.min()), float(values.max())
    pad = max(0.06 * (hi - lo), 1.0)
    return (lo - pad, hi + pad)


def _point_in_convex(xs: np.ndarray, ys: np.ndarray, x: float, y: float) -> bool:
    cross = (np.roll(xs, -1) - xs) * (y - ys) - (np.roll(ys, -1) - ys) * (x - xs)
    return bool(np.all(cross >= -1e-9 * np.abs(cross).max()) or np.all(cross <= 1e-9 * np.abs(cross).max()))


def _point_columns(rows, down: bool = True) -> dict[str, list]:
    margin = rows["margin_db"].to_numpy(float)
    rejection = rows["rejection_db"].to_numpy(float)
    is_response = rows["kind"].to_numpy() == "response"
    port = "IF" if down else "RF"
    return {
        # hover texts: a dash where a row has no number (the wanted row's margin, a product's
        # input-referred rejection), and the level said where it is, by direction
        "margin_text": [f"{v:+.1f} dB" if np.isfinite(v) else "—" for v in margin],
        "rejection_text": [f"{r:.1f} dB" if resp and np.isfinite(r) else "—"
                           for r, resp in zip(rejection, is_response, strict=True)],
        "level_text": [f"{v:.1f} dBc at the {port} output" for v in rows["level_dbc"].to_numpy(float)],
        "m": rows["rf_harmonic"].to_numpy(np.int32),
        "n": rows["lo_harmonic"].to_numpy(np.int32),
        "label": rows["label"].tolist(),
        "kind": rows["kind"].tolist(),
        "freq": [format_frequency(f, 7) for f in rows["f_center_hz"]],
        "level": rows["level_dbc"].to_numpy(float),
        # responses are judged by their input-referred rejection, products by their output level
        "rejection": np.where(rows["kind"].to_numpy() == "response", rows["rejection_db"].to_numpy(float), np.nan),
        "requirement": rows["requirement"].tolist(),
        # what set the filter loss where the filter's response did not (a floor, a data-span policy)
        "loss_limit": [t or "the filters' responses" for t in rows["loss_limit"]],
        # the wanted row has no margin (inf): shown as NaN
        "margin": np.where(np.isfinite(rows["margin_db"].to_numpy(float)), rows["margin_db"].to_numpy(float), np.nan),
    }


# ------------------------------------------------------------------ Bokeh


@dataclass
class ChartHandle:
    """The built chart: its layout, figures and named sources.

    Attributes
    ----------
    layout : bokeh.models.LayoutDOM
        What to show.
    tuning, output : bokeh.plotting.figure
        The two planes (named ``"tuning_plane"`` and ``"output_plane"``).
    margin : bokeh.plotting.figure
        Worst margin against channel (``"margin_plot"``), sharing the tuning plane's RF axis.
    sources : dict of str to ColumnDataSource
        Every source by name; updates assign ``.data``.
    bands : dict of str to BoxAnnotation
        The draggable bands by their source's name (``rf_band``, ``out_output_band``,
        ``out_input_band``); see :mod:`mixchart.chart_bands`.
    windows : dict
        The windows last applied to the ranges.
    legend : bokeh.models.Div
        The legend (``"chart_legend"``); its text follows the plan's direction.
    margin_hover : bokeh.models.HoverTool
        The margin plot's hover (its channel reads in the RF axis's unit).
    """

    layout: Any
    tuning: Any
    output: Any
    sources: dict[str, Any]
    bands: dict[str, Any]
    windows: dict[str, tuple[float, ...]] = field(default_factory=dict)
    last: dict[str, dict[str, Any]] = field(default_factory=dict)
    margin: Any = None  # the margin-against-channel plot
    legend: Any = None
    margin_hover: Any = None


_HOVER_POINTS = [
    ("product", "(@m,@n) @label"),
    ("kind", "@kind"),
    ("frequency", "@freq"),
    ("level", "@level_text"),
    ("rejection (input-referred)", "@rejection_text"),
    ("judged against", "@requirement"),
    ("filter loss set by", "@loss_limit"),
    ("margin", "@margin_text"),
]

#: A hover's filter: a row's tooltip is shown only if none of the renderers drawn above it (``above``)
#: is under the pointer too, so one tooltip shows at a time, the topmost thing's.
_ONLY_IF_NOTHING_ABOVE = """
const vars = cb_data.vars;
const plot_view = vars.glyph_view.parent.parent;
const geometry = {type: "point", sx: vars.sx, sy: vars.sy};
for (const renderer of above) {
  const view = plot_view.views.find_one(renderer);
  if (view == null || !renderer.visible) continue;
  const hit = view.hit_test(geometry);
  if (hit != null && !hit.is_empty()) return false;
}
return true;
"""


def _hover(renderer: Any, tooltips: list, above: list) -> Any:
    """One renderer's hover: the topmost row under the pointer only (rows are in draw order), and
    nothing while a renderer in ``above`` (drawn over it) is under the pointer too."""
    from bokeh.models import CustomJS, HoverTool

    filters = {"$index": CustomJS(args={"above": above}, code=_ONLY_IF_NOTHING_ABOVE)} if above else {}
    return HoverTool(renderers=[renderer], tooltips=tooltips, sort_by=[("$index", "descending")], limit=1,
                     filters=filters, description=f"Hover: {renderer.name}")


def _margin_tooltips(unit: str) -> list:
    return [("channel", f"@x{{0.000[000]}} {unit}"), ("worst", "@label"), ("margin", "@margin{+0.0} dB")]


def build_chart(data: ChartData, *, width: int = 640, height: int = 480, prefix: str = "",
                editable: bool = True, fit_width: bool = False) -> ChartHandle:
    """Build the figures once, around named sources filled from ``data``.

    Parameters
    ----------
    data : ChartData
        From :func:`chart_data`.
    width, height : int
        Size of each plane, screen pixels.
    prefix : str
        Put before every figure's and source's Bokeh ``name`` (e.g. ``"reference_"`` for a
        second chart on the same page, so that each name finds one model).
    editable : bool
        Whether the bands can be dragged by their handles (:mod:`mixchart.chart_bands`); False
        for a static snapshot, where nothing would recompute.
    fit_width : bool
        Stretch the planes, the margin plot and the legend to the width the page gives the chart
        (each plane then at least ``width / 2`` wide); else each plane is ``width`` wide.

    Returns
    -------
    ChartHandle
    """
    from bokeh.layouts import column, row
    from bokeh.models import CDSView, ColumnDataSource, Div, GroupFilter, Range1d, Span
    from bokeh.plotting import figure

    src = {name: ColumnDataSource(data=dict(cols), name=prefix + name) for name, cols in data.sources.items()}
    meta = data.meta
    tw, ow = meta["tuning_window"], meta["output_window"]
    ink, green = PALETTE["plan"], PALETTE["filter"]
    shade = {"fill_color": green, "fill_alpha": "alpha", "line_alpha": 0}
    # fitted: every part stretches across what the page gives; the planes share it half and half
    size = {"sizing_mode": "stretch_width", "min_width": width // 2} if fit_width else {}

    def make(name: str, title: str, win: tuple[float, ...]) -> Any:
        fig = figure(
            name=name,
            title=title,
            width=width,
            height=height,
            **size,
            x_range=Range1d(win[0], win[1]),
            y_range=Range1d(win[2], win[3]),
            min_border_left=_LEFT_BORDER_PX,
            tools="pan,wheel_zoom,box_zoom,reset,save",
            active_drag="pan",  # a drag on the plot pans; the bands move only by their handles
            active_scroll=None,  # the wheel scrolls the page until the user picks wheel-zoom
            toolbar_location="right",  # leaves the title the full width
            background_fill_color=PALETTE["background"],
            border_fill_color=PALETTE["background"],
            output_backend="canvas",
        )
        fig.title.text_font_size = "12pt"  # a half-width plane still shows the whole title
        for axis in (fig.xaxis, fig.yaxis):
            axis.axis_label_text_font_size = "13pt"
            axis.major_label_text_font_size = "11pt"
            axis.axis_label_text_font_style = "normal"
        fig.grid.grid_line_color = PALETTE["grid"]
        return fig

    tuning = make(prefix + "tuning_plane", meta["tuning_title"], tw)
    tuning.xaxis.axis_label = meta["tuning_x_label"]
    tuning.yaxis.axis_label = meta["tuning_y_label"]
    # shading first, then the band, the strips, the plan, marks and points on top
    tuning.vstrip(x0="x0", x1="x1", source=src["tuning_skirt"], name="tuning_shading", **shade)
    tuning.patches(xs="xs", ys="ys", source=src["tuning_track"], name="tracking_shading", **shade)
    # one renderer per category, in draw order (the worse on top), each showing its rows of the one
    # source: a hatch given per row makes BokehJS draw a pattern tile for every strip at every
    # update (31 at order 15, some 10 ms a plan change); a hatch per renderer draws four
    strips = [
        tuning.patches(
            xs="xs", ys="ys", source=src["tuning_strips"], view=CDSView(filter=GroupFilter(
                column_name="category", group=cat)), fill_alpha=0, hatch_pattern=STRIP_HATCH[cat][0],
            hatch_color=CATEGORIES[cat][1], hatch_alpha=1.0, hatch_scale=HATCH_SCALE,
            hatch_weight=STRIP_HATCH[cat][1], line_color=CATEGORIES[cat][1], line_width=STRIP_LINE_WIDTH[cat],
            name=f"strips_{cat}",
        )
        for cat in DRAW_ORDER
    ]
    tuning.line(x="x", y="y", source=src["tuning_plan"], line_color=ink, line_width=2.5, name="plan_line")
    marks = tuning.segment(
        x0="x0", y0="y0", x1="x1", y1="y1", source=src["tuning_marks"], line_color="color", line_width=4,
        line_cap="butt", name="channel_marks",
    )
    pts_t = tuning.scatter(
        x="x", y="y", source=src["tuning_points"], size=9, fill_color="color", line_color=ink,
        line_width=0.5, marker="diamond", name="lo_points",
    )
    tuning.scatter(
        x="x", y="y", source=src["tuning_now"], size=16, marker="circle_cross", fill_alpha=0,
        line_color=ink, line_width=2.5, name="current_channel",
    )
    tuning.add_tools(
        _hover(pts_t, _HOVER_POINTS, []),
        _hover(marks, [("channel", "@channel"), ("worst", "@label"), ("margin", "@margin{+0.0} dB")], [pts_t]),
        *(_hover(r, [("product", "@label"), ("table level", "@level{0.0} dBc"),
                     ("worst margin after the filters", "@margin{+0.0} dB")], [*strips[k + 1:], pts_t, marks])
          for k, r in enumerate(strips)),
    )
    bands = {"rf_band": band_box(tuning, src["rf_band"], vertical=True, editable=editable,
                                 name=prefix + "rf_band_box", line_color=ink)}

    output = make(prefix + "output_plane", meta["output_title"], ow)
    output.xaxis.axis_label = meta["output_x_label"]
    output.yaxis.axis_label = meta["output_y_label"]
    output.vstrip(x0="x0", x1="x1", source=src["out_input_skirt"], name="input_skirt", **shade)
    output.hstrip(y0="y0", y1="y1", source=src["out_output_skirt"], name="output_skirt", **shade)
    bands["out_output_band"] = band_box(output, src["out_output_band"], vertical=False, editable=editable,
                                        name=prefix + "output_band_box", line_color=ink)
    bands["out_input_band"] = band_box(output, src["out_input_band"], vertical=True, editable=editable,
                                       name=prefix + "input_band_box", line_color=ink)
    segs = output.segment(
        x0="x0", y0="y0", x1="x1", y1="y1", source=src["out_lines"], line_color="color",
        line_width="width", name="product_lines",
    )
    pts = output.scatter(
        x="x", y="y", source=src["out_points"], size="size", fill_color="color", line_color=ink,
        line_width=0.6, name="product_points",
    )
    off = output.scatter(
        x="x", y="y", source=src["out_offchart"], marker="triangle", angle="angle", size=13,
        fill_color="color", line_color=ink, line_width=0.6, name="offchart_marks",
    )
    output.text(
        x="x", y="y", text="text", source=src["out_offchart"], text_font_size="10px", text_color=ink,
        x_offset="dx", y_offset="dy", text_align="align", text_baseline="baseline", name="offchart_text",
        background_fill_color=PALETTE["background"], background_fill_alpha=1.0, padding=1,
    )  # on white: legible over the bands and lines
    output.add_tools(
        _hover(pts, _HOVER_POINTS, []),
        _hover(off, [("off the chart", "@text")], [pts]),
        _hover(segs, [("product", "@label"), ("table level", "@level{0.0} dBc"),
                      ("worst margin here, after the filters", "@margin{+0.0} dB")], [pts, off]),
    )

    # worst margin against channel, on the tuning plane's RF axis (zooming one zooms both); a click picks
    margin_fig = figure(
        name=prefix + "margin_plot", title="Worst margin against channel (click to pick a channel)", width=2 * width,
        height=190, x_range=tuning.x_range, y_range=Range1d(*meta["margin_y_window"]),
        min_border_left=_LEFT_BORDER_PX, tools="pan,box_zoom,reset,save", toolbar_location="right",
        background_fill_color=PALETTE["background"], border_fill_color=PALETTE["background"],
        output_backend="canvas",
        active_drag=None,  # a click is a tap that picks a channel, not the start of a pan
        **({"sizing_mode": "stretch_width", "min_width": width} if fit_width else {}),
    )
    margin_fig.xaxis.axis_label = meta["tuning_x_label"]
    margin_fig.yaxis.axis_label = "worst margin (dB)"
    margin_fig.grid.grid_line_color = PALETTE["grid"]
    margin_fig.add_layout(Span(location=0.0, dimension="width", line_color=CATEGORIES["violates"][1],
                               line_width=2, line_dash="dashed"))
    margin_fig.add_layout(Span(location=CLOSE_DB, dimension="width", line_color=CATEGORIES["close"][1],
                               line_width=1, line_dash="dotted"))
    margin_fig.line(x="x", y="y", source=src["margin_channels"], line_color=ink, line_width=1)
    m_pts = margin_fig.scatter(x="x", y="y", source=src["margin_channels"], size=5, fill_color="color",
                               line_color="color", name="margin_points")
    margin_fig.scatter(x="x", y="y", source=src["margin_now"], size=13, marker="circle_cross", fill_alpha=0,
                       line_color=ink, line_width=2, name="margin_now_mark")
    margin_hover = _hover(m_pts, _margin_tooltips(meta["units"]["tuning_x"]), [])
    margin_fig.add_tools(margin_hover)
    legend = Div(text=legend_html(meta["direction"]), name=prefix + "chart_legend", width=2 * width,
                 styles={"font-size": "13px"},  # as wide as the planes: its entries wrap there
                 **({"sizing_mode": "stretch_width"} if fit_width else {}))
    stretch = {"sizing_mode": "stretch_width"} if fit_width else {}
    # the planes first, so they sit at the top of the screen; the legend under them, then the margin plot
    layout = column(row(tuning, output, **stretch), legend, margin_fig, name="mixchart_chart", **stretch)
    handle = ChartHandle(
        layout=layout, tuning=tuning, output=output, sources=src, bands=bands,
        margin=margin_fig, legend=legend, margin_hover=margin_hover,
    )
    handle.windows = {"tuning": tuple(tw), "output": tuple(ow), "margin_y": tuple(meta["margin_y_window"])}
    handle.last = dict(data.sources)
    return handle


def update_chart(handle: ChartHandle, data: ChartData, *, reset_ranges: bool = False) -> None:
    """Push new data into the built chart.

    Only ``source.data`` is assigned; titles, axis labels, the legend and the margin plot's
    hover are assigned when their text changes, and ranges when the plotted window changes
    (so a user's zoom survives a channel change) or when ``reset_ranges``.

    Parameters
    ----------
    handle : ChartHandle
        From :func:`build_chart`.
    data : ChartData
        From :func:`chart_data`.
    reset_ranges : bool
        Re-apply the windows even if unchanged.
    """
    for name, cols in data.sources.items():
        if _same(handle.last.get(name), cols):
            continue  # no event, no message
        handle.sources[name].data = dict(cols)
        handle.last[name] = cols
    for name, box in handle.bands.items():  # after a drag the box may sit off the snapped value
        set_band(box, data.sources[name], vertical=name != "out_output_band")
    meta = data.meta
    _set(handle.tuning.title, "text", meta["tuning_title"])
    _set(handle.output.title, "text", meta["output_title"])
    _set(handle.tuning.xaxis[0], "axis_label", meta["tuning_x_label"])
    _set(handle.tuning.yaxis[0], "axis_label", meta["tuning_y_label"])
    _set(handle.output.xaxis[0], "axis_label", meta["output_x_label"])
    _set(handle.output.yaxis[0], "axis_label", meta["output_y_label"])
    if handle.margin is not None:
        _set(handle.margin.xaxis[0], "axis_label", meta["tuning_x_label"])
    if handle.legend is not None:
        _set(handle.legend, "text", legend_html(meta["direction"]))
    if handle.margin_hover is not None:
        _set(handle.margin_hover, "tooltips", _margin_tooltips(meta["units"]["tuning_x"]))
    if handle.margin is not None:
        win = tuple(meta["margin_y_window"])
        if reset_ranges or win != handle.windows.get("margin_y"):
            handle.margin.y_range.start, handle.margin.y_range.end = win
            handle.windows["margin_y"] = win
    for key, fig in (("tuning", handle.tuning), ("output", handle.output)):
        win = tuple(meta[f"{key}_window"])
        if reset_ranges or not _close(win, handle.windows.get(key)):
            fig.x_range.start, fig.x_range.end = win[0], win[1]
            fig.y_range.start, fig.y_range.end = win[2], win[3]
            handle.windows[key] = win


def _same(old: dict[str, Any] | None, new: dict[str, Any]) -> bool:
    """True when two column dicts hold equal data (so re-sending can be skipped)."""
    if old is None or old.keys() != new.keys():
        return False
    for key, a in old.items():
        b = new[key]
        if isinstance(a, np.ndarray) and isinstance(b, np.ndarray):
            if a.shape != b.shape or not np.array_equal(a, b, equal_nan=a.dtype.kind == "f"):
                return False
        elif isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
            if a and isinstance(a[0], np.ndarray):
                if not all(np.array_equal(x, y) for x, y in zip(a, b, strict=True)):
                    return False
            elif a != b:
                return False
        else:
            return False
    return True


def _set(model: Any, attr: str, value: Any) -> None:
    if getattr(model, attr) != value:
        setattr(model, attr, value)


def _close(a: tuple[float, ...] | None, b: tuple[float, ...] | None) -> bool:
    if a is None or b is None:
        return False
    span = max(abs(a[1] - a[0]), abs(a[3] - a[2]), 1e-30)
    return all(abs(x - y) <= 1e-6 * span for x, y in zip(a, b, strict=True))
