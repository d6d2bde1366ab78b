"""The filter of each kind, and :func:`build_filter`, which makes one from its spec.

Prototype and brick-wall filters are a low-pass response of a mapped frequency
(:class:`_Mapped`, with :mod:`mixchart.filters.prototypes`); tuned circuits, measured
(Touchstone) filters and cascades have a class each.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from pydantic import BaseModel, ValidationError

from ..errors import FilterError, field_error
from ..models.filters import (
    _ADAPTER,
    BrickWall,
    Cascade,
    MeasuredFilter,
    PrototypeFilter,
    TunedCircuit,
    _check_lower_edge,
)
from ..touchstone import read_touchstone
from ..units import format_frequency
from ..validation import from_validation_error
from .prototypes import (
    _DB_PER_NEPER_SQ,
    _chebyshev_atten_db,
    _elliptic_atten,
    _elliptic_pass_minima,
    _elliptic_stop_minima,
)
from .response import Filter

__all__ = ["build_filter"]


class _Mapped(Filter):
    """Prototype and brick-wall filters: a low-pass response of the mapped frequency Omega."""

    def __init__(self, spec: PrototypeFilter | BrickWall, field: str = "") -> None:
        super().__init__(spec, field)
        self._geometric = getattr(spec, "transform", "arithmetic") == "geometric"
        n = getattr(spec, "order", 0)
        if spec.kind == "brickwall":
            self._proto = lambda w: np.where(w <= 1.0, 0.0, spec.stop_atten_db)
        elif spec.kind == "butterworth":  # 10 log10(1 + w^2n), overflow-free
            self._proto = lambda w: _DB_PER_NEPER_SQ * np.logaddexp(0.0, (2 * n) * np.log(w))
        # Interior local minima (Omega, loss in dB) of the prototype's loss; between them and the
        # ends of an Omega interval the loss is monotone, so these and the ends give its least loss.
        self._minima: list[tuple[float, float]] = []
        self._passband_bound = False  # an interval reaching Omega <= 1 takes 0 dB (elliptic)
        # Above this Omega the loss only grows (Butterworth, brick wall: everywhere; Chebyshev:
        # above its edge; elliptic: nowhere, for its stopband ripples), so an interval starting
        # there takes the loss at its low end and nothing else need be looked at.
        self._rising_from = 0.0 if spec.kind in ("butterworth", "brickwall") else 1.0
        if spec.kind == "chebyshev1":
            log_eps_sq = math.log(math.expm1(spec.ripple_db * math.log(10) / 10))
            self._proto = lambda w: _chebyshev_atten_db(w, n, log_eps_sq)
            # 0 dB at the zeros of T_n, cos((2k - 1) pi / 2n)
            self._minima = [(math.cos((2 * k - 1) * math.pi / (2 * n)), 0.0) for k in range(1, n + 1)]
        elif spec.kind == "elliptic":
            self._proto, zeros = _elliptic_atten(n, spec.ripple_db, spec.stop_atten_db)
            passband = _elliptic_pass_minima(self._proto, zeros, spec.stop_atten_db)
            self._passband_bound = passband is None
            self._minima = (passband or []) + _elliptic_stop_minima(self._proto, zeros, n, spec.stop_atten_db)
            self._rising_from = math.inf

    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        spec = self.spec
        if spec.response == "lowpass":
            return self._proto(f / spec.f_edge_hz)
        if spec.response == "highpass":
            return self._proto(spec.f_edge_hz / f)
        f0 = self._centre(fc)
        if self.tracks_channel:
            _check_lower_edge(float(np.min(f0)), spec.bandwidth_hz, self._field + "f_center_hz")
        if self._geometric:
            omega = np.abs(f / f0 - f0 / f) * (f0 / spec.bandwidth_hz)
        else:
            omega = np.abs(f - f0) * (2.0 / spec.bandwidth_hz)
        return self._proto(1.0 / omega if spec.response == "bandstop" else omega)

    def _least(self, low: np.ndarray, high: np.ndarray, fc) -> np.ndarray:
        spec = self.spec
        if spec.response == "lowpass":
            w_a, w_b = low / spec.f_edge_hz, high / spec.f_edge_hz
        elif spec.response == "highpass":
            w_a, w_b = spec.f_edge_hz / high, spec.f_edge_hz / low
        else:
            f0 = self._centre(fc)
            if self.tracks_channel:
                _check_lower_edge(float(np.min(f0)), spec.bandwidth_hz, self._field + "f_center_hz")
            if self._geometric:  # signed Omega, increasing in f and zero at f0
                g_a = (low / f0 - f0 / low) * (f0 / spec.bandwidth_hz)
                g_b = (high / f0 - f0 / high) * (f0 / spec.bandwidth_hz)
            else:
                g_a, g_b = (low - f0) * (2.0 / spec.bandwidth_hz), (high - f0) * (2.0 / spec.bandwidth_hz)
            o_a = np.where((g_a <= 0) & (g_b >= 0), 0.0, np.minimum(np.abs(g_a), np.abs(g_b)))
            o_b = np.maximum(np.abs(g_a), np.abs(g_b))
            w_a, w_b = (1.0 / o_b, 1.0 / o_a) if spec.response == "bandstop" else (o_a, o_b)
        out = self._proto(w_a)
        rest = ~(w_a >= self._rising_from)  # where the far end and the interior minima can count
        if not rest.any():
            return out
        if rest.all():
            return self._least_over(w_a, w_b, out)
        out[rest] = self._least_over(w_a[rest], w_b[rest], out[rest])
        return out

    def _least_over(self, w_a: np.ndarray, w_b: np.ndarray, at_a: np.ndarray) -> np.ndarray:
        """Least loss over Omega intervals [w_a, w_b], given the loss ``at_a`` at their low ends."""
        out = np.minimum(at_a, self._proto(w_b))
        for w_min, loss in self._minima:
            np.minimum(out, np.where((w_a <= w_min) & (w_min <= w_b), loss, np.inf), out=out)
        if self._passband_bound:
            np.minimum(out, np.where(w_a <= 1.0, 0.0, np.inf), out=out)
        return out

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        spec = self.spec
        if spec.response == "lowpass":
            return [(0.0, spec.f_edge_hz)]
        if spec.response == "highpass":
            return [(spec.f_edge_hz, math.inf)]
        f0, half = self._passband_centre(f_center_hz), spec.bandwidth_hz / 2
        _check_lower_edge(f0, spec.bandwidth_hz, self._field + "f_center_hz")
        mid = math.hypot(f0, half) if self._geometric else f0  # geometric: f_lo * f_hi = f0^2
        lo, hi = mid - half, mid + half
        return [(lo, hi)] if spec.response == "bandpass" else [(0.0, lo), (hi, math.inf)]



class _Tuned(Filter):
    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        f0 = self._centre(fc)
        return (20.0 * self.spec.stages) * np.log10(np.hypot(1.0, self.spec.q_loaded * (f / f0 - f0 / f)))

    def _least(self, low: np.ndarray, high: np.ndarray, fc) -> np.ndarray:
        # the loss rises monotonically on each side of f0: least at the band point nearest it
        return self._atten(np.clip(self._centre(fc), low, high), fc)

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        f0 = self._passband_centre(f_center_hz)
        # Half power (-3.01 dB) of the cascade: each stage gives 1 + (Q rho)^2 = 2^(1/stages).
        rho = math.sqrt(2.0 ** (1.0 / self.spec.stages) - 1.0) / self.spec.q_loaded
        root = math.sqrt(rho * rho + 4.0)  # f/f0 - f0/f = +-rho solved for f/f0
        return [(f0 * (root - rho) / 2.0, f0 * (root + rho) / 2.0)]


class _Measured(Filter):
    def __init__(self, spec: MeasuredFilter, base_dir: Path | None, field: str = "") -> None:
        super().__init__(spec, field)
        path = Path(spec.path).expanduser()
        self.path = path if path.is_absolute() or base_dir is None else Path(base_dir) / path
        self.f_hz, self.table_db = read_touchstone(self.path, spec.port_out, spec.port_in, field + "path")

        self._range_min = _SparseMin(self.table_db)

    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        lo, hi = self.f_hz[0], self.f_hz[-1]
        outside = (f < lo) | (f > hi)
        if self.spec.outside == "error" and outside.any():
            allowed = (f"outside the range {format_frequency(lo)} to {format_frequency(hi)} measured in "
                       f"{str(self.path)!r}; use outside='hold' or 'floor' to say what the loss is there")
            raise field_error(FilterError, "f_hz", float(f[outside].flat[0]), allowed)
        out = np.interp(f, self.f_hz, self.table_db)
        if self.spec.outside == "floor":
            out[outside] = self.spec.outside_atten_db
        return out

    def _least(self, low: np.ndarray, high: np.ndarray, fc) -> np.ndarray:
        # loss linear between points (and as the policy says outside): least at a band end or at
        # a measured point inside the band
        out = np.minimum(self._atten(low, fc), self._atten(high, fc))
        first = np.searchsorted(self.f_hz, low, side="left")
        stop = np.searchsorted(self.f_hz, high, side="right")
        return np.minimum(out, self._range_min(first, stop))

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        """Span around the least-loss point where the loss stays within 3 dB of it."""
        f, a = self.f_hz, self.table_db
        best = int(np.argmin(a))
        limit = a[best] + 3.0
        above = np.flatnonzero(a > limit)
        left, right = above[above < best], above[above > best]
        # held end values extend the passband to 0 Hz / infinity, and so does a floor within 3 dB
        hold = self.spec.outside == "hold" or (self.spec.outside == "floor" and self.spec.outside_atten_db <= limit)

        def crossing(i: int, j: int) -> float:  # where the loss crosses the limit between points i and j
            return float(np.interp(limit, a[[i, j]], f[[i, j]]))

        lo = crossing(left[-1] + 1, left[-1]) if left.size else (0.0 if hold else float(f[0]))
        hi = crossing(right[0] - 1, right[0]) if right.size else (math.inf if hold else float(f[-1]))
        return [(lo, hi)]


class _SparseMin:
    """Range minimum of a fixed array in O(1) per query (a sparse table of minima over 2^k runs)."""

    def __init__(self, values: np.ndarray) -> None:
        levels = [np.asarray(values, dtype=np.float64)]
        while 2 ** len(levels) <= levels[0].size:
            prev, half = levels[-1], 2 ** (len(levels) - 1)
            levels.append(np.minimum(prev[:-half], prev[half:]))
        self.levels = levels

    def __call__(self, first: np.ndarray, stop: np.ndarray) -> np.ndarray:
        """Least of ``values[first:stop]`` for each pair, ``inf`` where the range is empty."""
        count = stop - first
        out = np.full(count.shape, np.inf)
        some = count > 0
        if not some.any():
            return out
        k = np.floor(np.log2(np.where(some, count, 1))).astype(np.intp)
        for level in np.unique(k[some]):
            sel = some & (k == level)
            row = self.levels[level]
            out[sel] = np.minimum(row[first[sel]], row[stop[sel] - 2**level])
        return out


class _Cascade(Filter):
    def __init__(self, spec: Cascade, stages: list[Filter], field: str = "") -> None:
        super().__init__(spec, field)
        self.stages = stages
        self.tracks_channel = any(stage.tracks_channel for stage in stages)

    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        return self._total(f, fc, False)

    def _total(self, f: np.ndarray, fc, floored: bool) -> np.ndarray:
        out = sum((stage._total(f, fc, floored) for stage in self.stages[1:]), self.stages[0]._total(f, fc, floored))
        return np.minimum(out, self.max_atten_db) if floored else out

    def _least_total(self, low: np.ndarray, high: np.ndarray, fc, floored: bool) -> np.ndarray:
        # the sum of the stages' least losses: a lower bound of the cascade's (never optimistic)
        out = sum((stage._least_total(low, high, fc, floored) for stage in self.stages[1:]),
                  self.stages[0]._least_total(low, high, fc, floored))
        return np.minimum(out, self.max_atten_db) if floored else out

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        bands = [(0.0, math.inf)]
        for stage in self.stages:  # intersect interval lists
            pairs = [(a, b, c, d) for a, b in bands for c, d in stage.passbands_hz(f_center_hz)]
            bands = [(max(a, c), min(b, d)) for a, b, c, d in pairs if max(a, c) < min(b, d)]
        return sorted(bands)


def build_filter(spec, *, base_dir: Path | None = None, field_prefix: str = "") -> Filter:
    """Build the :class:`Filter` described by ``spec``.

    Parameters
    ----------
    spec : FilterSpec or dict
        A spec model, or a dict validated with :func:`parse_filter_spec`.
    base_dir : pathlib.Path, optional
        Folder against which a relative Touchstone ``path`` is resolved
        (normally the plan file's folder); default: the working directory.
    field_prefix : str
        Dotted prefix for field names in error messages, e.g. ``"filters.if."``.

    Returns
    -------
    Filter
        Object with ``atten_db(f_hz, f_center_hz=None)`` and ``passband_hz()``.

    Raises
    ------
    FilterError
        If a dict spec is invalid (see :func:`parse_filter_spec`), or a Touchstone file is missing,
        unreadable, empty, lacks the requested S-parameter or has non-increasing frequencies.

    Examples
    --------
    >>> filt = build_filter({"kind": "butterworth", "response": "lowpass", "order": 5, "f_edge_hz": "10 MHz"})
    >>> round(float(filt.atten_db(20e6)), 2)
    30.11
    """
    if not isinstance(spec, BaseModel):
        try:
            spec = _ADAPTER.validate_python(spec)
        except ValidationError as exc:
            raise from_validation_error(exc, spec, FilterError, root="filter", prefix=field_prefix) from None
    if isinstance(spec, (PrototypeFilter, BrickWall)):
        return _Mapped(spec, field_prefix)
    if isinstance(spec, TunedCircuit):
        return _Tuned(spec, field_prefix)
    if isinstance(spec, MeasuredFilter):
        return _Measured(spec, base_dir, field_prefix)
    if isinstance(spec, Cascade):
        stages = [build_filter(s, base_dir=base_dir, field_prefix=f"{field_prefix}stages.{i}.")
                  for i, s in enumerate(spec.stages)]
        return _Cascade(spec, stages, field_prefix)
    raise field_error(FilterError, field_prefix + "kind", type(spec).__name__, "not a filter spec")
