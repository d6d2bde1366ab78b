"""What every stage of a conversion chain is: one protocol, and the arrays that flow through it.

A chain is swept one block of channels at a time.  Between two stages the signal is a
:class:`Flow`: ``P`` bands per channel (row 0 the wanted signal, the others its products so
far), each with its edges, its level and its spectral sense, and for each row the step that
made it and the row of the previous flow it came from (its *parent*), so that every band's
path through the chain can be read back.  A stage is an :class:`Element`:

* ``forward(flow, node)`` makes the bands leaving the stage from the bands entering it;
* ``level_bound(level_dbm)`` is an upper bound of the level of any band leaving the stage
  given the level of the band entering it (the pruning of provably weak paths uses it);
* ``inverse(low, high, node)`` lists the input bands that reach an output band through the
  stage, each with the affine map of its level (``out = slope·in + offset`` dB);
* ``output_passband(node)`` is the stage's passband at its output, where it has one.

Data only flows one way: the element never reads a later stage.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

__all__ = ["Flow", "Node", "Inverse", "Element", "ElementKind", "WarningRecord", "bound_from_maps"]


@dataclass(frozen=True)
class WarningRecord:
    """A thing the designer should read: a code, the field it is about, its value and a sentence.

    Attributes
    ----------
    code : str
        Stable short name (e.g. ``"assumed-intercept"``), for tools that filter warnings.
    field : str
        The plan field it is about, dotted (``"chain.2.oip3_dbm"``).
    value : object
        The value in force (the assumed figure, the offending value).
    text : str
        One line for a person, leading with the field.
    """

    code: str
    field: str
    value: Any
    text: str

    def __str__(self) -> str:
        return self.text


@dataclass
class Node:
    """The wanted signal at one node of the chain, per channel of the block.

    Attributes
    ----------
    channel_hz : numpy.ndarray, shape (C,)
        The channel (the tuned frequency), Hz.
    f_hz : numpy.ndarray, shape (C,)
        Centre of the wanted signal at this node, Hz.
    level_dbm : numpy.ndarray, shape (C,)
        Its level, dBm.
    inverted : numpy.ndarray of bool, shape (C,)
        Whether its spectrum is turned over relative to the chain input.
    bandwidth_hz : float
        Its width, Hz (the signal's bandwidth: the wanted (1,1) path keeps it).
    lo_hz : dict
        LO frequency of each mixer stage met so far, by stage index, Hz (C,).
    """

    channel_hz: np.ndarray
    f_hz: np.ndarray
    level_dbm: np.ndarray
    inverted: np.ndarray
    bandwidth_hz: float
    lo_hz: dict[int, np.ndarray] = field(default_factory=dict)


@dataclass
class Flow:
    """The bands between two stages: ``P`` rows per channel, row 0 the wanted signal.

    Attributes
    ----------
    low_hz, high_hz : numpy.ndarray, shape (P, C)
        Band edges, Hz.
    level_dbm : numpy.ndarray, shape (P, C)
        Level, dBm (-inf: the band does not get through).
    inverted : numpy.ndarray of bool, shape (P, C)
        Spectral sense of the band relative to the chain input.
    parent : numpy.ndarray of int, shape (P,)
        Row of the previous flow each row came from; -1 for a band the stage made itself
        (an LO leakage line).
    step : numpy.ndarray of str, shape (P,)
        What the stage did to make the row: ``""`` (passed), ``"(2,1)"``, ``"(1,1) sum"``,
        ``"LO (0,2)"``, ``"H3"``, ``"alias"``...
    order : numpy.ndarray of int, shape (P,)
        Order of the step (m + n for a mixer product, k for a harmonic, 0 when passed).
    gain : numpy.ndarray, shape (P,)
        How fast the row's frequency moves with its parent's, ``|d f / d f_parent|``: m for an
        (m, n) product, 0 for an LO line, k for a k-th harmonic, 1 when passed (its sign is the
        change of ``inverted``).  None: 1 for every row.
    """

    low_hz: np.ndarray
    high_hz: np.ndarray
    level_dbm: np.ndarray
    inverted: np.ndarray
    parent: np.ndarray
    step: np.ndarray
    order: np.ndarray
    gain: np.ndarray | None = None

    @property
    def n_rows(self) -> int:
        """Number of bands per channel."""
        return int(self.parent.size)

    def take(self, rows: np.ndarray) -> Flow:
        """The flow restricted to ``rows`` (row 0, the wanted signal, must stay first)."""
        return Flow(self.low_hz[rows], self.high_hz[rows], self.level_dbm[rows], self.inverted[rows],
                    self.parent[rows], self.step[rows], self.order[rows],
                    None if self.gain is None else self.gain[rows])


@dataclass
class Inverse:
    """Input bands that reach an output band through one stage, with their level maps.

    Every array has shape ``(Q, C)`` except ``step`` and ``order`` (``(Q,)``); row ``q``
    came from output row ``source[q]``.

    Attributes
    ----------
    low_hz, high_hz : numpy.ndarray
        The input band, Hz.
    valid : numpy.ndarray of bool
        False where the band is empty (it would need a negative frequency).
    slope : numpy.ndarray, shape (Q,)
        dB of output per dB of input (m for an (m, n) mixer product).
    offset_db : numpy.ndarray, shape (Q, C)
        Output level less ``slope`` times the input level, dB.
    source : numpy.ndarray of int, shape (Q,)
        The output row it reaches.
    step, order : numpy.ndarray, shape (Q,)
        As in :class:`Flow`.
    freq_slope : numpy.ndarray, shape (Q,)
        ``d f_out / d f_in`` of the step, signed (+m, or -m on the branch that turns the
        spectrum over; -k for a harmonic folded from an even zone).  None: +1 for every row.
    freq_offset_hz : numpy.ndarray, shape (Q, C)
        With ``freq_slope``, the step's frequency map ``f_out = freq_slope·f_in + freq_offset``
        (exact, before any clipping at 0 Hz).  None: 0 for every row.
    """

    low_hz: np.ndarray
    high_hz: np.ndarray
    valid: np.ndarray
    slope: np.ndarray
    offset_db: np.ndarray
    source: np.ndarray
    step: np.ndarray
    order: np.ndarray
    freq_slope: np.ndarray | None = None
    freq_offset_hz: np.ndarray | None = None


class Element(Protocol):
    """One stage of a chain, built from its spec once per analysis."""

    kind: str
    name: str
    field: str

    def prepare(self, node: Node) -> None:
        """Build what needs the whole sweep's wanted signal at the input (an LO filter's rejection, a check)."""

    def wanted(self, node: Node) -> Node:
        """The wanted signal at the stage's output, from the wanted signal at its input."""

    def forward(self, flow: Flow, node_in: Node, node_out: Node) -> Flow:
        """The bands leaving the stage; row 0 must be the wanted signal of ``node_out``."""

    def level_bound(self, level_dbm: np.ndarray) -> np.ndarray:
        """An upper bound of the level of any band leaving the stage, from an input band's level, dBm."""

    def level_maps(self) -> list[tuple[float, float]]:
        """Upper bounds of the stage's level maps, as (slope, offset) pairs: any band leaving the stage
        is at most ``max(slope·x + offset)`` dBm for an input band at x dBm."""

    def inverse(self, low_hz: np.ndarray, high_hz: np.ndarray, node_in: Node, node_out: Node) -> Inverse:
        """The input bands that reach the output bands ``[low, high]`` (R, C) through the stage."""

    def warnings(self) -> list[WarningRecord]:
        """What the element assumed (figures it took from defaults), as records."""


def bound_from_maps(maps: list[tuple[float, float]], level_dbm: np.ndarray) -> np.ndarray:
    """``max(slope·x + offset)`` over the (slope, offset) pairs, dBm."""
    out = np.full(np.shape(level_dbm), -np.inf)
    for slope, offset in maps:
        out = np.maximum(out, slope * level_dbm + offset)
    return out


@dataclass(frozen=True)
class ElementKind:
    """One kind of stage, as the registry holds it.

    Attributes
    ----------
    kind : str
        The ``kind`` tag in a plan's ``chain`` (``"mixer"``).
    spec : type
        Its pydantic spec (data only).
    build : callable
        ``build(spec, index, name, plan, base_dir) -> Element``.
    form_fields : tuple of str
        The spec fields the app's stage form shows, in order.
    words : str
        How the report names the kind ("mixer", "ADC").
    """

    kind: str
    spec: type
    build: Any
    form_fields: tuple[str, ...]
    words: str
