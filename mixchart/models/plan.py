"""The frequency plan: a validated model, saved as JSON for other tools.

A :class:`Plan` says what converts to what: the direction (a receiver's
down-conversion or a transmitter's up-conversion), the RF tuning range and its
channel raster, the wanted signal, how the LO is set (fixed, or tracking the
channel on the high or low side, on a synthesiser grid), the IF passband, the
mixer, the filters and the requirement.  Every frequency is float64 Hz inside;
the JSON accepts numbers in Hz or text such as ``"10.7 MHz"``.

Plan files are untrusted input.  They are parsed with :mod:`json` only (never
evaluated or unpickled), unknown keys, duplicate keys, NaN and infinities are
rejected, and every problem becomes a one-line :class:`~mixchart.errors.PlanError`
naming the field and repeating the value.  Saving is atomic and a save/load
round trip is exact.
"""

from __future__ import annotations

import math
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError, model_validator

from ..errors import PlanError, SweepTooLargeError
from ..filters import FilterSpec, iter_filter_stages
from ..requirements import MaskSegment, Requirement
from ..units import FrequencyHz, SpanHz, format_frequency
from ..validation import from_validation_error
from .mixer import MixerSpec

__all__ = [
    "SCHEMA_VERSION",
    "MAX_ORDER",
    "MAX_CHANNELS",
    "Plan",
    "RfBand",
    "Signal",
    "LoSetting",
    "IfBand",
    "Filters",
    "Requirement",
    "MaskSegment",
    "MAX_PLAN_BYTES",
    "parse_plan_json",
    "read_plan_bytes",
    "load_plan",
    "loads_plan",
    "save_plan",
    "dumps_plan",
    "plan_json_schema",
    "plan_from_dict",
]

#: Version of the plan JSON layout written by this release.
SCHEMA_VERSION = 1
#: Highest analysable order m + n.  Spur charts in practice stop at 15 to 21;
#: beyond ~25 the level model means nothing (common practice, no source).
MAX_ORDER = 25
#: Most channels in one sweep.  Larger sweeps are refused before any allocation.  The limit
#: keeps every accepted request under 500 MB of extra memory: the result keeps one worst row
#: per channel (about 500 bytes each at the peak), so the worst accepted sweep (this many
#: channels at MAX_ORDER, every row failing) peaks near 300 MB; benchmarks/bench_engine.py
#: measures it.  500,000 channels is a 1 GHz band on a 2 kHz raster.
MAX_CHANNELS = 500_000


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class RfBand(_Strict):
    """RF tuning range as channel centres on a raster.

    For a receiver (down-conversion) this is the input band; for a transmitter
    (up-conversion) it is the output band.
    """

    start_hz: FrequencyHz = Field(description="First channel centre, Hz.")
    stop_hz: FrequencyHz = Field(description="Last channel centre, Hz (>= start_hz).")
    step_hz: SpanHz | None = Field(
        default=None, description="Channel raster, Hz. Required when stop_hz > start_hz."
    )

    @model_validator(mode="after")
    def _check(self) -> RfBand:
        if self.stop_hz < self.start_hz:
            raise PlanError(
                f"stop_hz: {format_frequency(self.stop_hz)} is below start_hz "
                f"{format_frequency(self.start_hz)}"
            )
        if self.stop_hz > self.start_hz and self.step_hz is None:
            raise PlanError("step_hz: missing; it is required when stop_hz > start_hz")
        return self

    @property
    def n_channels(self) -> int:
        """Number of channel centres in the range (no allocation)."""
        if self.step_hz is None or self.stop_hz == self.start_hz:
            return 1
        ratio = (self.stop_hz - self.start_hz) / self.step_hz * (1 + 1e-12) + 1e-9
        if not math.isfinite(ratio):  # e.g. a 1e-310 Hz step: more channels than a float can count
            raise SweepTooLargeError(
                f"rf.step_hz: {self.step_hz!r} is invalid; it gives more than {MAX_CHANNELS} channels "
                f"from {format_frequency(self.start_hz)} to {format_frequency(self.stop_hz)}"
            )
        return math.floor(ratio) + 1


class Signal(_Strict):
    """The wanted signal."""

    bandwidth_hz: SpanHz = Field(description="Occupied bandwidth of the wanted signal, Hz.")
    level_dbm: float = Field(
        default=-30.0,
        ge=-200.0,
        le=60.0,
        description=(
            "Wanted-signal level ahead of the input-side filter (the preselector of a receiver, the IF "
            "filter of a transmitter), dBm; the mixer's drive is this less that filter's loss."
        ),
    )
    interferer_level_dbm: float | None = Field(
        default=None,
        ge=-200.0,
        le=60.0,
        description=(
            "Level assumed for unwanted inputs when computing receiver response "
            "rejection, dBm at the preselector input; default: the wanted level."
        ),
    )
    interferer_bandwidth_hz: SpanHz | None = Field(
        default=None,
        description=(
            "Bandwidth of the unwanted inputs, Hz: each response band widens by half of it on each side. "
            "Null: a CW interferer (the analysis says so)."
        ),
    )


class LoSetting(_Strict):
    """How the LO is set for each channel."""

    mode: Literal["tracking", "fixed"] = Field(
        default="tracking",
        description="'tracking': the LO follows the channel; 'fixed': one LO for the whole band.",
    )
    side: Literal["high", "low"] = Field(
        default="high", description="Tracking injection side: LO above ('high') or below ('low') the RF."
    )
    fixed_hz: FrequencyHz | None = Field(default=None, description="LO frequency when mode is 'fixed', Hz.")
    step_hz: SpanHz | None = Field(
        default=None,
        description="LO synthesiser step, Hz: the LO sits on the nearest multiple of it (exact halves round up).",
    )
    grid_holds: Literal["input", "output"] = Field(
        default="input",
        description=(
            "What stays put when the LO sits off its ideal value (on the step grid): 'input', the physical "
            "case (a receiver's RF channel, a transmitter's IF from its modem), so the wanted output and every "
            "product move by the LO error; 'output' (transmitters only), the IF source retunes to keep the "
            "output on the channel."
        ),
    )

    @model_validator(mode="after")
    def _check(self) -> LoSetting:
        if self.mode == "fixed" and self.fixed_hz is None:
            raise PlanError("fixed_hz: missing; it is required when mode is 'fixed'")
        if self.mode == "tracking" and self.fixed_hz is not None:
            raise PlanError("fixed_hz: only used when mode is 'fixed'; remove it or set mode 'fixed'")
        return self


class IfBand(_Strict):
    """The IF passband: where the wanted output lands (down) or the input comes from (up)."""

    center_hz: FrequencyHz = Field(description="IF centre, Hz.")
    bandwidth_hz: SpanHz = Field(description="IF passband width, Hz.")

    @model_validator(mode="after")
    def _check(self) -> IfBand:
        if self.bandwidth_hz >= 2 * self.center_hz:
            raise PlanError(
                f"bandwidth_hz: {format_frequency(self.bandwidth_hz)} puts the lower passband edge "
                f"at or below 0 Hz (centre {format_frequency(self.center_hz)})"
            )
        return self

    @property
    def f_low_hz(self) -> float:
        """Lower passband edge, Hz."""
        return self.center_hz - self.bandwidth_hz / 2

    @property
    def f_high_hz(self) -> float:
        """Upper passband edge, Hz."""
        return self.center_hz + self.bandwidth_hz / 2


class Filters(_Strict):
    """Filters around the mixer; ``None`` means no filter (0 dB everywhere)."""

    rf: FilterSpec | None = Field(
        default=None,
        description="RF-side filter: a receiver's preselector, a transmitter's output filter.",
    )
    if_: FilterSpec | None = Field(default=None, alias="if", description="IF filter.")
    lo: FilterSpec | None = Field(
        default=None,
        description="LO filter: not applied to levels; a warning says when the LO sits on its skirt (lost LO drive).",
    )


class _GridCache:
    """Holds a plan's channel and LO arrays once computed; invisible to ``==`` and copies.

    Every cache compares equal to every other, so two equal plans compare equal
    whether or not either has been swept; the arrays are read-only; and a cache
    remembers which plan filled it, so a shallow copy of a plan recomputes its
    own grid rather than trusting its source's.
    """

    __slots__ = ("_owner", "_grid")

    def __init__(self) -> None:
        self._owner: int | None = None
        self._grid: tuple[np.ndarray, np.ndarray] | None = None

    def get(self, plan: Plan) -> tuple[np.ndarray, np.ndarray]:
        if self._grid is None or self._owner != id(plan):
            channels, lo = _channels_and_lo(plan)
            channels.setflags(write=False)
            lo.setflags(write=False)
            self._grid, self._owner = (channels, lo), id(plan)
        return self._grid

    def __eq__(self, other: object) -> bool:
        return isinstance(other, _GridCache)

    __hash__ = None  # type: ignore[assignment]

    def __copy__(self) -> _GridCache:
        return _GridCache()

    def __deepcopy__(self, memo: dict[int, Any]) -> _GridCache:
        return _GridCache()


class Plan(_Strict):
    """One frequency plan.

    Examples
    --------
    >>> plan = Plan.model_validate({
    ...     "direction": "down",
    ...     "rf": {"start_hz": "88 MHz", "stop_hz": "108 MHz", "step_hz": "100 kHz"},
    ...     "signal": {"bandwidth_hz": "200 kHz"},
    ...     "lo": {"mode": "tracking", "side": "high"},
    ...     "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "200 kHz"},
    ... })
    >>> plan.rf.n_channels
    201
    """

    schema_version: Literal[1] = Field(default=SCHEMA_VERSION, description="Plan JSON layout version.")
    name: str = Field(default="untitled plan", max_length=200, description="Short name of the plan.")
    notes: str = Field(default="", max_length=20_000, description="Free text.")
    direction: Literal["down", "up"] = Field(
        default="down", description="'down': RF in, IF out (receiver); 'up': IF in, RF out (transmitter)."
    )
    rf: RfBand
    signal: Signal
    lo: LoSetting = Field(default_factory=LoSetting)
    if_: IfBand = Field(alias="if")
    max_order: int = Field(default=7, ge=2, le=MAX_ORDER, description="Highest order m+n analysed.")
    mixer: MixerSpec = Field(default_factory=MixerSpec)
    filters: Filters = Field(default_factory=Filters)
    requirement: Requirement = Field(default_factory=Requirement)
    _grid_cache: _GridCache = PrivateAttr(default_factory=lambda: _GridCache())

    @model_validator(mode="after")
    def _check(self) -> Plan:
        n = self.rf.n_channels
        if n > MAX_CHANNELS:
            raise SweepTooLargeError(
                f"rf: {n} channels ({format_frequency(self.rf.start_hz)} to "
                f"{format_frequency(self.rf.stop_hz)} in {format_frequency(self.rf.step_hz or 0)} steps) "
                f"is too many; at most {MAX_CHANNELS}"
            )
        if self.lo.mode == "tracking" and self.lo.side == "low" and self.rf.start_hz <= self.if_.center_hz:
            raise PlanError(
                f"lo.side: 'low' puts the LO at or below 0 Hz: rf.start_hz {format_frequency(self.rf.start_hz)} "
                f"<= if.center_hz {format_frequency(self.if_.center_hz)}"
            )
        if self.filters.if_ is not None:
            for where, stage in iter_filter_stages(self.filters.if_, "filters.if"):
                if getattr(stage, "tracks_channel", False):
                    raise PlanError(
                        f"{where}.tracks_channel: True is invalid; an IF filter cannot track the channel "
                        "(the IF is fixed); set it false"
                    )
        return self

    # ------------------------------------------------------------------ sweep
    @property
    def _grid(self) -> tuple[np.ndarray, np.ndarray]:
        # The sweep grid is cached outside the model's fields and private state, so equal
        # plans compare equal (and copies never see a stale grid): see _GridCache.
        return self._grid_cache.get(self)

    def channels_hz(self) -> np.ndarray:
        """Channel centres of the RF tuning range, Hz, shape ``(n_channels,)``."""
        return self._grid[0].copy()

    def lo_hz(self) -> np.ndarray:
        """LO frequency for each channel after snapping to the LO step grid, Hz."""
        return self._grid[1].copy()

    def nominal_lo_hz(self, f_rf_hz: np.ndarray | float) -> np.ndarray:
        """LO frequency that puts ``f_rf_hz`` exactly on the IF centre, before grid snapping.

        Parameters
        ----------
        f_rf_hz : array_like
            RF channel centres, Hz.

        Returns
        -------
        numpy.ndarray
            Ideal LO, Hz (the fixed LO when the LO is fixed).
        """
        f_rf_hz = np.asarray(f_rf_hz, dtype=float)
        if self.lo.mode == "fixed":
            return np.full_like(f_rf_hz, float(self.lo.fixed_hz))
        if self.lo.side == "high":
            return f_rf_hz + self.if_.center_hz
        return f_rf_hz - self.if_.center_hz

    def with_changes(self, changes: dict[str, Any]) -> Plan:
        """Return a validated copy with changes applied at dotted JSON paths.

        Parameters
        ----------
        changes : dict
            Dotted JSON key paths to new values, e.g.
            ``{"if.center_hz": "21.4 MHz", "lo.side": "low"}``.

        Returns
        -------
        Plan
            A new plan; the original is unchanged.

        Raises
        ------
        PlanError
            If the changed plan is invalid.
        """
        data = self.to_dict()
        for path, value in changes.items():
            node = data
            keys = path.split(".")
            for key in keys[:-1]:
                if not isinstance(node.get(key), dict):
                    node[key] = {}
                node = node[key]
            node[keys[-1]] = value
        return plan_from_dict(data)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (frequencies as float Hz, JSON key names)."""
        return self.model_dump(mode="json", by_alias=True, exclude_none=True)


def _channels_and_lo(plan: Plan) -> tuple[np.ndarray, np.ndarray]:
    n = plan.rf.n_channels
    step = plan.rf.step_hz or 0.0
    channels = plan.rf.start_hz + step * np.arange(n, dtype=float)
    if n > 1:
        channels[-1] = min(channels[-1], plan.rf.stop_hz)
    lo = plan.nominal_lo_hz(channels)
    if plan.lo.step_hz is not None:
        # nearest grid point, exact halves up (np.round's halves-to-even would alternate the
        # sign of the LO error from channel to channel)
        lo = np.floor(lo / plan.lo.step_hz + 0.5) * plan.lo.step_hz
        if np.any(lo <= 0):
            raise PlanError(
                f"lo.step_hz: {plan.lo.step_hz!r} snaps the LO to 0 Hz; use a finer step"
            )
    return channels, lo


# ---------------------------------------------------------------------- JSON


def plan_from_dict(data: Any) -> Plan:
    """Validate a plain dict (parsed JSON) into a :class:`Plan`.

    Parameters
    ----------
    data : dict
        The plan, with JSON key names (``"if"``, not ``"if_"``).

    Returns
    -------
    Plan

    Raises
    ------
    PlanError
        One line naming the first bad field and its value.
    SweepTooLargeError
        If the sweep has more than :data:`MAX_CHANNELS` channels.
    """
    return validate_plan_model(Plan, data)


def validate_plan_model(model: type[BaseModel], data: Any) -> Any:
    """Validate parsed JSON into a plan model of any layout, with the plan's one-line errors.

    A sweep too large is raised as itself (:class:`~mixchart.errors.SweepTooLargeError`), never
    wrapped; every other problem is one :class:`~mixchart.errors.PlanError` naming its field.
    """
    if not isinstance(data, dict):
        raise PlanError(f"plan: {type(data).__name__} is invalid; the top level must be a JSON object")
    try:
        return model.model_validate(data, by_alias=True, by_name=False)
    except SweepTooLargeError:
        raise
    except ValidationError as exc:
        for err in exc.errors(include_url=False):
            ctx = err.get("ctx") or {}
            if isinstance(ctx.get("error"), SweepTooLargeError):
                raise ctx["error"] from None
        raise from_validation_error(exc, data, PlanError, root="plan") from None


# The file side of the plan (strict JSON text, files, the schema) lives in plan_io; its names are
# part of this module's API.
from .plan_io import (  # noqa: E402  (after Plan: plan_io imports it)
    MAX_PLAN_BYTES,
    dumps_plan,
    load_plan,
    loads_plan,
    parse_plan_json,
    plan_json_schema,
    read_plan_bytes,
    save_plan,
)
