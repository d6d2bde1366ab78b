"""Brute-force reference for the product engine: plain Python, plain floats, nested loops.

Nothing here imports mixchart's engine: the relations are written out again from
the heterodyne physics, so the vectorised engine (:mod:`mixchart.products`,
:func:`mixchart.analysis.evaluate`) can be checked against an independent
implementation.

Relations (standard heterodyne relations, derived by hand):

* An input at ``f_in`` and an LO at ``f_lo`` give outputs at ``|m·f_in ± n·f_lo|``
  for harmonics ``m, n >= 0``, order ``m + n >= 1``.  A signal ``B`` wide gives an
  (m, n) product ``m·B`` wide; a band that would reach below 0 Hz folds back, so it
  is reported from 0 Hz up to ``centre + m·B/2``.
* An input at ``f`` reaches an IF ``f_if`` through (m, n) in three ways:
  ``m·f - n·f_lo = f_if`` (input above the LO harmonic), ``n·f_lo - m·f = f_if``
  and ``m·f + n·f_lo = f_if``.  The first is the "+1" branch; the other two are
  both ``|n·f_lo - f_if| / m`` and form the "-1" branch.  With ``n = 0`` all three
  are the same single response ``f_if / m``.
* Two closed bands overlap when neither lies wholly beyond the other (touching
  edges overlap).

Used by tests/test_products.py, tests/test_analysis.py and benchmarks/bench_engine.py.
"""

from __future__ import annotations


def product_list(f_in_hz: float, f_lo_hz: float, bw_in_hz: float, max_order: int) -> list[tuple]:
    """Every output product of one channel: ``(m, n, sign, centre, low, high)`` in Hz."""
    out = []
    for m in range(max_order + 1):
        for n in range(max_order + 1 - m):
            if m == 0 and n == 0:
                continue
            signs = (-1, 1) if (m > 0 and n > 0) else (1,)
            for sign in signs:
                if sign > 0:
                    centre = m * f_in_hz + n * f_lo_hz
                else:
                    centre = abs(m * f_in_hz - n * f_lo_hz)
                half = m * bw_in_hz / 2.0
                low = centre - half
                if low < 0.0:  # the band folds through 0 Hz
                    low = 0.0
                out.append((m, n, sign, centre, low, centre + half))
    return out


def response_list(f_lo_hz: float, if_low_hz: float, if_high_hz: float, max_order: int) -> list[tuple]:
    """Every input band reaching the IF passband: ``(m, n, branch, centre, low, high)`` in Hz."""
    if_centre = (if_low_hz + if_high_hz) / 2.0
    out = []
    for m in range(1, max_order + 1):
        for n in range(0, max_order + 1 - m):
            h = n * f_lo_hz
            # +1 branch: m·f - h = f_if
            out.append((m, n, 1, (h + if_centre) / m, (h + if_low_hz) / m, (h + if_high_hz) / m))
            if n == 0:
                continue  # the other two relations give the same single response f_if/m
            # -1 branch: h - m·f = f_if  (needs h > f_if) and m·f + h = f_if (needs h < f_if)
            pieces = []
            if h > if_low_hz:  # h - m·f = f_if for f_if in [if_low, min(if_high, h)]
                pieces.append(((h - min(if_high_hz, h)) / m, (h - if_low_hz) / m))
            if h < if_high_hz:  # m·f + h = f_if for f_if in [max(if_low, h), if_high]
                pieces.append(((max(if_low_hz, h) - h) / m, (if_high_hz - h) / m))
            low = min(p[0] for p in pieces)
            high = max(p[1] for p in pieces)
            out.append((m, n, -1, abs(h - if_centre) / m, low, high))
    return out


def bands_overlap(low_a: float, high_a: float, low_b: float, high_b: float) -> bool:
    """Closed bands ``[low_a, high_a]`` and ``[low_b, high_b]`` share at least a point."""
    return not (high_a < low_b or low_a > high_b)


def plan_channels(start_hz: float, stop_hz: float, step_hz: float | None) -> list[float]:
    """Channel centres ``start, start + step, ...`` up to ``stop`` (a hair of tolerance for rounding)."""
    if step_hz is None or stop_hz == start_hz:
        return [start_hz]
    out = []
    k = 0
    while True:
        f = start_hz + k * step_hz
        if f > stop_hz * (1 + 1e-12):
            break
        out.append(min(f, stop_hz))
        k += 1
    return out


def plan_lo(channel_hz: float, mode: str, side: str, if_hz: float, fixed_hz: float | None, step_hz: float | None) -> float:
    """LO for one channel: fixed, or the channel plus (high side) or minus (low side) the IF, on its grid."""
    if mode == "fixed":
        lo = fixed_hz
    elif side == "high":
        lo = channel_hz + if_hz
    else:
        lo = channel_hz - if_hz
    if step_hz is not None:
        lo = round(lo / step_hz) * step_hz  # nearest grid point (ties to even, like numpy)
    return lo


def sweep(plan, limit: int | None = None) -> list[dict]:
    """Products, responses and the in-band product set of every channel of a plan.

    The plan is read only through its plain fields (``plan.rf.start_hz`` and so
    on); channels, LOs and the output passband are worked out here.

    Parameters
    ----------
    plan : mixchart.plan.Plan
        The plan.
    limit : int, optional
        Only the first ``limit`` channels (for timing a subset).

    Returns
    -------
    list of dict
        One per channel: ``channel``, ``lo``, ``f_in``, ``products`` (list of
        tuples as :func:`product_list`), ``responses`` (as :func:`response_list`,
        receivers only) and ``in_band`` (set of ``(m, n, sign)`` overlapping the
        output passband).
    """
    if_low = plan.if_.center_hz - plan.if_.bandwidth_hz / 2.0
    if_high = plan.if_.center_hz + plan.if_.bandwidth_hz / 2.0
    bw = plan.signal.bandwidth_hz
    if plan.direction == "down":
        out_low, out_high = if_low, if_high
    else:
        out_low, out_high = plan.rf.start_hz - bw / 2.0, plan.rf.stop_hz + bw / 2.0
    channels = plan_channels(plan.rf.start_hz, plan.rf.stop_hz, plan.rf.step_hz)
    rows = []
    for ch in channels[:limit]:
        lo = plan_lo(ch, plan.lo.mode, plan.lo.side, plan.if_.center_hz, plan.lo.fixed_hz, plan.lo.step_hz)
        f_in = ch if plan.direction == "down" else abs(ch - lo)
        products = product_list(f_in, lo, bw, plan.max_order)
        in_band = {(m, n, s) for m, n, s, _c, low, high in products if bands_overlap(low, high, out_low, out_high)}
        responses = response_list(lo, if_low, if_high, plan.max_order) if plan.direction == "down" else []
        rows.append({"channel": ch, "lo": lo, "f_in": f_in, "products": products, "responses": responses, "in_band": in_band})
    return rows
