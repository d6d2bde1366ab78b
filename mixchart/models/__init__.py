"""Plan models: data only (pydantic and JSON), computing nothing.

:mod:`mixchart.models.chain` holds layout version 2 (a chain of stages) and the bridge to
version 1 (:mod:`mixchart.plan`); :func:`load_any` reads a plan file of either version.
"""

from __future__ import annotations

from .chain import (
    CHAIN_SCHEMA_VERSION,
    MAX_STAGES,
    ChainPlan,
    chain_from_dict,
    migrate_v1,
    single_stage_plan,
    stage_names,
)
from .loading import dumps_any, load_any, loads_any, save_any

__all__ = ["CHAIN_SCHEMA_VERSION", "MAX_STAGES", "ChainPlan", "chain_from_dict", "migrate_v1", "single_stage_plan",
           "stage_names", "load_any", "loads_any", "dumps_any", "save_any"]
