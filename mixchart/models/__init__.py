"""Plan models: data only (pydantic and JSON), computing nothing.

:mod:`mixchart.models.plan` holds layout version 1 (one conversion; its file side in
:mod:`mixchart.models.plan_io`), :mod:`mixchart.models.chain` layout version 2 (a chain of
stages) and the bridge between them; :func:`load_any` reads a plan file of either version.
The names below are imported on first use: the version-1 model is needed by the modules the
chain's stages are built from, so importing this package must not import the chain model.
"""

from __future__ import annotations

import importlib
from typing import Any

_LAZY = {
    "CHAIN_SCHEMA_VERSION": "chain", "MAX_STAGES": "chain", "ChainPlan": "chain", "chain_from_dict": "chain",
    "migrate_v1": "chain", "single_stage_plan": "chain", "stage_names": "chain",
    "load_any": "loading", "loads_any": "loading", "dumps_any": "loading", "save_any": "loading",
}

__all__ = sorted(_LAZY)


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        return getattr(importlib.import_module(f".{_LAZY[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
