"""Version-1 plans give bit-identical results release after release.

tests/data/golden_v1.json.gz holds the single-conversion engine's output at the commit named in
its provenance (see tests/data/SOURCES.md): each example plan, the level plans of
tests/test_analysis.py and twelve seeded random plans.  Each is loaded here the way a user's
file is (through the loader of every layout version, and as the one-mixer chain it migrates to)
and must give the same floats, bit for bit.  This is a regression record, not a physics check.
"""

from __future__ import annotations

import gzip
import json
import sys
from pathlib import Path

import pytest

from mixchart.analysis import evaluate
from mixchart.plan import plan_from_dict

HERE = Path(__file__).parent
sys.path.insert(0, str(HERE.parent / "tools"))
from make_golden import snapshot  # noqa: E402  (the same exact form the record was written in)

GOLDEN = json.loads(gzip.decompress((HERE / "data" / "golden_v1.json.gz").read_bytes()))
EXAMPLES = HERE.parent / "mixchart" / "examples"
CASES = {case["name"]: case for case in GOLDEN["cases"]}


def test_the_record_says_where_it_came_from():
    prov = GOLDEN["provenance"]
    assert len(prov["commit"]) == 40 and prov["made_by"] == "tools/make_golden.py"
    assert sum(name.startswith("example ") for name in CASES) == len(list(EXAMPLES.glob("*.json")))


def assert_same(got: dict, want: dict) -> None:
    for key in want:
        assert got[key] == want[key], f"{key} differs from the record"


@pytest.mark.parametrize("name", list(CASES))
def test_version_1_plans_give_the_recorded_results(name):
    case = CASES[name]
    base = str(EXAMPLES) if case["base"] else None
    assert_same(snapshot(evaluate(plan_from_dict(case["plan"]), base_dir=base)), case["result"])
