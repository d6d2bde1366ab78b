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

import numpy as np
import pytest

from mixchart.analysis import Evaluation, evaluate
from mixchart.chains import analyse_chain, evaluate_any
from mixchart.models import dumps_any, loads_any, migrate_v1
from mixchart.models.loading import plan_from_any_dict
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


@pytest.mark.parametrize("name", list(CASES))
def test_version_1_plans_through_the_chain_loader_and_bridge_give_the_recorded_results(name):
    case = CASES[name]
    base = str(EXAMPLES) if case["base"] else None
    plan = plan_from_any_dict(case["plan"])
    chain = loads_any(dumps_any(migrate_v1(plan)))  # written as version 2 and read back
    result = evaluate_any(chain, base_dir=base)
    assert isinstance(result, Evaluation)  # a one-mixer chain is evaluated by the single-conversion engine
    assert_same(snapshot(result), case["result"])


@pytest.mark.parametrize("name", [n for n in CASES if CASES[n]["plan"].get("lo", {}).get("grid_holds") != "output"])
def test_the_path_engine_agrees_with_the_record_on_every_channel(name):
    """The chain engine's own sweep of the one-mixer chain: the same worst margin per channel.

    Not bit for bit (the sums run in another order, and the response levels compose affine maps
    instead of dividing one level): within 1e-6 dB.  A transmitter whose LO grid holds the output
    (the IF source retunes) is the single-conversion engine's alone.
    """
    case = CASES[name]
    base = str(EXAMPLES) if case["base"] else None
    result = analyse_chain(migrate_v1(plan_from_dict(case["plan"])), base_dir=base, prune=False)
    want = np.array([float(x) for x in case["result"]["worst_margin_db"]])
    got = result.worst_margin_db
    both_inf = np.isinf(want) & np.isinf(got) & (np.sign(want) == np.sign(got))
    assert np.all(both_inf | (np.abs(got - want) <= 1e-6)), np.max(np.abs(got - want)[~both_inf])
