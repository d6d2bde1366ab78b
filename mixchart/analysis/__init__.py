"""Evaluate a plan: every product and response, its level after the filters, its margin.

:func:`evaluate` sweeps the plan's whole tuning range in chunks of channels and
returns an :class:`Evaluation`: per-channel worst cases, the worst case of each
product/response across the sweep, the failing rows, a summary, and the
warnings a designer should read.  Nothing here imports a plotting library.

The package's modules: :mod:`~mixchart.analysis.sweep` (:func:`evaluate`, the sweep
in blocks of channels), :mod:`~mixchart.analysis.block` (one block's products and
responses, and the level model), :mod:`~mixchart.analysis.frames` (rows gathered
into tables, :data:`FRAME_COLUMNS`) and :mod:`~mixchart.analysis.result`
(:class:`Evaluation`, :class:`Summary`, JSON records).
"""

from .frames import FRAME_COLUMNS
from .result import Evaluation, Summary, frame_records
from .sweep import CHUNK_CHANNELS as CHUNK_CHANNELS  # not in __all__ (as before), imported by the benchmarks
from .sweep import MAX_HIT_ROWS, evaluate

__all__ = ["Evaluation", "Summary", "evaluate", "frame_records", "FRAME_COLUMNS", "MAX_HIT_ROWS"]
