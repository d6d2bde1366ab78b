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

import itertools
import math
from pathlib import Path
from typing import Annotated, Literal

import numpy as np
from numpy.typing import ArrayLike
from pydantic import BaseModel, ConfigDict, Field, TypeAdapter, ValidationError, model_validator

from .errors import FilterError, field_error
from .touchstone import MAX_TOUCHSTONE_BYTES, read_touchstone  # noqa: F401 (re-exported)
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
#: Filter loss is counted up to this, dB: a response's exact zero (e.g. a band-stop centre) is not infinite.
MAX_FILTER_LOSS_DB = 400.0
#: Ultimate rejection of each kind of filter when its spec gives no ``max_atten_db``, dB (common
#: practice, no source): coupling around a lumped LC filter (and an idealised brick wall standing
#: for one) and its enclosure limit it to about 80 dB; a tuned-circuit preselector reaches about
#: 70 dB; a measured file already holds the part's own leakage, but fixtures and the analyser's
#: dynamic range rarely show more than 100 dB; an assembly of several filters (a cascade) is
#: limited by its housing to about 100 dB, whatever its stages add up to.
DEFAULT_MAX_ATTEN_DB = {"butterworth": 80.0, "chebyshev1": 80.0, "elliptic": 80.0, "brickwall": 80.0,
                        "tuned": 70.0, "touchstone": 100.0, "cascade": 100.0}
_MAX_ATTEN_DOC = ("Ultimate rejection in dB (> 0, <= 400): the loss never exceeds it anywhere.  "
                  "None: the kind's common-practice default, :data:`DEFAULT_MAX_ATTEN_DB`.")


def _max_atten_field():
    return Field(default=None, gt=0, le=MAX_FILTER_LOSS_DB, allow_inf_nan=False, description=_MAX_ATTEN_DOC)


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
    max_atten_db: float | None = _max_atten_field()

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
    max_atten_db: float | None = _max_atten_field()

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
    max_atten_db: float | None = _max_atten_field()

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
    outside: Literal["hold", "floor", "error"] = "hold"
    outside_atten_db: float | None = Field(default=None, ge=0, le=MAX_FILTER_LOSS_DB, allow_inf_nan=False)
    max_atten_db: float | None = _max_atten_field()

    @model_validator(mode="after")
    def _check(self) -> MeasuredFilter:
        if self.outside == "floor" and self.outside_atten_db is None:
            raise field_error(FilterError, "outside_atten_db", None,
                              "outside='floor' needs the loss (dB) to take there")
        if self.outside != "floor" and self.outside_atten_db is not None:
            raise field_error(FilterError, "outside_atten_db", self.outside_atten_db,
                              f"used only with outside='floor', not {self.outside!r}")
        return self


class Cascade(_Spec):
    """Filters in series (``stages``, at least one); their losses in dB add."""

    kind: Literal["cascade"]
    stages: tuple[FilterSpec, ...] = Field(min_length=1)
    max_atten_db: float | None = _max_atten_field()


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
    max_atten_db : float
        Ultimate rejection in dB: the spec's ``max_atten_db``, or the kind's
        common-practice default (:data:`DEFAULT_MAX_ATTEN_DB`).
    max_atten_is_default : bool
        True when ``max_atten_db`` is the default, an assumption the analysis reports.
    """

    def __init__(self, spec, field: str = "") -> None:
        self.spec = spec
        self.tracks_channel = bool(getattr(spec, "tracks_channel", False))
        self._field = field
        given = getattr(spec, "max_atten_db", None)
        self.max_atten_is_default = given is None
        self.max_atten_db = float(DEFAULT_MAX_ATTEN_DB[spec.kind] if given is None else given)

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.spec!r})"

    def atten_db(self, f_hz: ArrayLike, f_center_hz: ArrayLike | None = None, *, floored: bool = True) -> np.ndarray:
        """Attenuation in dB (positive = loss) at the frequencies ``f_hz``.

        Parameters
        ----------
        f_hz : array_like of float
            Frequencies in Hz, >= 0 (``inf`` allowed).
        f_center_hz : array_like of float, optional
            Centre in Hz of a channel-tracking filter, broadcast against ``f_hz``
            (one per frequency, or a scalar).  Ignored by fixed filters.  When
            omitted, a tracking filter uses the ``f_center_hz`` of its spec.
        floored : bool
            Limit the loss to the ultimate rejection :attr:`max_atten_db` (and each
            cascade stage's own); False gives the ideal response (``inf`` where it
            is exactly zero, e.g. a high-pass at 0 Hz).

        Returns
        -------
        numpy.ndarray of float64
            Loss in dB, shape ``broadcast(f_hz, f_center_hz)``: 0 dB at the
            passband maximum of a prototype or tuned circuit, ``-|S|`` in dB for
            a measured filter, never above :attr:`max_atten_db` when ``floored``.

        Raises
        ------
        FilterError
            If a frequency is negative or NaN, a tracking filter has no valid
            centre, or a measured filter with ``outside="error"`` is asked
            outside its measured range.
        """
        return self._evaluate(self._total, (f_hz,), ("f_hz",), f_center_hz, floored=floored)

    def least_atten_db(self, f_low_hz: ArrayLike, f_high_hz: ArrayLike, f_center_hz: ArrayLike | None = None, *,
                       floored: bool = True) -> np.ndarray:
        """Least attenuation in dB over each band ``[f_low_hz, f_high_hz]``.

        A signal occupying the band reaches the far side through the band's least-loss
        point, so this, not the loss at one point, is what a band's level takes.  It is
        exact for prototypes (their local minima are known: ``T_n``'s zeros for a
        Chebyshev filter, the equiripple stopband minima of an elliptic filter, found
        between its transmission zeros), tuned circuits (loss least at the point
        nearest the centre) and measured data (the least of the points inside the band
        and of the interpolated ends).  Bounds that are not exact are lower bounds, so
        never optimistic: an elliptic band that reaches the passband takes 0 dB (at
        most ``ripple_db`` low), and a cascade takes the sum of its stages' least losses.

        Parameters
        ----------
        f_low_hz, f_high_hz : array_like of float
            Band edges in Hz, ``0 <= f_low_hz <= f_high_hz`` (``inf`` allowed), broadcast together.
        f_center_hz : array_like of float, optional
            Centre of a channel-tracking filter in Hz, as in :meth:`atten_db`.
        floored : bool
            Limit the loss to :attr:`max_atten_db` (and each stage's); False gives the
            unlimited response, to tell where the ultimate rejection decided.

        Returns
        -------
        numpy.ndarray of float64
            Least loss over each band, dB, shape ``broadcast(f_low_hz, f_high_hz, f_center_hz)``.

        Raises
        ------
        FilterError
            As :meth:`atten_db`, and if a band's low edge is above its high edge.

        Examples
        --------
        >>> filt = build_filter({"kind": "tuned", "f_center_hz": "10 MHz", "q_loaded": 20})
        >>> float(filt.least_atten_db(9e6, 11e6))  # the band holds the centre
        0.0
        """
        low = np.asarray(f_low_hz, dtype=np.float64)
        high = np.asarray(f_high_hz, dtype=np.float64)
        try:
            low, high = np.broadcast_arrays(low, high)
        except ValueError:
            raise field_error(FilterError, "f_high_hz", f"shape {high.shape}",
                              f"must broadcast against f_low_hz of shape {low.shape}") from None
        if low.size and not np.all(high >= low):
            bad = ~(high >= low)
            allowed = f"each band's high edge must be >= its low edge ({float(low[bad].flat[0])!r} Hz)"
            raise field_error(FilterError, "f_high_hz", float(high[bad].flat[0]), allowed)
        return self._evaluate(self._least_total, (low, high), ("f_low_hz", "f_high_hz"), f_center_hz,
                              floored=floored)

    def _evaluate(self, fn, freqs: tuple, names: tuple, f_center_hz, *, floored: bool) -> np.ndarray:
        """Checked, broadcast, chunked evaluation of ``fn(*freqs, fc, floored)`` (1-D blocks)."""
        arrays = [np.asarray(f, dtype=np.float64) for f in freqs]
        for f, name in zip(arrays, names, strict=True):
            if f.size and not f.min() >= 0:
                raise field_error(FilterError, name, float(f[~(f >= 0)].flat[0]), "frequencies must be >= 0 Hz")
        fc = None if f_center_hz is None else np.asarray(f_center_hz, dtype=np.float64)
        if fc is not None:
            if self.tracks_channel and fc.size and not (fc.min() > 0 and np.isfinite(fc.max())):
                bad = float(fc[~((fc > 0) & np.isfinite(fc))].flat[0])
                raise field_error(FilterError, self._field + "f_center_hz", bad, "centres must be finite and > 0 Hz")
            try:
                *arrays, fc = np.broadcast_arrays(*arrays, fc)
            except ValueError:
                allowed = f"must broadcast against {names[0]} of shape {arrays[0].shape}"
                raise field_error(FilterError, self._field + "f_center_hz", f"shape {fc.shape}", allowed) from None
        shape = arrays[0].shape
        arrays = [a.reshape(-1) for a in arrays]
        fc = None if fc is None else fc.reshape(-1)
        out = np.empty(arrays[0].size)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            for i in range(0, out.size, _CHUNK):
                part = slice(i, i + _CHUNK)
                out[part] = fn(*(a[part] for a in arrays), None if fc is None else fc[part], floored)
        return out.reshape(shape)

    def _total(self, f: np.ndarray, fc, floored: bool) -> np.ndarray:
        out = self._atten(f, fc)
        return np.minimum(out, self.max_atten_db) if floored else out

    def _least_total(self, low: np.ndarray, high: np.ndarray, fc, floored: bool) -> np.ndarray:
        out = self._least(low, high, fc)
        return np.minimum(out, self.max_atten_db) if floored else out

    def _least(self, low: np.ndarray, high: np.ndarray, fc) -> np.ndarray:
        raise NotImplementedError

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


def _chebyshev_atten_db(w: np.ndarray, n: int, log_eps_sq: float) -> np.ndarray:
    """``10 log10(1 + eps^2 T_n(w)^2)`` without overflow, for ``w >= 0``.

    ``T_n(w) = cos(n acos w)`` for ``w <= 1`` and ``cosh(x)``, ``x = n acosh w``, above, taken
    through ``ln cosh x = x - ln 2 + ln(1 + e^(-2x))``; each branch is worked out only where it
    applies (most of a sweep's frequencies lie in the stopband).
    """
    inside = w <= 1.0
    n_inside = np.count_nonzero(inside)
    if n_inside == 0:
        return _chebyshev_stop_db(w, n, log_eps_sq)
    out = np.empty(w.shape)
    t_in = np.cos(n * np.arccos(w[inside]))
    out[inside] = np.log1p(math.exp(log_eps_sq) * t_in * t_in) * _DB_PER_NEPER_SQ
    if n_inside < w.size:
        outside = ~inside
        out[outside] = _chebyshev_stop_db(w[outside], n, log_eps_sq)
    return out


def _chebyshev_stop_db(w: np.ndarray, n: int, log_eps_sq: float) -> np.ndarray:
    """The Chebyshev loss above the edge (``w > 1``, or NaN), dB: ``10 log10(1 + eps^2 cosh^2 x)``."""
    x = n * np.arccosh(w)
    y = np.exp(-2.0 * x)
    np.log1p(y, out=y)
    y += x
    y *= 2.0
    y += log_eps_sq - 2.0 * math.log(2.0)
    return np.logaddexp(0.0, y, out=y) * _DB_PER_NEPER_SQ


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

    return atten, np.sqrt(zeros_sq)


def _elliptic_pass_minima(atten, zeros: np.ndarray, stop_atten_db: float) -> list[tuple[float, float]] | None:
    """The passband's 0 dB points (Omega, 0.0) of an elliptic prototype, or None if not found.

    An elliptic rational function's zeros and poles are reciprocal about the selectivity
    ``xi`` (the stopband edge, passband edge 1): ``R(xi/x) = L/R(x)`` (the elliptic rational
    functions' reciprocity; from memory, and checked here point by point).  So the passband's
    zero-loss points are ``xi / Omega_z`` for the transmission zeros ``Omega_z``; between them
    the loss rises to the ripple and falls again.  If a point does not check out to 1e-6 dB the
    caller falls back to 0 dB for any interval reaching the passband (a lower bound).
    """
    from scipy.optimize import brentq

    if not zeros.size:
        return None
    try:
        edge = brentq(lambda w: float(atten(np.array([w]))[0]) - stop_atten_db, 1.0, float(zeros[0]) * (1 - 1e-12),
                      xtol=1e-15, rtol=1e-15)
    except ValueError:
        return None
    points = edge / zeros
    if not np.all(np.abs(atten(points)) < 1e-6):
        return None
    return [(float(w), 0.0) for w in points]


def _elliptic_stop_minima(atten, zeros: np.ndarray, n: int, stop_atten_db: float) -> list[tuple[float, float]]:
    """The stopband's local minima (Omega, dB) of an elliptic prototype.

    Between two transmission zeros (and, for an odd order, beyond the last) the loss has one
    minimum, where it touches ``stop_atten_db`` (equiripple stopband); it is found with a bounded
    scalar search in each bracket and given the design value, the least of the two.  Below the
    first zero the loss rises monotonically from the passband edge, and beyond the last zero of an
    even order it falls monotonically towards ``stop_atten_db``, so the interval ends cover those.
    """
    from scipy.optimize import minimize_scalar

    brackets = list(itertools.pairwise(zeros))
    if n % 2 and zeros.size:
        brackets.append((zeros[-1], zeros[-1] * 1e3))  # the real pole's 20 dB/decade rise follows
    minima = []
    for a, b in brackets:
        found = minimize_scalar(lambda w: float(atten(np.array([w]))[0]), bounds=(a, b), method="bounded",
                                options={"xatol": 1e-12 * b})
        minima.append((float(found.x), min(float(found.fun), stop_atten_db)))
    return minima


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
