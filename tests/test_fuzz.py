"""Property-based fuzzing of the loader and the evaluation over the three built-in examples.

Each case mutates one example plan: keys removed, renamed or added (with control characters
and line separators), values replaced by other types, numbers replaced by extremes (0,
negatives, subnormals, 1e300, 2**64, huge integers), text replaced by long, empty or
control-character strings.  Whatever the mutation, the outcome is one of two things:

* a one-line :class:`~mixchart.errors.MixchartError` (the message names a field), or
* a plan whose evaluation has no NaN anywhere in its margins and whose summary line reads
  ``PASS`` or ``FAIL`` with a number.

Every case runs under a time limit (hypothesis's ``deadline``): a hang or a pathological
slowdown is a failure, not a slow test.  No duration is asserted beyond that limit.
"""

from __future__ import annotations

import copy
import json
import math
from datetime import timedelta
from importlib import resources

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from mixchart.analysis import evaluate
from mixchart.errors import MixchartError
from mixchart.plan import loads_plan

EXAMPLES = ("fm_receiver.json", "ku_block_converter.json", "uplink_transmitter.json", "hf_upconverting_receiver.json",
            "ism_transmitter.json")


def _example(name: str) -> dict:
    return json.loads(resources.files("mixchart.examples").joinpath(name).read_text(encoding="utf-8"))


def _paths(node: object, prefix: tuple = ()) -> list[tuple]:
    """Every path (tuple of keys/indices) to a value inside ``node``."""
    out = []
    if isinstance(node, dict):
        for key, value in node.items():
            out.append((*prefix, key))
            out.extend(_paths(value, (*prefix, key)))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            out.append((*prefix, i))
            out.extend(_paths(value, (*prefix, i)))
    return out


EXTREME_NUMBERS = [0, -1, -0.0, 1, 2**64, 10**400, 1e300, -1e300, 5e-324, 1e-310, 1e-3, 0.5, 1e12, 1e13, 25, 26,
                   1e6, 123456789.123]
WEIRD_TEXT = ["", " ", "1" * 16_000 + "!", "1" * 70, "10.7 MHz", "10.7 mHz", "1e999 GHz", "NaN", "inf Hz",
              "-5 MHz", "0 Hz", "5e-324 Hz", "\u2028", "a\r\nb", "x" * 300, "../../etc/passwd", "/dev/zero",
              "builtin", "high", "low", "down", "up", "tuned", "cascade", "touchstone"]
WEIRD_KEYS = ["", "x", "a\nb", "k\u2028", "tab\tkey", "__class__", "if", "if_", "rf", "stages", "kind"]
VALUES = st.one_of(
    st.sampled_from(EXTREME_NUMBERS),
    st.sampled_from(WEIRD_TEXT),
    st.sampled_from([None, True, False, [], {}, [1, 2], {"kind": "tuned"}]),
    st.floats(allow_nan=False, allow_infinity=False),
    st.integers(min_value=-(2**70), max_value=2**70),
    st.text(max_size=40),
)


@st.composite
def mutated_plans(draw) -> tuple[str, dict]:
    name = draw(st.sampled_from(EXAMPLES))
    data = _example(name)
    for _ in range(draw(st.integers(1, 3))):
        paths = _paths(data)
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = data
        for key in path[:-1]:
            parent = parent[key]
        last = path[-1]
        action = draw(st.sampled_from(["replace", "delete", "rename", "add", "scale"]))
        if action == "replace":
            parent[last] = draw(VALUES)
        elif action == "delete":
            del parent[last]
        elif action == "rename" and isinstance(parent, dict):
            parent[draw(st.sampled_from(WEIRD_KEYS))] = parent.pop(last)
        elif action == "add" and isinstance(parent, dict):
            parent[draw(st.sampled_from(WEIRD_KEYS))] = draw(VALUES)
        elif action == "scale" and isinstance(parent[last], (int, float)) and not isinstance(parent[last], bool):
            parent[last] = parent[last] * draw(st.sampled_from([-1, 0, 1e-6, 1e-3, 0.999, 1.001, 1e3, 1e6]))
    return name, data


def _check_one_line(exc: MixchartError) -> None:
    message = str(exc)
    assert message and len(message.splitlines()) == 1, repr(message)
    assert "\u2028" not in message and "\u2029" not in message and "\r" not in message, repr(message)
    assert len(message) < 2_000, message[:200]


@pytest.mark.filterwarnings("error::RuntimeWarning")  # a numpy overflow/invalid warning is a defect too
@settings(
    max_examples=400,
    deadline=timedelta(seconds=30),  # the per-case time limit
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    derandomize=True,  # the same cases on every run: a failure is reproducible, CI is stable
)
@given(mutated_plans())
def test_mutated_examples_give_a_one_line_error_or_finite_margins(case):
    _, data = case
    text = json.dumps(copy.deepcopy(data))
    try:
        plan = loads_plan(text)
        result = evaluate(plan)
    except MixchartError as exc:
        _check_one_line(exc)
        return
    margins = np.asarray(result.worst_margin_db, dtype=float)
    assert not np.isnan(margins).any()
    worst = result.summary.worst_margin_db
    assert not math.isnan(worst)
    line = result.summary.line()
    assert line.startswith(("PASS", "FAIL")) and "nan" not in line.lower(), line
    for frame in (result.worst_by_product, result.hits):
        assert not frame["margin_db"].isna().any()


@pytest.mark.parametrize("name", EXAMPLES)
def test_the_unmutated_examples_evaluate(name):
    # The fuzz above starts from these; each must load and give finite margins itself.
    result = evaluate(loads_plan(json.dumps(_example(name))))
    assert np.isfinite(result.summary.worst_margin_db)
