"""Read and write a plan file of any layout version.

``schema_version`` picks the layout: 1 (or absent, as in the first releases) a single-conversion
:class:`~mixchart.plan.Plan`, 2 a :class:`~mixchart.models.chain.ChainPlan`.  Either loader
refuses unknown keys.  Saves are atomic and a save/load round trip is exact.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from ..errors import PlanError
from ..fileio import atomic_write_text
from .chain import CHAIN_SCHEMA_VERSION, ChainPlan, chain_from_dict
from .plan import Plan, dumps_plan, parse_plan_json, plan_from_dict, read_plan_bytes

__all__ = ["plan_from_any_dict", "loads_any", "load_any", "dumps_any", "save_any"]


def plan_from_any_dict(data: Any) -> Plan | ChainPlan:
    """Validate parsed JSON of any layout version.

    Parameters
    ----------
    data : dict
        The plan, with JSON key names.

    Returns
    -------
    Plan or ChainPlan
        Version 1 or version 2.

    Raises
    ------
    PlanError
        An unknown ``schema_version``, or an invalid plan (one line naming the field).
    """
    if not isinstance(data, dict):
        raise PlanError(f"plan: {type(data).__name__} is invalid; the top level must be a JSON object")
    version = data.get("schema_version", 1)
    if type(version) is int and version == 1:  # a whole number only: never true, never 1.0
        return plan_from_dict(data)
    if type(version) is int and version == CHAIN_SCHEMA_VERSION:
        return chain_from_dict(data)
    raise PlanError(f"schema_version: {version!r} is invalid; this release reads 1 and {CHAIN_SCHEMA_VERSION}")


def loads_any(text: str | bytes) -> Plan | ChainPlan:
    """Parse plan JSON text of any layout version (see :func:`plan_from_any_dict`)."""
    return plan_from_any_dict(parse_plan_json(text))


def load_any(path: str | os.PathLike[str]) -> Plan | ChainPlan:
    """Read a plan file of any layout version (a regular file, at most 5 MB)."""
    return loads_any(read_plan_bytes(path))


def dumps_any(plan: Plan | ChainPlan) -> str:
    """JSON text of a plan of either version (floats written with ``repr``: exact round trip)."""
    if isinstance(plan, Plan):
        return dumps_plan(plan)
    return json.dumps(plan.to_dict(), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def save_any(plan: Plan | ChainPlan, path: str | os.PathLike[str]) -> Path:
    """Write a plan of either version to ``path`` atomically (temporary file, flush, rename)."""
    return atomic_write_text(path, dumps_any(plan), error=PlanError, field="plan file")
