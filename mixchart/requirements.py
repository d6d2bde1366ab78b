"""What a plan must achieve, in the trade's own terms, and which limit each row is judged against.

A :class:`Requirement` (the plan's ``requirement`` object) holds three separate limits:

* ``response_rejection_db``: a receiver's spurious-response rejection, input-referred (dB):
  how much stronger than the wanted signal an unwanted input must be to give the same output.
  Applies to every receiver response (image, half-IF, IF feedthrough, ...).
* ``output_spur_dbc``: the output spurs of the wanted signal's own products, dBc relative to
  the wanted output (e.g. -60).  Applies to every product that reaches the output, after the
  output filter's loss (a receiver's in-channel spurs; a transmitter's emissions wherever no
  mask segment says otherwise).
* ``emission_mask``: a transmitter's emission limits over output frequency, as segments
  ``(f_low_hz, f_high_hz, limit, unit)`` with the unit ``"dBc"`` (relative to the wanted
  output) or ``"dBm"`` (absolute, at the mixer output after the output filter).  Segments must
  not overlap; output frequencies that no segment covers are judged against
  ``output_spur_dbc``.  A product whose band spans several segments is judged in each part
  against that part's limit, and its margin is the smallest.

**Old plans.** A plan that gives only ``min_rejection_db = R`` (the single figure of earlier
releases, default 60 dB) keeps its meaning: ``response_rejection_db = R`` and
``output_spur_dbc = -R``, no mask.  When both forms are given, the specific field wins.  A
receiver ignores the emission mask (and the analysis warns).

This module never imports a plotting or widget library.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import pairwise
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, model_validator

from .errors import PlanError
from .units import FrequencyHz, format_frequency

__all__ = ["MaskSegment", "Requirement", "Limits", "resolve_limits", "MAX_MASK_SEGMENTS"]

#: Most segments in an emission mask (a real mask has a handful).
MAX_MASK_SEGMENTS = 32


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class MaskSegment(_Strict):
    """One segment of a transmitter's emission mask: a limit over an output-frequency range."""

    f_low_hz: FrequencyHz = Field(description="Lower edge of the segment, Hz (edges belong to the segment).")
    f_high_hz: FrequencyHz = Field(description="Upper edge of the segment, Hz (> f_low_hz).")
    limit: float = Field(ge=-300.0, le=100.0, allow_inf_nan=False,
                         description="Highest allowed level of any product in the segment, in `unit`.")
    unit: Literal["dBc", "dBm"] = Field(default="dBc", description="'dBc': relative to the wanted output; "
                                        "'dBm': absolute, at the output after the output filter.")

    @model_validator(mode="after")
    def _check(self) -> MaskSegment:
        if not self.f_high_hz > self.f_low_hz:
            raise PlanError(f"f_high_hz: {format_frequency(self.f_high_hz)} is invalid; it must be above "
                            f"f_low_hz {format_frequency(self.f_low_hz)}")
        if self.unit == "dBc" and self.limit > 0.0:
            raise PlanError(f"limit: {self.limit!r} dBc is invalid; a spur limit relative to the wanted output "
                            "is at most 0 dBc (write suppression as a negative level)")
        return self


class Requirement(_Strict):
    """What the plan must achieve: separate limits, each applied where it belongs.

    See the :mod:`mixchart.requirements` module docstring for where each limit applies and how
    the single ``min_rejection_db`` of older plans maps onto them.
    """

    min_rejection_db: float = Field(
        default=60.0, ge=0.0, le=300.0, allow_inf_nan=False,
        description=(
            "dB. The single figure of older plans, and the fallback for the fields below: responses "
            "need at least this input-referred rejection, products must sit at or below -x dBc."
        ),
    )
    response_rejection_db: float | None = Field(
        default=None, ge=0.0, le=300.0, allow_inf_nan=False,
        description=(
            "Receiver spurious-response rejection, dB, input-referred: an unwanted input must be at least this "
            "much stronger than the wanted signal to give an equal output. Null: min_rejection_db."
        ),
    )
    output_spur_dbc: float | None = Field(
        default=None, ge=-300.0, le=0.0, allow_inf_nan=False,
        description=(
            "Highest output level of any product of the wanted signal, dBc (e.g. -60), after the output "
            "filter; for a transmitter, where no emission_mask segment applies. Null: -min_rejection_db."
        ),
    )
    emission_mask: tuple[MaskSegment, ...] = Field(
        default=(), max_length=MAX_MASK_SEGMENTS,
        description="Transmitter emission limits over output frequency; segments must not overlap.",
    )

    @model_validator(mode="after")
    def _check(self) -> Requirement:
        segments = sorted(enumerate(self.emission_mask), key=lambda item: item[1].f_low_hz)
        for (_, a), (j, b) in pairwise(segments):
            if b.f_low_hz < a.f_high_hz:
                raise PlanError(
                    f"emission_mask[{j}].f_low_hz: {format_frequency(b.f_low_hz)} is invalid; it overlaps the "
                    f"segment {format_frequency(a.f_low_hz)} to {format_frequency(a.f_high_hz)}"
                )
        return self

    @property
    def rejection_db(self) -> float:
        """The response-rejection limit in force, dB (``response_rejection_db`` or ``min_rejection_db``)."""
        return self.min_rejection_db if self.response_rejection_db is None else self.response_rejection_db

    @property
    def spur_dbc(self) -> float:
        """The output-spur limit in force, dBc (``output_spur_dbc`` or ``-min_rejection_db``)."""
        return -self.min_rejection_db if self.output_spur_dbc is None else self.output_spur_dbc


@dataclass(frozen=True)
class Limits:
    """The limits of one plan, ready for the analysis.

    Attributes
    ----------
    rejection_db : float
        Response-rejection limit, dB (input-referred).
    spur_dbc : float
        Output-spur limit, dBc.
    pieces_low_hz, pieces_high_hz : numpy.ndarray
        The output-frequency pieces a transmitter's products are judged in, Hz: the mask
        segments and the gaps between them (which take ``spur_dbc``), covering 0 Hz to infinity.
        A receiver has one piece, 0 Hz to infinity, at ``spur_dbc``.
    pieces_limit : numpy.ndarray
        Each piece's limit, in its unit.
    pieces_dbm : numpy.ndarray of bool
        True where a piece's limit is in dBm (absolute) rather than dBc.
    texts : tuple of str
        What each row's ``requirement`` column says: index 0 the response rejection, 1 + i
        piece i (e.g. "mask 1.2 GHz-1.3 GHz <= -36 dBm").
    """

    rejection_db: float
    spur_dbc: float
    pieces_low_hz: np.ndarray
    pieces_high_hz: np.ndarray
    pieces_limit: np.ndarray
    pieces_dbm: np.ndarray
    texts: tuple[str, ...]
    pieces_gap: np.ndarray | None = None

    def piece_hits(self, i: int, f_low_hz: np.ndarray, f_high_hz: np.ndarray):
        """Which bands overlap piece ``i``, and the overlapping parts (edges included).

        A mask segment holds its edges (module docstring): a gap next to it never holds a
        single frequency on that edge, so a line exactly on a segment's edge is judged against
        the segment's limit alone.

        Returns
        -------
        hit : numpy.ndarray of bool
        low_hz, high_hz : numpy.ndarray
            The parts of the bands inside the piece (meaningful where ``hit``).
        """
        low = np.maximum(f_low_hz, self.pieces_low_hz[i])
        high = np.minimum(f_high_hz, self.pieces_high_hz[i])
        hit = low <= high
        if self.pieces_gap is not None and self.pieces_gap[i]:
            on_edge = ((low == self.pieces_low_hz[i]) & (self.pieces_low_hz[i] > 0)) | (high == self.pieces_high_hz[i])
            hit &= ~((low == high) & on_edge)
        return hit, low, high

    @property
    def n_pieces(self) -> int:
        """Number of output-frequency pieces."""
        return int(self.pieces_limit.size)


def _spur_text(spur_dbc: float) -> str:
    return f"output spur <= {spur_dbc:g} dBc"


def resolve_limits(requirement: Requirement, direction: str) -> Limits:
    """The limits in force for a plan's direction (see the module docstring).

    Parameters
    ----------
    requirement : Requirement
        The plan's requirement.
    direction : {"down", "up"}
        The plan's direction; a receiver ("down") ignores the emission mask.

    Returns
    -------
    Limits
    """
    spur = requirement.spur_dbc
    lows, highs, limits, dbm, texts, gap = [], [], [], [], [], []
    edge = 0.0
    segments = sorted(requirement.emission_mask, key=lambda s: s.f_low_hz) if direction == "up" else []
    for seg in segments:
        if seg.f_low_hz > edge:  # a gap before the segment: the general output-spur limit
            lows.append(edge), highs.append(seg.f_low_hz), limits.append(spur), dbm.append(False)
            texts.append(_spur_text(spur)), gap.append(True)
        lows.append(seg.f_low_hz), highs.append(seg.f_high_hz), limits.append(seg.limit)
        dbm.append(seg.unit == "dBm"), gap.append(False)
        texts.append(f"mask {format_frequency(seg.f_low_hz)}-{format_frequency(seg.f_high_hz)} "
                     f"<= {seg.limit:g} {seg.unit}")
        edge = seg.f_high_hz
    lows.append(edge), highs.append(np.inf), limits.append(spur), dbm.append(False)
    texts.append(_spur_text(spur)), gap.append(True)
    rejection = requirement.rejection_db
    return Limits(
        rejection_db=rejection,
        spur_dbc=spur,
        pieces_low_hz=np.asarray(lows, dtype=float),
        pieces_high_hz=np.asarray(highs, dtype=float),
        pieces_limit=np.asarray(limits, dtype=float),
        pieces_dbm=np.asarray(dbm, dtype=bool),
        texts=(f"response rejection >= {rejection:g} dB", *texts),
        pieces_gap=np.asarray(gap, dtype=bool),
    )
