"""The sweep context of an evaluation and the filter losses as the analysis applies them.

:func:`build_context` works out, once per plan, the channels, the LO on its grid, the wanted
conversion of every channel, the built filters and level table and the requirement's limits;
the loss helpers turn a filter's attenuation into the relative losses the level model uses
(:mod:`mixchart.analysis` docstring).  Pure numpy; never imports a plotting library.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .errors import AnalysisError
from .filters import MAX_FILTER_LOSS_DB, Filter, build_filter  # the cap lives in filters (one home)
from .levels import LevelTable
from .mixer_model import build_table
from .plan import Plan
from .requirements import Limits, resolve_limits
from .units import format_frequency


def read_only(array: np.ndarray) -> np.ndarray:
    """A read-only copy of ``array`` (nothing else holds a writable alias of it)."""
    out = np.array(array, copy=True)
    out.setflags(write=False)
    return out


@dataclass(frozen=True)
class Context:
    """Everything the per-block evaluation needs, built once per plan."""

    plan: Plan
    table: LevelTable
    rf_filter: Filter | None
    if_filter: Filter | None
    channels_hz: np.ndarray
    lo_hz: np.ndarray
    f_in_hz: np.ndarray  # wanted centre at the mixer signal input
    f_out_hz: np.ndarray  # wanted output centre
    wanted_sign: np.ndarray
    out_low_hz: float  # output passband
    out_high_hz: float
    lo_filter: Filter | None = None  # its rejection of 2·f_LO lowers the even-n floor (mixer_model rule 2)
    limits: Limits | None = None  # the requirement's limits for this direction


def build_context(plan: Plan, base_dir: Path | None) -> Context:
    channels = plan.channels_hz()
    lo = plan.lo_hz()
    rf_filter = (None if plan.filters.rf is None
                 else build_filter(plan.filters.rf, base_dir=base_dir, field_prefix="filters.rf."))
    if_filter = (None if plan.filters.if_ is None
                 else build_filter(plan.filters.if_, base_dir=base_dir, field_prefix="filters.if."))
    lo_filter = (None if plan.filters.lo is None
                 else build_filter(plan.filters.lo, base_dir=base_dir, field_prefix="filters.lo."))
    strongest = plan.signal.level_dbm
    if plan.direction == "down" and plan.signal.interferer_level_dbm is not None:
        strongest = max(strongest, plan.signal.interferer_level_dbm)
    table = build_table(plan.mixer, plan.max_order, base_dir=base_dir, direction=plan.direction,
                        lo_h2_rejection_db=lo_h2_rejection_db(lo_filter, lo), signal_dbm=strongest)
    if plan.direction == "down":
        f_in = channels
        diff = np.abs(channels - lo)
        summ = channels + lo
        in_if = lambda f: (f >= plan.if_.f_low_hz) & (f <= plan.if_.f_high_hz)  # noqa: E731
        wanted_sign = np.where(in_if(summ) & ~in_if(diff), 1, -1)
        f_out = np.where(wanted_sign > 0, summ, diff)
        out_low, out_high = plan.if_.f_low_hz, plan.if_.f_high_hz
    else:
        f_out = channels
        # The IF input that gives the channel through (1,1): IF + LO (sum, channel above the LO),
        # IF - LO (difference, LO below the IF) or LO - IF (difference, LO above the IF); the one
        # nearest the IF centre is the wanted conversion (a fixed LO below a high IF gives IF - LO).
        # With the IF held (lo.grid_holds 'input', the physical case) the IF input is the one the
        # ideal, off-grid LO needs, and the output moves by the LO's grid error; with the output
        # held, the IF input is retuned so that the output stays on the channel.
        hold_output = plan.lo.grid_holds == "output"
        lo_for_if = lo if hold_output else plan.nominal_lo_hz(channels)
        candidates = np.stack([channels - lo_for_if, channels + lo_for_if, lo_for_if - channels])
        candidates = np.where(candidates > 0, candidates, np.inf)
        pick = np.argmin(np.abs(candidates - plan.if_.center_hz), axis=0)
        wanted_sign = np.where(pick == 0, 1, -1)
        f_in = np.take_along_axis(candidates, pick[None, :], axis=0)[0]
        if not hold_output:
            f_out = np.where(wanted_sign > 0, f_in + lo, np.abs(f_in - lo))
        half = plan.signal.bandwidth_hz / 2
        out_low, out_high = plan.rf.start_hz - half, plan.rf.stop_hz + half
    channels, lo, f_in, f_out, wanted_sign = (read_only(a) for a in (channels, lo, f_in, f_out, wanted_sign))
    return Context(plan, table, rf_filter, if_filter, channels, lo, f_in, f_out, wanted_sign, out_low, out_high,
                    lo_filter=lo_filter, limits=resolve_limits(plan.requirement, plan.direction))


def lo_h2_rejection_db(lo_filter: Filter | None, lo_hz: np.ndarray) -> float:
    """The LO filter's least extra rejection of the LO's second harmonic, dB, over every LO in use.

    ``min over channels of A(2·f_LO) - A(f_LO)`` (0 dB without an LO filter): the least is the
    worst case for the even-n residual floor the LO's second harmonic sets
    (:func:`mixchart.mixer_model.builtin_table`, rule 2).  A tracking LO filter is centred on the LO.
    """
    if lo_filter is None or lo_hz.size == 0:
        return 0.0
    fc = lo_hz if lo_filter.tracks_channel else None
    rel = (capped(lo_filter.atten_db(2.0 * lo_hz, fc), "filters.lo", 2.0 * lo_hz)
           - capped(lo_filter.atten_db(lo_hz, fc), "filters.lo", lo_hz))
    return float(np.min(rel))


def band_rel_atten(filt: Filter, f_low: np.ndarray, f_high: np.ndarray, f_ref: np.ndarray,
                    centre: np.ndarray | None, field: str) -> np.ndarray:
    """Output-filter loss of product bands [f_low, f_high] (Cb, K) less its loss at the wanted output, dB.

    A product occupying a band reaches the output through the band's least-loss point, so the
    loss it takes is the filter's least loss over the band (:meth:`Filter.least_atten_db`: exact
    for prototypes, tuned circuits and measured data, a lower bound for a cascade), never the
    loss at one chosen point, which an elliptic zero or a measured notch would make optimistic.
    """
    return band_atten(filt, f_low, f_high, centre, field) - point_atten(filt, f_ref, centre, field)[:, None]


def band_atten(filt: Filter, f_low: np.ndarray, f_high: np.ndarray, centre: np.ndarray | None,
               field: str) -> np.ndarray:
    """Least loss of ``filt`` over bands [f_low, f_high] (Cb, K), dB, capped; ``centre`` (Cb,) if it tracks."""
    fc = None
    if filt.tracks_channel and centre is not None:
        fc = np.broadcast_to(np.asarray(centre, dtype=float)[:, None], np.broadcast_shapes(f_low.shape, f_high.shape))
    return capped(filt.least_atten_db(f_low, f_high, fc), field, f_low)


def point_atten(filt: Filter, f_hz: np.ndarray, centre: np.ndarray | None, field: str) -> np.ndarray:
    """Loss of ``filt`` at ``f_hz`` (Cb,), dB, capped; ``centre`` (Cb,) if it tracks."""
    fc = centre if (filt.tracks_channel and centre is not None) else None
    return capped(filt.atten_db(f_hz, fc), field, f_hz)


def mask_margins(ctx: Context, level: np.ndarray, filt: Filter | None, p_low: np.ndarray, p_high: np.ndarray,
                  f_out: np.ndarray, centre: np.ndarray | None, field: str, wanted_out_dbm: np.ndarray,
                  out: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A transmitter's product margins against its emission mask, written into ``out`` (Cb, K).

    Each product band is cut into the mask's pieces (segments and the gaps between them); each
    part is judged against its piece's limit after the output filter's loss over that part, and
    the margin is the smallest.  Returns the level (dBc), the filter loss and the piece index
    (+1, the ``requirement`` code) of the limiting part.
    """
    lim = ctx.limits
    shape = out.shape
    out.fill(np.inf)
    best_level = np.broadcast_to(level, shape).copy()
    best_atten = np.zeros(shape)
    best_req = np.ones(shape, dtype=np.int8)
    for i in range(lim.n_pieces):
        hit, low, high = lim.piece_hits(i, p_low, p_high)
        if not hit.any():
            continue
        if filt is None:
            atten = np.zeros(shape)
        else:
            atten = band_rel_atten(filt, np.where(hit, low, p_low), np.where(hit, high, p_high), f_out, centre,
                                    field)
        piece_level = level - atten
        piece_margin = lim.pieces_limit[i] - piece_level
        if lim.pieces_dbm[i]:
            piece_margin -= wanted_out_dbm
        better = hit & (piece_margin < out)
        np.copyto(out, piece_margin, where=better)
        np.copyto(best_level, piece_level, where=better)
        np.copyto(best_atten, atten, where=better)
        best_req[better] = i + 1
    return best_level, best_atten, best_req


def capped(atten_db: np.ndarray, field: str, f_hz: np.ndarray) -> np.ndarray:
    """Filter loss limited to :data:`MAX_FILTER_LOSS_DB` (an exact zero of a response is not infinite here).

    A NaN loss is an :class:`~mixchart.errors.AnalysisError` naming the filter (``field``) and the
    first frequency of ``f_hz`` where it happened: it never reaches a margin.
    """
    atten_db = np.asarray(atten_db, dtype=float)
    bad = np.isnan(atten_db)
    if bad.any():
        f_bad = float(np.broadcast_to(f_hz, atten_db.shape)[bad].flat[0])
        raise AnalysisError(
            f"{field}: the filter's loss at {format_frequency(f_bad)} is not a number (NaN); "
            "check its description there (a NaN is never reported as a margin)"
        )
    return np.minimum(atten_db, MAX_FILTER_LOSS_DB)


def loss_limits(ctx: Context, kind: np.ndarray, f_low: np.ndarray, f_high: np.ndarray,
                channel_hz: np.ndarray) -> np.ndarray:
    """What limited each row's filter loss, when not the filter's own response (text, '' if nothing).

    A row's band takes its filter's least loss over the band (:func:`band_atten`); that loss
    is limited by a filter's ultimate rejection where the response alone would reject more
    (``"filters.rf floor 70 dB (assumed)"``; "assumed" when the kind's common-practice default
    stood in for an unstated ``max_atten_db``), and follows the file's policy where measured
    data is read outside its span (``"filters.if outside its data: end values held"``).  With
    no filter described, the text says what was taken instead.  For a transmitter with an
    emission mask the whole product band is looked at, not only the mask piece that limited it.

    Parameters
    ----------
    ctx : Context
        The evaluation's context.
    kind : numpy.ndarray of int8
        0 for a product of the wanted signal, 1 for a receiver response, per row.
    f_low, f_high : numpy.ndarray of float
        Band edges of each row, Hz.
    channel_hz : numpy.ndarray of float
        Each row's channel, Hz (the centre of a channel-tracking filter).

    Returns
    -------
    numpy.ndarray of object
        One string per row.
    """
    down = ctx.plan.direction == "down"
    out = np.full(kind.shape, "", dtype=object)
    uses = [(ctx.rf_filter, "filters.rf", kind == 1)] if down else []
    uses.append((ctx.if_filter, "filters.if", kind == 0) if down else (ctx.rf_filter, "filters.rf", kind == 0))
    for filt, field, rows in uses:
        if not rows.any():
            continue
        if filt is None:
            text = ("no preselector: 0 dB taken" if field == "filters.rf" and down else
                    "no IF filter: ideal passband taken" if down else "no output filter: 0 dB taken")
            out[rows] = _join(out[rows], text)
            continue
        idx = np.flatnonzero(rows)
        low, high, ch = f_low[idx], f_high[idx], channel_hz[idx]
        for name, stage in _with_stages(filt, field):
            fc = ch if stage.tracks_channel else None
            if getattr(stage, "stages", None) is not None:  # the assembly's own floor, over its floored stages
                hit = _assembly_floored(stage, low, high, fc)
            else:
                hit = stage.least_atten_db(low, high, fc, floored=False) > stage.max_atten_db
            if hit.any():
                note = f"{name} floor {stage.max_atten_db:g} dB{' (assumed)' if stage.max_atten_is_default else ''}"
                out[idx[hit]] = _join(out[idx[hit]], note)
            f_hz = getattr(stage, "f_hz", None)
            if f_hz is not None:
                outside = (low < f_hz[0]) | (high > f_hz[-1])
                if outside.any():
                    policy = stage.spec.outside
                    text = ("end values held" if policy == "hold" else
                            f"floor {stage.spec.outside_atten_db:g} dB" if policy == "floor" else policy)
                    out[idx[outside]] = _join(out[idx[outside]], f"{name} outside its data: {text}")
    return out


def _with_stages(filt: Filter, field: str):
    """``filt`` and, for a cascade, each stage (recursively), with dotted field names."""
    yield field, filt
    for i, stage in enumerate(getattr(filt, "stages", None) or ()):
        yield from _with_stages(stage, f"{field}.stages.{i}")


def _assembly_floored(cascade: Filter, low: np.ndarray, high: np.ndarray, fc) -> np.ndarray:
    """Where a cascade's own floor, not its stages, set the least loss over each band."""
    stages_sum = sum(s.least_atten_db(low, high, fc if s.tracks_channel else None) for s in cascade.stages)
    return stages_sum > cascade.max_atten_db


def _join(texts: np.ndarray, note: str) -> np.ndarray:
    return np.asarray([note if not t else f"{t}; {note}" for t in texts], dtype=object)
