"""The sweep: :func:`evaluate` runs the whole tuning range in blocks of channels and keeps the worst."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from ..checks import floor_warnings, plan_warnings, span_warnings
from ..context import build_context
from ..errors import AnalysisError, one_line
from ..physics.products import is_inverted
from ..plan import Plan
from ..units import format_frequency
from .block import _Block, _evaluate_block
from .frames import _frame_from
from .result import Evaluation, Summary

__all__ = ["evaluate", "CHUNK_CHANNELS", "MAX_HIT_ROWS"]

#: Failing (channel, product) rows kept in :attr:`Evaluation.hits`; more are counted, not stored.
MAX_HIT_ROWS = 50_000
#: Channels processed per block; bounds peak memory whatever the sweep size.  Blocks of a
#: few hundred channels keep the (channels x products) temporaries in cache and out of
#: fresh-page faults: measured fastest for orders 7-15 on our machines.
CHUNK_CHANNELS = 512


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
