"""The one registry of stage kinds: spec, builder, form fields and report words for each.

The plan model's stage union is made from it (:func:`stage_specs`), the analysis builds
elements through it (:func:`build_element`), and the app and the report read their fields and
words from it.  A new kind is one module plus one :func:`register` line below.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from .base import Element, ElementKind

__all__ = ["REGISTRY", "register", "build_element", "kind_of", "stage_specs"]

#: Every stage kind, by its ``kind`` tag, in the order registered.
REGISTRY: dict[str, ElementKind] = {}


def register(entry: ElementKind) -> ElementKind:
    """Add a stage kind to :data:`REGISTRY` (its tag must be new)."""
    if entry.kind in REGISTRY:
        raise ValueError(f"kind: {entry.kind!r} is registered already")
    REGISTRY[entry.kind] = entry
    return entry


def kind_of(spec: Any) -> ElementKind:
    """The registry entry of a stage spec."""
    return REGISTRY[spec.kind]


def stage_specs() -> tuple[type, ...]:
    """The spec class of every registered kind (the members of the plan's stage union)."""
    return tuple(entry.spec for entry in REGISTRY.values())


def build_element(spec: Any, index: int, name: str, plan: Any, base_dir: str | Path | None) -> Element:
    """Build stage ``index`` of ``plan`` from its spec.

    Parameters
    ----------
    spec : pydantic model
        The stage's spec (``plan.chain[index]``).
    index : int
        Its place in the chain, from 0.
    name : str
        Its name in paths and tables (:func:`mixchart.models.chain.stage_names`).
    plan : ChainPlan
        The whole plan (a stage reads the signal, the direction and the default order from it).
    base_dir : str or pathlib.Path, optional
        Folder for relative file paths in the spec.

    Returns
    -------
    Element
    """
    return kind_of(spec).build(spec, index, name, plan, base_dir)


def _register_builtin() -> None:
    from . import adc, amplifier, filter, mixer

    for module in (filter, mixer, amplifier, adc):
        register(module.KIND)


_register_builtin()
