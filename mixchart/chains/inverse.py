"""Inverse: every input band a receiver chain hears in its final passband, and its rejection.

Starting from the final passband, each stage from the last to the first lists the input bands
that reach the bands at its output (:meth:`Element.inverse`): a mixer's responses
``|n·f_LO ± f_out| / m`` (both branches), an ADC's aliases ``k·fs ± f`` (and their ADC-harmonic
sources), an amplifier's harmonic sources, a filter passing the band with its least loss over it.
At the chain input this gives, for every path, the band an unwanted input must sit in to be
heard, and the affine map of its level (``out = S·in + C``: each stage's map is affine in dB, so
is their composition).  The input-referred rejection is the input level giving an output equal
to the wanted output, less the wanted input level: ``(W_out - C) / S - P_wanted``; its margin is
that less ``response_rejection_db``.  This generalises the single-conversion rule
``(P_u - P_w) - level/m`` to several stages.

Named responses: a path that follows the wanted conversion at every stage but one is named for
that stage's step: ``image`` (the other (1,1) branch), ``half-IF`` ((2,2)), ``IF feedthrough``
((1,0)), ``IF/m feedthrough`` ((m,0): an input at IF/m whose m-th harmonic is the IF); at a
later mixer reached through the earlier ones it is that mixer's image *at RF*
(the second image).  An input band that covers the wanted channel is the wanted signal or a
co-channel signal: it has no margin (+inf), as in the single-conversion engine.

The interferer's bandwidth widens the band at the chain input (where the preselector acts);
filters between mixers are judged on the band of a CW interferer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .setup import PRUNE_HEADROOM_DB, ChainSetup

__all__ = ["InverseBlock", "inverse_block"]

#: Lowest band edge handed to a filter, Hz: a band reaching 0 Hz is looked at from here.
_LOWEST_HZ = 1.0


@dataclass
class InverseBlock:
    """Responses of one block of channels: R input bands (paths) x C channels.

    Attributes
    ----------
    stage, path : numpy.ndarray of str, shape (R,)
        The stage that hears each input band, and its name and path.
    low_hz, high_hz : numpy.ndarray, shape (R, C)
        The input band at the chain input, Hz.
    rejection_db, level_dbc, margin_db : numpy.ndarray, shape (R, C)
        Input-referred rejection, output level at the interferer level (dBc) and margin
        (+inf where the band is empty or co-channel).
    explored, pruned : int
        Input bands looked at, summed over the stages, and those dropped as provably rejected
        by more than the limit plus the headroom.
    """

    stage: np.ndarray
    path: np.ndarray
    low_hz: np.ndarray
    high_hz: np.ndarray
    rejection_db: np.ndarray
    level_dbc: np.ndarray
    margin_db: np.ndarray
    explored: int
    pruned: int
    freq_slope: np.ndarray  # (R,): d f_out / d f_in of each path, signed
    anchor_hz: np.ndarray  # (R, C): the input that lands on the passband's centre along the path


def _prefix_maps(setup: ChainSetup) -> list[dict[float, float]]:
    """For each stage i, the best case of stages 0..i-1 composed: slope -> highest offset (dB)."""
    out = [{1.0: 0.0}]
    for element in setup.elements:
        nxt: dict[float, float] = {}
        for s, c in out[-1].items():
            for s_e, c_e in element.level_maps():
                key = s * s_e
                nxt[key] = max(nxt.get(key, -np.inf), s_e * c + c_e)
        out.append(nxt)
    return out


def _wanted_steps(setup: ChainSetup, rows: slice) -> list[str | None]:
    """The inverse-step text of the wanted conversion at each stage (None where nothing is chosen)."""
    from ..elements.mixer import _step_text

    out: list[str | None] = []
    for i, element in enumerate(setup.elements):
        if element.kind == "mixer":
            node_in = setup.nodes[i]
            lo = setup.nodes[i + 1].lo_hz[i][rows][0]
            f = node_in.f_hz[rows][0]
            s_w = int(element.wanted_sign(_first(node_in, rows), np.array([lo]))[0])
            out.append(_step_text(1, 1, s_w) if f + s_w * lo >= 0 else _step_text(-1, 1, -s_w))
        elif element.kind == "adc":
            out.append(f"alias zone {element.spec.nyquist_zone}")
        else:
            out.append("")
    return out


def _first(node, rows: slice):
    from ..elements.base import Node

    i = rows.start or 0
    return Node(node.channel_hz[i:i + 1], node.f_hz[i:i + 1], node.level_dbm[i:i + 1], node.inverted[i:i + 1],
                node.bandwidth_hz, {k: v[i:i + 1] for k, v in node.lo_hz.items()})


def _response_name(setup: ChainSetup, steps: list[str], wanted: list[str | None]) -> str:
    """'image of mixer 2', 'half-IF of mixer 1', ... or the path itself when several stages deviate."""
    off = [i for i, (s, w) in enumerate(zip(steps, wanted, strict=True)) if s != w]
    parts = [f"{s} in {setup.names[i]}" for i, s in enumerate(steps) if s]
    path = ", then ".join(parts)
    if len(off) != 1:
        return path
    i = off[0]
    step, name = steps[i], setup.names[i]
    mixers_before = any(e.kind == "mixer" for e in setup.elements[:i])
    if setup.elements[i].kind == "mixer":
        m, n = (int(x) for x in step.strip("()").replace("+", "").split(","))
        if abs(m) == 1 and abs(n) == 1:
            label = f"image of {name}" + (" (second image, at RF)" if mixers_before else "")
        elif abs(m) == 2 and abs(n) == 2:
            label = f"half-IF of {name}"
        elif abs(m) == 1 and n == 0:
            label = f"IF feedthrough at {name}"
        elif n == 0:
            label = f"IF/{abs(m)} feedthrough at {name}"  # the input's m-th harmonic lands on the IF
        else:
            label = f"{step} response of {name}"
        return f"{label}: {path}"
    return f"{step} of {name}: {path}"  # an ADC's alias, an amplifier's harmonic


def inverse_block(setup: ChainSetup, rows: slice, *, prune: bool = True) -> InverseBlock:
    """The responses of the channels ``rows`` (a receiver chain).

    Parameters
    ----------
    setup : ChainSetup
    rows : slice
    prune : bool
        After each stage, drop the input bands whose rejection is provably above the limit plus
        :data:`~mixchart.chains.setup.PRUNE_HEADROOM_DB` whatever the stages before it do (their
        best case: no filter loss, each stage's strongest level map).
    """
    plan = setup.plan
    nodes = setup.block_nodes(rows)
    low = setup.pass_low_hz[rows][None, :].copy()
    high = setup.pass_high_hz[rows][None, :].copy()
    c = low.shape[1]
    slope = np.ones(1)
    freq_slope = np.ones(1)  # d f_out / d f_in of each row's path so far, signed
    # the input that lands exactly on the passband's centre along each path (never clipped)
    anchor = 0.5 * (low + high)
    offset = np.zeros((1, c))
    steps: list[np.ndarray] = []  # per stage, from the last: each row's step
    sources: list[np.ndarray] = []
    b_u = float(plan.signal.interferer_bandwidth_hz or 0.0)
    first_mixer = next(i for i, e in enumerate(setup.elements) if e.kind == "mixer")
    wanted_out = nodes[-1].level_dbm
    p_w = plan.signal.level_dbm
    ceiling = setup.limits.rejection_db + PRUNE_HEADROOM_DB
    prefix = _prefix_maps(setup)
    explored = pruned = 0
    alive = np.ones((1, c), dtype=bool)
    for i in range(len(setup.elements) - 1, -1, -1):
        element = setup.elements[i]
        widen = 0.5 * b_u if (element.kind == "filter" and i < first_mixer) else 0.0
        inv = element.inverse(low - widen, high + widen, nodes[i], nodes[i + 1])
        ok = inv.valid & alive[inv.source]
        # compose: out = slope_suffix·(s·x + o) + offset_suffix
        new_offset = slope[inv.source][:, None] * inv.offset_db + offset[inv.source]
        new_slope = slope[inv.source] * inv.slope
        explored += int(ok.any(axis=1).sum())
        if prune:
            # The lowest rejection any prefix (s, c) could give is min over (s, c) of (A - c)/s - P_w with
            # A = (W - C_suf)/S_suf; it rises with A, so over the row's live channels the lowest A decides.
            a = np.where(ok, (wanted_out[None, :] - new_offset) / new_slope[:, None], np.inf).min(axis=1)
            low_r = np.full(a.shape, np.inf)
            for s_p, c_p in prefix[i].items():
                low_r = np.minimum(low_r, (a - c_p) / s_p - p_w)
            weak = ok.any(axis=1) & (low_r > ceiling)
            pruned += int(weak.sum())
            ok &= ~weak[:, None]
        keep = np.flatnonzero(ok.any(axis=1))
        src = inv.source[keep]
        alive = ok[keep]
        # empty bands stand at 1 Hz (never NaN: a filter is never asked about one) and stay dead
        low = np.where(alive, np.maximum(inv.low_hz[keep] + widen, _LOWEST_HZ), _LOWEST_HZ)
        high = np.where(alive, np.maximum(inv.high_hz[keep] - widen, _LOWEST_HZ), _LOWEST_HZ)
        offset, slope = new_offset[keep], new_slope[keep]
        step_freq = np.ones(inv.source.size) if inv.freq_slope is None else inv.freq_slope
        freq_slope = freq_slope[src] * step_freq[keep]
        step_off = 0.0 if inv.freq_offset_hz is None else inv.freq_offset_hz[keep]
        anchor = (anchor[src] - step_off) / step_freq[keep][:, None]
        steps.append(inv.step[keep])
        sources.append(src)
    # each input row's step at every stage, read from the input (the last step taken) to the output
    q = low.shape[0]
    index = np.arange(q)
    per_stage = {}
    for depth in range(len(steps) - 1, -1, -1):
        stage = len(setup.elements) - 1 - depth
        per_stage[stage] = steps[depth][index]
        index = sources[depth][index]
    u = plan.signal.interferer_level_dbm if plan.signal.interferer_level_dbm is not None else p_w
    rejection = (wanted_out[None, :] - offset) / slope[:, None] - p_w
    level_dbc = slope[:, None] * u + offset - wanted_out[None, :]
    margin = rejection - setup.limits.rejection_db
    ch = nodes[0].channel_hz
    half = 0.5 * plan.signal.bandwidth_hz
    co = (low <= (ch + half)[None, :]) & (high >= (ch - half)[None, :])
    margin = np.where(alive & ~co, margin, np.inf)
    wanted = _wanted_steps(setup, rows)
    n_st = len(setup.elements)
    names = np.empty(q, dtype=object)
    origin = np.zeros(q, dtype=int)
    cache = setup.cache.setdefault("response_names", {})
    for r, key in enumerate(zip(*(per_stage[st] for st in range(n_st)), strict=True)):
        key = (key, tuple(wanted))
        if key not in cache:
            steps = [str(x) for x in key[0]]
            cache[key] = (_response_name(setup, steps, wanted), _origin(steps, wanted))
        names[r], origin[r] = cache[key]
    stage_of = np.asarray(setup.names, dtype=object)[origin] if q else np.array([], dtype=object)
    return InverseBlock(stage_of, names, low, high, rejection, level_dbc, margin, explored, pruned, freq_slope,
                        anchor)


def _origin(steps: list[str], wanted: list[str | None]) -> int:
    """The first stage whose step is not the wanted conversion (the stage that hears the input)."""
    for i, (s, w) in enumerate(zip(steps, wanted, strict=True)):
        if s != w:
            return i
    return 0
