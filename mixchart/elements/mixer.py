"""A mixer stage: its own LO (tracking, fixed, on a step grid), its IF passband, level table and isolations.

Every band entering the stage makes the products ``|m·f + s·n·f_LO|`` (m >= 1, n >= 0,
m + n up to the stage's order cap, s = +1 sum, -1 difference), each at the level the stage's
level table gives at that band's own drive:
``out = drive - conversion loss + level_dbc(m, n, drive)``, which moves ``m`` dB per dB of
drive.  The LO's own lines ``(0, n)`` come from the table's leakage entries, once per stage
(their level does not depend on any input).  The wanted output is the (1,1) product of the
wanted signal that lands in the IF passband: the sum when only the sum does, else the
difference (the rule of the single-conversion engine).  For a stage fed at its IF port (a
transmitter's mixer) a tracking LO puts the wanted output on the channel.

References
----------
Product levels relative to the wanted output move (m - 1) dB per dB of drive: the power-series
result for the m-th harmonic of the drive (e.g. Maas, *Microwave Mixers*, 2nd ed., ch. 6).
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from ..context import capped
from ..errors import PlanError
from ..filters import FilterSpec, build_filter
from ..mixer_model import MixerSpec, assumed_figures, build_table
from ..physics.bands import inverse_mix_band, mix_band
from ..plan import MAX_ORDER, IfBand, LoSetting
from ..units import format_frequency
from .base import ElementKind, Flow, Inverse, Node, WarningRecord, bound_from_maps

__all__ = ["MixerStage", "MixerElement", "KIND", "stage_family"]


class MixerStage(BaseModel):
    """A mixer with its own LO, IF passband, level model and isolations."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)

    kind: Literal["mixer"] = "mixer"
    name: str | None = Field(default=None, min_length=1, max_length=60,
                             description="Name in paths and tables; default 'mixer <k>'.")
    input_port: Literal["rf", "if"] = Field(
        default="rf", description="'rf': the signal enters at the RF port and leaves at the IF port (a receiver's "
        "mixer); 'if': it enters at the IF port and leaves at the RF port (a transmitter's mixer).")
    lo: LoSetting = Field(default_factory=LoSetting, description="How this stage's LO is set.")
    if_: IfBand = Field(alias="if", description="This stage's IF passband: where its wanted output lands "
                        "(input_port 'rf') or where its wanted input sits (input_port 'if').")
    mixer: MixerSpec = Field(default_factory=MixerSpec, description="The mixer's level model and isolations.")
    lo_filter: FilterSpec | None = Field(default=None, description="Filter on the LO (its rejection of 2·f_LO "
                                         "sets the even-n floor), or null.")
    max_order: int | None = Field(default=None, ge=2, le=MAX_ORDER,
                                  description="This stage's order cap m+n; null: the plan's max_order.")


def stage_family(max_order: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The products a stage makes of each input band: (m, n, s) with m >= 1, n >= 0, m + n <= max_order.

    Returns
    -------
    m, n, sign : numpy.ndarray of int
        ``sign`` is +1 (sum) and -1 (difference) for n >= 1, and +1 alone for n = 0.
    """
    rows = [(m, n, s) for m in range(1, max_order + 1) for n in range(max_order + 1 - m)
            for s in ((1,) if n == 0 else (-1, 1))]
    m, n, s = (np.array(col, dtype=int) for col in zip(*rows, strict=True))
    return m, n, s


def _step_text(m: int, n: int, s: int) -> str:
    return f"({m},{'+' if s > 0 else '-'}{n})" if n else f"({m},0)"


class MixerElement:
    """The element of a :class:`MixerStage`."""

    kind = "mixer"

    def __init__(self, spec: MixerStage, index: int, name: str, plan, base_dir) -> None:
        self.spec, self.index, self.name = spec, index, name
        self.field = f"chain.{index}"
        self.base_dir = base_dir
        self.max_order = spec.max_order or plan.max_order
        self.direction = "down" if spec.input_port == "rf" else "up"
        self.m, self.n, self.sign = stage_family(self.max_order)
        self.steps = np.array([_step_text(*k) for k in zip(self.m, self.n, self.sign, strict=True)], dtype=object)
        self.lo_filter = (None if spec.lo_filter is None else
                          build_filter(spec.lo_filter, base_dir=base_dir, field_prefix=self.field + ".lo_filter."))
        self.table = None
        self._records: list[WarningRecord] = []

    # ------------------------------------------------------------ the LO and the wanted product
    def lo_hz(self, node: Node) -> np.ndarray:
        """This stage's LO for each channel, on its grid, Hz."""
        lo_set, f = self.spec.lo, node.f_hz
        if lo_set.mode == "fixed":
            lo = np.full_like(f, float(lo_set.fixed_hz))
        elif self.spec.input_port == "rf":
            lo = f + self.spec.if_.center_hz if lo_set.side == "high" else f - self.spec.if_.center_hz
        else:  # fed at the IF port: the LO puts the wanted output on the channel
            lo = node.channel_hz + f if lo_set.side == "high" else node.channel_hz - f
        if lo_set.step_hz is not None:
            lo = np.floor(lo / lo_set.step_hz + 0.5) * lo_set.step_hz  # nearest, exact halves up (as the plan)
        if np.any(lo <= 0):
            bad = float(lo[lo <= 0][0])
            raise PlanError(f"{self.field}.lo: puts the LO of {self.name} at {format_frequency(bad)} (<= 0 Hz); "
                            "change its side, its IF or its fixed frequency")
        return lo

    def wanted_sign(self, node: Node, lo: np.ndarray) -> np.ndarray:
        """+1 where the wanted output is the sum ``f + f_LO``, -1 where it is the difference."""
        f, band = node.f_hz, self.spec.if_
        if self.spec.input_port == "rf":
            summ, diff = f + lo, np.abs(f - lo)
            in_if = lambda x: (x >= band.f_low_hz) & (x <= band.f_high_hz)  # noqa: E731
            return np.where(in_if(summ) & ~in_if(diff), 1, -1)
        target = node.channel_hz if self.spec.lo.mode == "tracking" else None
        if target is None:
            return np.ones_like(f, dtype=int)  # a fixed LO fed at the IF port: the usual sum (up) conversion
        return np.where(np.abs(f + lo - target) <= np.abs(np.abs(f - lo) - target), 1, -1)

    def prepare(self, node: Node) -> None:
        """Build the level table once, from the LO of every channel (the LO filter's 2·f_LO rejection)."""
        lo = self.lo_hz(node)
        h2_rejection = 0.0
        if self.lo_filter is not None:
            fc = lo if self.lo_filter.tracks_channel else None
            field = self.field + ".lo_filter"
            h2_rejection = float(np.min(capped(self.lo_filter.atten_db(2 * lo, fc), field, lo)
                                        - capped(self.lo_filter.atten_db(lo, fc), field, lo)))
        self.table = build_table(self.spec.mixer, self.max_order, base_dir=self.base_dir, direction=self.direction,
                                 lo_h2_rejection_db=h2_rejection, signal_dbm=float(np.max(node.level_dbm)))
        self._records = [WarningRecord("assumed-mixer-figure", f"{self.field}.mixer", text,
                                       f"{self.field}.mixer: {text} assumed for {self.name} (the topology's "
                                       "typical data-sheet figure; give it to replace)")
                         for text in assumed_figures(self.spec.mixer, self.direction)]
        self._records += [WarningRecord("drive", f"{self.field}.mixer", None, f"{self.field}.mixer: {text}")
                          for text in self.table.drive_warnings(node.level_dbm, self.spec.mixer.lo_drive_dbm)]
        # the affine level map of every product: out = slope·drive + offset (dB)
        ref = self.table.rf_ref_dbm
        at_ref = self.table.level_dbc_at(self.m, self.n, ref, floored=False)
        table_slope = self.table.level_dbc_at(self.m, self.n, ref + 1.0, floored=False) - at_ref
        self.slope = 1.0 + table_slope
        self.offset = -self.table.conversion_loss_db + at_ref - table_slope * ref

    def wanted(self, node: Node) -> Node:
        lo = self.lo_hz(node)
        sign = self.wanted_sign(node, lo)
        raw = node.f_hz + sign * lo
        inverted = node.inverted ^ (raw < 0)
        level = node.level_dbm - self.table.conversion_loss_db
        lo_map = dict(node.lo_hz)
        lo_map[self.index] = lo
        return Node(node.channel_hz, np.abs(raw), level, inverted, node.bandwidth_hz, lo_map)

    # ------------------------------------------------------------ forward and inverse
    def forward(self, flow: Flow, node_in: Node, node_out: Node) -> Flow:
        lo = node_out.lo_hz[self.index]
        p, k = flow.n_rows, self.m.size
        m, n, s = self.m[None, :, None], self.n[None, :, None], self.sign[None, :, None]
        low, high, flipped = mix_band(flow.low_hz[:, None, :], flow.high_hz[:, None, :], lo[None, None, :], m, n, s)
        level = self.slope[None, :, None] * flow.level_dbm[:, None, :] + self.offset[None, :, None]
        inverted = flow.inverted[:, None, :] ^ flipped
        c = lo.size
        low, high, level, inverted = (a.reshape(p * k, c) for a in (low, high, level, inverted))
        parent = np.repeat(np.arange(p), k)
        step = np.tile(self.steps, p)
        order = np.tile(self.m + self.n, p)
        # the wanted output: row 0's (1,1) product of the wanted sign, moved to the top
        s_w = self.wanted_sign(node_in, lo)
        k_minus, k_plus = (int(np.flatnonzero((self.m == 1) & (self.n == 1) & (self.sign == sg))[0]) for sg in (-1, 1))
        w = np.where(s_w > 0, k_plus, k_minus)  # per channel: its column among row 0's products
        cols = np.arange(c)
        low_w, high_w = low[w, cols], high[w, cols]
        # the LO's own lines (0, n): one set per stage, at the level its leakage entries give
        n_lo = np.arange(1, self.max_order + 1)
        leak = self.table.level_dbc_at(np.zeros_like(n_lo)[:, None], n_lo[:, None], node_in.level_dbm[None, :],
                                       floored=False)
        leak_level = node_in.level_dbm[None, :] - self.table.conversion_loss_db + leak
        leak_f = n_lo[:, None] * lo[None, :]
        # row 0's wanted product now sits at the top: take it out of the product rows
        if np.all(w == w[0]):
            rows = np.flatnonzero(np.arange(p * k) != w[0])
        else:  # the wanted sign changes within the block: keep both rows, each muted where it is the wanted
            rows = np.arange(p * k)
            level[w, cols] = -np.inf
        return Flow(
            np.vstack([low_w, low[rows], leak_f]),
            np.vstack([high_w, high[rows], leak_f]),
            np.vstack([node_out.level_dbm, level[rows], leak_level]),
            np.vstack([node_out.inverted, inverted[rows], np.zeros(leak_f.shape, dtype=bool)]),
            np.concatenate([[0], parent[rows], np.full(n_lo.size, -1)]),
            np.concatenate([[_step_text(1, 1, int(s_w[0]))], step[rows], [f"LO (0,{j})" for j in n_lo]]).astype(object),
            np.concatenate([[2], order[rows], n_lo]),
            np.concatenate([[1.0], np.tile(self.m.astype(float), p)[rows], np.zeros(n_lo.size)]),
        )

    def level_maps(self) -> list[tuple[float, float]]:
        return [(float(sl), float(self.offset[self.slope == sl].max())) for sl in np.unique(self.slope)]

    def level_bound(self, level_dbm: np.ndarray) -> np.ndarray:
        return bound_from_maps(self.level_maps(), level_dbm)

    def inverse(self, low_hz: np.ndarray, high_hz: np.ndarray, node_in: Node, node_out: Node) -> Inverse:
        lo = node_out.lo_hz[self.index]
        r, k = low_hz.shape[0], self.m.size
        m, n, s = self.m[None, :, None], self.n[None, :, None], self.sign[None, :, None]
        la, ha, lb, hb, valid = inverse_mix_band(low_hz[:, None, :], high_hz[:, None, :], lo[None, None, :], m, n, s)
        c = lo.size
        # stack branch a then branch b: (2, R, K, C) -> (2·R·K, C)
        low = np.stack([la, lb]).reshape(2 * r * k, c)
        high = np.stack([ha, hb]).reshape(2 * r * k, c)
        ok = valid.reshape(2 * r * k, c)
        slope = np.tile(self.slope, 2 * r)
        offset = np.broadcast_to(np.tile(self.offset, 2 * r)[:, None], (2 * r * k, c))
        source = np.tile(np.repeat(np.arange(r), k), 2)
        # branch a keeps the product's sign, branch b is its negative: (-m, -s·n), e.g. (-1,+1) = LO - f
        neg = np.array([_step_text(-m, n, -s) for m, n, s in zip(self.m, self.n, self.sign, strict=True)],
                       dtype=object)
        step = np.concatenate([np.tile(self.steps, r), np.tile(neg, r)])
        order = np.tile(self.m + self.n, 2 * r)
        freq = np.concatenate([np.tile(self.m.astype(float), r), -np.tile(self.m.astype(float), r)])
        shift = np.broadcast_to(s * n * lo[None, None, :], (r, k, c))  # f_out = ±(m·f + shift)
        freq_offset = np.stack([shift, -shift]).reshape(2 * r * k, c)
        return Inverse(low, high, ok, slope, offset, source, step, order, freq, freq_offset)

    def warnings(self) -> list[WarningRecord]:
        return list(self._records)


def _build(spec: MixerStage, index: int, name: str, plan, base_dir) -> MixerElement:
    return MixerElement(spec, index, name, plan, base_dir)


KIND = ElementKind(kind="mixer", spec=MixerStage, build=_build,
                   form_fields=("name", "input_port", "lo", "if", "mixer", "lo_filter", "max_order"), words="mixer")
