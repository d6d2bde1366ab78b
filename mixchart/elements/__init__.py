"""The stages of a conversion chain behind one protocol and one registry.

Each kind of stage (filter, mixer, amplifier, ADC) is one module holding its spec (data only)
and its element (what it does to bands), and one entry in :data:`REGISTRY`.  Adding a kind is
those two things; DEVELOPERS.md says how.
"""

from __future__ import annotations

from .base import Element, ElementKind, Flow, Inverse, Node, WarningRecord
from .registry import REGISTRY, build_element, kind_of, register

__all__ = ["Element", "ElementKind", "Flow", "Inverse", "Node", "WarningRecord", "REGISTRY", "register",
           "build_element", "kind_of"]
