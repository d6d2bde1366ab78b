"""One mixer of a chain seen as a single-conversion plan, and that plan's edits written back.

The planner shows a chain's mixer on the tuning and output planes of a single conversion.  The
mixer's view is a version-1 plan (:func:`stage_plan`): its tuning range is the wanted signal's
frequencies at the mixer's input (the chain's tuning range for the first mixer; one frequency
behind a tracking first LO), its signal the wanted signal there, its filters the filter stages
next to it.  An edit of that view (a dragged IF band, a new LO side) is written back into the
chain by :func:`apply_stage_plan`, and the chain is analysed again: a later mixer whose LO tracks
follows the new IF.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import PlanError
from ..models.chain import ChainPlan, chain_from_dict, stage_names
from ..plan import Plan, plan_from_dict
from .setup import ChainSetup

__all__ = ["stage_plan", "apply_stage_plan", "mixer_indices"]


def mixer_indices(plan: ChainPlan) -> list[int]:
    """The chain positions of the mixers."""
    return [i for i, s in enumerate(plan.chain) if s.kind == "mixer"]


def _neighbour_filter(plan: ChainPlan, i: int, step: int) -> int | None:
    """The nearest filter stage before (step -1) or after (+1) stage i, across amplifiers only."""
    j = i + step
    while 0 <= j < len(plan.chain) and plan.chain[j].kind == "amplifier":
        j += step
    if 0 <= j < len(plan.chain) and plan.chain[j].kind == "filter":
        return j
    return None


def _raster(f_hz: np.ndarray) -> dict[str, float]:
    """A tuning range holding ``f_hz`` (the wanted signal at a node), as version 1 writes one."""
    f = np.sort(np.unique(np.round(f_hz, 3)))
    if f.size == 1:
        return {"start_hz": float(f[0]), "stop_hz": float(f[0])}
    step = float(np.min(np.diff(f)))
    return {"start_hz": float(f[0]), "stop_hz": float(f[-1]), "step_hz": step}


def stage_plan(setup: ChainSetup, index: int) -> Plan:
    """The single-conversion plan of mixer ``index`` of a chain.

    Parameters
    ----------
    setup : ChainSetup
        The chain's set-up (:func:`mixchart.chains.setup.set_up`): its wanted signal at every node.
    index : int
        The mixer's position in the chain.

    Returns
    -------
    Plan
        Direction ``down`` for a mixer fed at its RF port (its input is the tuning range),
        ``up`` for one fed at its IF port (its output is).  Its filters are the nearest filter
        stages on each side (across amplifiers); its signal level is the one that gives the
        mixer the drive it has in the chain (the level at the mixer plus the input-side filter's
        loss on the wanted signal, so that amplifiers in between are counted).
    """
    plan = setup.plan
    spec = plan.chain[index]
    if spec.kind != "mixer":
        raise PlanError(f"chain.{index}.kind: {spec.kind!r} is invalid; only a mixer has planes of its own")
    down = spec.input_port == "rf"
    before, after = _neighbour_filter(plan, index, -1), _neighbour_filter(plan, index, +1)
    node_in, node_out = setup.nodes[index], setup.nodes[index + 1]
    level = node_in.level_dbm.copy()
    if before is not None:
        level += setup.elements[before].point_loss_db(node_in.f_hz, setup.nodes[before])
    filters: dict[str, Any] = {}
    first, last = ("rf", "if") if down else ("if", "rf")
    if before is not None:
        filters[first] = plan.chain[before].filter.model_dump(mode="json", by_alias=True, exclude_none=True)
    if after is not None:
        filters[last] = plan.chain[after].filter.model_dump(mode="json", by_alias=True, exclude_none=True)
    if spec.lo_filter is not None:
        filters["lo"] = spec.lo_filter.model_dump(mode="json", by_alias=True, exclude_none=True)
    data = {
        "schema_version": 1,
        "name": f"{plan.name}: {stage_names(plan)[index]}"[:200],
        "direction": "down" if down else "up",
        "rf": _raster(node_in.f_hz if down else node_out.f_hz),
        "signal": {**plan.signal.model_dump(mode="json", exclude_none=True), "level_dbm": float(np.max(level))},
        "lo": spec.lo.model_dump(mode="json", exclude_none=True),
        "if": spec.if_.model_dump(mode="json", exclude_none=True),
        "max_order": spec.max_order or plan.max_order,
        "mixer": spec.mixer.model_dump(mode="json", exclude_none=True),
        "filters": filters,
        "requirement": plan.requirement.model_dump(mode="json", exclude_none=True),
    }
    return plan_from_dict(data)


def apply_stage_plan(plan: ChainPlan, index: int, edited: Plan) -> ChainPlan:
    """Write an edited single-conversion view of mixer ``index`` back into the chain.

    The mixer takes the view's LO, IF, mixer and LO filter; the filter stages next to it take its
    input-side and output-side filters (a filter the view adds becomes a new stage, one it removes
    is dropped); the requirement is the whole chain's.  For the first mixer of a receiver the
    view's tuning range and signal are the chain's too; for a later mixer they are derived from
    the stages before it, so edits of them are not written back.

    Raises
    ------
    PlanError
        If the chain is no longer valid (one line naming the stage's field).
    """
    data = plan.to_dict()
    chain = data["chain"]
    spec = dict(chain[index])
    view = edited.to_dict()
    spec["lo"], spec["if"], spec["mixer"] = view.get("lo", {}), view["if"], view.get("mixer", {})
    filters = view.get("filters", {})
    if "lo" in filters:
        spec["lo_filter"] = filters["lo"]
    else:
        spec.pop("lo_filter", None)
    if view.get("max_order") != (plan.chain[index].max_order or plan.max_order):
        spec["max_order"] = view["max_order"]
    chain[index] = spec
    down = plan.chain[index].input_port == "rf"
    first, last = ("rf", "if") if down else ("if", "rf")
    after = _neighbour_filter(plan, index, +1)
    if after is not None and last in filters:
        chain[after] = {**chain[after], "filter": filters[last]}
    elif after is not None:
        chain.pop(after)
    elif last in filters:
        chain.insert(index + 1, {"kind": "filter", "filter": filters[last]})
    before = _neighbour_filter(plan, index, -1)
    if before is not None and first in filters:
        chain[before] = {**chain[before], "filter": filters[first]}
    elif before is not None:
        chain.pop(before)
    elif first in filters:
        chain.insert(index, {"kind": "filter", "filter": filters[first]})
    data["requirement"] = view.get("requirement", data.get("requirement", {}))
    if index == mixer_indices(plan)[0] and plan.direction == "down":
        data["rf"] = view["rf"]
        data["signal"] = {**view["signal"], "level_dbm": plan.signal.level_dbm}
    return chain_from_dict(data)
