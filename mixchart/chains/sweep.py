"""The chunked sweep of a chain: blocks of channels through the forward and inverse analyses.

:func:`analyse_chain` is the one entry point from a chain plan to a :class:`ChainResult`.  The
channels go through in blocks sized so that no block holds more than
:data:`~mixchart.chains.setup.BLOCK_ELEMENTS` bands x channels, whatever the order caps; each
block's output bands are judged, and every path keeps its worst channel across the sweep.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from ..models.chain import ChainPlan
from .forward import forward_block, path_texts
from .inverse import inverse_block
from .result import CHANNEL_COLUMNS, NODE_COLUMNS, ChainResult, ChainSummary
from .setup import ChainSetup, set_up

__all__ = ["analyse_chain", "channel_rows", "MAX_HIT_ROWS"]

#: Most failing (path, channel) rows kept (the worst ones).
MAX_HIT_ROWS = 10_000
#: The end-to-end plane draws each path at every channel where it is within this of its limit.
TRACK_MARGIN_DB = 10.0
#: Most (path, channel) points kept for the end-to-end plane (the worst ones).
MAX_TRACK_ROWS = 50_000


def _kind_of_step(path: str) -> str:
    return "LO leakage" if path.startswith("LO (0,") else "product"


def _reduce(kind: str | np.ndarray, stage: np.ndarray, path: np.ndarray, ch: np.ndarray, first: int,
            margin: np.ndarray, level_dbc: np.ndarray, rejection: np.ndarray, low: np.ndarray, high: np.ndarray,
            in_band: np.ndarray, limit: np.ndarray, worst: dict[str, np.ndarray],
            geometry) -> tuple[dict, dict]:
    """One block's (R, C) judged rows reduced to: each row at its worst channel, and its failing cells.

    Also updates ``worst`` (the per-channel worst margin, path and stage of the sweep) in place.
    Rows whose margin is +inf everywhere (nothing arrives) are left out.  ``geometry(ri, ci)``
    gives the ``freq_slope``, ``x_hz`` and ``y_hz`` of the cells picked (only those: a full (R, C)
    array of each would cost memory that the block sizing does not allow for).
    """
    r, c = margin.shape
    live = np.isfinite(margin).any(axis=1) if r else np.zeros(0, dtype=bool)
    rows = np.flatnonzero(live)
    cols = np.argmin(margin[rows], axis=1) if rows.size else np.zeros(0, dtype=int)
    kinds = np.asarray(kind, dtype=object)
    kinds = np.broadcast_to(kinds, (r,)) if kinds.ndim == 0 else kinds

    def cells(ri: np.ndarray, ci: np.ndarray) -> dict[str, np.ndarray]:
        return {"kind": kinds[ri], "stage": stage[ri], "path": path[ri], "channel_hz": ch[ci],
                "f_low_hz": low[ri, ci], "f_high_hz": high[ri, ci], "level_dbc": level_dbc[ri, ci],
                "rejection_db": rejection[ri, ci], "margin_db": margin[ri, ci],
                "limit": limit[ri, ci] if limit.ndim == 2 else limit[ri], "in_band": in_band[ri, ci],
                **geometry(ri, ci)}

    per_path = cells(rows, cols)
    per_path["n_failing_channels"] = (margin[rows] < 0).sum(axis=1)
    near_r, near_c = np.nonzero(margin < TRACK_MARGIN_DB)
    if near_r.size > MAX_TRACK_ROWS:
        keep = np.argpartition(margin[near_r, near_c], MAX_TRACK_ROWS)[:MAX_TRACK_ROWS]
        near_r, near_c = near_r[keep], near_c[keep]
    geo = geometry(near_r, near_c)
    worst["tracks"].append({
        "kind": kinds[near_r], "path": path[near_r], "channel_hz": ch[near_c],
        "x_hz": geo["x_hz"], "y_hz": geo["y_hz"], "margin_db": margin[near_r, near_c]})
    fail_r, fail_c = np.nonzero(margin < 0)
    if fail_r.size > MAX_HIT_ROWS:
        keep = np.argpartition(margin[fail_r, fail_c], MAX_HIT_ROWS)[:MAX_HIT_ROWS]
        fail_r, fail_c = fail_r[keep], fail_c[keep]
    hits = cells(fail_r, fail_c)
    if r:
        best = np.argmin(margin, axis=0)
        value = margin[best, np.arange(c)]
        span = slice(first, first + c)
        better = value < worst["margin"][span]
        worst["margin"][span] = np.where(better, value, worst["margin"][span])
        worst["path"][span] = np.where(better, path[best], worst["path"][span])
        worst["stage"][span] = np.where(better, stage[best], worst["stage"][span])
    return per_path, hits


def _forward_reduce(setup: ChainSetup, rows: slice, fwd, texts, origin, worst, gain) -> tuple[dict, dict]:
    ch = setup.channels_hz[rows]
    texts = np.asarray(texts, dtype=object)
    margin = fwd.margin_db  # row 0 (the wanted signal) and bands that do not arrive are at +inf already
    kinds = np.array([_kind_of_step(t) for t in texts], dtype=object)
    limit_texts = np.asarray(("",) + setup.limits.texts[1:], dtype=object)
    stage = np.asarray(setup.names, dtype=object)[np.maximum(origin, 0)]
    flow = fwd.flow

    def geometry(ri: np.ndarray, ci: np.ndarray) -> dict[str, np.ndarray]:
        return {"freq_slope": gain[ri] * np.where(flow.inverted[ri, ci], -1.0, 1.0), "x_hz": ch[ci],
                "y_hz": 0.5 * (flow.low_hz[ri, ci] + flow.high_hz[ri, ci])}

    return _reduce(kinds, stage, texts, ch, rows.start or 0, margin, fwd.level_dbc, _Negated(fwd.level_dbc),
                   flow.low_hz, flow.high_hz, fwd.in_band, _Indexed(limit_texts, fwd.limit_text), worst, geometry)


class _Negated:
    """``-array`` read cell by cell (no full negated copy)."""

    def __init__(self, array: np.ndarray) -> None:
        self.array = array
        self.ndim = array.ndim

    def __getitem__(self, key):
        return -self.array[key]


class _Indexed:
    """``table[codes]`` read cell by cell (no full (R, C) array of texts)."""

    def __init__(self, table: np.ndarray, codes: np.ndarray) -> None:
        self.table, self.codes = table, codes
        self.ndim = codes.ndim

    def __getitem__(self, key):
        return self.table[self.codes[key]]


def _response_geometry(inv, centre: np.ndarray):
    def geometry(ri: np.ndarray, ci: np.ndarray) -> dict[str, np.ndarray]:
        return {"freq_slope": inv.freq_slope[ri], "x_hz": inv.anchor_hz[ri, ci], "y_hz": centre[ci]}
    return geometry


class _PathTable:
    """Each path at its worst channel over the blocks seen so far; compacted as it grows (bounded memory)."""

    #: Rows held before a compaction (one row per path and block until then).
    COMPACT_ROWS = 200_000

    def __init__(self) -> None:
        self.parts: list[pd.DataFrame] = []
        self.rows = 0

    def add(self, columns: dict[str, np.ndarray]) -> None:
        part = pd.DataFrame(columns)
        self.parts.append(part)
        self.rows += len(part)
        if self.rows > self.COMPACT_ROWS:
            self.parts = [self._compact()]
            self.rows = len(self.parts[0])

    def _compact(self) -> pd.DataFrame:
        table = pd.concat(self.parts, ignore_index=True) if len(self.parts) > 1 else self.parts[0]
        if not len(table):
            return table
        fails = table.groupby(["kind", "path"], sort=False)["n_failing_channels"].sum()
        table = table.sort_values("margin_db", kind="stable").drop_duplicates(["kind", "path"]).copy()
        table["n_failing_channels"] = fails.loc[list(zip(table["kind"], table["path"], strict=True))].to_numpy()
        return table

    def frame(self) -> pd.DataFrame:
        """The table, worst first."""
        return self._compact().reset_index(drop=True)


def _worst_cells(parts: list[dict[str, np.ndarray]], limit: int) -> dict[str, np.ndarray]:
    """The ``limit`` worst failing cells of several blocks, as one set of columns."""
    joined = {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}
    margin = joined["margin_db"]
    if margin.size > limit:
        keep = np.argpartition(margin, limit)[:limit]
        joined = {k: v[keep] for k, v in joined.items()}
    return joined


def _passband_centre(setup: ChainSetup, rows: slice) -> np.ndarray:
    """The final passband's centre at each channel of a block (C,)."""
    return 0.5 * (setup.pass_low_hz[rows] + setup.pass_high_hz[rows])


def _nodes_frame(setup: ChainSetup) -> pd.DataFrame:
    rows = []
    kinds = ["input"] + [s.kind for s in setup.plan.chain]
    for j, node in enumerate(setup.nodes):
        lo = node.lo_hz.get(j - 1)
        sense = "mixed" if node.inverted.any() and not node.inverted.all() else (
            "inverted" if node.inverted.any() else "normal")
        rows.append({"node": j, "after": "chain input" if j == 0 else setup.names[j - 1], "kind": kinds[j],
                     "f_low_hz": float(node.f_hz.min()), "f_high_hz": float(node.f_hz.max()), "sense": sense,
                     "lo_low_hz": float(lo.min()) if lo is not None else np.nan,
                     "lo_high_hz": float(lo.max()) if lo is not None else np.nan,
                     "level_dbm": float(node.level_dbm.max())})
    return pd.DataFrame(rows, columns=list(NODE_COLUMNS))


def analyse_chain(plan: ChainPlan, *, base_dir: str | Path | None = None, prune: bool = True,
                  responses: bool = True, block_channels: int | None = None) -> ChainResult:
    """Sweep a chain plan: the wanted signal's products forward, the receiver's responses inverse.

    Parameters
    ----------
    plan : ChainPlan
        The plan (layout version 2).
    base_dir : str or pathlib.Path, optional
        Folder for relative file paths in the plan (its own folder, for a plan file).
    prune : bool
        Drop bands provably below every limit (the default; the count is reported).
    responses : bool
        Run the inverse search for a receiver (``direction 'down'``); a transmitter has none.
    block_channels : int, optional
        Channels per block; default: as many as the memory budget allows.

    Returns
    -------
    ChainResult

    Raises
    ------
    PlanError
        A stage the wanted signal cannot pass (named, with the field).
    SweepTooLargeError
        Order caps that would carry too many bands per channel.
    """
    setup = set_up(plan, base_dir)
    n = setup.channels_hz.size
    step = block_channels or setup.block_channels()
    paths = _PathTable()
    hits, explored, pruned, r_explored, r_pruned = [], 0, 0, 0, 0
    worst_all = {"margin": np.full(n, np.inf), "path": np.full(n, "", dtype=object),
                 "stage": np.full(n, "", dtype=object), "tracks": []}
    for start in range(0, n, step):
        rows = slice(start, min(n, start + step))
        width = rows.stop - rows.start
        fwd = forward_block(setup, rows, prune=prune)
        texts, origin, gain = path_texts(setup, fwd.history, with_gain=True)
        a, b = _forward_reduce(setup, rows, fwd, texts, origin, worst_all, gain)
        paths.add(a)
        hits.append(b)
        explored += fwd.explored * width  # counted per channel: the figure does not depend on the blocks
        pruned += fwd.pruned * width
        del fwd
        if responses and plan.direction == "down":
            inv = inverse_block(setup, rows, prune=prune)
            a, b = _reduce("response", inv.stage, inv.path, setup.channels_hz[rows], start, inv.margin_db,
                           inv.level_dbc, inv.rejection_db, inv.low_hz, inv.high_hz,
                           np.broadcast_to(True, inv.margin_db.shape),
                           np.full(inv.path.shape, setup.limits.texts[0], dtype=object), worst_all,
                           _response_geometry(inv, _passband_centre(setup, rows)))
            paths.add(a)
            hits.append(b)
            r_explored += inv.explored * width
            r_pruned += inv.pruned * width
        if len(hits) > 1:  # keep only the worst failing cells and plane points so far
            hits = [_worst_cells(hits, MAX_HIT_ROWS)]
        if len(worst_all["tracks"]) > 1:
            worst_all["tracks"] = [_worst_cells(worst_all["tracks"], MAX_TRACK_ROWS)]
    explored, pruned = round(explored / max(n, 1)), round(pruned / max(n, 1))
    r_explored, r_pruned = round(r_explored / max(n, 1)), round(r_pruned / max(n, 1))
    worst, worst_path, worst_stage = worst_all["margin"], worst_all["path"], worst_all["stage"]
    paths = paths.frame()
    hits = pd.DataFrame({k: np.concatenate([p[k] for p in hits]) for k in hits[0]})
    tracks = pd.DataFrame({k: np.concatenate([p[k] for p in worst_all["tracks"]]) for k in worst_all["tracks"][0]})
    tracks = tracks.sort_values("margin_db", kind="stable").head(MAX_TRACK_ROWS)
    tracks = tracks.sort_values(["kind", "path", "x_hz"], kind="stable").reset_index(drop=True)
    hits = hits.sort_values("margin_db", kind="stable").head(MAX_HIT_ROWS).reset_index(drop=True)
    out = setup.nodes[-1]
    channels = pd.DataFrame({"channel_hz": setup.channels_hz, "f_out_hz": out.f_hz, "inverted": out.inverted,
                             "worst_margin_db": worst, "worst_path": worst_path, "worst_stage": worst_stage},
                            columns=list(CHANNEL_COLUMNS))
    k = int(np.argmin(worst)) if n else 0
    inverted = "mixed" if out.inverted.any() and not out.inverted.all() else ("yes" if out.inverted.any() else "no")
    caps = tuple((name, int(getattr(e, "max_order", 0) or getattr(e, "max_harmonic", 0)))
                 for name, e in zip(setup.names, setup.elements, strict=True) if e.kind != "filter")
    summary = ChainSummary(
        worst_margin_db=float(worst[k]), worst_channel_hz=float(setup.channels_hz[k]), worst_path=str(worst_path[k]),
        limiting_stage=str(worst_stage[k]), spur_free_fraction=float(np.mean(worst >= 0)), n_channels=n,
        n_failing_channels=int(np.sum(worst < 0)), paths_explored=explored, paths_pruned=pruned,
        responses_explored=r_explored, responses_pruned=r_pruned, order_caps=caps, inverted=inverted)
    return ChainResult(plan=plan, channels_hz=setup.channels_hz, worst_margin_db=worst, summary=summary,
                       warnings=setup.warnings, paths=paths, channels=channels, nodes=_nodes_frame(setup), hits=hits,
                       tracks=tracks, pass_low_hz=setup.pass_low_hz, pass_high_hz=setup.pass_high_hz,
                       channel_rows=lambda index: channel_rows(setup, index, prune=prune, responses=responses))


def channel_rows(setup: ChainSetup, index: int, *, prune: bool = True, responses: bool = True) -> pd.DataFrame:
    """Every judged path of one channel (products, and responses for a receiver), worst first.

    Parameters
    ----------
    setup : ChainSetup
        The sweep's set-up (its elements and wanted signal, unchanged).
    index : int
        The channel, 0 to ``n_channels - 1``.
    """
    n = setup.channels_hz.size
    if not 0 <= index < n:
        raise IndexError(f"index: {index} is invalid; the sweep has channels 0 to {n - 1}")
    rows = slice(index, index + 1)
    scratch = {"margin": np.full(n, np.inf), "path": np.full(n, "", dtype=object),
               "stage": np.full(n, "", dtype=object), "tracks": []}
    fwd = forward_block(setup, rows, prune=prune)
    texts, origin, gain = path_texts(setup, fwd.history, with_gain=True)
    parts = [_forward_reduce(setup, rows, fwd, texts, origin, scratch, gain)[0]]
    if responses and setup.plan.direction == "down":
        inv = inverse_block(setup, rows, prune=prune)
        parts.append(_reduce("response", inv.stage, inv.path, setup.channels_hz[rows], index, inv.margin_db,
                             inv.level_dbc, inv.rejection_db, inv.low_hz, inv.high_hz,
                             np.broadcast_to(True, inv.margin_db.shape),
                             np.full(inv.path.shape, setup.limits.texts[0], dtype=object), scratch,
                             _response_geometry(inv, _passband_centre(setup, rows)))[0])
    frame = pd.DataFrame({k: np.concatenate([p[k] for p in parts]) for k in parts[0]})
    return frame.drop(columns="n_failing_channels").sort_values("margin_db", kind="stable").reset_index(drop=True)
