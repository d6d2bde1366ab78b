"""The planner's state, without any widget: the plan being edited, a reference, the view.

:class:`PlanState` validates every change (a bad change leaves the last valid
plan in place and returns the one-line message) and tells its listeners what
changed.  It is what :mod:`mixchart.app` wires widgets to, and what tests drive
without a browser.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from .analysis import Evaluation, evaluate
from .chart import ViewOptions
from .errors import MixchartError
from .plan import Plan, load_plan, loads_plan, save_plan
from .units import parse_frequency

__all__ = ["PlanState", "example_plan", "default_save_dir", "Listener"]

Listener = Callable[["PlanState", str], None]

#: Plan changes kept for undo.
MAX_UNDO = 200
#: The newest history entries keep their evaluation, so that stepping back or forth through
#: them shows the plan without evaluating it again (older entries are evaluated when reached).
KEEP_EVALUATIONS = 8
#: Reference plans kept for comparison (the oldest goes when one more is kept).
MAX_REFERENCES = 8


def default_save_dir() -> Path:
    """Where a plan that came from no file is saved: the user's working directory.

    ``mixchart serve`` runs its notebook in a temporary folder, so it passes the folder the
    user started it from as ``MIXCHART_CWD``; elsewhere it is the current directory.
    """
    return Path(os.environ.get("MIXCHART_CWD") or os.getcwd())


def example_plan(name: str = "fm_receiver") -> tuple[Plan, Path]:
    """A built-in example plan and its folder."""
    from .cli import example_path

    path = example_path(name)
    return load_plan(path), path.parent


class PlanState:
    """The app's state, without any widget.

    Parameters
    ----------
    plan : Plan
        The plan to start from.
    base_dir : path-like, optional
        Folder for relative file paths inside the plan.
    save_dir : path-like, optional
        Where saves and snapshots go unless given an absolute path: the opened plan's
        folder, else the working directory (never a server's temporary folder).
    file_name : str
        The file name saves default to: the opened plan's name.

    Attributes
    ----------
    plan : Plan
        The current (always valid) plan.
    evaluation : Evaluation
        Its evaluation.
    references : dict of str to (Plan, Evaluation)
        The plans kept for comparison, by name, oldest first (at most :data:`MAX_REFERENCES`).
    reference_name : str or None
        The reference shown beside the plan (None: none kept).
    view : ViewOptions
        Channel, normalisation and shown orders.
    """

    def __init__(self, plan: Plan, base_dir: str | os.PathLike[str] | None = None, *,
                 save_dir: str | os.PathLike[str] | None = None, file_name: str = "plan.json") -> None:
        self.base_dir = None if base_dir is None else Path(base_dir)
        self.save_dir = Path(save_dir if save_dir is not None else default_save_dir()).resolve()
        self.file_name = file_name
        self.plan = plan
        self.evaluation = evaluate(plan, base_dir=self.base_dir)
        self.references: dict[str, tuple[Plan, Evaluation]] = {}
        self.reference_name: str | None = None
        self.view = ViewOptions()
        self._listeners: list[Listener] = []
        # every plan change can be undone and redone: (plan, base_dir, evaluation or None) before
        # each change; only the KEEP_EVALUATIONS newest entries of each list keep their evaluation
        self._undo: list[tuple[Plan, Path | None, Evaluation | None]] = []
        self._redo: list[tuple[Plan, Path | None, Evaluation | None]] = []

    def observe(self, listener: Listener) -> None:
        """Call ``listener(state, what)`` after each change; ``what`` is
        ``"plan"``, ``"view"`` or ``"reference"``."""
        self._listeners.append(listener)

    def _notify(self, what: str) -> None:
        for listener in list(self._listeners):
            listener(self, what)

    # --------------------------------------------------------------- plan
    def try_update(self, changes: dict[str, Any]) -> str | None:
        """Apply changes at dotted JSON paths if the result is a valid plan.

        Parameters
        ----------
        changes : dict
            e.g. ``{"if.center_hz": "21.4 MHz"}``.

        Returns
        -------
        str or None
            The one-line error if the change was refused (the plan is then
            unchanged), else None.  A change that leaves the plan as it was
            does nothing (so a repeated event is harmless).
        """
        try:
            new = self.plan.with_changes(_filters_follow(self.plan, changes))
            if new == self.plan:
                return None
            result = evaluate(new, base_dir=self.base_dir)
        except MixchartError as exc:
            return str(exc)
        self._remember()
        self.plan, self.evaluation = new, result
        self._notify("plan")
        return None

    # --------------------------------------------------------------- undo / redo
    def _remember(self) -> None:
        """Keep the plan as it is now for :meth:`undo`; a new change forgets what could be redone."""
        _push(self._undo, (self.plan, self.base_dir, self.evaluation))
        self._redo.clear()

    @property
    def can_undo(self) -> bool:
        """Whether a plan change can be undone."""
        return bool(self._undo)

    @property
    def can_redo(self) -> bool:
        """Whether an undone change can be redone."""
        return bool(self._redo)

    def undo(self) -> str | None:
        """Go back to the plan before the last change (a field, a drag, a button or a load).

        Returns
        -------
        str or None
            An error text if that plan no longer evaluates (e.g. a file it names was removed;
            nothing changes then), else None.  Nothing to undo is not an error.
        """
        return self._step(self._undo, self._redo)

    def redo(self) -> str | None:
        """Re-apply the change last undone.  Returns an error text or None, as :meth:`undo`."""
        return self._step(self._redo, self._undo)

    def _step(self, source: list, target: list) -> str | None:
        if not source:
            return None
        plan, folder, kept = source[-1]
        try:
            # a kept evaluation is the one this plan had; a plan that reads a file is evaluated
            # again, so that a file edited meanwhile is read anew
            result = kept if kept is not None and not reads_files(plan) else evaluate(plan, base_dir=folder)
        except MixchartError as exc:
            return str(exc)
        source.pop()
        _push(target, (self.plan, self.base_dir, self.evaluation))
        self.plan, self.evaluation, self.base_dir = plan, result, folder
        self._notify("plan")
        return None

    def replace_plan(self, plan: Plan, base_dir: str | os.PathLike[str] | None = None) -> str | None:
        """Replace the whole plan (after a load).  Returns an error text or None."""
        folder = self.base_dir if base_dir is None else Path(base_dir)
        try:
            result = evaluate(plan, base_dir=folder)
        except MixchartError as exc:
            return str(exc)
        self._remember()
        self.plan, self.evaluation, self.base_dir = plan, result, folder
        self.view = replace(self.view, channel_hz=None)
        self._notify("plan")
        return None

    def load_text(self, text: str | bytes, name: str | None = None) -> str | None:
        """Load a plan from JSON text (e.g. an uploaded file named ``name``).  Returns an error text or None."""
        try:
            plan = loads_plan(text)
        except MixchartError as exc:
            return str(exc)
        error = self.replace_plan(plan)
        if error is None and name:
            self.file_name = Path(name).name
        return error

    def load_path(self, path: str | os.PathLike[str]) -> str | None:
        """Load a plan file; later saves go next to it, under its name.  Returns an error text or None."""
        try:
            plan = load_plan(self.resolve(path))
        except MixchartError as exc:
            return str(exc)
        resolved = self.resolve(path)
        error = self.replace_plan(plan, resolved.parent)
        if error is None:
            self.save_dir, self.file_name = resolved.parent, resolved.name
        return error

    def resolve(self, path: str | os.PathLike[str]) -> Path:
        """``path`` as the user means it: absolute as given, relative to :attr:`save_dir` otherwise."""
        path = Path(os.path.expanduser(str(path)))
        return path if path.is_absolute() else self.save_dir / path

    def save(self, path: str | os.PathLike[str] | None = None) -> Path:
        """Save the current plan atomically (at :meth:`resolve` of ``path``, default :attr:`file_name`)."""
        return save_plan(self.plan, self.resolve(path or self.file_name))

    # --------------------------------------------------------------- view
    def set_view(self, **changes: Any) -> None:
        """Change view options (see :class:`~mixchart.chart.ViewOptions`)."""
        new = replace(self.view, **changes)
        if new != self.view:
            self.view = new
            self._notify("view")

    @property
    def channel_index(self) -> int:
        """Index of the channel the output plane shows."""
        if self.view.channel_hz is None:
            return int(np.argmin(self.evaluation.worst_margin_db))
        return self.evaluation.nearest_channel(self.view.channel_hz)

    # ---------------------------------------------------------- reference
    @property
    def reference(self) -> tuple[Plan, Evaluation] | None:
        """The reference shown beside the plan, as ``(plan, evaluation)``, or None."""
        return None if self.reference_name is None else self.references[self.reference_name]

    def keep_reference(self, name: str | None = None) -> str:
        """Keep the current plan as a named reference and show it.

        Parameters
        ----------
        name : str, optional
            The reference's name; default the plan's name.  A name already kept
            gets a number (``"... (2)"``); surrounding blanks are dropped.

        Returns
        -------
        str
            The name it was kept under.
        """
        base = (name or "").strip() or self.plan.name.strip() or "reference"
        kept, k = base, 2
        while kept in self.references:
            kept, k = f"{base} ({k})", k + 1
        self.references[kept] = (self.plan, self.evaluation)
        while len(self.references) > MAX_REFERENCES:
            del self.references[next(iter(self.references))]
        self.reference_name = kept
        self._notify("reference")
        return kept

    def select_reference(self, name: str | None) -> None:
        """Show the reference kept as ``name`` (None: show none).

        Raises
        ------
        MixchartError
            If no reference has that name.
        """
        if name is not None and name not in self.references:
            raise MixchartError(f"reference: {name!r} is not kept; kept: {', '.join(self.references) or 'none'}")
        if name != self.reference_name:
            self.reference_name = name
            self._notify("reference")

    def clear_reference(self, name: str | None = None) -> None:
        """Forget one reference (default: the one shown); the newest left is shown next."""
        name = self.reference_name if name is None else name
        if name is None or name not in self.references:
            return
        del self.references[name]
        if self.reference_name == name:
            self.reference_name = next(reversed(self.references), None)
        self._notify("reference")

    # ---------------------------------------------------------- drag edits
    def apply_band_drag(self, band: str, low: float, high: float) -> str | None:
        """Apply a dragged band from the chart.

        Parameters
        ----------
        band : {"rf", "if"}
            Which band was dragged.
        low, high : float
            New edges, Hz (any order).  A band is moved to the dragged centre and,
            if its width changed by more than 1 %, resized.  The RF band snaps to its
            channel raster (nearest, ties up) and a move keeps its channel count; the
            IF snaps to a grid of a hundredth of its passband's decade.

        Returns
        -------
        str or None
            Error text if the result is not a valid plan.
        """
        low, high = sorted((float(low), float(high)))
        if not (math.isfinite(low) and math.isfinite(high)) or high <= 0:
            return f"{band} band: dragged to {low!r}..{high!r} Hz, which is not a usable band"
        centre, width = 0.5 * (low + high), high - low
        plan = self.plan
        if band == "if":
            # a grid a hundredth of the passband's decade (230 kHz -> 1 kHz, 1 GHz -> 10 MHz)
            old_w = plan.if_.bandwidth_hz
            grid = 10.0 ** (math.floor(math.log10(old_w)) - 2)
            new_w = max(round(width / grid), 1) * grid if abs(width - old_w) > 0.01 * old_w else old_w
            centre = math.floor(centre / grid + 0.5) * grid
            return self.try_update({"if.center_hz": _snap(centre), "if.bandwidth_hz": _snap(new_w)})
        half_sig = plan.signal.bandwidth_hz / 2
        old_lo, old_hi = plan.rf.start_hz - half_sig, plan.rf.stop_hz + half_sig
        old_w = old_hi - old_lo
        shift = centre - 0.5 * (old_lo + old_hi)
        start, stop = plan.rf.start_hz + shift, plan.rf.stop_hz + shift
        resized = abs(width - old_w) > 0.01 * max(old_w, 1.0)
        if resized:
            start, stop = low + half_sig, max(high - half_sig, low + half_sig)
        step = plan.rf.step_hz
        if step:
            # on the channel raster (nearest, ties up); a move keeps the channel count exactly
            start = math.floor(start / step + 0.5) * step
            count = (plan.rf.n_channels - 1) if not resized else math.floor((stop - start) / step + 0.5)
            stop = start + max(count, 0) * step
        return self.try_update({"rf.start_hz": _snap(start), "rf.stop_hz": _snap(stop)})


def _filters_follow(plan: Plan, changes: dict[str, Any]) -> dict[str, Any]:
    """Move a fixed filter along with the band it was centred on.

    When the IF centre moves and the IF filter was centred on the old IF centre,
    the filter moves too; likewise a fixed RF filter centred on the RF band
    follows the band.  (A filter centred elsewhere is the user's choice and
    stays.)  Returns the changes with the filter moves added.
    """
    out = dict(changes)

    def centred(spec: Any, f_hz: float) -> bool:
        centre = getattr(spec, "f_center_hz", None)
        return (
            spec is not None
            and not getattr(spec, "tracks_channel", False)
            and centre is not None
            and abs(centre - f_hz) <= 1e-9 * f_hz
        )

    if "if.center_hz" in changes and "filters.if" not in changes and centred(plan.filters.if_, plan.if_.center_hz):
        try:
            out["filters.if.f_center_hz"] = parse_frequency(changes["if.center_hz"], "if.center_hz")
        except MixchartError:
            pass  # the plan change itself reports the bad value
    if ("rf.start_hz" in changes or "rf.stop_hz" in changes) and "filters.rf" not in changes:
        old_mid = 0.5 * (plan.rf.start_hz + plan.rf.stop_hz)
        if centred(plan.filters.rf, old_mid):
            try:
                start = parse_frequency(changes.get("rf.start_hz", plan.rf.start_hz), "rf.start_hz")
                stop = parse_frequency(changes.get("rf.stop_hz", plan.rf.stop_hz), "rf.stop_hz")
            except MixchartError:
                return out
            out["filters.rf.f_center_hz"] = 0.5 * (start + stop)
    return out


def _snap(f_hz: float) -> float:
    """Round a dragged frequency to 6 significant digits (no float drift in the plan)."""
    if f_hz <= 0 or not math.isfinite(f_hz):
        return f_hz
    digits = 6 - math.floor(math.log10(f_hz)) - 1
    return float(round(f_hz, digits))


def _push(history: list, entry: tuple) -> None:
    """Append a history entry; keep at most MAX_UNDO, and evaluations only on the newest few."""
    history.append(entry)
    del history[:-MAX_UNDO]
    if len(history) > KEEP_EVALUATIONS:
        plan, folder, kept = history[-KEEP_EVALUATIONS - 1]
        if kept is not None:
            history[-KEEP_EVALUATIONS - 1] = (plan, folder, None)


def reads_files(plan: Plan) -> bool:
    """Whether evaluating ``plan`` reads a file: a measured level table (``mixer.table``) or a
    filter given by its data file (a ``path`` anywhere under ``filters``)."""
    if plan.mixer.table != "builtin":
        return True

    def has_path(node: Any) -> bool:
        if isinstance(node, dict):
            return isinstance(node.get("path"), str) or any(has_path(v) for v in node.values())
        if isinstance(node, list):
            return any(has_path(v) for v in node)
        return False

    return has_path(plan.model_dump(mode="json").get("filters"))
