"""An ADC stage: sampling folds every band into the first Nyquist zone; its own harmonics come first.

Sampling at ``fs`` is mixing with every harmonic of the clock at equal weight: an input at
``f`` appears at ``|f - k·fs|`` in ``[0, fs/2]`` (:func:`mixchart.physics.sampling.fold_band`),
turned over when it came from an even zone.  The ADC's front end makes the harmonics
``k·f`` of each band before it samples (HD2, HD3, ... in dBc, held at the stated figure at
every level: real converter harmonics fall more slowly than a power series at low levels, so
holding them is the pessimistic choice).  A spur on the sample clock at ``fs ± d`` puts
sidebands at ``f ± d`` before folding, ``20·log10(f/fs)`` dB above the clock spur's own level.
The digital channel filter is the chain's final passband; without one the channel is taken
as an ideal brick wall of the wanted signal's width (and the result says so).

References
----------
Kester (ed.), *Data Conversion Handbook*, Analog Devices, 2005, ch. 2 (Nyquist zones and
folding); Brannon, Analog Devices AN-756 (clock spurs reach a sampled tone scaled by f/fs).
"""

from __future__ import annotations

import math
from typing import Annotated, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from ..context import capped
from ..filters import FilterSpec, build_filter
from ..physics.sampling import check_band_in_zone, fold_band, fold_hz
from ..units import FrequencyHz, SpanHz
from .base import ElementKind, Flow, Inverse, Node, WarningRecord, bound_from_maps

__all__ = ["AdcStage", "ClockSpur", "AdcElement", "KIND", "DEFAULT_HARMONICS_DBC", "DEFAULT_INPUT_BANDWIDTH_ZONES"]

#: ADC harmonics assumed when a stage gives none, dBc, for HD2..HD5: on the strong side of a
#: 12- to 14-bit converter near full scale (common practice, no source).
DEFAULT_HARMONICS_DBC = (-60.0, -60.0, -70.0, -70.0)
#: Analog input bandwidth assumed when none is given, in Nyquist zones: the inverse search looks
#: for aliases up to this many zones (twice the chosen zone's top, at least 4 zones; no source).
DEFAULT_INPUT_BANDWIDTH_ZONES = 4


_Dbc = Annotated[float, Field(ge=-300.0, le=0.0, allow_inf_nan=False)]


class ClockSpur(BaseModel):
    """A spur of the sample clock, at ``fs ± offset_hz``."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    offset_hz: SpanHz = Field(description="Offset of the spur from the clock frequency, Hz.")
    level_dbc: float = Field(ge=-300.0, le=0.0, allow_inf_nan=False, description="Level of each clock sideband, "
                             "dBc (phase modulation).")


class AdcStage(BaseModel):
    """An ADC sampling the last analogue node."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)

    kind: Literal["adc"] = "adc"
    name: str | None = Field(default=None, min_length=1, max_length=60, description="Default 'ADC'.")
    sample_rate_hz: FrequencyHz = Field(description="Sample rate fs, Hz.")
    nyquist_zone: int = Field(default=1, ge=1, le=64, description="Nyquist zone holding the wanted signal: zone z "
                              "is (z-1)·fs/2 to z·fs/2.")
    passband_hz: SpanHz | None = Field(default=None, description="Width of the digital channel, Hz, centred on "
                                       "the folded wanted signal; null: the signal's bandwidth.")
    channel_filter: FilterSpec | None = Field(default=None, description="The digital channel filter, in first-zone "
                                              "frequencies (a tracking one is centred on the folded wanted signal); "
                                              "null: an ideal brick wall over the passband (said in the result).")
    harmonics_dbc: tuple[_Dbc, ...] | None = Field(default=None, max_length=31, description="HD2, HD3, ... of the "
                                                    "converter, dBc, held at every level; null: "
                                                    f"{list(DEFAULT_HARMONICS_DBC)} assumed.")
    clock_spurs: tuple[ClockSpur, ...] = Field(default=(), max_length=16, description="Spurs of the sample clock; "
                                               "none: a clean clock (said in the result).")
    input_bandwidth_hz: FrequencyHz | None = Field(default=None, description="Analog input bandwidth, Hz: aliases "
                                                   "are looked for up to here; null: "
                                                   f"{DEFAULT_INPUT_BANDWIDTH_ZONES} zones or twice the chosen "
                                                   "zone's top, whichever is higher.")


class AdcElement:
    """The element of an :class:`AdcStage`."""

    kind = "adc"

    def __init__(self, spec: AdcStage, index: int, name: str, plan, base_dir) -> None:
        self.spec, self.index, self.name = spec, index, name
        self.field = f"chain.{index}"
        self.fs = float(spec.sample_rate_hz)
        given = spec.harmonics_dbc
        hd = list(DEFAULT_HARMONICS_DBC if given is None else given)
        self.max_harmonic = min(1 + len(hd), plan.max_order)
        self.k = np.arange(1, self.max_harmonic + 1)
        self.hd_dbc = np.array([0.0] + hd[: self.max_harmonic - 1])
        self.bandwidth = spec.passband_hz if spec.passband_hz is not None else float(plan.signal.bandwidth_hz)
        prefix = self.field + ".channel_filter."
        self.filter = (None if spec.channel_filter is None else
                       build_filter(spec.channel_filter, base_dir=base_dir, field_prefix=prefix))
        top = spec.nyquist_zone * self.fs / 2
        self.f_max = (spec.input_bandwidth_hz if spec.input_bandwidth_hz is not None
                      else max(DEFAULT_INPUT_BANDWIDTH_ZONES * self.fs / 2, 2 * top))

    def prepare(self, node: Node) -> None:
        """Refuse a wanted signal that the chosen zone cannot hold (at any channel)."""
        half = 0.5 * node.bandwidth_hz
        check_band_in_zone(float(np.min(node.f_hz) - half), float(np.max(node.f_hz) + half), self.fs,
                           self.spec.nyquist_zone, f"{self.field}.nyquist_zone")

    def passband(self, node_out: Node) -> tuple[np.ndarray, np.ndarray]:
        """The digital channel at the output, Hz (C,) each."""
        half = 0.5 * self.bandwidth
        return node_out.f_hz - half, node_out.f_hz + half

    def _filter_loss(self, low, high, node_out: Node) -> np.ndarray:
        fc = np.broadcast_to(node_out.f_hz, np.shape(low)) if getattr(self.filter, "tracks_channel", False) else None
        return capped(self.filter.least_atten_db(low, high, fc), self.field + ".channel_filter", low)

    def wanted(self, node: Node) -> Node:
        f, inverted = fold_hz(node.f_hz, self.fs)
        level = node.level_dbm.copy()
        out = Node(node.channel_hz, f, level, node.inverted ^ inverted, node.bandwidth_hz, node.lo_hz)
        if self.filter is not None:
            fc = f if self.filter.tracks_channel else None
            out.level_dbm = level - capped(self.filter.atten_db(f, fc), self.field + ".channel_filter", f)
        return out

    def forward(self, flow: Flow, node_in: Node, node_out: Node) -> Flow:
        p, kk, c = flow.n_rows, self.k.size, flow.low_hz.shape[1]
        k = self.k[None, :, None].astype(float)
        low = k * flow.low_hz[:, None, :]
        high = k * flow.high_hz[:, None, :]
        level = flow.level_dbm[:, None, :] + self.hd_dbc[None, :, None]
        inverted = np.broadcast_to(flow.inverted[:, None, :], low.shape)
        step = np.array(["alias"] + [f"H{j}, alias" for j in self.k[1:]], dtype=object)
        rows = [(low, high, level, inverted, np.repeat(np.arange(p), kk), np.tile(step, p),
                 np.tile(np.where(self.k > 1, self.k, 0), p))]
        gains = [np.tile(self.k.astype(float), p)]
        for spur in self.spec.clock_spurs:  # sidebands f ± d of every band (harmonics included)
            centre = 0.5 * (low + high)
            side_db = spur.level_dbc + 20.0 * np.log10(np.maximum(centre, 1e-300) / self.fs)
            for sgn, word in ((1, "+"), (-1, "-")):
                a, b = low + sgn * spur.offset_hz, high + sgn * spur.offset_hz
                s_low, s_high = np.where(a >= 0, a, np.where(b <= 0, -b, 0.0)), np.maximum(np.abs(a), np.abs(b))
                rows.append((s_low, s_high, level + side_db, inverted, np.repeat(np.arange(p), kk),
                             np.tile(np.array([f"{t}, clock {word}{spur.offset_hz:g} Hz" for t in step],
                                              dtype=object), p),
                             np.tile(np.where(self.k > 1, self.k, 0), p)))
                gains.append(np.tile(self.k.astype(float), p))
        low = np.concatenate([r[0].reshape(p * kk, c) for r in rows])
        high = np.concatenate([r[1].reshape(p * kk, c) for r in rows])
        level = np.concatenate([r[2].reshape(p * kk, c) for r in rows])
        inverted = np.concatenate([r[3].reshape(p * kk, c) for r in rows])
        parent = np.concatenate([r[4] for r in rows])
        steps = np.concatenate([r[5] for r in rows])
        order = np.concatenate([r[6] for r in rows])
        folded = fold_band(low, high, self.fs)
        # each band's two pieces as two rows (the second is empty unless the band straddles a zone edge)
        f_low = np.concatenate([folded.low_hz[..., 0], folded.low_hz[..., 1]])
        f_high = np.concatenate([folded.high_hz[..., 0], folded.high_hz[..., 1]])
        f_level = np.concatenate([level, np.where(folded.valid[..., 1], level, -np.inf)])
        f_inv = np.concatenate([inverted ^ folded.inverted[..., 0], inverted ^ folded.inverted[..., 1]])
        if self.filter is not None:
            f_level = f_level - self._filter_loss(f_low, f_high, node_out)
        else:  # an ideal digital channel: what misses the passband does not reach the output
            p_low, p_high = self.passband(node_out)
            f_level = np.where((f_high >= p_low[None, :]) & (f_low <= p_high[None, :]), f_level, -np.inf)
        f_level[0] = node_out.level_dbm  # row 0 (the wanted signal's own piece): the loss at its centre
        gain = np.concatenate(gains)
        return Flow(f_low, f_high, f_level, f_inv, np.concatenate([parent, parent]),
                    np.concatenate([steps, steps]), np.concatenate([order, order]), np.concatenate([gain, gain]))

    def level_maps(self) -> list[tuple[float, float]]:
        spur = max((s.level_dbc for s in self.spec.clock_spurs), default=-np.inf)
        return [(1.0, max(0.0, spur + 20.0 * math.log10(self.f_max / self.fs)))]

    def level_bound(self, level_dbm: np.ndarray) -> np.ndarray:
        return bound_from_maps(self.level_maps(), level_dbm)

    def inverse(self, low_hz: np.ndarray, high_hz: np.ndarray, node_in: Node, node_out: Node) -> Inverse:
        r, c = low_hz.shape
        loss = (self._filter_loss(low_hz, high_hz, node_out) if self.filter is not None else np.zeros((r, c)))
        n_k = math.ceil(self.max_harmonic * self.f_max / self.fs) + 1  # the harmonics of inputs up to f_max
        bands_low, bands_high, src, steps, lvl, orders, freq, f_off = [], [], [], [], [], [], [], []
        for k in range(n_k):
            for sgn in ((1,) if k == 0 else (-1, 1)):
                lo_b = k * self.fs + sgn * (low_hz if sgn > 0 else high_hz)
                hi_b = k * self.fs + sgn * (high_hz if sgn > 0 else low_hz)
                zone = 2 * k + (1 if sgn > 0 else 0)  # below k·fs: zone 2k; above: 2k + 1
                for h, hd in zip(self.k, self.hd_dbc, strict=True):
                    word = f"H{h}, alias zone {zone}" if h > 1 else f"alias zone {zone}"
                    bands_low.append(lo_b / h)
                    bands_high.append(hi_b / h)
                    src.append(np.arange(r))
                    steps.append(word)
                    lvl.append(hd - loss)
                    orders.append(h if h > 1 else 0)
                    sense = -1.0 if zone % 2 == 0 else 1.0  # an even zone turns the spectrum over
                    freq.append(sense * h)
                    f_off.append(np.full((r, c), -sgn * k * self.fs))  # f_out = ±(h·f - k·fs)
                    for spur in self.spec.clock_spurs:
                        # a clock sideband h·f ± d folds onto the band: h·f in the alias band ∓ d, at the
                        # spur's level raised by h·f/fs (taken at the band's top: never optimistic)
                        for sb, mark in ((1, "+"), (-1, "-")):
                            a, b = lo_b - sb * spur.offset_hz, hi_b - sb * spur.offset_hz
                            top = np.maximum(b, 1e-300)
                            bands_low.append(a / h)
                            bands_high.append(b / h)
                            src.append(np.arange(r))
                            steps.append(f"{word}, clock {mark}{spur.offset_hz:g} Hz")
                            lvl.append(hd - loss + spur.level_dbc + 20.0 * np.log10(top / self.fs))
                            orders.append(h if h > 1 else 0)
                            freq.append(sense * h)
                            f_off.append(np.full((r, c), -sgn * (k * self.fs - sb * spur.offset_hz)))
        q = len(bands_low)
        low = np.concatenate(bands_low)
        high = np.concatenate(bands_high)
        valid = (high > 0) & (low <= self.f_max) & (low <= high)
        # a band must really fold onto the output band (and from the zone it claims: no wrap)
        low = np.maximum(low, 0.0)
        return Inverse(low, high, valid, np.ones(q * r), np.concatenate(lvl), np.concatenate(src),
                       np.repeat(np.array(steps, dtype=object), r),
                       np.repeat(np.array(orders), r), np.repeat(np.array(freq, dtype=float), r),
                       np.concatenate(f_off))

    def warnings(self) -> list[WarningRecord]:
        out = []
        if self.spec.harmonics_dbc is None:
            out.append(WarningRecord("assumed-adc-harmonics", f"{self.field}.harmonics_dbc",
                                     list(DEFAULT_HARMONICS_DBC),
                                     f"{self.field}.harmonics_dbc: not given; HD2-HD5 of "
                                     f"{list(DEFAULT_HARMONICS_DBC)} dBc assumed for {self.name} (common practice, "
                                     "no source: give the data sheet's figures)"))
        if not self.spec.clock_spurs:
            out.append(WarningRecord("clean-clock", f"{self.field}.clock_spurs", [],
                                     f"{self.field}.clock_spurs: none given; {self.name}'s sample clock is taken as "
                                     "free of spurs"))
        if self.filter is None:
            out.append(WarningRecord("ideal-channel", f"{self.field}.channel_filter", None,
                                     f"{self.field}.channel_filter: not given; {self.name}'s digital channel is taken "
                                     "as an ideal brick wall over the passband"))
        if self.spec.input_bandwidth_hz is None:
            out.append(WarningRecord("assumed-input-bandwidth", f"{self.field}.input_bandwidth_hz", self.f_max,
                                     f"{self.field}.input_bandwidth_hz: not given; aliases looked for up to "
                                     f"{self.f_max:.6g} Hz"))
        return out


def _build(spec: AdcStage, index: int, name: str, plan, base_dir) -> AdcElement:
    return AdcElement(spec, index, name, plan, base_dir)


KIND = ElementKind(kind="adc", spec=AdcStage, build=_build,
                   form_fields=("name", "sample_rate_hz", "nyquist_zone", "passband_hz", "channel_filter",
                                "harmonics_dbc", "clock_spurs", "input_bandwidth_hz"), words="ADC")
