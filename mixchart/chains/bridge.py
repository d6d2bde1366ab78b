"""The one bridge from a plan of either layout version to an engine.

A version-1 plan, and a chain that is one (one mixer with at most a filter on each side:
:func:`~mixchart.models.chain.single_stage_plan`), go to the single-conversion engine
(:func:`mixchart.analysis.evaluate`), so their results are identical to version 1's, bit for
bit (tests/test_golden.py).  Every other chain goes to :func:`~mixchart.chains.analyse_chain`.
"""

from __future__ import annotations

from pathlib import Path

from ..models.chain import ChainPlan, single_stage_plan
from ..plan import Plan
from .sweep import analyse_chain

__all__ = ["evaluate_any"]


def evaluate_any(plan: Plan | ChainPlan, *, base_dir: str | Path | None = None):
    """Evaluate a plan of either layout version.

    Parameters
    ----------
    plan : Plan or ChainPlan
    base_dir : str or pathlib.Path, optional
        Folder for relative file paths in the plan.

    Returns
    -------
    Evaluation or ChainResult
        The single-conversion engine's :class:`~mixchart.analysis.Evaluation` for a version-1
        plan or a one-mixer chain; a :class:`ChainResult` for any other chain.
    """
    from ..analysis import evaluate

    if isinstance(plan, ChainPlan):
        single = single_stage_plan(plan)
        if single is None:
            return analyse_chain(plan, base_dir=base_dir)
        plan = single
    return evaluate(plan, base_dir=base_dir)
