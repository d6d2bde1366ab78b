"""The version-1 plan (one conversion): the import path of every release.

The model lives in :mod:`mixchart.models.plan` (and its file side in
:mod:`mixchart.models.plan_io`); this module re-exports their public names, so that
``from mixchart.plan import load_plan`` keeps working.
"""

from __future__ import annotations

from .models.plan import *  # noqa: F403  (the public names, listed in its __all__)
from .models.plan import __all__  # noqa: F401
