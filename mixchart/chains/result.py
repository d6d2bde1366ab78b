"""The result of a chain analysis: read-only arrays and pandas tables, JSON, and a summary line."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ..analysis.result import _plain, frame_records
from ..units import format_frequency

__all__ = ["ChainSummary", "ChainResult", "PATH_COLUMNS", "CHANNEL_COLUMNS", "NODE_COLUMNS"]

#: Columns of :attr:`ChainResult.paths` (one row per path, at its worst channel) and of ``hits``.
PATH_COLUMNS = {
    "kind": "'product' (of the wanted signal, forward) or 'response' (an unwanted input heard, inverse)",
    "stage": "the stage where the path leaves the wanted signal (where the spur is made or first heard)",
    "path": "the steps, stage by stage: '(2,-1) in mixer 1, then (1,-1) in mixer 2'",
    "channel_hz": "the channel, Hz (the path's worst, in the paths table)",
    "f_low_hz": "band edge, Hz: at the output for a product, at the chain input for a response",
    "f_high_hz": "band edge, Hz",
    "level_dbc": "output level relative to the wanted output, dBc (responses: at the interferer level)",
    "rejection_db": "responses: input-referred rejection, dB (how much stronger than the wanted the input must be "
                    "for an equal output); products: -level_dbc",
    "margin_db": "rejection or level against its limit, dB (negative: the requirement is broken)",
    "limit": "the limit the margin is against",
    "in_band": "whether the band lands in the final passband",
    "freq_slope": "d f_out / d f_in of the path, signed: how the output moves with the chain input (m·... along the "
                  "path; negative where the spectrum is turned over; 0 for a line that does not move, an LO's)",
    "x_hz": "a point of the path on the end-to-end plane, Hz: the chain input (the channel for a product; for a "
            "response the input that lands on the passband's centre)",
    "y_hz": "and the chain output there (the product's centre; the passband's centre for a response)",
    "n_failing_channels": "paths table: channels where this path breaks its limit",
}
#: Columns of :attr:`ChainResult.channels`.
CHANNEL_COLUMNS = ("channel_hz", "f_out_hz", "inverted", "worst_margin_db", "worst_path", "worst_stage")
#: Columns of :attr:`ChainResult.nodes`.
NODE_COLUMNS = ("node", "after", "kind", "f_low_hz", "f_high_hz", "sense", "lo_low_hz", "lo_high_hz", "level_dbm")


@dataclass(frozen=True)
class ChainSummary:
    """Headline figures of a chain analysis.

    Attributes
    ----------
    worst_margin_db : float
        Smallest margin over every channel, product and response, dB.
    worst_channel_hz : float
        Where it occurs, Hz.
    worst_path : str
        Its path.
    limiting_stage : str
        The stage where that path leaves the wanted signal.
    spur_free_fraction : float
        Share of channels whose every margin is >= 0.
    n_channels, n_failing_channels : int
    paths_explored, paths_pruned : int
        Paths per channel (on average over the channels): bands made along the chain, summed over
        the stages, and those dropped as provably below every limit by more than
        :data:`~mixchart.chains.setup.PRUNE_HEADROOM_DB`.
    responses_explored, responses_pruned : int
        The same for the inverse search: input bands looked at per channel, and those dropped as
        provably rejected by more than the limit plus the headroom.
    order_caps : tuple of (str, int)
        Each stage's order cap.
    inverted : str
        'yes', 'no' or 'mixed': the wanted signal's sense at the output.
    """

    worst_margin_db: float
    worst_channel_hz: float
    worst_path: str
    limiting_stage: str
    spur_free_fraction: float
    n_channels: int
    n_failing_channels: int
    paths_explored: int
    paths_pruned: int
    responses_explored: int
    responses_pruned: int
    order_caps: tuple[tuple[str, int], ...]
    inverted: str

    def line(self) -> str:
        """One-line status."""
        state = "PASS" if self.worst_margin_db >= 0 else "FAIL"
        return (f"{state}: worst margin {self.worst_margin_db:+.1f} dB ({self.worst_path} at "
                f"{format_frequency(self.worst_channel_hz)}; limited by {self.limiting_stage}); spur-free "
                f"{100 * self.spur_free_fraction:.1f}% of {self.n_channels} channels; paths per channel explored "
                f"{self.paths_explored}, pruned {self.paths_pruned}; inverted: {self.inverted}")


class ChainResult:
    """Result of :func:`mixchart.chains.analyse_chain`; read-only.

    Attributes
    ----------
    plan : ChainPlan
    channels_hz, worst_margin_db : numpy.ndarray (read-only), shape (C,)
    pass_low_hz, pass_high_hz : numpy.ndarray (read-only), shape (C,)
        The final passband at each channel, Hz.
    summary : ChainSummary
    warnings : tuple of WarningRecord
    """

    __slots__ = ("plan", "channels_hz", "worst_margin_db", "pass_low_hz", "pass_high_hz", "summary", "warnings",
                 "_paths", "_channels", "_nodes",
                 "_hits", "_channel_rows", "_tracks")

    def __init__(self, *, plan, channels_hz, worst_margin_db, summary, warnings, paths, channels, nodes,
                 hits, channel_rows, tracks, pass_low_hz, pass_high_hz) -> None:
        for name, value in (("channels_hz", channels_hz), ("worst_margin_db", worst_margin_db),
                            ("pass_low_hz", pass_low_hz), ("pass_high_hz", pass_high_hz)):
            value = np.array(value, dtype=float)
            value.flags.writeable = False
            object.__setattr__(self, name, value)
        for name, value in (("plan", plan), ("summary", summary), ("warnings", tuple(warnings)),
                            ("_paths", paths), ("_channels", channels), ("_nodes", nodes), ("_hits", hits),
                            ("_channel_rows", channel_rows), ("_tracks", tracks)):
            object.__setattr__(self, name, value)

    def __setattr__(self, name: str, value: object) -> None:
        raise AttributeError(f"ChainResult is read-only; cannot set {name!r}")

    def __repr__(self) -> str:
        return f"<ChainResult of {self.plan.name!r}: {self.summary.line()}>"

    @property
    def paths(self) -> pd.DataFrame:
        """One row per path at its worst channel, sorted by margin (:data:`PATH_COLUMNS`)."""
        return self._paths.copy(deep=False)

    @property
    def channels(self) -> pd.DataFrame:
        """One row per channel: the wanted output, its sense and the worst path (:data:`CHANNEL_COLUMNS`)."""
        return self._channels.copy(deep=False)

    @property
    def nodes(self) -> pd.DataFrame:
        """The wanted signal's frequency range and sense at every node (:data:`NODE_COLUMNS`)."""
        return self._nodes.copy(deep=False)

    @property
    def hits(self) -> pd.DataFrame:
        """Failing (path, channel) rows, worst first."""
        return self._hits.copy(deep=False)

    @property
    def tracks(self) -> pd.DataFrame:
        """The end-to-end plane's points: every (path, channel) within 10 dB of its limit.

        Columns ``kind``, ``path``, ``channel_hz``, ``x_hz`` and ``y_hz`` (a point of the path, as
        in :data:`PATH_COLUMNS`) and ``margin_db``; sorted by path, then x.
        """
        return self._tracks.copy(deep=False)

    def plot(self, index: int | None = None):
        """The end-to-end plane at channel ``index`` (default: the worst), as a Bokeh figure.

        Bokeh is imported only here (the analysis never needs it); show the figure with
        ``bokeh.plotting.show`` or in a notebook.
        """
        from ..app_chain import end_to_end_figure  # lazy: the engine never imports a plotting library

        index = int(np.argmin(self.worst_margin_db)) if index is None else int(index)
        if not 0 <= index < self.channels_hz.size:
            raise IndexError(f"index: {index} is invalid; the sweep has channels 0 to {self.channels_hz.size - 1}")
        return end_to_end_figure(self, index)[0]

    def channel_frame(self, index: int) -> pd.DataFrame:
        """Every judged path of channel ``index`` (products and responses), worst first."""
        return self._channel_rows(int(index))

    def nearest_channel(self, f_hz: float) -> int:
        """Index of the channel nearest ``f_hz``."""
        return int(np.argmin(np.abs(self.channels_hz - f_hz)))

    def to_frame(self) -> pd.DataFrame:
        """The paths table (the worst case of every path)."""
        return self.paths

    def to_json(self) -> dict[str, Any]:
        """JSON-ready summary, warnings (as records), nodes and the paths table."""
        summary = {k: _plain(v) for k, v in self.summary.__dict__.items()}
        summary["order_caps"] = [list(pair) for pair in self.summary.order_caps]
        return {
            "plan": self.plan.name,
            "summary": summary,
            "warnings": [{"code": w.code, "field": w.field, "value": _plain(w.value) if not isinstance(
                w.value, (list, dict)) else w.value, "text": w.text} for w in self.warnings],
            "nodes": frame_records(self._nodes),
            "paths": frame_records(self._paths),
        }

    @property
    def warning_texts(self) -> tuple[str, ...]:
        """The warnings as lines of text."""
        return tuple(str(w) for w in self.warnings)
