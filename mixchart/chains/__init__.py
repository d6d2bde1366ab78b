"""Conversion chains: the sweep of a chain plan, forward (products) and inverse (responses).

:func:`analyse_chain` takes a :class:`~mixchart.models.chain.ChainPlan` to a
:class:`ChainResult`; :func:`evaluate_any` takes a plan of either layout version and evaluates
a one-mixer chain with the single-conversion engine (identical to version 1's results).
"""

from __future__ import annotations

from .bridge import evaluate_any
from .result import ChainResult, ChainSummary
from .sweep import analyse_chain

__all__ = ["analyse_chain", "evaluate_any", "ChainResult", "ChainSummary"]
