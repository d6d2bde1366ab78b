"""Filter specs: the strict pydantic models a plan describes its filters with, and their limits.

:func:`parse_filter_spec` validates a spec given as a dict; :func:`iter_filter_stages`
walks a cascade.  The physical ranges of the fields and the default ultimate rejection
of each kind (:data:`DEFAULT_MAX_ATTEN_DB`) live here.
"""

from __future__ import annotations

from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, TypeAdapter, ValidationError, model_validator

from ..errors import FilterError, field_error
from ..units import FrequencyHz, SpanHz
from ..validation import from_validation_error

__all__ = ["PrototypeFilter", "TunedCircuit", "BrickWall", "MeasuredFilter", "Cascade", "FilterSpec",
           "parse_filter_spec", "iter_filter_stages", "MAX_FILTER_LOSS_DB", "DEFAULT_MAX_ATTEN_DB"]

Response = Literal["lowpass", "highpass", "bandpass", "bandstop"]
_FINITE = {"allow_inf_nan": False}
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
