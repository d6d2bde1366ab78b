"""Plan layout version 2: a tuning range, the wanted signal, the requirements and a chain of stages.

A :class:`ChainPlan` holds what converts to what, as data only (it computes nothing):

* ``direction``: ``"down"``, the tuning range is the chain's input (a receiver); ``"up"``, it
  is the chain's output and the input sits in the first mixer's IF (a transmitter);
* ``rf``: the tuning range and channel raster;
* ``signal``, ``requirement``, ``max_order`` (each stage's default order cap), as in version 1;
* ``chain``: the stages in signal order, each tagged by ``kind``, one of the kinds in
  :data:`mixchart.elements.REGISTRY` (``filter``, ``mixer``, ``amplifier``, ``adc``).

A version-1 plan is a one-mixer chain: :func:`migrate_v1` writes it as one and
:func:`single_stage_plan` reads such a chain back into version 1, which is how the chain code
evaluates it (with results identical to version 1's).  Plan files are untrusted: parsed with
:mod:`json` only, unknown keys refused, every error one line naming the field.
"""

from __future__ import annotations

import functools
import operator
from collections import Counter
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from ..elements.registry import stage_specs
from ..errors import PlanError, SweepTooLargeError
from ..requirements import Requirement
from .plan import MAX_CHANNELS, MAX_ORDER, Plan, RfBand, Signal, plan_from_dict, validate_plan_model

__all__ = ["CHAIN_SCHEMA_VERSION", "MAX_STAGES", "ChainPlan", "Stage", "chain_from_dict", "chain_json_schema",
           "migrate_v1",
           "single_stage_plan", "stage_names"]

#: Version of the plan layout with a chain of stages.
CHAIN_SCHEMA_VERSION = 2
#: Most stages in one chain (a real chain has a handful).
MAX_STAGES = 16

#: One stage of a chain: any registered kind, told apart by its ``kind`` tag.
Stage = Annotated[functools.reduce(operator.or_, stage_specs()), Field(discriminator="kind")]


class ChainPlan(BaseModel):
    """A frequency plan whose conversion is a chain of stages (layout version 2).

    Examples
    --------
    >>> plan = chain_from_dict({
    ...     "schema_version": 2, "direction": "down",
    ...     "rf": {"start_hz": "144 MHz", "stop_hz": "146 MHz", "step_hz": "25 kHz"},
    ...     "signal": {"bandwidth_hz": "12.5 kHz"},
    ...     "chain": [{"kind": "mixer", "lo": {"side": "high"}, "if": {"center_hz": "45 MHz",
    ...                "bandwidth_hz": "30 kHz"}},
    ...               {"kind": "mixer", "lo": {"mode": "fixed", "fixed_hz": "44.545 MHz"},
    ...                "if": {"center_hz": "455 kHz", "bandwidth_hz": "15 kHz"}}]})
    >>> stage_names(plan)
    ['mixer 1', 'mixer 2']
    """

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)

    schema_version: Literal[2] = Field(default=CHAIN_SCHEMA_VERSION, description="Plan JSON layout version.")
    name: str = Field(default="untitled plan", max_length=200, description="Short name of the plan.")
    notes: str = Field(default="", max_length=20_000, description="Free text.")
    direction: Literal["down", "up"] = Field(default="down", description="'down': the tuning range is the chain's "
                                             "input (a receiver); 'up': it is the chain's output (a transmitter).")
    rf: RfBand = Field(description="The tuning range: channel centres at the chain's input ('down') or output ('up').")
    signal: Signal
    max_order: int = Field(default=7, ge=2, le=MAX_ORDER, description="Each stage's order cap unless it sets its own.")
    requirement: Requirement = Field(default_factory=Requirement)
    chain: tuple[Stage, ...] = Field(min_length=1, max_length=MAX_STAGES, description="The stages, in signal order.")

    @model_validator(mode="after")
    def _check(self) -> ChainPlan:
        n = self.rf.n_channels
        if n > MAX_CHANNELS:
            raise SweepTooLargeError(f"rf: {n} channels is too many; at most {MAX_CHANNELS}")
        kinds = [stage.kind for stage in self.chain]
        if "mixer" not in kinds:
            raise PlanError("chain: no mixer stage; a chain converts, so it needs at least one mixer")
        mixers = [i for i, k in enumerate(kinds) if k == "mixer"]
        for i, kind in enumerate(kinds):
            if kind == "adc" and i != len(kinds) - 1:
                raise PlanError(f"chain.{i}.kind: 'adc' must be the last stage (it turns the signal digital)")
            if kind == "adc" and self.direction == "up":
                raise PlanError(f"chain.{i}.kind: 'adc' is invalid in an up-conversion chain (direction 'up')")
        for i in mixers:
            stage = self.chain[i]
            if stage.input_port == "if" and stage.lo.mode == "tracking" and not (
                    self.direction == "up" and i == mixers[-1]):
                raise PlanError(f"chain.{i}.lo.mode: 'tracking' is invalid for a mixer fed at its IF port unless "
                                "it is the last mixer of an up-conversion chain (its LO puts the output on the "
                                "channel); fix its LO")
            if len(mixers) > 1 and stage.lo.grid_holds != "input":
                raise PlanError(f"chain.{i}.lo.grid_holds: {stage.lo.grid_holds!r} is invalid in a chain of "
                                "several mixers; only 'input' is modelled there")
        if self.direction == "up" and self.chain[mixers[0]].input_port != "if":
            raise PlanError(f"chain.{mixers[0]}.input_port: 'rf' is invalid for the first mixer of an "
                            "up-conversion chain: the chain's input is that mixer's IF")
        names = stage_names(self)
        for i, name in enumerate(names):
            if name in names[:i]:
                raise PlanError(f"chain.{i}.name: {name!r} is invalid; stage {names.index(name)} has that name "
                                "already, and each stage needs its own")
        return self

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (frequencies as float Hz, JSON key names)."""
        return self.model_dump(mode="json", by_alias=True, exclude_none=True)


def chain_json_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of a version-2 plan file, generated from the model."""
    schema = ChainPlan.model_json_schema(by_alias=True, mode="validation")
    return {"$schema": "https://json-schema.org/draft/2020-12/schema",
            "$id": f"mixchart-plan-v{CHAIN_SCHEMA_VERSION}", **schema}


def stage_names(plan: ChainPlan) -> list[str]:
    """Each stage's name: its own, else its kind and its count among that kind ('mixer 2').

    The one ADC a chain may hold is called 'ADC'.
    """
    seen: Counter[str] = Counter()
    out = []
    for stage in plan.chain:
        seen[stage.kind] += 1
        default = "ADC" if stage.kind == "adc" else f"{stage.kind} {seen[stage.kind]}"
        out.append(stage.name or default)
    return out


def chain_from_dict(data: Any) -> ChainPlan:
    """Validate a plain dict (parsed JSON) of layout version 2 into a :class:`ChainPlan`.

    Raises
    ------
    PlanError
        One line naming the first bad field (``chain.1.lo.side``) and its value.
    """
    return validate_plan_model(ChainPlan, data)


# ------------------------------------------------------------------ version 1 <-> one-mixer chain

_V1_NAMES = {"down": ("preselector", "mixer", "IF filter"), "up": ("IF filter", "mixer", "output filter")}


def migrate_v1(plan: Plan) -> ChainPlan:
    """The one-mixer chain that a version-1 plan describes.

    A receiver (``down``) becomes preselector → mixer → IF filter, a transmitter (``up``)
    IF filter → mixer → output filter; an absent filter is left out.  Nothing is lost:
    :func:`single_stage_plan` gives the version-1 plan back, equal field for field.

    Parameters
    ----------
    plan : Plan
        A version-1 plan.

    Returns
    -------
    ChainPlan
    """
    data = plan.to_dict()
    before, mixer_name, after = _V1_NAMES[plan.direction]
    filters = data.pop("filters", {})
    first, last = ("rf", "if") if plan.direction == "down" else ("if", "rf")
    mixer: dict[str, Any] = {"kind": "mixer", "name": mixer_name,
                             "input_port": "rf" if plan.direction == "down" else "if",
                             "lo": data.pop("lo"), "if": data.pop("if"), "mixer": data.pop("mixer")}
    if "lo" in filters:
        mixer["lo_filter"] = filters["lo"]
    chain = []
    if first in filters:
        chain.append({"kind": "filter", "name": before, "filter": filters[first]})
    chain.append(mixer)
    if last in filters:
        chain.append({"kind": "filter", "name": after, "filter": filters[last]})
    data["schema_version"] = CHAIN_SCHEMA_VERSION
    data["chain"] = chain
    return chain_from_dict(data)


def single_stage_plan(plan: ChainPlan) -> Plan | None:
    """The version-1 plan a one-mixer chain is, or None when the chain needs the chain engine.

    A chain is a version-1 plan when it holds one mixer, fed at its RF port for a receiver
    (its IF port for a transmitter), with at most one filter before it and one after, and
    nothing else.  Stage names other than the ones :func:`migrate_v1` writes are not kept.
    """
    kinds = [s.kind for s in plan.chain]
    if kinds.count("mixer") != 1 or set(kinds) - {"mixer", "filter"}:
        return None
    i = kinds.index("mixer")
    if i > 1 or len(kinds) - i > 2:
        return None
    mixer = plan.chain[i]
    if mixer.input_port != ("rf" if plan.direction == "down" else "if"):
        return None
    data = plan.to_dict()
    stages = data.pop("chain")
    data["schema_version"] = 1
    m = stages[i]
    data["lo"], data["if"], data["mixer"] = m.get("lo", {}), m["if"], m.get("mixer", {})
    if m.get("max_order") not in (None, plan.max_order):
        return None
    filters: dict[str, Any] = {}
    first, last = ("rf", "if") if plan.direction == "down" else ("if", "rf")
    if i == 1:
        filters[first] = stages[0]["filter"]
    if len(stages) - i == 2:
        filters[last] = stages[i + 1]["filter"]
    if "lo_filter" in m:
        filters["lo"] = m["lo_filter"]
    if filters:
        data["filters"] = filters
    return plan_from_dict(data)
