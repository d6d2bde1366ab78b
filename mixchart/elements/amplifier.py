"""An amplifier stage: gain, and the second and third harmonics its intercept points give.

For a memoryless power series ``y = a1·x + a2·x² + a3·x³`` driven by one tone, the second
harmonic sits 6.02 dB below the two-tone second-order product and the third 9.54 dB below the
third-order one, so at an output level ``P`` (dBm, per tone):

* ``HD2 = P - OIP2 - 6.02`` dBc,
* ``HD3 = 2·(P - OIP3) - 9.54`` dBc.

The k-th harmonic of a band ``[a, b]`` occupies ``[k·a, k·b]`` and grows k dB per dB of input.
Only each band's own harmonics are made: products between two bands (intermodulation) are not.

References
----------
Power-series distortion of a memoryless nonlinearity: Razavi, *RF Microelectronics*, 2nd ed.,
sec. 2.2 (harmonics and intermodulation of ``a1·x + a2·x² + a3·x³``); tests/test_chain_elements.py
checks both relations with a numpy FFT of the power series.
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from .base import ElementKind, Flow, Inverse, Node, WarningRecord, bound_from_maps

__all__ = ["AmplifierStage", "AmplifierElement", "KIND", "DEFAULT_OIP2_DBM", "DEFAULT_OIP3_DBM",
           "HD2_BELOW_IM2_DB", "HD3_BELOW_IM3_DB"]

#: Output intercepts assumed when a stage gives none, dBm: the low end of small-signal gain
#: blocks, so the assumed harmonics are on the strong side (from memory, no source).
DEFAULT_OIP2_DBM = 30.0
DEFAULT_OIP3_DBM = 20.0
#: 20·log10(2) and 20·log10(3): HD2 below IM2 and HD3 below IM3 (power series, see the module).
HD2_BELOW_IM2_DB = 20.0 * math.log10(2.0)
HD3_BELOW_IM3_DB = 20.0 * math.log10(3.0)


class AmplifierStage(BaseModel):
    """A gain stage (an LNA, an IF amplifier, a driver)."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)

    kind: Literal["amplifier"] = "amplifier"
    name: str | None = Field(default=None, min_length=1, max_length=60,
                             description="Name in paths and tables; default 'amplifier <k>'.")
    gain_db: float = Field(ge=-50.0, le=100.0, allow_inf_nan=False, description="Small-signal gain, dB.")
    oip2_dbm: float | None = Field(default=None, ge=-50.0, le=100.0, allow_inf_nan=False,
                                   description=f"Output second-order intercept, dBm; null: {DEFAULT_OIP2_DBM:g} "
                                   "dBm assumed (the result says so).")
    oip3_dbm: float | None = Field(default=None, ge=-50.0, le=100.0, allow_inf_nan=False,
                                   description=f"Output third-order intercept, dBm; null: {DEFAULT_OIP3_DBM:g} "
                                   "dBm assumed (the result says so).")
    max_order: int | None = Field(default=None, ge=1, le=3, description="Highest harmonic made (1: none); "
                                  "null: 3, or the plan's max_order when lower.")


class AmplifierElement:
    """The element of an :class:`AmplifierStage`."""

    kind = "amplifier"

    def __init__(self, spec: AmplifierStage, index: int, name: str, plan) -> None:
        self.spec, self.index, self.name = spec, index, name
        self.field = f"chain.{index}"
        self.gain_db = spec.gain_db
        self.oip2_dbm = DEFAULT_OIP2_DBM if spec.oip2_dbm is None else spec.oip2_dbm
        self.oip3_dbm = DEFAULT_OIP3_DBM if spec.oip3_dbm is None else spec.oip3_dbm
        self.max_harmonic = spec.max_order if spec.max_order is not None else min(3, plan.max_order)
        k = np.arange(1, self.max_harmonic + 1)
        # output level of harmonic k against the input level x: slope k, offset per k (dB)
        offsets = [self.gain_db,
                   2 * self.gain_db - self.oip2_dbm - HD2_BELOW_IM2_DB,
                   3 * self.gain_db - 2 * self.oip3_dbm - HD3_BELOW_IM3_DB]
        self.k = k
        self.offset = np.array(offsets[: k.size])

    def prepare(self, node: Node) -> None:
        """Nothing to build ahead of the sweep."""

    def wanted(self, node: Node) -> Node:
        return Node(node.channel_hz, node.f_hz, node.level_dbm + self.gain_db, node.inverted, node.bandwidth_hz,
                    node.lo_hz)

    def forward(self, flow: Flow, node_in: Node, node_out: Node) -> Flow:
        p, kk, c = flow.n_rows, self.k.size, flow.low_hz.shape[1]
        k = self.k[None, :, None].astype(float)
        low = (k * flow.low_hz[:, None, :]).reshape(p * kk, c)
        high = (k * flow.high_hz[:, None, :]).reshape(p * kk, c)
        level = (k * flow.level_dbm[:, None, :] + self.offset[None, :, None]).reshape(p * kk, c)
        inverted = np.repeat(flow.inverted, kk, axis=0)
        steps = np.array([""] + [f"H{j}" for j in self.k[1:]], dtype=object)
        return Flow(low, high, level, inverted, np.repeat(np.arange(p), kk), np.tile(steps, p),
                    np.tile(np.where(self.k > 1, self.k, 0), p), np.tile(self.k.astype(float), p))

    def level_maps(self) -> list[tuple[float, float]]:
        return [(float(k), float(o)) for k, o in zip(self.k, self.offset, strict=True)]

    def level_bound(self, level_dbm: np.ndarray) -> np.ndarray:
        return bound_from_maps(self.level_maps(), level_dbm)

    def inverse(self, low_hz: np.ndarray, high_hz: np.ndarray, node_in: Node, node_out: Node) -> Inverse:
        r, kk, c = low_hz.shape[0], self.k.size, low_hz.shape[1]
        k = self.k[None, :, None].astype(float)
        low = (low_hz[:, None, :] / k).reshape(r * kk, c)
        high = (high_hz[:, None, :] / k).reshape(r * kk, c)
        steps = np.array([""] + [f"H{j}" for j in self.k[1:]], dtype=object)
        return Inverse(low, high, np.ones((r * kk, c), dtype=bool), np.tile(self.k.astype(float), r),
                       np.broadcast_to(np.tile(self.offset, r)[:, None], (r * kk, c)), np.repeat(np.arange(r), kk),
                       np.tile(steps, r), np.tile(np.where(self.k > 1, self.k, 0), r), np.tile(self.k.astype(float), r))

    def warnings(self) -> list[WarningRecord]:
        out = []
        for key, value, used in (("oip2_dbm", self.spec.oip2_dbm, self.oip2_dbm),
                                 ("oip3_dbm", self.spec.oip3_dbm, self.oip3_dbm)):
            if value is None and ((key == "oip2_dbm" and self.max_harmonic >= 2) or self.max_harmonic >= 3):
                out.append(WarningRecord("assumed-intercept", f"{self.field}.{key}", used,
                                         f"{self.field}.{key}: not given; {used:g} dBm assumed for {self.name} "
                                         "(the low end of small-signal gain blocks, from memory: give the data "
                                         "sheet's figure)"))
        return out


def _build(spec: AmplifierStage, index: int, name: str, plan, base_dir) -> AmplifierElement:
    return AmplifierElement(spec, index, name, plan)


KIND = ElementKind(kind="amplifier", spec=AmplifierStage, build=_build,
                   form_fields=("name", "gain_db", "oip2_dbm", "oip3_dbm", "max_order"), words="amplifier")
