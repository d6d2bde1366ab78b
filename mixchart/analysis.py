"""Evaluate a plan: every product and response, its level after the filters, its margin.

:func:`evaluate` sweeps the plan's whole tuning range in chunks of channels and
returns an :class:`Evaluation`: per-channel worst cases, the worst case of each
product/response across the sweep, the failing rows, a summary, and the
warnings a designer should read.  Nothing here imports a plotting library.

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

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .checks import COMPRESSION_MARGIN_DB, floor_warnings, plan_warnings, span_warnings
from .context import Context, band_atten, band_rel_atten, build_context, capped, loss_limits, mask_margins, point_atten
from .context import read_only as _read_only
from .errors import AnalysisError, one_line
from .filters import Filter
from .levels import FLOOR_DBC, RF_EXTRAPOLATION_LIMIT_DB, LevelTable
from .plan import Plan
from .products import (
    LABELS,
    WANTED,
    ResponseFamily,
    is_inverted,
    overlaps,
    product_bands,
    product_family,
    product_labels,
    response_bands,
    response_bands_at,
    response_family,
    response_labels,
)
from .units import format_frequency

__all__ = ["Evaluation", "Summary", "evaluate", "frame_records", "FRAME_COLUMNS", "MAX_HIT_ROWS"]

#: Failing (channel, product) rows kept in :attr:`Evaluation.hits`; more are counted, not stored.
MAX_HIT_ROWS = 50_000
#: Channels processed per block; bounds peak memory whatever the sweep size.  Blocks of a
#: few hundred channels keep the (channels x products) temporaries in cache and out of
#: fresh-page faults: measured fastest for orders 7-15 on our machines.
CHUNK_CHANNELS = 512

#: Columns of :meth:`Evaluation.to_frame`, :attr:`Evaluation.hits` and
#: :meth:`Evaluation.channel_frame`, with their meaning.
FRAME_COLUMNS: dict[str, str] = {
    "kind": "'product' (an output of the wanted signal) or 'response' (an unwanted receiver input)",
    "label": "wanted, image, half-IF, IF feedthrough, LO leakage, LO harmonic, RF feedthrough, "
    "sum product, unwanted sideband, or spur",
    "rf_harmonic": "m, harmonic of the signal at the mixer's signal input (RF down, IF up)",
    "lo_harmonic": "n, LO harmonic",
    "order": "m + n",
    "sign": "product: +1 sum, -1 difference; response: +1 input above n·LO, -1 |n·LO - IF|/m",
    "channel_hz": "RF channel centre, Hz",
    "lo_hz": "LO frequency (on the LO grid), Hz",
    "f_center_hz": "product: output centre; response: unwanted input centre, Hz",
    "f_low_hz": "lower band edge, Hz",
    "f_high_hz": "upper band edge, Hz",
    "in_band": "product: overlaps the output passband; response: always True",
    "table_dbc": "mixer table level at the reference drive, dBc",
    "rf_atten_db": "RF filter loss applied (response: m·A(f_in) - A(f_wanted); up: output filter), dB",
    "if_atten_db": "IF filter loss applied relative to the wanted output, dB",
    "level_dbc": "output level relative to the wanted output, dBc, floored once at -300 dBc for display "
    "(rejection_db and margin_db come from the unfloored level; -inf: nothing reaches the output)",
    "level_dbm": "output level, dBm (level_dbc plus the wanted output level; responses at the interferer level)",
    "rejection_db": "response: how much stronger than the wanted an unwanted input must be for an equal "
    "output, (P_u - P_w) - level_dbc/m (input-referred); product: -level_dbc",
    "requirement": "the limit the margin is taken against: response rejection, output spur or a mask segment",
    "limit": "that limit's value, in limit_unit",
    "limit_unit": "dB (input-referred rejection), dBc or dBm (output level)",
    "margin_db": "response: rejection_db - limit; product: limit - level (dBc or dBm); >= 0 passes; +inf: the "
    "wanted row, and co-channel responses (an input inside the wanted channel is the wanted signal, whose own "
    "products are judged)",
    "mixer_drive_dbm": "RF drive at the mixer's signal input that the row's level was read at, dBm (product: the "
    "wanted after the input filter; response: the interferer after the preselector's loss)",
    "drive_ok": "mixer_drive_dbm at most 10 dB above the level table's reference and 10 dB under the LO drive",
    "loss_limit": "what limited the row's filter loss where the filter's response did not: a filter's ultimate "
    "rejection ('filters.rf floor 70 dB (assumed)': assumed when the kind's common-practice default stood in "
    "for max_atten_db), measured data read outside its span (the file's policy), or a filter not described; "
    "'' when the response itself",
    "passes": "margin_db >= 0",
    "extra_rf_db": "extra RF-filter rejection at the spur that would make it pass, dB (NaN: none needed or no help)",
    "extra_if_db": "extra IF/output-filter rejection that would make it pass, dB (NaN: none needed or no help)",
}


@dataclass(frozen=True)
class Summary:
    """Headline figures of an evaluation.

    Attributes
    ----------
    worst_margin_db : float
        Smallest margin over every channel and product/response, dB.
    worst_channel_hz : float
        Channel where it occurs, Hz.
    worst_label : str
        Its label, with ``(m,n)``.
    spur_free_fraction : float
        Share of channels whose every margin is >= 0 (0 to 1).
    n_channels : int
        Channels swept.
    n_failing_channels : int
        Channels with at least one failing product/response.
    n_failing_rows : int
        Failing (channel, product/response) pairs counted.
    inverted : str
        ``"yes"``, ``"no"`` or ``"mixed"``: spectrum inversion of the wanted conversion.
    """

    worst_margin_db: float
    worst_channel_hz: float
    worst_label: str
    spur_free_fraction: float
    n_channels: int
    n_failing_channels: int
    n_failing_rows: int
    inverted: str

    def line(self) -> str:
        """One-line status for a screen or a log."""
        state = "PASS" if self.worst_margin_db >= 0 else "FAIL"
        return (
            f"{state}: worst margin {self.worst_margin_db:+.1f} dB ({self.worst_label} at "
            f"{format_frequency(self.worst_channel_hz)}); spur-free {100 * self.spur_free_fraction:.1f}% "
            f"of {self.n_channels} channel{'s' if self.n_channels != 1 else ''}; inverted: {self.inverted}"
        )


class Evaluation:
    """Result of :func:`evaluate`; read-only.

    Every array is a read-only numpy array (writing one raises ``ValueError``)
    and every table is handed out as a copy-on-write copy, so nothing a caller
    does to a returned value changes the evaluation or its per-channel
    re-evaluation (:meth:`channel_frame`).  Two evaluations compare equal only
    when they are the same object, and hash by identity.

    Attributes
    ----------
    plan : Plan
        The plan evaluated.
    channels_hz, lo_hz, f_wanted_out_hz : numpy.ndarray, shape (C,)
        Channel centres, LO per channel (on its grid) and wanted output centre, Hz.
    inverted : numpy.ndarray of bool, shape (C,)
        Spectrum inversion of each channel's wanted conversion.
    worst_margin_db : numpy.ndarray, shape (C,)
        Worst margin per channel, dB.
    worst_row : pandas.DataFrame
        The worst product/response of each channel (C rows, :data:`FRAME_COLUMNS`).
    worst_by_product : pandas.DataFrame
        The worst case across the sweep of each (kind, m, n, sign), sorted by margin.
    hits : pandas.DataFrame
        Failing rows, at most :data:`MAX_HIT_ROWS` (see ``summary.n_failing_rows``).
    summary : Summary
    warnings : tuple of str
        Things the designer should read (IF inside the RF band, drive far from
        the table's reference, LO grid error, table entries from the model...).
    """

    __slots__ = (
        "plan", "channels_hz", "lo_hz", "f_wanted_out_hz", "inverted", "worst_margin_db",
        "_worst_row", "_worst_by_product", "_hits", "summary", "warnings", "_context", "_channel_frames",
    )

    def __init__(
        self,
        *,
        plan: Plan,
        channels_hz: np.ndarray,
        lo_hz: np.ndarray,
        f_wanted_out_hz: np.ndarray,
        inverted: np.ndarray,
        worst_margin_db: np.ndarray,
        worst_row: pd.DataFrame,
        worst_by_product: pd.DataFrame,
        hits: pd.DataFrame,
        summary: Summary,
        warnings: tuple[str, ...],
        context: Context,
    ) -> None:
        values = {
            "plan": plan,
            "channels_hz": _read_only(channels_hz),
            "lo_hz": _read_only(lo_hz),
            "f_wanted_out_hz": _read_only(f_wanted_out_hz),
            "inverted": _read_only(inverted),
            "worst_margin_db": _read_only(worst_margin_db),
            "_worst_row": worst_row.copy(),
            "_worst_by_product": worst_by_product.copy(),
            "_hits": hits.copy(),
            "summary": summary,
            "warnings": tuple(warnings),
            "_context": context,
            "_channel_frames": {},  # channel_frame's results, by index (the evaluation never changes)
        }
        for name, value in values.items():
            object.__setattr__(self, name, value)

    def __setattr__(self, name: str, value: object) -> None:
        raise AttributeError(f"Evaluation is read-only; cannot set {name!r}")

    def __delattr__(self, name: str) -> None:
        raise AttributeError(f"Evaluation is read-only; cannot delete {name!r}")

    def __repr__(self) -> str:
        return f"<Evaluation of {self.plan.name!r}: {self.summary.line()}>"

    @property
    def worst_row(self) -> pd.DataFrame:
        """The worst product/response of each channel (a copy-on-write copy)."""
        return self._worst_row.copy(deep=False)

    @property
    def worst_by_product(self) -> pd.DataFrame:
        """The worst case of each product/response across the sweep (a copy-on-write copy)."""
        return self._worst_by_product.copy(deep=False)

    @property
    def hits(self) -> pd.DataFrame:
        """Failing rows, the worst first (a copy-on-write copy)."""
        return self._hits.copy(deep=False)

    def to_frame(self) -> pd.DataFrame:
        """Worst case of every product/response across the sweep (one row each, wanted excluded)."""
        return self._worst_by_product.copy()

    def channels_frame(self) -> pd.DataFrame:
        """One row per channel: its worst product/response (columns: :data:`FRAME_COLUMNS`)."""
        return self._worst_row.copy()

    def responses_at(self, index: int, labels: tuple[str, ...]) -> list[tuple[str, int, int, float]]:
        """(label, m, n, input centre Hz) of each response of one channel whose label is in
        ``labels``, in the engine's column order; made from the channel's columns without a frame
        (the chart asks for the image and half-IF of the middle channel at every plan change)."""
        if not 0 <= index < self.channels_hz.size:
            raise IndexError(f"channel index {index} is out of range 0..{self.channels_hz.size - 1}")
        block = _evaluate_block(self._context, slice(int(index), int(index) + 1))
        n_cols = block.margin_db.shape[1]
        data = block.take(np.zeros(n_cols, dtype=np.intp), np.arange(n_cols))
        names = _LABEL_TEXT[data["label"]]
        wanted = np.isin(names, list(labels)) & (data["kind"] == 1)
        cols = (names[wanted], data["rf_harmonic"][wanted], data["lo_harmonic"][wanted], data["f_center_hz"][wanted])
        return [(str(lb), int(m), int(n), float(f)) for lb, m, n, f in zip(*cols, strict=True)]

    def channel_frame(self, index: int) -> pd.DataFrame:
        """Every product and response of one channel, wanted rows included.

        Parameters
        ----------
        index : int
            Channel index, 0 to ``len(channels_hz) - 1``.

        Returns
        -------
        pandas.DataFrame
            Columns :data:`FRAME_COLUMNS`, sorted by margin.
        """
        if not 0 <= index < self.channels_hz.size:
            raise IndexError(f"channel index {index} is out of range 0..{self.channels_hz.size - 1}")
        index = int(index)
        cached = self._channel_frames.get(index)
        if cached is None:
            block = _evaluate_block(self._context, slice(index, index + 1))
            # sorted by margin before the frame is made (a stable argsort, NaN last as in pandas):
            # one gather instead of a gather and a frame-wide sort
            cols = np.arange(block.margin_db.shape[1])
            cols = cols[np.argsort(block.margin_db[0], kind="stable")]
            cached = _frame_at(block, np.zeros(cols.size, dtype=np.intp), cols, self._context)
            if len(self._channel_frames) >= 16:  # a few channels' worth: the ones a user steps between
                self._channel_frames.pop(next(iter(self._channel_frames)))
            self._channel_frames[index] = cached
        return cached.copy(deep=False)  # copy-on-write: the caller's edits never reach the cache

    @property
    def level_table(self) -> LevelTable:
        """The mixer level table the evaluation used."""
        return self._context.table

    @property
    def wanted_sign(self) -> np.ndarray:
        """Per channel, ``+1`` where the wanted (1,1) conversion is the sum, ``-1`` the difference (read-only)."""
        return self._context.wanted_sign

    @property
    def f_wanted_in_hz(self) -> np.ndarray:
        """Per channel, the wanted signal's centre at the mixer input, Hz (RF down, IF up; read-only)."""
        return self._context.f_in_hz

    @property
    def filters(self) -> tuple[Filter | None, Filter | None]:
        """The built ``(rf, if)`` filters (None where the plan describes none)."""
        return self._context.rf_filter, self._context.if_filter

    def failing_channels_hz(self) -> np.ndarray:
        """Centres of the channels with at least one product or response below the requirement, Hz."""
        return self.channels_hz[self.worst_margin_db < 0]

    def nearest_channel(self, f_hz: float) -> int:
        """Index of the channel closest to ``f_hz`` (Hz)."""
        return int(np.argmin(np.abs(self.channels_hz - f_hz)))

    def to_json_dict(self) -> dict[str, Any]:
        """JSON-ready summary, warnings and worst-case table (documented in the README)."""
        return {
            "plan": self.plan.name,
            "summary": {k: _plain(v) for k, v in self.summary.__dict__.items()},
            "warnings": list(self.warnings),
            "worst_by_product": frame_records(self._worst_by_product),
            "hits": frame_records(self._hits),
        }


def _plain(value: Any) -> Any:
    if isinstance(value, (np.floating, float)):
        value = float(value)
        return value if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value


def frame_records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    return [{k: _plain(v) for k, v in row.items()} for row in frame.to_dict(orient="records")]


# ------------------------------------------------------------------ engine


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

    The same values as :func:`~mixchart.products.response_bands` over a (Cb, K) block;
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


def _frame(block: _Block, mask: np.ndarray, ctx: Context) -> pd.DataFrame:
    """Frame of the rows where ``mask`` (shape of ``block.margin_db``) is True, in row-major order."""
    return _frame_at(block, *np.nonzero(mask), ctx)


def _frame_at(block: _Block, rows: np.ndarray, cols: np.ndarray, ctx: Context) -> pd.DataFrame:
    """Frame of the given (channel row, product column) pairs, in that order."""
    return _frame_from(block.take(rows, cols), ctx)


_KIND_TEXT = np.asarray(("product", "response"), dtype=object)
_LABEL_TEXT = np.asarray(LABELS, dtype=object)


def _frame_from(data: dict[str, np.ndarray], ctx: Context) -> pd.DataFrame:
    """Frame (columns :data:`FRAME_COLUMNS`) of gathered block columns.

    Built without copying the gathered arrays (they are fresh and never written
    again), which keeps the memory of a million-row frame down.
    """
    rf_harmonic = data["rf_harmonic"].astype(np.int64, copy=False)
    lo_harmonic = data["lo_harmonic"].astype(np.int64, copy=False)
    floats = ("table_dbc", "rf_atten_db", "if_atten_db", "level_dbc", "level_dbm", "rejection_db", "margin_db",
              "extra_rf_db", "extra_if_db", "mixer_drive_dbm")
    limits = ctx.limits
    req = data["requirement"].astype(np.intp, copy=False)
    limit = np.concatenate([[limits.rejection_db], limits.pieces_limit])
    unit = np.asarray(["dB", *np.where(limits.pieces_dbm, "dBm", "dBc")], dtype=object)
    columns = {
        "kind": _KIND_TEXT[data["kind"]],
        "label": _LABEL_TEXT[data["label"]],
        "rf_harmonic": rf_harmonic,
        "lo_harmonic": lo_harmonic,
        "order": rf_harmonic + lo_harmonic,
        "sign": data["sign"].astype(np.int64, copy=False),
        **{k: data[k] for k in ("channel_hz", "lo_hz", "f_center_hz", "f_low_hz", "f_high_hz")},
        "in_band": data["in_band"].astype(bool, copy=False),
        **{k: data[k].astype(float, copy=False) for k in floats},
    }
    columns["passes"] = columns["margin_db"] >= 0
    columns["requirement"] = np.asarray(limits.texts, dtype=object)[req]
    columns["limit"] = limit[req]
    columns["limit_unit"] = unit[req]
    # The table's levels hold up to RF_EXTRAPOLATION_LIMIT_DB above its reference drive and with the
    # RF drive COMPRESSION_MARGIN_DB under the LO drive: rows read beyond are flagged.  Below the
    # reference the small-signal slope of (m - 1) dB per dB is the power-series result itself, so
    # lower drives are not flagged (the summary's drive warning still names a far reference).
    drive = columns["mixer_drive_dbm"]
    columns["loss_limit"] = loss_limits(ctx, data["kind"], columns["f_low_hz"], columns["f_high_hz"],
                                        columns["channel_hz"])
    columns["drive_ok"] = ((drive <= ctx.table.rf_ref_dbm + RF_EXTRAPOLATION_LIMIT_DB)
                           & (drive <= ctx.plan.mixer.lo_drive_dbm - COMPRESSION_MARGIN_DB))
    return pd.DataFrame({k: columns[k] for k in FRAME_COLUMNS}, copy=False)


def _concat(parts: list[dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
    return {k: np.concatenate([part[k] for part in parts]) for k in parts[0]}


def _subset(data: dict[str, np.ndarray], index: np.ndarray) -> dict[str, np.ndarray]:
    return {k: v[index] for k, v in data.items()}


def _prune_hits(parts: list[dict[str, np.ndarray]], limit_db: float | None) -> list[dict[str, np.ndarray]]:
    """The parts without their rows of margin above ``limit_db`` (None: no limit), in order."""
    if limit_db is None:
        return parts
    pruned = []
    for part in parts:
        keep = np.flatnonzero(part["margin_db"] <= limit_db)
        if keep.size == part["margin_db"].size:
            pruned.append(part)
        elif keep.size:
            pruned.append(_subset(part, keep))
    return pruned


def _worst_hits(parts: list[dict[str, np.ndarray]]) -> dict[str, np.ndarray]:
    """The MAX_HIT_ROWS rows of smallest margin, sorted by margin; ties keep the parts' order."""
    merged = _concat(parts)
    return _subset(merged, np.argsort(merged["margin_db"], kind="stable")[:MAX_HIT_ROWS])


def evaluate(plan: Plan, *, base_dir: str | Path | None = None, chunk_channels: int = CHUNK_CHANNELS) -> Evaluation:
    """Evaluate every product and response of a plan across its tuning range.

    Parameters
    ----------
    plan : Plan
        The plan.
    base_dir : path-like, optional
        Folder for relative file paths in the plan (the plan file's folder).
    chunk_channels : int
        Channels per block; bounds peak memory (about 1 kB per channel per
        order² at the default).

    Returns
    -------
    Evaluation

    Raises
    ------
    MixchartError
        If a filter or level table described by the plan is invalid.
    """
    base = None if base_dir is None else Path(base_dir)
    ctx = build_context(plan, base)
    n_ch = ctx.channels_hz.size
    worst_margin = np.empty(n_ch)
    # Per-chunk results stay plain numpy; the frames are built once at the end.
    worst_cols: dict[str, np.ndarray] = {}  # the worst row of each channel, filled chunk by chunk
    best_margin = best_channel = best_rows = None  # worst case of each product/response so far
    hit_parts: list[dict[str, np.ndarray]] = []
    n_hit_rows = 0
    n_kept = 0  # rows in hit_parts
    kept_margin = np.empty(0)  # the MAX_HIT_ROWS (or fewer) smallest failing margins so far
    hit_limit: float | None = None
    step = max(1, int(chunk_channels))
    for start in range(0, n_ch, step):
        rows = slice(start, min(start + step, n_ch))
        block = _evaluate_block(ctx, rows)
        margin = block.margin_db
        if np.isnan(margin).any():  # a NaN is an error, never a margin (nor a PASS)
            raise _nan_error(block, start)
        n_rows, n_cols = margin.shape
        all_cols = np.arange(n_cols)
        idx = np.argmin(margin, axis=1)
        worst_margin[rows] = margin[np.arange(n_rows), idx]
        for key, values in block.take(np.arange(n_rows), idx).items():
            if key not in worst_cols:
                worst_cols[key] = np.empty(n_ch, dtype=values.dtype)
            worst_cols[key][rows] = values
        # worst channel of each product/response (first channel on ties); infinite margins
        # (the wanted rows) never count
        col_best = margin.min(axis=0)
        if best_margin is None:
            best_margin = np.full(n_cols, np.inf)
            best_channel = np.zeros(n_cols, dtype=np.int64)
            empty = block.take(all_cols[:0], all_cols[:0])
            best_rows = {k: np.empty(n_cols, dtype=v.dtype) for k, v in empty.items()}
        better = np.isfinite(col_best) & (col_best < best_margin)
        if better.any():
            cols = np.flatnonzero(better)
            col_rows = np.argmin(margin[:, cols], axis=0)  # first channel of the chunk on ties
            best_margin[cols] = col_best[cols]
            best_channel[cols] = start + col_rows
            for key, values in block.take(col_rows, cols).items():
                best_rows[key][cols] = values
        # failing rows: keep the MAX_HIT_ROWS worst of the whole sweep, ties in channel order
        fail = margin < 0
        count = int(np.count_nonzero(fail))
        n_hit_rows += count
        if count:
            # once MAX_HIT_ROWS are kept, only rows worse than the MAX_HIT_ROWS-th worst kept can
            # enter; flat indices into the block (much faster than np.nonzero on a 2-D mask)
            flat = np.flatnonzero(fail if hit_limit is None else margin < hit_limit)
            flat_margin = margin.ravel().take(flat)
            if kept_margin.size + flat.size > MAX_HIT_ROWS:
                # tighten the limit with this block's margins before gathering its rows: only rows
                # at or below the MAX_HIT_ROWS-th smallest margin so far can stay
                pool = np.partition(np.concatenate([kept_margin, flat_margin]), MAX_HIT_ROWS - 1)
                kept_margin = pool[:MAX_HIT_ROWS]
                hit_limit = float(pool[MAX_HIT_ROWS - 1])
                inside = np.flatnonzero(flat_margin <= hit_limit)
                if inside.size > MAX_HIT_ROWS:  # ties at the limit: the first ones win
                    inside = np.sort(inside[np.argsort(flat_margin[inside], kind="stable")[:MAX_HIT_ROWS]])
                flat = flat[inside]
            else:
                kept_margin = np.concatenate([kept_margin, flat_margin])
            if flat.size:
                hit_parts.append(block.take(*np.divmod(flat, n_cols)))  # row-major: channel order
                n_kept += flat.size
            if n_kept > 2 * MAX_HIT_ROWS:  # now and then, drop the rows the limit has since shut out
                hit_parts = _prune_hits(hit_parts, hit_limit)
                n_kept = sum(part["margin_db"].size for part in hit_parts)
                if n_kept > 2 * MAX_HIT_ROWS:  # many ties at the limit: merge
                    hit_parts = [_worst_hits(hit_parts)]
                    n_kept = MAX_HIT_ROWS
    worst_row = _frame_from(worst_cols, ctx)
    # each product/response once, by margin; ties in channel, then family, order
    found = np.flatnonzero(np.isfinite(best_margin))
    order = found[np.lexsort((found, best_channel[found], best_margin[found]))]
    wbp = _frame_from(_subset(best_rows, order), ctx)
    hit_frame = (
        _frame_from(_worst_hits(_prune_hits(hit_parts, hit_limit)), ctx)  # by margin, ties in channel order
        if hit_parts
        else wbp.iloc[:0].copy()
    )
    inverted = is_inverted(ctx.f_in_hz, ctx.lo_hz, ctx.wanted_sign)
    i = int(np.argmin(worst_margin))
    worst = worst_row.iloc[i]
    summary = Summary(
        worst_margin_db=float(worst_margin[i]),
        worst_channel_hz=float(ctx.channels_hz[i]),
        worst_label=(
            f"{worst['label']} ({worst['rf_harmonic']},{worst['lo_harmonic']})"
            if math.isfinite(worst_margin[i])
            else "nothing reaches the output"
        ),
        spur_free_fraction=float(np.mean(worst_margin >= 0)),
        n_channels=int(n_ch),
        n_failing_channels=int(np.sum(worst_margin < 0)),
        n_failing_rows=int(n_hit_rows),
        inverted="yes" if inverted.all() else "no" if not inverted.any() else "mixed",
    )
    return Evaluation(
        plan=plan,
        channels_hz=ctx.channels_hz,
        lo_hz=ctx.lo_hz,
        f_wanted_out_hz=ctx.f_out_hz,
        inverted=inverted,
        worst_margin_db=worst_margin,
        worst_row=worst_row,
        worst_by_product=wbp,
        hits=hit_frame,
        summary=summary,
        warnings=tuple(plan_warnings(ctx) + span_warnings(ctx, wbp) + floor_warnings(wbp)),
        context=ctx,
    )


def _nan_error(block: _Block, start: int) -> AnalysisError:
    """The error for the first NaN margin of a block: which product, which channel, which term."""
    row, col = (int(i) for i in np.argwhere(np.isnan(block.margin_db))[0])
    r = {k: v[0] for k, v in block.take(np.array([row]), np.array([col])).items()}
    terms = (("table_dbc", "mixer"), ("rf_atten_db", "filters.rf"), ("if_atten_db", "filters.if"))
    field = next((name for key, name in terms if np.isnan(r[key])), "plan")
    what = "response" if r["kind"] == 1 else "product"
    return AnalysisError(one_line(
        f"{field}: the {what} ({int(r['rf_harmonic'])},{int(r['lo_harmonic'])}) at channel "
        f"{format_frequency(float(r['channel_hz']))} (channel index {start + row}) has no number (NaN) for its "
        "level; check the field's values there (a NaN is never reported as a margin)"
    ))
