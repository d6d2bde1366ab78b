"""Brute-force reference for the engine: plain Python, plain floats, nested loops.

Nothing here imports mixchart's engine: the relations are written out again from
the heterodyne physics and the documented level model, so the vectorised engine
(:mod:`mixchart.physics.products`, :func:`mixchart.analysis.evaluate`) can be checked
against an independent implementation.  The only mixchart calls are
:func:`mixchart.levels.build_table` (the mixer's level table is *input data*,
read once into plain lists) and, for filter kinds whose formulas are not
re-derived here (elliptic, Touchstone), :meth:`mixchart.filters.Filter.atten_db`
on one scalar frequency at a time.

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

Levels and margins (:func:`sweep_levels`) follow the level model as documented in
the :mod:`mixchart.analysis` module docstring and DEVELOPERS.md ("Level model in
one page"); each rule is quoted where it is used.

Used by tests/test_products.py, tests/test_analysis.py and benchmarks/bench_engine.py.
"""

from __future__ import annotations

import math

from reference_filters import (  # noqa: F401  (re-exported for the tests)
    FilterLoss,
    butterworth_loss_db,
    chebyshev1_loss_db,
    tuned_circuit_loss_db,
)
from reference_levels import DRIVE_CLIP_DB, FLOOR_DBC, TableLevels, shown  # noqa: F401


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
        for n in range(max_order + 1 - m):
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


def plan_lo(
    channel_hz: float, mode: str, side: str, if_hz: float, fixed_hz: float | None, step_hz: float | None
) -> float:
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


def wanted_conversion(direction: str, channel_hz: float, lo_hz: float, if_low_hz: float, if_high_hz: float) -> tuple:
    """The wanted (1, 1) conversion of one channel: ``(f_in, f_out, sign)`` in Hz.

    Derived by hand.  A receiver (``"down"``) takes the channel in and wants the (1, 1)
    output that lands in the IF passband: the sum ``f + f_LO`` if it alone does, else the
    difference ``|f - f_LO|`` (the usual superheterodyne conversion, also taken when a
    grid or fixed LO leaves neither centre in the passband).  A transmitter (``"up"``)
    wants the channel out through one of f = f_IF + f_LO (sum), f = f_IF - f_LO or
    f = f_LO - f_IF (differences): the IF input solving one of them that lies nearest the
    IF passband centre is the wanted one.
    """
    if direction == "down":
        summ, diff = channel_hz + lo_hz, abs(channel_hz - lo_hz)
        sum_in = if_low_hz <= summ <= if_high_hz
        diff_in = if_low_hz <= diff <= if_high_hz
        if sum_in and not diff_in:
            return channel_hz, summ, 1
        return channel_hz, diff, -1
    centre = 0.5 * (if_low_hz + if_high_hz)
    options = [(channel_hz - lo_hz, 1), (channel_hz + lo_hz, -1), (lo_hz - channel_hz, -1)]
    f_if, sign = min((o for o in options if o[0] > 0), key=lambda o: abs(o[0] - centre))
    return f_if, channel_hz, sign


def sweep(plan, limit: int | None = None) -> list[dict]:
    """Products, responses, the in-band product set and the worst in-band spur of every channel.

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
        One per channel: ``channel``, ``lo``, ``f_in``, ``wanted_sign``,
        ``products`` (list of tuples as :func:`product_list`), ``responses`` (as
        :func:`response_list`, receivers only), ``in_band`` (set of ``(m, n,
        sign)`` overlapping the output passband) and ``worst_in_band``: the
        in-band product other than the wanted with the lowest ``(order, m,
        sign)`` (lower orders are the stronger spurs; the frequency-only notion
        of "worst", so that a benchmark of the products layer also does a
        per-channel worst-case reduction), or None.
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
        f_in, f_out, wanted_sign = wanted_conversion(plan.direction, ch, lo, if_low, if_high)
        if plan.direction == "up" and plan.lo.grid_holds == "input":
            # plan.LoSetting.grid_holds 'input': the transmitter's IF is the one the ideal (off-grid)
            # LO needs; the LO on its grid then moves the output off the channel
            ideal_lo = plan_lo(ch, plan.lo.mode, plan.lo.side, plan.if_.center_hz, plan.lo.fixed_hz, None)
            f_in, _, wanted_sign = wanted_conversion("up", ch, ideal_lo, if_low, if_high)
            f_out = f_in + lo if wanted_sign > 0 else abs(f_in - lo)
        products = product_list(f_in, lo, bw, plan.max_order)
        in_band = set()
        worst = None
        for m, n, s, _c, low, high in products:
            if bands_overlap(low, high, out_low, out_high):
                in_band.add((m, n, s))
                if not (m == 1 and n == 1 and s == wanted_sign):
                    key = (m + n, m, s, n)
                    if worst is None or key < worst:
                        worst = key
        responses = response_list(lo, if_low, if_high, plan.max_order) if plan.direction == "down" else []
        rows.append({"channel": ch, "lo": lo, "f_in": f_in, "f_out": f_out, "wanted_sign": wanted_sign,
                     "products": products,
                     "responses": responses, "in_band": in_band,
                     "worst_in_band": None if worst is None else (worst[1], worst[3], worst[2])})
    return rows


# ------------------------------------------------------------------ levels and margins



def product_label(direction: str, m: int, n: int, sign: int, wanted_sign: int) -> str:
    """Label of an output product (mixchart.physics.products.LABELS and analysis.FRAME_COLUMNS["label"]).

    (0,1) LO leakage; (0,n>1) LO harmonic; (1,0) RF feedthrough of a receiver, IF
    feedthrough of a transmitter (its input is the IF); the (1,1) of the wanted sign is
    the wanted output; the other (1,1) is a transmitter's unwanted sideband, and a
    receiver's "sum product" when it is the sum (else, when the wanted is the sum, a spur).
    """
    if m == 0:
        return "LO leakage" if n == 1 else "LO harmonic"
    if (m, n) == (1, 0):
        return "RF feedthrough" if direction == "down" else "IF feedthrough"
    if (m, n) == (1, 1):
        if sign == wanted_sign:
            return "wanted"
        if direction == "up":
            return "unwanted sideband"
        return "sum product" if sign > 0 else "spur"
    return "spur"


def response_label(m: int, n: int, branch: int, wanted_branch: int) -> str:
    """Label of a receiver response (mixchart.physics.products.response_labels docstring, derived by hand).

    (1,0) is IF feedthrough; the (1,1) branch holding the channel is the wanted input, the
    other (1,1) branch the image; the (2,2) response on the wanted branch is the half-IF
    response (high-side LO: ``(2·f_LO - f_IF)/2 = f_LO - f_IF/2``, halfway between the
    wanted ``f_LO - f_IF`` and the LO).
    """
    if (m, n) == (1, 0):
        return "IF feedthrough"
    if (m, n) == (1, 1):
        return "wanted" if branch == wanted_branch else "image"
    if (m, n) == (2, 2) and branch == wanted_branch:
        return "half-IF"
    return "spur"


def sweep_levels(plan, limit: int | None = None, base_dir=None) -> dict:
    """Levels and margins of every product and response of every channel, in plain Python.

    Every rule below is the documented level model, restated from the
    :mod:`mixchart.analysis` module docstring ("analysis") and DEVELOPERS.md "Level
    model in one page" ("dev"), not copied from the engine's code:

    * Table level at a drive (levels.LevelTable.level_dbc_at docstring; dev):
      ``T(m, n) + (m - 1)·(P - P_ref)``, the offset clipped to +/-1000 dB, and vanished
      entries (at the floor) stay there.  The final level is floored once at -300 dBc
      for display; margins and rejections take the unfloored level (analysis FRAME_COLUMNS).
    * Products of the wanted signal (analysis; dev):
      ``level = T(m, n) + (m - 1)·(P_mix - P_ref) - [A_out(f) - A_out(f_wanted)]``
      with ``P_mix`` the signal level less the input filter's loss at the wanted
      input (receiver: the preselector at the channel; transmitter: the IF filter at
      the IF input), ``A_out`` the output filter (receiver: IF filter; transmitter:
      RF filter) taken as its least loss over the product band ("a band reaches the
      output through its least-loss point": mixchart.filters.Filter.least_atten_db,
      re-derived in tests/reference_filters.py FilterLoss.least), and ``f_wanted`` the
      wanted output centre.
    * No output filter: "an ideal brick wall over the output passband (the IF
      passband of a receiver; the RF tuning range, widened by half the signal
      bandwidth, of a transmitter): products outside it do not reach the output"
      (analysis): 0 dB in band, infinite loss (level -inf) outside.
    * Receiver responses (analysis; dev):
      ``level = T(m, n) + (m - 1)·(P_u - A_rf(f_in) - P_ref) - A_rf(f_in) + A_rf(f_wanted)
      + (P_u - P_w)``: the table is read at the unwanted input's drive at the mixer,
      ``P_u`` is ``signal.interferer_level_dbm`` (default: the wanted level ``P_w``),
      ``f_wanted`` the channel.  ``A_rf(f_in)`` is the preselector's least loss over the
      response band (an interferer anywhere in the band responds, so the least-loss point
      decides), the same rule as for products.  "A receiver without a
      described preselector rejects nothing by filtering": ``A_rf = 0``.
    * Product: ``margin = -level - min_rejection_db``.  Response: the trade's spurious-response
      rejection is the input ratio at which the response output equals the wanted output; the
      (m,n) output grows m dB per dB of interferer, so ``rejection = (P_u - P_w) - level/m``
      and ``margin = rejection - min_rejection_db`` (published definition of receiver
      spurious-response rejection, e.g. the equal-output method of receiver measurements; the
      m dB/dB slope from the small-signal power series).  The wanted product and the wanted
      response have no margin (``+inf``) and never count as a worst case.
    * Worst case of a channel: the smallest margin over its products and responses;
      ties go to the first in family order (products before responses, then order,
      ``m``, sign: mixchart.physics.products.product_family / response_family docstrings).
      Worst case of a product/response across the sweep: its smallest finite margin,
      the first channel on ties.

    Filters are evaluated by :class:`FilterLoss`; a filter with ``tracks_channel``
    on the RF side (preselector, transmitter output filter) is centred on the channel.
    The IF filter never tracks an RF channel.

    Parameters
    ----------
    plan : mixchart.plan.Plan
        The plan.
    limit : int, optional
        Only the first ``limit`` channels (for timing a subset).
    base_dir : path-like, optional
        Folder for the plan's relative file paths (CSV table, Touchstone).

    Returns
    -------
    dict
        ``channels``: one dict per channel with ``channel``, ``lo``, ``worst_margin_db``,
        ``worst`` (the worst row) and ``rows`` (every product and response as a tuple
        ``(kind, label, m, n, sign, f_center, f_low, f_high, level_dbc, margin_db)``);
        ``worst_by_product``: ``{(kind, m, n, sign): (margin_db, channel_index, label)}``
        for every product/response with a finite margin somewhere.
    """
    from mixchart.mixer_model import build_table  # input data only: the mixer's level table

    down = plan.direction == "down"
    # The table is built for the plan's direction (which port is the output: the LO isolation it
    # takes) and with the LO filter's least extra rejection of 2·f_LO over f_LO across the LOs in
    # use (mixchart.mixer_model.builtin_table rule 2; mixchart.context.lo_h2_rejection_db docstring).
    lo_h2_rejection = 0.0
    if plan.filters.lo is not None:
        lo_filter = FilterLoss(plan.filters.lo, base_dir)
        los = [row["lo"] for row in sweep(plan)]  # every LO in use, as the engine takes them
        lo_h2_rejection = min(lo_filter(2.0 * f, f) - lo_filter(f, f) for f in los)  # tracking: centred on f_LO
    table_at = TableLevels(build_table(plan.mixer, plan.max_order, base_dir=base_dir, direction=plan.direction,
                                       lo_h2_rejection_db=lo_h2_rejection))
    # mixchart.requirements docstring: response_rejection_db (default min_rejection_db) for responses,
    # output_spur_dbc (default -min_rejection_db) for products; a transmitter's mask segments judge the
    # parts of a product band inside them, the gaps take output_spur_dbc, and the margin is the least.
    rq = plan.requirement
    rejection = rq.min_rejection_db if rq.response_rejection_db is None else rq.response_rejection_db
    spur = -rq.min_rejection_db if rq.output_spur_dbc is None else rq.output_spur_dbc
    segments = sorted((s.f_low_hz, s.f_high_hz, s.limit, s.unit) for s in rq.emission_mask) if not down else []
    pieces, edge = [], 0.0
    for f0, f1, seg_limit, unit in segments:
        if f0 > edge:
            pieces.append((edge, f0, spur, "dBc"))
        pieces.append((f0, f1, seg_limit, unit))
        edge = f1
    pieces.append((edge, math.inf, spur, "dBc"))
    p_w = plan.signal.level_dbm
    p_u = plan.signal.interferer_level_dbm if plan.signal.interferer_level_dbm is not None else p_w
    b_u = plan.signal.interferer_bandwidth_hz or 0.0
    bw = plan.signal.bandwidth_hz
    rf_filter = None if plan.filters.rf is None else FilterLoss(plan.filters.rf, base_dir)
    if_filter = None if plan.filters.if_ is None else FilterLoss(plan.filters.if_, base_dir)
    input_filter, output_filter = (rf_filter, if_filter) if down else (if_filter, rf_filter)

    inf = math.inf
    channels = []
    worst_by_product: dict = {}
    for index, row in enumerate(sweep(plan, limit)):
        ch, lo, f_in, wanted_sign = row["channel"], row["lo"], row["f_in"], row["wanted_sign"]
        f_out = row["f_out"]
        # RF-side filters are centred on the channel when they track it; the IF filter never is
        rf_centre = ch
        if input_filter is None:
            p_mix = p_w
        else:
            p_mix = p_w - input_filter(f_in, rf_centre if down else None)
        a_out_wanted = 0.0 if output_filter is None else output_filter(f_out, None if down else rf_centre)
        wanted_out_dbm = p_mix - table_at.conversion_loss_db - a_out_wanted
        in_band = row["in_band"]
        rows = []
        worst_key = None
        worst = None

        def record(kind, label, m, n, sign, centre, low, high, level, margin=None, index=index, rows=rows):
            """Keep a row; track the channel's worst and each (kind, m, n, sign)'s worst over the sweep."""
            nonlocal worst_key, worst
            if label == "wanted" or margin == inf:
                margin = inf
            elif kind == "product":
                pass  # the caller's: limit - level over the limiting piece of the band
            else:  # input-referred rejection (P_u - P_w) - level/m, less the requirement
                margin = (p_u - p_w) - level / m - rejection
            rows.append((kind, label, m, n, sign, centre, low, high, shown(level), margin))
            if margin < inf:
                key = (margin, 0 if kind == "product" else 1, m + n, m, sign)
                if worst_key is None or key < worst_key:
                    worst_key, worst = key, rows[-1]
                best = worst_by_product.get((kind, m, n, sign))
                if best is None or margin < best[0]:
                    worst_by_product[(kind, m, n, sign)] = (margin, index, label)
        # ---- products of the wanted signal
        for m, n, sign, centre, low, high in row["products"]:
            label = product_label(plan.direction, m, n, sign, wanted_sign)
            best = None  # (margin, level) of the limiting part of the band
            for f0, f1, piece_limit, unit in pieces:
                part_low, part_high = max(low, f0), min(high, f1)
                if part_low > part_high:
                    continue
                if output_filter is None and not down:
                    a_rel = 0.0  # a transmitter emits every product: no output filter, no loss anywhere
                elif output_filter is None:
                    a_rel = 0.0 if (m, n, sign) in in_band else inf  # the IF passband as a brick wall
                else:  # the least loss over the part of the band
                    a_rel = output_filter.least(part_low, part_high, None if down else rf_centre) - a_out_wanted
                level = table_at(m, n, p_mix) - a_rel
                margin = piece_limit - level - (wanted_out_dbm if unit == "dBm" else 0.0)
                if best is None or margin < best[0]:
                    best = (margin, level)
            record("product", label, m, n, sign, centre, low, high, best[1], best[0])
        # ---- receiver responses
        if down:
            wanted_branch = 1 if (wanted_sign < 0 and ch > lo) else -1  # the (1,1) branch holding the channel
            a_w = 0.0 if rf_filter is None else rf_filter(ch, rf_centre)
            for m, n, branch, centre, low, high in row["responses"]:
                # an interferer B_u wide responds while any part of it lies in the CW band: the band
                # of its centres is B_u/2 wider each side (plan.Signal.interferer_bandwidth_hz)
                low, high = max(low - b_u / 2.0, 0.0), high + b_u / 2.0
                label = response_label(m, n, branch, wanted_branch)
                a_in = 0.0 if rf_filter is None else rf_filter.least(low, high, rf_centre)
                level = table_at(m, n, p_u - a_in) - a_in + a_w + (p_u - p_w)
                # co-channel (analysis FRAME_COLUMNS "margin_db"): an unwanted input centred inside the
                # wanted channel [ch - B/2, ch + B/2] is the wanted signal itself: no margin
                half = bw / 2.0
                if low + b_u / 2.0 <= ch + half and high - b_u / 2.0 >= ch - half:
                    record("response", label, m, n, branch, centre, low, high, level, inf)
                    continue
                record("response", label, m, n, branch, centre, low, high, level)
        channels.append({"channel": ch, "lo": lo, "worst_margin_db": inf if worst is None else worst[9],
                         "worst": worst, "rows": rows})
    return {"channels": channels, "worst_by_product": worst_by_product}
