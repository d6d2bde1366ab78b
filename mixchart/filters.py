"""Filter descriptions and their attenuation versus frequency.

A filter is described by a strict pydantic *spec* (embedded in the plan JSON),
a discriminated union on ``kind``: ``butterworth``, ``chebyshev1`` and
``elliptic`` prototypes (:class:`PrototypeFilter`), cascaded single tuned
circuits (``tuned``, :class:`TunedCircuit`), an ideal ``brickwall``
(:class:`BrickWall`), a measured ``touchstone`` two-port
(:class:`MeasuredFilter`) and a ``cascade`` of any of these (:class:`Cascade`).
:func:`build_filter` turns a spec into a :class:`Filter`, whose
:meth:`Filter.atten_db` gives the loss in dB (positive = loss) at arrays of
frequencies in Hz.  Band filters and tuned circuits may *track the channel*
(a tracking preselector): their centre is then given at evaluation time.

Pure numpy; scipy.signal and scikit-rf are imported only when an elliptic or
a measured filter is built.
"""

from __future__ import annotations

import io
import math
import re
import warnings
from pathlib import Path
from typing import Annotated, Literal

import numpy as np
from numpy.typing import ArrayLike
from pydantic import BaseModel, ConfigDict, Field, TypeAdapter, ValidationError, model_validator

from .errors import FilterError, field_error
from .fileio import read_regular_file
from .units import FrequencyHz, SpanHz, format_frequency
from .validation import from_validation_error

__all__ = ["PrototypeFilter", "TunedCircuit", "BrickWall", "MeasuredFilter", "Cascade", "FilterSpec",
           "parse_filter_spec", "iter_filter_stages", "Filter", "build_filter"]

Response = Literal["lowpass", "highpass", "bandpass", "bandstop"]
_DB_PER_NEPER_SQ = 10.0 / math.log(10.0)  # 10*log10(x) == _DB_PER_NEPER_SQ * ln(x)
_FINITE = {"allow_inf_nan": False}
_CHUNK = 8192  # points per block in Filter.atten_db (cache-sized blocks run several times faster)
# Physical ranges of the dB and Q fields (common practice, no source): passband ripple of a real
# Chebyshev or elliptic design lies well inside 0.001-10 dB; no filter is specified beyond 300 dB
# of stopband loss; a loaded Q below 0.5 is no longer a tuned circuit and one above 1e6 is a
# crystal's unloaded Q at best.  Touchstone files name at most a few dozen ports.
MIN_RIPPLE_DB, MAX_RIPPLE_DB = 0.001, 10.0
MAX_STOP_ATTEN_DB = 300.0
MIN_Q, MAX_Q = 0.5, 1e6
MAX_PORT = 99
#: Longest file path accepted in a spec, characters (PATH_MAX on Linux is 4096).
MAX_PATH_CHARS = 4096


class _Spec(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


def _check_lower_edge(f_center_hz: float, bandwidth_hz: float, field: str) -> None:
    if not f_center_hz - bandwidth_hz / 2 > 0:
        allowed = f"the lower band edge f_center_hz - bandwidth_hz/2 must be > 0 Hz (bandwidth_hz={bandwidth_hz!r})"
        raise field_error(FilterError, field, f_center_hz, allowed)


def _check_edges(spec: PrototypeFilter | BrickWall) -> None:
    """Check that exactly the edge fields the response needs are given."""
    band = spec.response in ("bandpass", "bandstop")
    needed = ["bandwidth_hz"] + ([] if spec.tracks_channel else ["f_center_hz"]) if band else ["f_edge_hz"]
    for name in needed:
        if getattr(spec, name) is None:
            raise field_error(FilterError, name, None, f"a {spec.response} filter needs {name}")
    for name in ["f_edge_hz"] if band else ["bandwidth_hz", "f_center_hz"]:
        if getattr(spec, name) is not None:
            raise field_error(FilterError, name, getattr(spec, name), f"not used by a {spec.response} filter")
    if spec.tracks_channel and not band:
        raise field_error(FilterError, "tracks_channel", True, "only band-pass and band-stop filters track")
    if band and spec.f_center_hz is not None:
        _check_lower_edge(spec.f_center_hz, spec.bandwidth_hz, "f_center_hz")


class PrototypeFilter(_Spec):
    """A Butterworth, Chebyshev type I or elliptic filter.

    Attributes
    ----------
    kind : {"butterworth", "chebyshev1", "elliptic"}
    response : {"lowpass", "highpass", "bandpass", "bandstop"}
    order : int
        1 to 20.
    f_edge_hz : float, optional
        Low-pass/high-pass edge in Hz: the -3 dB point of a Butterworth, the
        end of the ripple band of a Chebyshev or elliptic filter.
    f_center_hz, bandwidth_hz : float, optional
        Band-pass/band-stop centre and width between the same edges, in Hz.
        ``f_center_hz`` may be omitted when ``tracks_channel``.
    ripple_db : float, optional
        Passband ripple in dB (0.001 to 10) of a Chebyshev or elliptic filter.
    stop_atten_db : float, optional
        Minimum stopband loss in dB (> ``ripple_db``, <= 300) of an elliptic filter.
    transform : {"geometric", "arithmetic"}
        Band transform: ``Omega = |f/f0 - f0/f| f0/BW`` (standard, ``f0`` the
        geometric centre) or the narrow-band ``Omega = 2|f - f0|/BW``.
    tracks_channel : bool
        Band filters only: the centre follows the tuned channel.

    References
    ----------
    Frequency transforms as ``scipy.signal.lp2hp_zpk``, ``lp2bp_zpk``, ``lp2bs_zpk``.
    """

    kind: Literal["butterworth", "chebyshev1", "elliptic"]
    response: Response
    order: int = Field(ge=1, le=20)
    f_edge_hz: FrequencyHz | None = None
    f_center_hz: FrequencyHz | None = None
    bandwidth_hz: SpanHz | None = None
    ripple_db: float | None = Field(default=None, ge=MIN_RIPPLE_DB, le=MAX_RIPPLE_DB, **_FINITE)
    stop_atten_db: float | None = Field(default=None, gt=0, le=MAX_STOP_ATTEN_DB, **_FINITE)
    transform: Literal["geometric", "arithmetic"] = "geometric"
    tracks_channel: bool = False

    @model_validator(mode="after")
    def _check(self) -> PrototypeFilter:
        _check_edges(self)
        if self.kind == "butterworth" and self.ripple_db is not None:
            raise field_error(FilterError, "ripple_db", self.ripple_db, "a butterworth filter has no ripple")
        if self.kind != "butterworth" and self.ripple_db is None:
            raise field_error(FilterError, "ripple_db", None, f"a {self.kind} filter needs ripple_db > 0 dB")
        if self.kind == "elliptic" and (self.stop_atten_db is None or self.stop_atten_db <= self.ripple_db):
            allowed = f"an elliptic filter needs stop_atten_db > ripple_db ({self.ripple_db!r} dB)"
            raise field_error(FilterError, "stop_atten_db", self.stop_atten_db, allowed)
        if self.kind != "elliptic" and self.stop_atten_db is not None:
            raise field_error(FilterError, "stop_atten_db", self.stop_atten_db, f"not used by a {self.kind} filter")
        return self


class TunedCircuit(_Spec):
    """``stages`` identical single tuned circuits; one loses ``10 log10(1 + (Q (f/f0 - f0/f))^2)`` dB.

    Attributes
    ----------
    f_center_hz : float, optional
        Resonant frequency in Hz; may be omitted when ``tracks_channel``.
    q_loaded : float
        Loaded Q (0.5 to 1e6); the half-power bandwidth of one stage is ``f0/Q``.
    stages : int
        Number of identical cascaded circuits, 1 to 20 (their dB add).
    tracks_channel : bool
        The centre follows the tuned channel (ganged tuning).
    """

    kind: Literal["tuned"]
    f_center_hz: FrequencyHz | None = None
    q_loaded: float = Field(ge=MIN_Q, le=MAX_Q, **_FINITE)
    stages: int = Field(default=1, ge=1, le=20)
    tracks_channel: bool = False

    @model_validator(mode="after")
    def _check(self) -> TunedCircuit:
        if self.f_center_hz is None and not self.tracks_channel:
            raise field_error(FilterError, "f_center_hz", None, "give the centre in Hz, or set tracks_channel")
        return self


class BrickWall(_Spec):
    """An ideal filter: 0 dB from edge to edge (edges included), ``stop_atten_db`` outside.

    Edge fields as :class:`PrototypeFilter`; a band brick wall spans
    ``f_center_hz +/- bandwidth_hz/2`` (Hz).  ``stop_atten_db`` is in dB (> 0).
    """

    kind: Literal["brickwall"]
    response: Response
    f_edge_hz: FrequencyHz | None = None
    f_center_hz: FrequencyHz | None = None
    bandwidth_hz: SpanHz | None = None
    stop_atten_db: float = Field(default=200.0, gt=0, le=MAX_STOP_ATTEN_DB, **_FINITE)
    tracks_channel: bool = False

    @model_validator(mode="after")
    def _check(self) -> BrickWall:
        _check_edges(self)
        return self


class MeasuredFilter(_Spec):
    """A measured filter: loss ``-20 log10|S[port_out, port_in]|`` dB from a Touchstone file.

    Attributes
    ----------
    path : str
        Touchstone file; a relative path is resolved against the ``base_dir``
        given to :func:`build_filter` (normally the plan file's folder).
    port_out, port_in : int
        1-based ports; the default uses S21.
    outside : {"hold", "error"}
        Outside the measured range, hold the end value or raise; never extrapolate.
        Between points the loss in dB is interpolated linearly in frequency.
    """

    kind: Literal["touchstone"]
    path: str = Field(min_length=1, max_length=MAX_PATH_CHARS)
    port_out: int = Field(default=2, ge=1, le=MAX_PORT)
    port_in: int = Field(default=1, ge=1, le=MAX_PORT)
    outside: Literal["hold", "error"] = "hold"


class Cascade(_Spec):
    """Filters in series (``stages``, at least one); their losses in dB add."""

    kind: Literal["cascade"]
    stages: tuple[FilterSpec, ...] = Field(min_length=1)


FilterSpec = Annotated[
    PrototypeFilter | TunedCircuit | BrickWall | MeasuredFilter | Cascade, Field(discriminator="kind")
]
Cascade.model_rebuild()
_ADAPTER: TypeAdapter = TypeAdapter(FilterSpec)


def parse_filter_spec(data: object) -> PrototypeFilter | TunedCircuit | BrickWall | MeasuredFilter | Cascade:
    """Validate a filter spec given as a dict (e.g. read from JSON).

    Parameters
    ----------
    data : dict
        Spec with a ``kind`` key; frequencies in Hz or as text like ``"10.7 MHz"``.

    Returns
    -------
    FilterSpec
        The validated, frozen spec model.

    Raises
    ------
    FilterError
        If the data is not a valid spec: one line naming the field (e.g.
        ``filter.order`` or ``stages.0.q_loaded``) and repeating the value.
    """
    try:
        return _ADAPTER.validate_python(data)
    except ValidationError as exc:
        raise from_validation_error(exc, data, FilterError, root="filter") from None


def iter_filter_stages(spec, where: str = "filter"):
    """Every non-cascade filter inside ``spec``, however deeply cascades nest.

    Parameters
    ----------
    spec : FilterSpec
        A validated spec.
    where : str
        Dotted name of ``spec`` in its document, e.g. ``"filters.if"``.

    Yields
    ------
    (str, FilterSpec)
        The dotted name of each stage (``"filters.if.stages.1.stages.0"``) and its spec.
    """
    if isinstance(spec, Cascade):
        for i, stage in enumerate(spec.stages):
            yield from iter_filter_stages(stage, f"{where}.stages.{i}")
    else:
        yield where, spec


# --------------------------------------------------------------------------- responses


class Filter:
    """A built filter: attenuation in dB versus frequency in Hz.

    Attributes
    ----------
    spec : FilterSpec
        The spec the filter was built from.
    tracks_channel : bool
        True when the filter (or a stage of a cascade) follows the tuned channel
        and so needs ``f_center_hz`` at evaluation time.
    """

    def __init__(self, spec, field: str = "") -> None:
        self.spec = spec
        self.tracks_channel = bool(getattr(spec, "tracks_channel", False))
        self._field = field

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.spec!r})"

    def atten_db(self, f_hz: ArrayLike, f_center_hz: ArrayLike | None = None) -> np.ndarray:
        """Attenuation in dB (positive = loss) at the frequencies ``f_hz``.

        Parameters
        ----------
        f_hz : array_like of float
            Frequencies in Hz, >= 0 (``inf`` allowed).
        f_center_hz : array_like of float, optional
            Centre in Hz of a channel-tracking filter, broadcast against ``f_hz``
            (one per frequency, or a scalar).  Ignored by fixed filters.  When
            omitted, a tracking filter uses the ``f_center_hz`` of its spec.

        Returns
        -------
        numpy.ndarray of float64
            Loss in dB, shape ``broadcast(f_hz, f_center_hz)``: 0 dB at the
            passband maximum of a prototype or tuned circuit, ``-|S|`` in dB for
            a measured filter, ``inf`` where the response is exactly zero (e.g.
            a high-pass at 0 Hz).

        Raises
        ------
        FilterError
            If a frequency is negative or NaN, a tracking filter has no valid
            centre, or a measured filter with ``outside="error"`` is asked
            outside its measured range.
        """
        f = np.asarray(f_hz, dtype=np.float64)
        if f.size and not f.min() >= 0:
            raise field_error(FilterError, "f_hz", float(f[~(f >= 0)].flat[0]), "frequencies must be >= 0 Hz")
        fc = None if f_center_hz is None else np.asarray(f_center_hz, dtype=np.float64)
        if fc is not None:
            if self.tracks_channel and fc.size and not (fc.min() > 0 and np.isfinite(fc.max())):
                bad = float(fc[~((fc > 0) & np.isfinite(fc))].flat[0])
                raise field_error(FilterError, self._field + "f_center_hz", bad, "centres must be finite and > 0 Hz")
            try:
                f, fc = np.broadcast_arrays(f, fc)
            except ValueError:
                allowed = f"must broadcast against f_hz of shape {f.shape}"
                raise field_error(FilterError, self._field + "f_center_hz", f"shape {fc.shape}", allowed) from None
        shape, f = f.shape, f.reshape(-1)
        fc = None if fc is None else fc.reshape(-1)
        out = np.empty(f.size)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for i in range(0, f.size, _CHUNK):
                out[i : i + _CHUNK] = self._atten(f[i : i + _CHUNK], None if fc is None else fc[i : i + _CHUNK])
        return out.reshape(shape)

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        """Nominal pass intervals in Hz, for shading on charts.

        Parameters
        ----------
        f_center_hz : float, optional
            Centre in Hz of a channel-tracking filter.

        Returns
        -------
        list of (float, float)
            Sorted ``(lo_hz, hi_hz)`` intervals; ``hi_hz`` may be ``inf``.  A
            band-stop filter has two; a cascade whose stages share no pass
            interval has none.
        """
        raise NotImplementedError

    def passband_hz(self, f_center_hz: float | None = None) -> tuple[float, float]:
        """Nominal passband ``(lo_hz, hi_hz)``: low-pass ``(0, fc)``, high-pass ``(fc, inf)``.

        Parameters
        ----------
        f_center_hz : float, optional
            Centre in Hz of a channel-tracking filter.

        Returns
        -------
        (float, float)
            The span of :meth:`passbands_hz` in Hz: ``(0, inf)`` for a band-stop
            filter, ``(nan, nan)`` for a cascade with no common pass interval.
        """
        bands = self.passbands_hz(f_center_hz)
        return (bands[0][0], bands[-1][1]) if bands else (math.nan, math.nan)

    def _centre(self, fc: np.ndarray | float | None) -> np.ndarray | float:
        """The centre in Hz: ``fc`` for a tracking filter when given, else the spec's."""
        fc = fc if self.tracks_channel and fc is not None else self.spec.f_center_hz
        if fc is None:
            allowed = "this filter tracks the channel; pass f_center_hz (Hz) or set it in the spec"
            raise field_error(FilterError, self._field + "f_center_hz", None, allowed)
        return fc

    def _passband_centre(self, f_center_hz: float | None) -> float:
        f0 = float(self._centre(f_center_hz))
        if not 0 < f0 < math.inf:
            raise field_error(FilterError, self._field + "f_center_hz", f0, "must be finite and > 0 Hz")
        return f0

    def _atten(self, f: np.ndarray, fc: np.ndarray | None) -> np.ndarray:
        raise NotImplementedError


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
        elif spec.kind == "chebyshev1":
            log_eps_sq = math.log(math.expm1(spec.ripple_db * math.log(10) / 10))
            self._proto = lambda w: _chebyshev_atten_db(w, n, log_eps_sq)
        else:
            self._proto = _elliptic_atten(n, spec.ripple_db, spec.stop_atten_db)

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


def _chebyshev_atten_db(w: np.ndarray, n: int, log_eps_sq: float) -> np.ndarray:
    """``10 log10(1 + eps^2 T_n(w)^2)`` without overflow, for ``w >= 0``."""
    t_in = np.cos(n * np.arccos(np.minimum(w, 1.0)))  # T_n(w) for w <= 1
    x = n * np.arccosh(np.maximum(w, 1.0))  # T_n(w) = cosh(x) for w > 1; ln cosh(x) below
    log_t = x - math.log(2.0) + np.log1p(np.exp(-2.0 * x))
    out = np.logaddexp(0.0, log_eps_sq + 2.0 * log_t)
    inside = w <= 1.0
    out[inside] = np.log1p(math.exp(log_eps_sq) * t_in[inside] ** 2)
    return out * _DB_PER_NEPER_SQ


def _elliptic_atten(n: int, ripple_db: float, stop_atten_db: float):
    """Return ``w -> loss in dB`` of scipy's elliptic prototype ``scipy.signal.ellipap``.

    ``|H(jw)| = |k| prod |w^2 - wz^2| / (|jw - p| |jw - conj p|)`` over matched
    zero and pole pairs (each factor tends to 1 as w grows, so nothing
    overflows), divided by ``|jw - p0|`` for the real pole of an odd order.
    ellipap scales ``k`` so that the passband maximum is exactly 0 dB.
    """
    from scipy.signal import ellipap

    z, p, k = ellipap(n, ripple_db, stop_atten_db)
    zeros_sq = np.sort(z.imag[z.imag > 0]) ** 2
    upper = np.sort_complex(p[p.imag > 1e-12 * np.abs(p)] * -1j) * 1j  # upper-half poles by imag part
    pole_c = upper.real**2 - upper.imag**2  # |jw - p|^2 |jw - conj p|^2 = (w^2 + c)^2 + e^2
    pole_e = 2.0 * np.abs(upper.real * upper.imag)
    real_sq = p.real[np.abs(p.imag) <= 1e-12 * np.abs(p)] ** 2
    log_k = math.log(abs(float(np.real(k))))
    assert len(zeros_sq) == len(pole_c) and len(real_sq) == n % 2, "unexpected ellipap layout"

    def atten(w: np.ndarray) -> np.ndarray:
        w_sq = w * w
        w_cap = np.minimum(w_sq, 1e300)  # each pair factor is 1 to float precision long before this
        gain = np.ones_like(w_sq)
        for z_sq, c, e in zip(zeros_sq, pole_c, pole_e, strict=True):
            gain *= np.abs(w_cap - z_sq) / np.hypot(w_cap + c, e)
        for s_sq in real_sq:
            gain /= np.sqrt(w_sq + s_sq)
        return -2.0 * _DB_PER_NEPER_SQ * (np.log(gain) + log_k)

    return atten


class _Tuned(Filter):
    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        f0 = self._centre(fc)
        return (20.0 * self.spec.stages) * np.log10(np.hypot(1.0, self.spec.q_loaded * (f / f0 - f0 / f)))

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
        self.f_hz, self.table_db = _read_touchstone(self.path, spec.port_out, spec.port_in, field + "path")

    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        lo, hi = self.f_hz[0], self.f_hz[-1]
        if self.spec.outside == "error" and f.size and (f.min() < lo or f.max() > hi):
            allowed = (f"outside the range {format_frequency(lo)} to {format_frequency(hi)} measured in "
                       f"{str(self.path)!r}; use outside='hold' to hold the end values")
            raise field_error(FilterError, "f_hz", float(f[(f < lo) | (f > hi)].flat[0]), allowed)
        return np.interp(f, self.f_hz, self.table_db)

    def passbands_hz(self, f_center_hz: float | None = None) -> list[tuple[float, float]]:
        """Span around the least-loss point where the loss stays within 3 dB of it."""
        f, a = self.f_hz, self.table_db
        best = int(np.argmin(a))
        limit = a[best] + 3.0
        above = np.flatnonzero(a > limit)
        left, right = above[above < best], above[above > best]
        hold = self.spec.outside == "hold"  # held end values extend the passband to 0 Hz / infinity

        def crossing(i: int, j: int) -> float:  # where the loss crosses the limit between points i and j
            return float(np.interp(limit, a[[i, j]], f[[i, j]]))

        lo = crossing(left[-1] + 1, left[-1]) if left.size else (0.0 if hold else float(f[0]))
        hi = crossing(right[0] - 1, right[0]) if right.size else (math.inf if hold else float(f[-1]))
        return [(lo, hi)]


# Linear: each character can be taken by one part only (the old mantissa \d+\.?\d* was quadratic).
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")
_VERSION2 = re.compile(r"^[ \t]*\[version\]", re.IGNORECASE | re.MULTILINE)  # [ \t], not \s: linear
#: Largest Touchstone file read, bytes (a 2-port file of 100,000 points is about 10 MB).
MAX_TOUCHSTONE_BYTES = 20_000_000


def _raw_frequencies(text: str, nports: int) -> list[float] | str:
    """Frequencies of the network-data records in file order, or a problem description.

    scikit-rf takes a decreasing frequency in a 2-port version 1 file as the
    start of noise data and silently drops what follows, so order is checked here.
    """
    version2 = _VERSION2.search(text) is not None
    in_data, lines = not version2, []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("!", 1)[0].strip()
        if line.startswith("["):  # version 2 keyword: data only under [Network Data]
            in_data = version2 and line.lower().startswith("[network data]")
        elif line and not line.startswith("#") and in_data:
            if not all(len(word) <= 64 and _NUMBER.fullmatch(word) for word in line.split()):
                return f"line {lineno} is not numeric data"  # its text is not repeated: it may be any file
            lines.append(line.split())
    if nports == 2 and not version2 and all(len(w) in (9, 5) for w in lines):  # records, then noise data
        n_s = next((i for i, w in enumerate(lines) if len(w) == 5), len(lines))
        if any(len(w) == 9 for w in lines[n_s:]):
            return "network data follow noise data (frequencies not increasing?)"
        lines = lines[:n_s]
    tokens, per_record = [word for words in lines for word in words], 1 + 2 * nports * nports
    if len(tokens) % per_record:
        return f"{len(tokens)} numbers do not make whole {nports}-port records of {per_record}"
    return [float(t) for t in tokens[::per_record]]


def _read_touchstone(path: Path, port_out: int, port_in: int, field: str) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies in Hz and loss ``-20 log10|S[port_out, port_in]|`` in dB from a Touchstone file."""
    where = str(path)
    # A regular file only (never a FIFO or a device), at most MAX_TOUCHSTONE_BYTES; scikit-rf
    # then parses these bytes from memory and never opens the path itself.
    raw = read_regular_file(path, MAX_TOUCHSTONE_BYTES, error=FilterError, field=field)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("iso-8859-1")  # as scikit-rf falls back
    import skrf

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # every problem it warns about is checked below
            source = io.StringIO(text)
            source.name = path.name  # scikit-rf reads the port count from the extension (.s2p)
            net = skrf.Network(source)
    except Exception as exc:  # any reader failure is a bad file to the user
        # the reader's own words can quote the file; name only what failed
        raise field_error(FilterError, field, where, f"not a readable Touchstone file ({type(exc).__name__})") from None
    if net.nports < max(port_out, port_in):
        allowed = f"the file has {net.nports} port(s): no S{port_out}{port_in} (port_out={port_out}, port_in={port_in})"
        raise field_error(FilterError, field, where, allowed)
    f_hz = np.asarray(net.f, dtype=np.float64)
    if f_hz.size == 0:
        raise field_error(FilterError, field, where, "the file holds no frequency points")
    raw = _raw_frequencies(text, net.nports)
    if isinstance(raw, str):
        raise field_error(FilterError, field, where, raw)
    if len(raw) != f_hz.size or np.any(np.diff(raw) <= 0) or np.any(np.diff(f_hz) <= 0):
        raise field_error(FilterError, field, where, "frequencies must be strictly increasing, without repeats")
    s = np.asarray(net.s[:, port_out - 1, port_in - 1])
    if not (np.all(np.isfinite(f_hz)) and np.all(np.isfinite(s))):
        raise field_error(FilterError, field, where, "the file holds non-finite numbers")
    # Clip |S| at 1e-20 (400 dB) so a recorded exact zero stays finite for interpolation.
    return f_hz, -20.0 * np.log10(np.maximum(np.abs(s), 1e-20))


class _Cascade(Filter):
    def __init__(self, spec: Cascade, stages: list[Filter], field: str = "") -> None:
        super().__init__(spec, field)
        self.stages = stages
        self.tracks_channel = any(stage.tracks_channel for stage in stages)

    def _atten(self, f: np.ndarray, fc) -> np.ndarray:
        return sum((stage._atten(f, fc) for stage in self.stages[1:]), self.stages[0]._atten(f, fc))

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
