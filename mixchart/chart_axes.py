"""The chart's windows and the unit of each axis.

Every axis picks its own engineering unit from its own window (a 140 MHz IF input axis reads
in MHz beside an RF output axis in GHz), so that its tick labels read with one to three
integer digits; the axis label names it.  The output plane's output axis centres on the
output passband, :data:`OUT_MARGIN_WIDTHS` passband widths each side, and stretches to hold the
rows near their requirement (see :func:`output_axis_window`).

This module does not import Bokeh.
"""

from __future__ import annotations

import numpy as np

from .units import engineering_scale

__all__ = ["AXES", "OUT_MARGIN_WIDTHS", "OUT_MIN_BAND_FRACTION", "axis_unit", "plane_windows", "output_axis_window"]

#: The chart's frequency axes, by the name the chart's meta uses.
AXES = ("tuning_x", "tuning_y", "output_x", "output_y")
#: The output axis shows the output passband and this many passband widths each side of it.
OUT_MARGIN_WIDTHS = 3.0
#: The output axis stretches to hold a row near its requirement only while the passband still
#: fills at least this fraction of the axis; a row farther out is marked at the edge instead.
OUT_MIN_BAND_FRACTION = 0.1
#: Room left beyond a row the output axis stretched to hold, as a fraction of the axis.
_OUT_PAD = 0.04


def axis_unit(low_hz: float, high_hz: float) -> tuple[float, str]:
    """The engineering unit of an axis from ``low_hz`` to ``high_hz``.

    The unit shows the middle of the axis with one to three integer digits
    (:func:`mixchart.units.engineering_scale`), so the tick labels read between about 1 and
    1000 (an axis from 826 MHz to 1.004 GHz reads 850 ... 1000 MHz, not 0.85 ... 1 GHz).

    Parameters
    ----------
    low_hz, high_hz : float
        The axis window, Hz.

    Returns
    -------
    (float, str)
        Hz per display unit and the unit's name, e.g. ``(1e6, "MHz")``.
    """
    return engineering_scale(0.5 * (abs(float(low_hz)) + abs(float(high_hz))))


def _pad(lo: float, hi: float, frac: float, floor: float) -> tuple[float, float]:
    span = max(hi - lo, floor)
    return lo - frac * span, hi + frac * span


def plane_windows(ev, lo_now_hz: float) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """The tuning plane's window and the output plane's input-axis span, Hz.

    Parameters
    ----------
    ev : Evaluation
        The evaluated plan.
    lo_now_hz : float
        The LO of the channel the output plane shows, Hz.

    Returns
    -------
    tuning : (x0, x1, y0, y1)
        RF band and its image side across, the LO range up, Hz.
    output_x : (x0, x1)
        The output plane's input axis, Hz (its output axis is :func:`output_axis_window`'s).
    """
    plan = ev.plan
    if_c, if_bw = plan.if_.center_hz, plan.if_.bandwidth_hz
    rf_lo = plan.rf.start_hz - plan.signal.bandwidth_hz / 2
    rf_hi = plan.rf.stop_hz + plan.signal.bandwidth_hz / 2
    lo_min, lo_max = float(ev.lo_hz.min()), float(ev.lo_hz.max())
    # Tuning plane: the RF band and its image side, the LO range.
    x0 = max(0.0, min(rf_lo, lo_min - if_c - if_bw))
    x1 = max(rf_hi, lo_max + if_c + if_bw)
    x0, x1 = _pad(x0, x1, 0.05, 4 * if_bw)
    y0, y1 = _pad(lo_min, lo_max, 0.15, max(0.2 * (x1 - x0), 4 * if_bw))
    tuning = (max(x0, 0.0), x1, max(y0, 0.0), y1)
    if plan.direction == "down":  # the RF input, as on the tuning plane
        return tuning, (tuning[0], tuning[1])
    # a transmitter's IF input from 0 (where the IF harmonics' lines start)
    return tuning, (0.0, max(2.5 * (if_c + if_bw / 2), if_c + 8 * if_bw))


def output_axis_window(band_hz: tuple[float, float], near_hz) -> tuple[float, float]:
    """The output plane's output axis, Hz: the output passband and what lands near it.

    The axis spans the passband and :data:`OUT_MARGIN_WIDTHS` passband widths each side (never
    below 0 Hz), then stretches, nearest first, to hold each output frequency in ``near_hz`` (the
    rows within :data:`~mixchart.chart_style.CLOSE_DB` of their requirement) as long as the
    passband still fills :data:`OUT_MIN_BAND_FRACTION` of the axis.  A row left outside is marked
    at the axis's edge by the chart (its ``out_offchart`` source), so the limiting rows are never
    off the chart unseen.

    Parameters
    ----------
    band_hz : (float, float)
        The output passband drawn on the plane (a receiver's IF band, a transmitter's RF band), Hz.
    near_hz : array_like of float
        Output frequencies of the rows near or past their requirement, Hz.

    Returns
    -------
    (float, float)
        The axis window, Hz.
    """
    lo, hi = float(band_hz[0]), float(band_hz[1])
    width = max(hi - lo, 1e-9 * max(abs(hi), 1.0))
    base = (max(0.0, lo - OUT_MARGIN_WIDTHS * width), hi + OUT_MARGIN_WIDTHS * width)
    a, b = base
    cap = width / OUT_MIN_BAND_FRACTION
    near = np.asarray(near_hz, dtype=float).ravel()
    near = near[np.isfinite(near)]
    centre = 0.5 * (lo + hi)
    for f in near[np.argsort(np.abs(near - centre), kind="stable")]:
        na, nb = min(a, float(f)), max(b, float(f))
        if nb - na <= max(cap, base[1] - base[0]):
            a, b = na, nb
    span = b - a
    if a < base[0]:
        a = max(0.0, a - _OUT_PAD * span)
    if b > base[1]:
        b = b + _OUT_PAD * span
    return a, b
