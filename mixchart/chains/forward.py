"""Forward: every band the wanted signal makes on its way through the chain, with its level and path.

Each stage makes its products of every band it receives (:meth:`Element.forward`); levels
compose along the path, each stage applying its own table at its own drive and the filters
their least loss over each band.  After each stage a band is pruned only when its level is
provably below every limit at the output, by more than :data:`PRUNE_HEADROOM_DB`, whatever
follows: the stages after it are bounded by
their :meth:`Element.level_bound` (a filter never adds, a mixer's strongest product at that
drive, an amplifier's gain and harmonics), and the bound is checked against the strictest limit
in force at each channel.  Pruning never drops a band by order: the order caps are each stage's
``max_order``, and the result lists them.

The rows that reach the output are judged there: the level relative to the wanted output (dBc),
the margin against the limit in force at the band's frequency, and whether the band overlaps the
final passband.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..elements.base import Flow
from .setup import PRUNE_HEADROOM_DB, ChainSetup

__all__ = ["ForwardBlock", "forward_block", "path_texts"]


@dataclass
class ForwardBlock:
    """What one block of channels gives at the output.

    Attributes
    ----------
    flow : Flow
        The bands at the output (row 0 the wanted signal).
    history : list of Flow
        The flow after each stage (for reading paths back).
    margin_db, level_dbc : numpy.ndarray, shape (P, C)
        Each band's margin against its limit and its level relative to the wanted output.
    limit_text : numpy.ndarray of int, shape (P, C)
        Index into ``Limits.texts`` of the limit each margin is against.
    in_band : numpy.ndarray of bool, shape (P, C)
        Whether the band overlaps the final passband.
    explored, pruned : int
        Bands made (per channel, summed over stages) and bands dropped as provably below.
    """

    flow: Flow
    history: list[Flow]
    margin_db: np.ndarray
    level_dbc: np.ndarray
    limit_text: np.ndarray
    in_band: np.ndarray
    explored: int
    pruned: int


def _strictest_dbm(setup: ChainSetup, wanted_out_dbm: np.ndarray) -> np.ndarray:
    """The lowest output level any limit allows at each channel, dBm (C,)."""
    lim = setup.limits
    dbc = lim.pieces_limit[~lim.pieces_dbm]
    dbm = lim.pieces_limit[lim.pieces_dbm]
    low = np.full(wanted_out_dbm.shape, np.inf)
    if dbc.size:
        low = np.minimum(low, wanted_out_dbm + dbc.min())
    if dbm.size:
        low = np.minimum(low, dbm.min())
    return low


def _judge(setup: ChainSetup, flow: Flow, wanted_out_dbm: np.ndarray, pass_low, pass_high):
    """Margins of the output bands: against each limit piece the band overlaps, the smallest."""
    lim = setup.limits
    level_dbc = flow.level_dbm - wanted_out_dbm[None, :]
    margin = np.full(level_dbc.shape, np.inf)
    which = np.zeros(level_dbc.shape, dtype=int)
    for j in range(lim.n_pieces):
        hit = lim.piece_hits(j, flow.low_hz, flow.high_hz)[0]
        if not hit.any():
            continue
        level = flow.level_dbm if lim.pieces_dbm[j] else level_dbc
        m = np.where(hit, lim.pieces_limit[j] - level, np.inf)
        better = m < margin
        margin = np.where(better, m, margin)
        which = np.where(better, 1 + j, which)
    in_band = (flow.high_hz >= pass_low[None, :]) & (flow.low_hz <= pass_high[None, :])
    return margin, level_dbc, which, in_band


def forward_block(setup: ChainSetup, rows: slice, *, prune: bool = True) -> ForwardBlock:
    """Carry the wanted signal of the channels ``rows`` through the chain and judge the output.

    Parameters
    ----------
    setup : ChainSetup
    rows : slice
        The block's channels.
    prune : bool
        Drop bands provably below every limit (the default); False keeps every band (the
        tests compare the two).

    Returns
    -------
    ForwardBlock
    """
    nodes = setup.block_nodes(rows)
    node0 = nodes[0]
    half = 0.5 * node0.bandwidth_hz
    flow = Flow((node0.f_hz - half)[None, :], (node0.f_hz + half)[None, :], node0.level_dbm[None, :].copy(),
                node0.inverted[None, :].copy(), np.array([-1]), np.array(["input"], dtype=object),
                np.zeros(1, dtype=int), np.ones(1))
    wanted_out = nodes[-1].level_dbm
    floor = _strictest_dbm(setup, wanted_out) - PRUNE_HEADROOM_DB
    explored = pruned = 0
    history = []
    elements = setup.elements
    for i, element in enumerate(elements):
        flow = element.forward(flow, nodes[i], nodes[i + 1])
        explored += flow.n_rows - 1
        if setup.brick_wall and i == len(elements) - 1:
            inside = (flow.high_hz >= setup.pass_low_hz[rows][None, :]) & (flow.low_hz <= setup.pass_high_hz[rows])
            flow.level_dbm = np.where(inside, flow.level_dbm, -np.inf)
        if prune:
            bound = flow.level_dbm
            for later in elements[i + 1:]:
                bound = later.level_bound(bound)
            keep = (bound >= floor[None, :]).any(axis=1)
            keep[0] = True
            pruned += int((~keep).sum())
            if not keep.all():
                flow = flow.take(np.flatnonzero(keep))
        history.append(flow)
    margin, level_dbc, which, in_band = _judge(setup, flow, wanted_out, setup.pass_low_hz[rows],
                                               setup.pass_high_hz[rows])
    margin[0] = np.inf  # the wanted signal itself
    return ForwardBlock(flow, history, margin, level_dbc, which, in_band, explored, pruned)


def path_texts(setup: ChainSetup, history: list[Flow], *, with_gain: bool = False):
    """Each output row's path, as text, and the stage that made it (where it left the wanted signal).

    Returns
    -------
    texts : list of str
        For instance ``"(1,-1) in mixer 1, then (2,+1) in mixer 2"``; row 0 is ``"wanted"``.
    origin : numpy.ndarray of int
        Index of the stage where each row's path leaves the wanted signal (-1 for row 0).
    gain : numpy.ndarray, shape (P,)
        Only with ``with_gain``: ``|d f_out / d f_in|`` of each row's whole path (the product of
        its steps' gains; 0 for a line that does not move with the input, such as an LO's).
    """
    n_rows = history[-1].n_rows
    index = np.arange(n_rows)
    ancestors = [None] * len(history)
    for i in range(len(history) - 1, -1, -1):
        ancestors[i] = index
        parent = history[i].parent[np.maximum(index, 0)]
        index = np.where(index >= 0, parent, -1)
    gain = np.ones(n_rows)
    for i, flow in enumerate(history):
        if flow.gain is not None:
            a = ancestors[i]
            gain = np.where(a >= 0, gain * flow.gain[np.maximum(a, 0)], gain)
    origin = np.full(n_rows, -1)
    for i in range(len(history)):
        # the stage where the row is first not row 0 (a leakage line is made there: its parent is -1)
        fresh = (origin < 0) & (ancestors[i] > 0)
        origin[fresh] = i
    texts = []
    for r in range(n_rows):
        if r == 0:
            texts.append("wanted")
            continue
        parts = []
        for i in range(origin[r], len(history)):
            a = ancestors[i][r]
            if a < 0:
                continue
            step = history[i].step[a]
            if step:
                parts.append(f"{step} in {setup.names[i]}")
        texts.append(", then ".join(parts) if parts else f"passed by {setup.names[origin[r]]}")
    if with_gain:
        return texts, origin, gain
    return texts, origin
