"""The engine never imports a plotting or widget library (STYLE.md section 2)."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]

PROBE = """
import sys
import mixchart, mixchart.analysis, mixchart.physics.products, mixchart.plan, mixchart.levels, mixchart.filters
import mixchart.cli
import mixchart.requirements, mixchart.context, mixchart.checks, mixchart.physics.loci
import mixchart.models, mixchart.physics, mixchart.elements, mixchart.chains, mixchart.cli_chain
from mixchart import evaluate, load_plan
from mixchart.chains import analyse_chain
from mixchart.cli import example_path
from mixchart.models import load_any
evaluate(load_plan(example_path()))  # running the engine must not pull them in either
result = analyse_chain(load_any(example_path("if_sampling_receiver")))  # nor the chain engine
result.channel_frame(0), result.to_json(), result.paths
loaded = sorted(name for name in sys.modules if name.split(".")[0] in {"bokeh", "ipywidgets", "jupyter_bokeh"})
print("LOADED:" + ",".join(loaded))
"""


def test_engine_imports_no_bokeh_or_ipywidgets():
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    done = subprocess.run([sys.executable, "-c", PROBE], cwd=REPO, env=env, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip().splitlines()[-1] == "LOADED:", done.stdout
