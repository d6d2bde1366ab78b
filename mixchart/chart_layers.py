"""The helpers of the chart's layers: filter shading, the plan line's marks, off-chart markers, the
hover columns of points, the verdicts of strips and lines, axis scales, and the caches of what depends
on the plan alone.  Pure, no Bokeh: :func:`mixchart.chart_data.chart_data` calls them.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .chart_axes import axis_unit
from .chart_style import CLOSE_DB, TINT_MAX_ALPHA, category_of, style_columns
from .physics.products import HALF_IF, IMAGE, LABELS
from .units import format_frequency

_MAX_PLAN_POINTS = 2000
_EMPTY_SKIRT: dict[str, Any] = {"x0": np.zeros(0), "x1": np.zeros(0), "alpha": np.zeros(0), "atten_db": np.zeros(0)}
_EMPTY_TRACK: dict[str, Any] = {"xs": [], "ys": [], "alpha": np.zeros(0), "atten_db": np.zeros(0)}
#: The receiver responses whose strip (tuning plane) and arm (output plane) carry the table's name.
_NAMED_RESPONSES = (LABELS[IMAGE], LABELS[HALF_IF])


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
