"""mixchart: frequency planning for mixers.

Find every mixing product ``|m·f_RF ± n·f_LO|`` and every spurious response of
a frequency plan across its tuning range, estimate how strong each is after the
filters, and show the margins against the requirement.

The engine (this package's top level) never imports a plotting or widget
library; :mod:`mixchart.chart`, :mod:`mixchart.app` and :mod:`mixchart.report`
do, and are imported only when asked for.
"""

from .analysis import Evaluation, Summary, evaluate
from .errors import (
    AnalysisError,
    FilterError,
    LevelTableError,
    MixchartError,
    PlanError,
    SweepTooLargeError,
    UnitError,
)
from .plan import Plan, load_plan, loads_plan, plan_json_schema, save_plan
from .units import format_frequency, parse_frequency

__version__ = "0.1.0"

__all__ = [
    "Evaluation",
    "Summary",
    "evaluate",
    "Plan",
    "load_plan",
    "loads_plan",
    "save_plan",
    "plan_json_schema",
    "parse_frequency",
    "format_frequency",
    "MixchartError",
    "PlanError",
    "UnitError",
    "FilterError",
    "LevelTableError",
    "SweepTooLargeError",
    "AnalysisError",
]
