"""From a chain plan to what the sweeps need: elements, the wanted signal at every node, the final passband.

The wanted signal is carried through every stage first, for every channel at once: that fixes
each mixer's LO (a tracking LO follows the wanted signal at its own input), checks that the
wanted signal lands in every passband it must, and gives the wanted output level that every
product is judged against (and that pruning needs before any product is made).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..elements.base import Element, Node, WarningRecord
from ..elements.registry import build_element
from ..errors import PlanError, SweepTooLargeError
from ..models.chain import ChainPlan, stage_names
from ..requirements import Limits, resolve_limits
from ..units import format_frequency

__all__ = ["ChainSetup", "set_up", "channels_hz", "MAX_BANDS_PER_CHANNEL", "BLOCK_ELEMENTS", "PRUNE_HEADROOM_DB"]

#: A path is pruned only when it is provably this far inside its limit (a product this much below
#: it, a response rejected this much more than required): every margin up to this is reported
#: exactly, so the tables show what passes with little to spare, not only what fails.
PRUNE_HEADROOM_DB = 30.0

#: Most bands one channel may carry through the chain before pruning (every stage's fan-out
#: multiplied): the memory of a sweep is bounded by this times the block size, so a larger
#: request is refused before anything is allocated.
MAX_BANDS_PER_CHANNEL = 400_000
#: Bands x channels held at once in a block (about 160 bytes each across the arrays in flight at the
#: peak, under the 500 MB budget; benchmarks/bench_chain.py measures it).
BLOCK_ELEMENTS = 2_000_000


@dataclass
class ChainSetup:
    """Everything a chain sweep reads, computed once per plan."""

    plan: ChainPlan
    names: list[str]
    elements: list[Element]
    channels_hz: np.ndarray
    nodes: list[Node]  # nodes[0] the chain input, nodes[i + 1] the output of stage i (all channels)
    pass_low_hz: np.ndarray  # the final passband per channel, Hz
    pass_high_hz: np.ndarray
    brick_wall: bool  # nothing outside the final passband reaches the output (no final filter described)
    limits: Limits
    fan_out: list[int]
    warnings: list[WarningRecord] = field(default_factory=list)
    cache: dict = field(default_factory=dict)  # what the blocks share (e.g. response names by path)

    @property
    def wanted_out_dbm(self) -> np.ndarray:
        """The wanted signal's level at the chain output, dBm (C,)."""
        return self.nodes[-1].level_dbm

    def block_nodes(self, rows: slice) -> list[Node]:
        """The nodes restricted to the channels ``rows``."""
        return [Node(n.channel_hz[rows], n.f_hz[rows], n.level_dbm[rows], n.inverted[rows], n.bandwidth_hz,
                     {k: v[rows] for k, v in n.lo_hz.items()}) for n in self.nodes]

    def block_channels(self) -> int:
        """How many channels one block holds, from the chain's worst-case bands per channel."""
        return max(1, BLOCK_ELEMENTS // max(1, math.prod(self.fan_out)))


def channels_hz(plan: ChainPlan) -> np.ndarray:
    """The channel centres of the tuning range, Hz (the same grid as a version-1 plan's)."""
    n = plan.rf.n_channels
    step = plan.rf.step_hz or 0.0
    out = plan.rf.start_hz + step * np.arange(n, dtype=float)
    if n > 1:
        out[-1] = min(out[-1], plan.rf.stop_hz)
    return out


def _fan_out(element: Element) -> int:
    kind = element.kind
    if kind == "mixer":
        return int(element.m.size) + 1
    if kind == "amplifier":
        return int(element.k.size)
    if kind == "adc":
        return int(element.k.size) * (1 + 2 * len(element.spec.clock_spurs)) * 2
    return 1


def _check_in_band(node: Node, low: float, high: float, field_name: str, what: str,
                   records: list[WarningRecord], *, refuse: bool = True) -> None:
    """Refuse a stage the wanted signal cannot reach at any channel; warn where only some channels miss."""
    half = 0.5 * node.bandwidth_hz
    tol = 1e-9 * high
    outside = (node.f_hz - half < low - tol) | (node.f_hz + half > high + tol)
    if not outside.any():
        return
    i = int(np.flatnonzero(outside)[0])
    where = (f"{what} at {format_frequency(node.f_hz[i])} (channel {format_frequency(node.channel_hz[i])}), "
             f"outside its passband {format_frequency(low)} to {format_frequency(high)}")
    if outside.all() and refuse:
        raise PlanError(f"{field_name}: the wanted signal reaches {where}; fix this stage's LO or passband")
    records.append(WarningRecord("wanted-outside-passband", field_name, int(outside.sum()),
                                 f"{field_name}: at {int(outside.sum())} of {outside.size} channels the wanted "
                                 f"signal does not fit the passband (first: {where})"))


def set_up(plan: ChainPlan, base_dir: str | Path | None = None) -> ChainSetup:
    """Build the elements and carry the wanted signal through the chain for every channel.

    Raises
    ------
    PlanError
        The wanted signal misses a stage's passband, a LO reaches 0 Hz, an ADC zone cannot
        hold the signal (one line naming the stage and the field).
    SweepTooLargeError
        The chain's order caps would carry more than :data:`MAX_BANDS_PER_CHANNEL` bands.
    """
    names = stage_names(plan)
    elements = [build_element(spec, i, names[i], plan, base_dir) for i, spec in enumerate(plan.chain)]
    fan = [_fan_out(e) for e in elements]
    total = math.prod(fan)
    if total > MAX_BANDS_PER_CHANNEL:
        raise SweepTooLargeError(f"chain: up to {total} bands per channel at these order caps is too many; at most "
                                 f"{MAX_BANDS_PER_CHANNEL}: lower a stage's max_order")
    ch = channels_hz(plan)
    mixers = [i for i, s in enumerate(plan.chain) if s.kind == "mixer"]
    f0 = ch.copy() if plan.direction == "down" else np.full_like(ch, plan.chain[mixers[0]].if_.center_hz)
    node = Node(ch, f0, np.full_like(ch, plan.signal.level_dbm), np.zeros(ch.shape, dtype=bool),
                float(plan.signal.bandwidth_hz))
    nodes = [node]
    checks: list[WarningRecord] = []
    for i, element in enumerate(elements):
        spec = plan.chain[i]
        if spec.kind == "mixer" and spec.input_port == "if":
            _check_in_band(node, spec.if_.f_low_hz, spec.if_.f_high_hz, f"chain.{i}.if", f"{names[i]}'s input",
                           checks)
        element.prepare(node)
        node = element.wanted(node)
        if spec.kind == "mixer" and spec.input_port == "rf":
            _check_in_band(node, spec.if_.f_low_hz, spec.if_.f_high_hz, f"chain.{i}.if", f"{names[i]}'s output",
                           checks)
        nodes.append(node)
    last = plan.chain[-1]
    half = 0.5 * plan.signal.bandwidth_hz
    if last.kind == "adc":
        low, high = elements[-1].passband(nodes[-1])
        brick = False  # the ADC applies its own channel (a brick wall when it has no filter)
    elif plan.direction == "down":
        m = plan.chain[mixers[-1]]
        low, high = np.full_like(ch, m.if_.f_low_hz), np.full_like(ch, m.if_.f_high_hz)
        brick = not any(s.kind == "filter" for s in plan.chain[mixers[-1] + 1:])
    else:
        low, high = nodes[-1].f_hz - half, nodes[-1].f_hz + half
        brick = False
        _check_in_band(nodes[-1], float(np.min(ch - half)), float(np.max(ch + half)), "rf",
                       "the chain output", checks, refuse=False)  # an LO grid error moves it off: a warning
    records = checks + [rec for e in elements for rec in e.warnings()]
    if brick:
        records.append(WarningRecord("ideal-final-filter", f"chain.{mixers[-1]}.if", None,
                                     f"chain.{mixers[-1]}.if: no filter after {names[mixers[-1]]}; its IF passband "
                                     "is taken as an ideal brick wall (only what lands in it reaches the output)"))
    for a, b in itertools.pairwise(mixers):
        if not any(s.kind == "filter" for s in plan.chain[a + 1:b]):
            records.append(WarningRecord("no-interstage-filter", f"chain.{a + 1}", None,
                                         f"chain.{a + 1}: no filter between {names[a]} and {names[b]}; every product "
                                         f"of {names[a]} reaches {names[b]} at 0 dB loss"))
    limits = resolve_limits(plan.requirement, plan.direction)
    return ChainSetup(plan, names, elements, ch, nodes, low, high, brick, limits, fan, records)
