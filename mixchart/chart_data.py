"""What the chart draws, as plain column dicts: :func:`chart_data` (pure; no Bokeh objects).

:func:`chart_data` turns an :class:`~mixchart.analysis.Evaluation` and the
:class:`ViewOptions` into a :class:`ChartData`: the columns of every named source of
:func:`mixchart.chart.build_chart`, in display units, and the axis labels, windows and
scales.  The helpers of its layers are in :mod:`mixchart.chart_layers`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .analysis import Evaluation
from .chart_axes import output_axis_window, plane_windows
from .chart_layers import (
    _EMPTY_SKIRT,
    _EMPTY_TRACK,
    _MAX_PLAN_POINTS,
    _NAMED_RESPONSES,
    _line_margins,
    _margin_window,
    _named_responses,
    _offchart,
    _plan_cached,
    _point_columns,
    _point_in_convex,
    _scales,
    _skirt,
    _track_cached,
    _tracking_skirt,
    _tuning_marks,
    _worst_label_margin,
    _worst_product_margins,
)
from .chart_style import CLOSE_DB, DOT_SIZE, category_of, draw_rank, style_columns
from .levels import FLOOR_DBC
from .physics.loci import output_plane_loci, tuning_plane_strips
from .physics.products import IMAGE, LABELS
from .units import format_frequency

__all__ = ["ViewOptions", "ChartData", "chart_data"]


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
