"""One block of channels: every product and response, its level after the filters, its margin.

:func:`_evaluate_block` works out a (channels x products) block of a sweep as numpy
columns (:class:`_Block`); :mod:`mixchart.analysis.sweep` reduces the blocks and
:mod:`mixchart.analysis.frames` gathers rows of them into tables.

Level model
-----------
All levels are relative to the wanted output (dBc).  ``T(m, n)`` is the mixer
level table at its reference RF drive ``P_ref``; the RF drive moves an (m, n)
product ``(m - 1)`` dB per dB relative to the wanted output.

*Products of the wanted signal* (down-conversion: the receiver's own spurs; up-
conversion: the transmitter's output spurs)::

    level = T(m, n) + (m - 1)·(P_mix - P_ref) - [A_out(f_product) - A_out(f_wanted)]

where ``P_mix`` is the wanted drive at the mixer (signal level less the input
filter's loss) and ``A_out`` the output filter (IF filter of a receiver, RF
filter of a transmitter) taken as its least loss over the product band
(:meth:`mixchart.filters.Filter.least_atten_db`): a band reaches the output
through its least-loss point, so an elliptic zero or a measured notch inside the
band never hides it.
Filter losses are counted up to :data:`MAX_FILTER_LOSS_DB`.  A transmitter emits every
product: with no output filter described, its loss is 0 dB everywhere and the
summary warns.  A receiver with no IF filter described counts only what lands in
the IF passband (an ideal brick wall there), and the summary says so.

*Receiver spurious responses*: an unwanted input at ``f_in`` at level ``P_u``
(the plan's interferer level) reaches the IF through (m, n) at::

    level = T(m, n) + (m - 1)·(P_u - A_rf(f_in) - P_ref) - A_rf(f_in) + A_rf(f_wanted) + (P_u - P_w)
          = T(m, n) + (m - 1)·(P_u - P_ref) - m·A_rf(f_in) + A_rf(f_wanted) + (P_u - P_w)

i.e. preselector loss ``A`` at the unwanted input lowers the (m, n) output by
``m·A``.  ``A_rf(f_in)`` is the preselector's least loss over the responding
input band, by the same rule as for products.
A receiver without a described preselector rejects nothing by filtering.  The
response *rejection* is how much stronger than the wanted an unwanted input
must be to give the same output.

The response rejection is input-referred: the (m,n) response output grows m dB per dB of the
interferer, so the rejection is ``(P_u - P_w) - level/m`` (small-signal regime), and a
response's margin is ``rejection - min_rejection_db``.  A product's margin is
``-level - min_rejection_db``.  Positive passes.
"""

from __future__ import annotations

import numpy as np

from ..context import Context, band_atten, band_rel_atten, capped, mask_margins, point_atten
from ..levels import FLOOR_DBC
from ..physics.products import (
    WANTED,
    ResponseFamily,
    overlaps,
    product_bands,
    product_family,
    product_labels,
    response_bands,
    response_bands_at,
    response_family,
    response_labels,
)


def _gather(column, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Values of a (Cb, K) block column at the (row, column) pairs, as a fresh 1-D array.

    A broadcast view is read from the one row or column it repeats, and a C-contiguous
    array through one flat ``take``: both several times faster than ``column[rows, cols]``.
    Computed columns (:class:`_Derived`, :class:`_ByGroup`) gather their inputs the same way.
    """
    if not isinstance(column, np.ndarray):
        return column.gather(rows, cols)
    row_stride, col_stride = column.strides
    if row_stride == 0 and col_stride == 0:
        return np.full(rows.size, column[0, 0], dtype=column.dtype)
    if row_stride == 0:
        return column[0].take(cols)
    if col_stride == 0:
        return column[:, 0].take(rows)
    if column.flags.c_contiguous:
        return column.ravel().take(rows * column.shape[1] + cols)
    return np.asarray(column[rows, cols])


class _Derived:
    """A (Cb, K) float column computed only at the (row, column) pairs asked for."""

    dtype = np.dtype(float)

    def __init__(self, fn, *arrays: np.ndarray) -> None:
        self.fn = fn
        self.arrays = arrays

    def gather(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        return self.fn(*(_gather(array, rows, cols) for array in self.arrays))


class _Block:
    """Products (and, for a receiver, responses) of a block of channels.

    ``parts`` holds one dict of columns per family (products, then responses);
    each column is a (Cb, K_i) array, a read-only broadcast view or a column
    computed on demand, so nothing is copied to join the two families.
    ``margin_db`` is the joined (Cb, K) margin that the reductions need (the
    parts' margins are views of it); :meth:`take` gathers the rows asked for.
    Columns that depend only on the product/response (m, n, sign, ...) or only on
    the channel are joined once here, so that :meth:`take` reads them in one go.
    """

    def __init__(self, parts: list[dict[str, np.ndarray]], margin_db: np.ndarray) -> None:
        self.parts = parts
        self.widths = [part["margin_db"].shape[1] for part in parts]
        self.margin_db = margin_db
        self.by_column: dict[str, np.ndarray] = {}  # (K,) values of the joined block's columns
        self.by_row: dict[str, np.ndarray] = {}  # (Cb,) values, the same in both families
        if len(parts) == 2:
            first, second = parts
            for key, a in first.items():
                b = second[key]
                if key == "margin_db" or not (isinstance(a, np.ndarray) and isinstance(b, np.ndarray)):
                    continue
                if a.strides[0] == 0 and b.strides[0] == 0:
                    self.by_column[key] = np.concatenate([a[0], b[0]])
                elif a.strides[1] == 0 and b.strides[1] == 0 and np.array_equal(a[:, 0], b[:, 0]):
                    self.by_row[key] = a[:, 0]

    def take(self, rows: np.ndarray, cols: np.ndarray) -> dict[str, np.ndarray]:
        """Columns at the (row, column) pairs, in the order given (column index into the joined block)."""
        if len(self.parts) == 1:
            return {k: _gather(v, rows, cols) for k, v in self.parts[0].items()}
        first, second = self.parts
        k0 = self.widths[0]
        in_first = cols < k0
        at0, at1 = np.flatnonzero(in_first), np.flatnonzero(~in_first)
        r0, c0 = rows[at0], cols[at0]
        r1, c1 = rows[at1], cols[at1] - k0
        out: dict[str, np.ndarray] = {}
        for key, a in first.items():
            if key in self.by_column:
                out[key] = self.by_column[key].take(cols)
            elif key in self.by_row:
                out[key] = self.by_row[key].take(rows)
            elif key == "margin_db":
                out[key] = _gather(self.margin_db, rows, cols)
            elif not at1.size:  # all products
                out[key] = _gather(a, r0, c0)
            elif not at0.size:  # all responses
                out[key] = _gather(second[key], r1, c1)
            else:
                b = second[key]
                values = np.empty(rows.size, dtype=np.result_type(a.dtype, b.dtype))
                values[at0] = _gather(a, r0, c0)
                values[at1] = _gather(b, r1, c1)
                out[key] = values
        return out


class _ByGroup:
    """A (Cb, K) column whose row ``r`` is ``table[group[r]]`` (e.g. labels set by the wanted sign)."""

    def __init__(self, table: np.ndarray, group: np.ndarray) -> None:
        self.table = table
        self.group = group
        self.dtype = table.dtype

    def gather(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        return self.table.ravel().take(self.group.take(rows) * self.table.shape[1] + cols)


def _labels_by_group(table: np.ndarray, group: np.ndarray, margin: np.ndarray) -> _ByGroup:
    """Label column from a (2, K) table per group; sets the wanted rows' margin to +inf in place."""
    for g in range(table.shape[0]):
        cols = np.flatnonzero(table[g] == WANTED)
        rows = np.flatnonzero(group == g)
        if cols.size and rows.size:
            margin[np.ix_(rows, cols)] = np.inf
    return _ByGroup(table, group)


def _brick_wall_db(in_band: np.ndarray) -> np.ndarray:
    """Loss of the ideal brick-wall output filter, dB: 0 in band, infinite outside."""
    return np.where(in_band, 0.0, np.inf)


def _extra_out(margin: np.ndarray, in_band: np.ndarray) -> np.ndarray:
    """Extra output-filter rejection a failing out-of-band product needs, dB (NaN: none or no help)."""
    return np.where((margin < 0) & ~in_band, -margin, np.nan)


def _shown(level_dbc: np.ndarray) -> np.ndarray:
    """The final level as shown: floored once at FLOOR_DBC (margins use the unfloored level).

    ``-inf`` (nothing reaches the output: outside a receiver's ideal IF passband) stays.
    """
    return np.where(level_dbc == -np.inf, level_dbc, np.maximum(level_dbc, FLOOR_DBC))


def _shown_dbm(level_dbc: np.ndarray, wanted_out_dbm: np.ndarray) -> np.ndarray:
    return _shown(level_dbc) + wanted_out_dbm


def _extra_rf(margin: np.ndarray, a_in: np.ndarray, m: np.ndarray) -> np.ndarray:
    """Extra preselector rejection a failing response needs, dB: its input-referred shortfall.

    X dB more loss at the unwanted input lowers the (m,n) output by m·X, so the input-referred
    rejection (level/m) rises by exactly X.
    """
    return np.where((margin < 0) & np.isfinite(a_in) & (m > 0), -margin, np.nan)


class _ResponseBands:
    """Centre, low and high edge (Hz) of the responding input bands, computed only where gathered.

    The same values as :func:`~mixchart.physics.products.response_bands` over a (Cb, K) block;
    :attr:`columns` are its three columns.  One gather works out all three edges
    and keeps them for the other two columns of the same gather.
    """

    dtype = np.dtype(float)

    def __init__(self, lo_hz: np.ndarray, family: ResponseFamily, if_low_hz: float, if_high_hz: float,
                 interferer_bandwidth_hz: float) -> None:
        self.lo_hz = lo_hz
        self.interferer_bandwidth_hz = interferer_bandwidth_hz
        self.family = family
        self.if_hz = (if_low_hz, if_high_hz)
        self._last: tuple[np.ndarray, np.ndarray, tuple[np.ndarray, ...]] | None = None
        self.columns = tuple(_BandEdge(self, which) for which in range(3))

    def at(self, rows: np.ndarray, cols: np.ndarray) -> tuple[np.ndarray, ...]:
        """The three edges at the (row, column) pairs, Hz."""
        if self._last is None or self._last[0] is not rows or self._last[1] is not cols:
            fam = self.family
            bands = response_bands_at(
                self.lo_hz.take(rows), fam.rf_harmonic.take(cols), fam.lo_harmonic.take(cols), fam.branch.take(cols),
                *self.if_hz, interferer_bandwidth_hz=self.interferer_bandwidth_hz,
            )
            self._last = (rows, cols, bands)
        return self._last[2]


class _BandEdge:
    """One of the three columns of :class:`_ResponseBands` (0 centre, 1 low edge, 2 high edge)."""

    dtype = np.dtype(float)

    def __init__(self, bands: _ResponseBands, which: int) -> None:
        self.bands = bands
        self.which = which

    def gather(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        return self.bands.at(rows, cols)[self.which]


def _evaluate_block(ctx: Context, rows: slice) -> _Block:
    """Products and responses of the channels ``rows``.

    Works in place on as few full (channels x products) arrays as it can: labels,
    rejections and the "extra rejection needed" columns are gathered later only
    for the rows that reach a frame.
    """
    plan = ctx.plan
    limits = ctx.limits
    ch = ctx.channels_hz[rows]
    lo = ctx.lo_hz[rows]
    f_in = ctx.f_in_hz[rows]
    f_out = ctx.f_out_hz[rows]
    sign = ctx.wanted_sign[rows]
    nb = ch.size
    down = plan.direction == "down"
    sig_dbm = plan.signal.level_dbm
    pf = product_family(plan.max_order)
    rfam = response_family(plan.max_order) if down else None
    k_p = len(pf)
    margin = np.empty((nb, k_p + (len(rfam) if down else 0)))  # joined products | responses

    # ---- products of the wanted signal
    p_center, p_low, p_high = product_bands(f_in, lo, plan.signal.bandwidth_hz, pf)
    in_band = overlaps(p_low, p_high, ctx.out_low_hz, ctx.out_high_hz)
    shape = p_center.shape
    if down:
        input_filter, output_filter, out_filter_centre = ctx.rf_filter, ctx.if_filter, None
        in_filter_centre = ch
        in_field, out_field = "filters.rf", "filters.if"
    else:
        input_filter, output_filter, out_filter_centre = ctx.if_filter, ctx.rf_filter, ch
        in_filter_centre = None
        in_field, out_field = "filters.if", "filters.rf"
    if input_filter is not None:
        c = None if not input_filter.tracks_channel else in_filter_centre
        drive = (sig_dbm - capped(input_filter.atten_db(f_in, c), in_field, f_in))[:, None]
    else:
        drive = np.full((1, 1), sig_dbm)  # the same for every channel: levels work out once per column
    # the wanted output, dBm: the drive less the conversion loss and the output filter's loss there
    wanted_out_dbm = drive - ctx.table.conversion_loss_db
    if output_filter is not None:
        c = None if out_filter_centre is None or not output_filter.tracks_channel else out_filter_centre
        wanted_out_dbm = wanted_out_dbm - capped(output_filter.atten_db(f_out, c), out_field, f_out)[:, None]
    wanted_out_dbm = np.broadcast_to(wanted_out_dbm, (nb, 1))
    table_p = ctx.table.level_dbc_at(pf.rf_harmonic[None, :], pf.lo_harmonic[None, :], ctx.table.rf_ref_dbm)
    table_p = np.broadcast_to(table_p, shape)
    # unfloored: the -300 dBc floor applies once, to the final level shown (never to a margin)
    level = ctx.table.level_dbc_at(pf.rf_harmonic[None, :], pf.lo_harmonic[None, :], drive, floored=False)
    if output_filter is None and not down:
        # A transmitter emits every product: with no output filter described, the loss is 0 dB
        # everywhere (never an ideal brick wall), and the summary warns about the assumption.
        out_atten = np.broadcast_to(0.0, shape)
        p_level = np.broadcast_to(level, shape)
    elif output_filter is None:
        # Receiver with no IF filter described: only what lands in the IF passband reaches the
        # output, so the passband is taken as an ideal brick wall (loss 0 dB in band, infinite
        # outside: level - 0 and level - inf); the summary says so.
        out_atten = _Derived(_brick_wall_db, in_band)
        p_level = np.where(in_band, level, -np.inf)
    else:
        out_atten = band_rel_atten(output_filter, p_low, p_high, f_out, out_filter_centre, out_field)
        p_level = level - out_atten
    p_margin = margin[:, :k_p]
    if down or limits.n_pieces == 1:
        np.subtract(limits.spur_dbc, p_level, out=p_margin)  # margin = limit - level, in one pass
        p_req = np.broadcast_to(np.int8(1), shape)
    else:  # a transmitter's emission mask: each part of a band against its piece's limit
        p_level, out_atten, p_req = mask_margins(ctx, level, output_filter, p_low, p_high, f_out,
                                                  out_filter_centre, out_field, wanted_out_dbm, p_margin)
    # labels depend on the channel only through the wanted sign: one table row per sign
    p_labels = _labels_by_group(
        product_labels(pf, plan.direction, np.array([-1, 1])), (sign > 0).astype(np.intp), p_margin
    )
    zero = np.broadcast_to(0.0, shape)
    nan = np.broadcast_to(np.nan, shape)
    extra_out = _Derived(_extra_out, p_margin, in_band)
    products = {
        "kind": np.broadcast_to(np.int8(0), shape),
        "label": p_labels,
        "rf_harmonic": np.broadcast_to(pf.rf_harmonic, shape),
        "lo_harmonic": np.broadcast_to(pf.lo_harmonic, shape),
        "sign": np.broadcast_to(pf.sign, shape),
        "channel_hz": np.broadcast_to(ch[:, None], shape),
        "lo_hz": np.broadcast_to(lo[:, None], shape),
        "f_center_hz": p_center,
        "f_low_hz": p_low,
        "f_high_hz": p_high,
        "in_band": in_band,
        "table_dbc": table_p,
        "rf_atten_db": zero if down else out_atten,
        "if_atten_db": out_atten if down else zero,
        "level_dbc": _Derived(_shown, p_level),
        "level_dbm": _Derived(_shown_dbm, p_level, np.broadcast_to(wanted_out_dbm, shape)),
        "rejection_db": _Derived(np.negative, p_level),
        "margin_db": p_margin,
        "requirement": p_req,
        "mixer_drive_dbm": np.broadcast_to(drive, shape),
        "extra_rf_db": nan if down else extra_out,
        "extra_if_db": extra_out if down else nan,
    }
    if not down:
        return _Block([products], margin)

    # ---- receiver spurious responses
    shape = (nb, len(rfam))
    b_u = plan.signal.interferer_bandwidth_hz or 0.0  # None: a CW interferer
    if ctx.rf_filter is not None:
        r_center, r_low, r_high = response_bands(lo, plan.if_.f_low_hz, plan.if_.f_high_hz, rfam,
                                                 interferer_bandwidth_hz=b_u)
    else:
        # nothing but the frames reads the bands: work them out only for the rows gathered
        r_center, r_low, r_high = _ResponseBands(lo, rfam, plan.if_.f_low_hz, plan.if_.f_high_hz, b_u).columns
    zero = np.broadcast_to(0.0, shape)
    nan = np.broadcast_to(np.nan, shape)
    m = np.broadcast_to(rfam.rf_harmonic, shape)
    u_dbm = plan.signal.interferer_level_dbm if plan.signal.interferer_level_dbm is not None else sig_dbm
    if ctx.rf_filter is not None:
        # The unwanted input reaches the mixer through its response band's least-loss point: the
        # preselector's least loss over the band (exact, so an elliptic zero or a measured notch
        # inside the band never makes the rejection look better than it is).
        a_in = band_atten(ctx.rf_filter, r_low, r_high, ch, "filters.rf")
        a_w = point_atten(ctx.rf_filter, ch, ch, "filters.rf")[:, None]
        mixer_drive = u_dbm - a_in
    else:
        # no preselector: every channel alike, so the levels work out once per column
        a_in = np.zeros((1, 1))
        a_w = np.zeros((1, 1))
        mixer_drive = u_dbm - a_in
    table_r = ctx.table.level_dbc_at(rfam.rf_harmonic[None, :], rfam.lo_harmonic[None, :], ctx.table.rf_ref_dbm)
    table_r = np.broadcast_to(table_r, shape)
    r_level = ctx.table.level_dbc_at(rfam.rf_harmonic[None, :], rfam.lo_harmonic[None, :], mixer_drive,
                                     floored=False)  # (1 or Cb, K), floored once for display below
    r_level -= a_in
    r_level += a_w
    r_level += u_dbm - sig_dbm
    r_margin = margin[:, k_p:]
    # Receiver spurious-response rejection is an input ratio: the (m,n) response output grows m dB
    # per dB of interferer, so the interferer level giving an output equal to the wanted one is
    # P_u - level/m, and the rejection is (P_u - P_w) - level/m (small-signal regime).  The margin
    # is that rejection less the requirement; for m = 1 it equals the output ratio.
    np.divide(r_level, rfam.rf_harmonic[None, :], out=r_margin)
    np.subtract(u_dbm - sig_dbm - limits.rejection_db, r_margin, out=r_margin)
    # Co-channel: an unwanted input whose centre would sit inside the wanted channel is the wanted
    # signal itself, whose own products are judged above; such responses have no margin (+inf).
    if isinstance(r_low, np.ndarray):
        band_low, band_high = r_low, r_high
    else:
        _, band_low, band_high = response_bands(lo, plan.if_.f_low_hz, plan.if_.f_high_hz, rfam,
                                                interferer_bandwidth_hz=b_u)
    half = 0.5 * plan.signal.bandwidth_hz
    co_channel = (band_low + 0.5 * b_u <= (ch + half)[:, None]) & (band_high - 0.5 * b_u >= (ch - half)[:, None])
    r_margin[co_channel] = np.inf
    r_level = np.broadcast_to(r_level, shape)
    a_in = np.broadcast_to(a_in, shape)
    # The wanted input is on the (1,1) branch +1, (f_LO + f_IF), only for a difference
    # conversion with the LO below the channel; otherwise it is |f_LO - f_IF| (branch -1).
    wanted_branch = np.where((sign < 0) & (ch > lo), 1, -1)
    r_labels = _labels_by_group(response_labels(rfam, np.array([-1, 1])), (wanted_branch > 0).astype(np.intp), r_margin)
    responses = {
        "kind": np.broadcast_to(np.int8(1), shape),
        "label": r_labels,
        "rf_harmonic": m,
        "lo_harmonic": np.broadcast_to(rfam.lo_harmonic, shape),
        "sign": np.broadcast_to(rfam.branch, shape),
        "channel_hz": np.broadcast_to(ch[:, None], shape),
        "lo_hz": np.broadcast_to(lo[:, None], shape),
        "f_center_hz": r_center,
        "f_low_hz": r_low,
        "f_high_hz": r_high,
        "in_band": np.broadcast_to(True, shape),
        "table_dbc": table_r,
        # the preselector's part of the level: m·A(f_in) - A(f_wanted)
        "rf_atten_db": _Derived(lambda a, w, mm: mm * a - w, a_in, np.broadcast_to(a_w, shape), m),
        "if_atten_db": zero,
        "level_dbc": _Derived(_shown, r_level),
        "level_dbm": _Derived(_shown_dbm, r_level, np.broadcast_to(wanted_out_dbm, shape)),
        "rejection_db": _Derived(lambda level, mm: (u_dbm - sig_dbm) - level / mm, r_level, m),
        "margin_db": r_margin,
        "requirement": np.broadcast_to(np.int8(0), shape),
        "mixer_drive_dbm": np.broadcast_to(mixer_drive, shape),
        "extra_rf_db": _Derived(_extra_rf, r_margin, a_in, m),
        "extra_if_db": nan,
    }
    return _Block([products, responses], margin)

