"""Objects that behave: equality, read-only results, validated enumerations.

These are API contracts, not physics: each test states the behaviour it pins.
"""

from __future__ import annotations

import copy
from pathlib import Path

import numpy as np
import pytest

from mixchart import MixchartError, evaluate, load_plan
from mixchart.physics.loci import tuning_plane_loci, tuning_plane_strips
from mixchart.physics.products import product_family, product_labels

EXAMPLES = Path(__file__).resolve().parents[1] / "mixchart" / "examples"


@pytest.fixture(scope="module")
def fm_plan():
    return load_plan(EXAMPLES / "fm_receiver.json")


def test_equal_plans_compare_equal_after_both_are_swept():
    a = load_plan(EXAMPLES / "fm_receiver.json")
    b = load_plan(EXAMPLES / "fm_receiver.json")
    assert a == b
    evaluate(a)
    evaluate(b)  # both now hold their cached sweep grid
    assert a == b
    assert a != a.with_changes({"max_order": 5})


def test_report_accepts_the_evaluation_of_an_equal_copy(fm_plan):
    from mixchart.report import report_html

    twin = load_plan(EXAMPLES / "fm_receiver.json")
    html = report_html(fm_plan, evaluation=evaluate(twin))
    assert fm_plan.name in html


def test_a_copied_plan_never_reuses_a_stale_grid(fm_plan):
    fm_plan.channels_hz()  # fill the cache
    changed = fm_plan.model_copy(update={"rf": fm_plan.rf.model_copy(update={"start_hz": 90e6})})
    assert changed.channels_hz()[0] == 90e6
    assert fm_plan.channels_hz()[0] == 88e6
    deep = copy.deepcopy(fm_plan)
    assert deep == fm_plan
    np.testing.assert_array_equal(deep.lo_hz(), fm_plan.lo_hz())


def test_evaluation_arrays_are_read_only_and_unshared(fm_plan):
    ev = evaluate(fm_plan)
    before = ev.channel_frame(0)
    for name in ("channels_hz", "lo_hz", "f_wanted_out_hz", "inverted", "worst_margin_db"):
        array = getattr(ev, name)
        with pytest.raises(ValueError):
            array[0] = array[0]
    # the caller's copy of the plan grid is its own
    grid = fm_plan.channels_hz()
    grid[0] = 1.0
    assert ev.channels_hz[0] == 88e6
    after = ev.channel_frame(0)
    assert after.equals(before)


def test_evaluation_tables_are_copies(fm_plan):
    ev = evaluate(fm_plan)
    first = ev.worst_by_product["margin_db"].iloc[0]
    table = ev.worst_by_product
    table.loc[table.index[0], "margin_db"] = 1e9
    hits = ev.hits
    n_hits = len(hits)
    hits["margin_db"] = hits["margin_db"] + 100.0
    assert ev.worst_by_product["margin_db"].iloc[0] == first
    assert len(ev.hits) == n_hits
    assert ev.hits["margin_db"].equals(evaluate(fm_plan).hits["margin_db"])
    assert ev.to_frame()["margin_db"].iloc[0] == first


def test_evaluation_attributes_cannot_be_rebound(fm_plan):
    ev = evaluate(fm_plan)
    with pytest.raises(AttributeError):
        ev.summary = None
    with pytest.raises(AttributeError):
        del ev.plan


def test_evaluation_equality_and_hash_are_identity(fm_plan):
    a, b = evaluate(fm_plan), evaluate(fm_plan)
    assert a == a and a != b
    assert len({a, b, a}) == 2  # hashing never raises
    assert "Evaluation" in repr(a)


@pytest.mark.parametrize(
    "call",
    [
        lambda: tuning_plane_loci(5, 10e6, 11e6, (0.0, 1e8, 0.0, 1e8), direction="dwon"),
        lambda: tuning_plane_strips("UP", 5, 10e6, 11e6, (0.0, 1e8, 0.0, 1e8)),
        lambda: product_labels(product_family(3), "sideways", np.ones(1)),
    ],
)
def test_public_functions_refuse_unknown_directions(call):
    with pytest.raises(MixchartError, match=r"^direction: '(dwon|UP|sideways)' is invalid; must be 'down' or 'up'$"):
        call()
