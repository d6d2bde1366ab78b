"""The result of an evaluation: :class:`Evaluation`, its :class:`Summary`, and JSON-ready records."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ..context import Context
from ..context import read_only as _read_only
from ..filters import Filter
from ..levels import LevelTable
from ..plan import Plan
from ..units import format_frequency
from .block import _evaluate_block
from .frames import _LABEL_TEXT, _frame_at

__all__ = ["Evaluation", "Summary", "frame_records"]


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
