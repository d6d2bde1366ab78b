"""The plan model and its JSON file (mixchart.plan).

Rules checked here come from the project brief and mixchart.plan's docstring:
frequencies as numbers in Hz or text with a unit; an exact save/load round trip;
atomic saves; a JSON Schema (draft 2020-12) that the examples satisfy; and a
one-line error naming the field and repeating the value for every bad input.
"""

from __future__ import annotations

import copy
import json
import os
import tracemalloc

import jsonschema
import numpy as np
import pydantic
import pytest

from mixchart import evaluate
from mixchart.cli import EXAMPLES, example_path
from mixchart.errors import MixchartError, PlanError, SweepTooLargeError
from mixchart.plan import (
    MAX_CHANNELS,
    MAX_ORDER,
    MAX_PLAN_BYTES,
    SCHEMA_VERSION,
    Plan,
    dumps_plan,
    load_plan,
    loads_plan,
    plan_from_dict,
    plan_json_schema,
    save_plan,
)

#: An invented FM-broadcast receiver plan (our own demo scenario).
BASE = {
    "name": "test receiver",
    "direction": "down",
    "rf": {"start_hz": "88 MHz", "stop_hz": "108 MHz", "step_hz": "100 kHz"},
    "signal": {"bandwidth_hz": "200 kHz"},
    "lo": {"mode": "tracking", "side": "high"},
    "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "230 kHz"},
    "max_order": 5,
}


def plan_dict(**changes) -> dict:
    """A deep copy of BASE with top-level keys replaced."""
    data = copy.deepcopy(BASE)
    data.update(changes)
    return data


def example_names() -> list[str]:
    return sorted(EXAMPLES)


# ---------------------------------------------------------------- frequencies


@pytest.mark.parametrize(
    ("value", "expected_hz", "source"),
    [
        ("10.7 MHz", 10.7e6, "SI prefix M = 10^6 (BIPM SI Brochure, Table 7)"),
        ("2.4GHz", 2.4e9, "SI prefix G = 10^9"),
        ("455 kHz", 455e3, "SI prefix k = 10^3"),
        (10_700_000, 10.7e6, "a JSON number is Hz"),
        (10.7e6, 10.7e6, "a JSON number is Hz"),
        ("10700000", 10.7e6, "text without a unit is Hz"),
    ],
)
def test_frequency_fields_accept_numbers_and_text(value, expected_hz, source):
    plan = plan_from_dict(plan_dict(**{"if": {"center_hz": value, "bandwidth_hz": "200 kHz"}}))
    assert plan.if_.center_hz == expected_hz, source
    assert isinstance(plan.if_.center_hz, float)


@pytest.mark.parametrize(
    ("rf", "expected_count", "first_hz", "last_hz", "source"),
    [
        ({"start_hz": "88 MHz", "stop_hz": "108 MHz", "step_hz": "100 kHz"}, 201, 88e6, 108e6,
         "derived by hand: (108 - 88) MHz / 100 kHz + 1 = 201"),
        ({"start_hz": "530 kHz", "stop_hz": "1700 kHz", "step_hz": "10 kHz"}, 118, 530e3, 1700e3,
         "derived by hand: (1700 - 530) / 10 + 1 = 118 (North American AM raster)"),
        ({"start_hz": "1 MHz", "stop_hz": "1.95 MHz", "step_hz": "100 kHz"}, 10, 1e6, 1.9e6,
         "derived by hand: 1.95 is not on the raster, so 1.0 .. 1.9 MHz: 10 channels"),
        ({"start_hz": "98.1 MHz", "stop_hz": "98.1 MHz"}, 1, 98.1e6, 98.1e6, "a single channel needs no step"),
        ({"start_hz": "2.31 GHz", "stop_hz": "2.39 GHz", "step_hz": "1 MHz"}, 81, 2.31e9, 2.39e9,
         "derived by hand: 80 MHz / 1 MHz + 1 = 81"),
    ],
)
def test_channel_raster(rf, expected_count, first_hz, last_hz, source):
    plan = plan_from_dict(plan_dict(rf=rf))
    channels = plan.channels_hz()
    assert plan.rf.n_channels == expected_count, source
    assert channels.size == expected_count, source
    assert channels[0] == first_hz
    assert channels[-1] == pytest.approx(last_hz, rel=1e-12)


@pytest.mark.parametrize(
    ("lo", "channel_hz", "expected_lo_hz", "source"),
    [
        ({"mode": "tracking", "side": "high"}, 100e6, 110.7e6, "derived by hand: 100 + 10.7 = 110.7 MHz (high side)"),
        ({"mode": "tracking", "side": "low"}, 100e6, 89.3e6, "derived by hand: 100 - 10.7 = 89.3 MHz (low side)"),
        ({"mode": "tracking", "side": "high", "step_hz": "25 kHz"}, 88.1e6, 98.8e6,
         "derived by hand: 98.8 MHz / 25 kHz = 3952, already on the grid"),
        ({"mode": "tracking", "side": "high", "step_hz": "300 kHz"}, 88.1e6, 98.7e6,
         "derived by hand: 98.8 MHz / 300 kHz = 329.33 -> 329 x 300 kHz = 98.7 MHz"),
        ({"mode": "tracking", "side": "high", "step_hz": "300 kHz"}, 88.2e6, 99.0e6,
         "derived by hand: 98.9 MHz / 300 kHz = 329.67 -> 330 x 300 kHz = 99.0 MHz"),
        ({"mode": "fixed", "fixed_hz": "120 MHz"}, 100e6, 120e6, "a fixed LO does not move"),
    ],
)
def test_lo_per_channel(lo, channel_hz, expected_lo_hz, source):
    plan = plan_from_dict(plan_dict(lo=lo))
    i = int(np.argmin(np.abs(plan.channels_hz() - channel_hz)))
    assert plan.channels_hz()[i] == pytest.approx(channel_hz, rel=1e-12)
    assert plan.lo_hz()[i] == pytest.approx(expected_lo_hz, rel=1e-12), source


def test_channel_arrays_are_copies():
    plan = plan_from_dict(plan_dict())
    plan.channels_hz()[:] = 0.0
    plan.lo_hz()[:] = 0.0
    assert plan.channels_hz()[0] == 88e6
    assert plan.lo_hz()[0] == pytest.approx(98.7e6)


def test_lo_grid_that_snaps_to_zero_is_refused():
    plan = plan_from_dict(plan_dict(
        rf={"start_hz": "1 kHz", "stop_hz": "2 kHz", "step_hz": "1 kHz"},
        signal={"bandwidth_hz": "10 Hz"},
        **{"if": {"center_hz": "1 kHz", "bandwidth_hz": "100 Hz"}},
        lo={"mode": "tracking", "side": "high", "step_hz": "1 GHz"},
    ))
    with pytest.raises(PlanError, match=r"^lo\.step_hz: 1000000000\.0 snaps the LO to 0 Hz"):
        plan.lo_hz()


# ---------------------------------------------------------------- save / load


@pytest.mark.parametrize("name", example_names())
def test_examples_save_load_exact_and_second_save_byte_identical(name, tmp_path):
    plan = load_plan(example_path(name))
    first = save_plan(plan, tmp_path / "a.json")
    again = load_plan(first)
    assert again == plan
    second = save_plan(again, tmp_path / "b.json")
    assert first.read_bytes() == second.read_bytes()


def test_awkward_floats_round_trip_exactly(tmp_path):
    # repr() of a float round-trips exactly (Python float repr, shortest round-trip digits)
    data = plan_dict(rf={"start_hz": 88.123456789012e6, "stop_hz": 1e8 + 1 / 3, "step_hz": 0.1 + 0.2},
                     signal={"bandwidth_hz": 12_345.678_901_234_5, "level_dbm": -33.333333333333336})
    data["rf"]["stop_hz"] = data["rf"]["start_hz"] + 7 * data["rf"]["step_hz"]
    plan = plan_from_dict(data)
    path = save_plan(plan, tmp_path / "plan.json")
    back = load_plan(path)
    assert back == plan
    assert back.rf.step_hz == 0.1 + 0.2
    assert np.array_equal(back.channels_hz(), plan.channels_hz())


def test_save_writes_schema_version_and_json_key_names(tmp_path):
    path = save_plan(plan_from_dict(plan_dict()), tmp_path / "plan.json")
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data["schema_version"] == SCHEMA_VERSION == 1
    assert "if" in data and "if_" not in data
    assert data["if"]["center_hz"] == 10.7e6


def test_save_is_atomic_when_the_rename_fails(tmp_path, monkeypatch):
    path = tmp_path / "plan.json"
    path.write_text("original contents", encoding="utf-8")

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(PlanError) as info:
        save_plan(plan_from_dict(plan_dict()), path)
    assert "cannot be written" in str(info.value) and "\n" not in str(info.value)
    assert path.read_text(encoding="utf-8") == "original contents"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.json"], "no temporary file left behind"


def test_save_is_atomic_when_the_write_fails(tmp_path, monkeypatch):
    path = tmp_path / "plan.json"
    path.write_text("original contents", encoding="utf-8")

    def broken_fsync(fd):
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(os, "fsync", broken_fsync)
    with pytest.raises(PlanError, match="cannot be written"):
        save_plan(plan_from_dict(plan_dict()), path)
    assert path.read_text(encoding="utf-8") == "original contents"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.json"]


def test_save_into_missing_folder_is_a_plan_error(tmp_path):
    with pytest.raises(PlanError, match="cannot be written"):
        save_plan(plan_from_dict(plan_dict()), tmp_path / "no such folder" / "plan.json")


def test_dumps_plan_is_json_with_finite_numbers():
    text = dumps_plan(load_plan(example_path("fm_receiver")))
    assert text.endswith("\n")
    assert json.loads(text)["name"] == "Broadcast FM tuner, 10.7 MHz IF"


def test_with_changes_returns_a_validated_copy():
    plan = plan_from_dict(plan_dict())
    changed = plan.with_changes({"if.center_hz": "21.4 MHz", "lo.side": "low"})
    assert changed.if_.center_hz == 21.4e6 and changed.lo.side == "low"
    assert plan.if_.center_hz == 10.7e6 and plan.lo.side == "high"
    assert changed.lo_hz()[0] == pytest.approx(88e6 - 21.4e6), "derived by hand: 88 - 21.4 = 66.6 MHz"
    with pytest.raises(PlanError, match=r"^max_order: 99 is invalid"):
        plan.with_changes({"max_order": 99})


def test_equal_plans_compare_equal_after_the_grid_is_cached():
    a = plan_from_dict(plan_dict())
    b = plan_from_dict(plan_dict())
    a.lo_hz()
    assert a == b


# ---------------------------------------------------------------- JSON Schema


def test_schema_is_a_valid_draft_2020_12_schema():
    schema = plan_json_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["properties"]["schema_version"]["const"] == SCHEMA_VERSION


@pytest.mark.parametrize("name", example_names())
def test_schema_accepts_the_examples(name):
    validator = jsonschema.Draft202012Validator(plan_json_schema())
    data = json.loads(example_path(name).read_text(encoding="utf-8"))
    assert [e.message for e in validator.iter_errors(data)] == []


@pytest.mark.parametrize(
    ("change", "why"),
    [
        (lambda d: d.__setitem__("colour", "red"), "unknown top-level key"),
        (lambda d: d["rf"].__setitem__("colour", "red"), "unknown nested key"),
        (lambda d: d["filters"]["rf"].__setitem__("colour", "red"), "unknown key inside a filter"),
        (lambda d: d.__setitem__("schema_version", 2), "a future layout version"),
        (lambda d: d.__setitem__("max_order", MAX_ORDER + 1), "order above the cap"),
        (lambda d: d["rf"].__setitem__("start_hz", -1), "negative frequency"),
        (lambda d: d["rf"].__setitem__("start_hz", "-1 MHz"), "negative frequency text"),
        (lambda d: d.pop("signal"), "missing required section"),
    ],
)
def test_schema_and_loader_both_reject(change, why):
    data = json.loads(example_path("fm_receiver").read_text(encoding="utf-8"))
    change(data)
    validator = jsonschema.Draft202012Validator(plan_json_schema())
    assert list(validator.iter_errors(data)), f"schema should reject: {why}"
    with pytest.raises(PlanError):
        loads_plan(json.dumps(data))


# ---------------------------------------------------------------- bad input


def mutate(data: dict, path: str, value) -> dict:
    """Set a dotted path (creating dicts) and return the data."""
    node = data
    keys = path.split(".")
    for key in keys[:-1]:
        node = node.setdefault(key, {})
    node[keys[-1]] = value
    return data


BAD_FIELDS = [
    # (dotted path, value, exact one-line message)
    ("rf.start_hz", 0, "rf.start_hz: 0 is invalid; must be > 0 Hz"),
    ("rf.step_hz", -100_000.0, "rf.step_hz: -100000.0 is invalid; must be > 0 Hz"),
    ("rf.stop_hz", "-5 MHz", "rf.stop_hz: '-5 MHz' is invalid; must be > 0 Hz"),
    ("signal.bandwidth_hz", "NaN",
     "signal.bandwidth_hz: 'NaN' is invalid; give a frequency in Hz or text like '10.7 MHz'"),
    ("signal.bandwidth_hz", "inf Hz",
     "signal.bandwidth_hz: 'inf Hz' is invalid; give a frequency in Hz or text like '10.7 MHz'"),
    ("if.center_hz", 10**400, None),  # checked below: a 400-digit integer (regression: was OverflowError)
    ("rf.stop_hz", "80 MHz", "rf.stop_hz: 80 MHz is below start_hz 88 MHz"),
    ("max_order", MAX_ORDER + 1, f"max_order: {MAX_ORDER + 1} is invalid; must be <= {MAX_ORDER}"),
    ("max_order", 1, "max_order: 1 is invalid; must be >= 2"),
    ("max_order", "seven", "max_order: 'seven' is invalid; must be a whole number"),
    ("max_order", 7.5, "max_order: 7.5 is invalid; must be a whole number"),
    ("rf", 5, "rf: 5 is invalid; must be a JSON object"),
    ("direction", "sideways", "direction: 'sideways' is invalid; must be 'down' or 'up'"),
    ("colour", "red", "colour: unknown key (value 'red'); remove it or check its spelling"),
    ("rf.colour", "red", "rf.colour: unknown key (value 'red'); remove it or check its spelling"),
    ("if_", {"center_hz": 1e6}, "if_: unknown key (value {...}); did you mean if?"),
    ("filters.rf", {"kind": "tuned", "q_loaded": -1, "tracks_channel": True},
     "filters.rf.q_loaded: -1 is invalid; must be >= 0.5"),
    ("filters.if", {"kind": "chebyshev1", "response": "bandpass", "order": 3, "f_center_hz": "10.7 MHz",
                    "bandwidth_hz": "200 kHz"},
     "filters.if.ripple_db: None is invalid; a chebyshev1 filter needs ripple_db > 0 dB"),
    ("filters.if", {"kind": "butterworth", "response": "lowpass", "order": 3, "f_edge_hz": "20 MHz", "colour": 1},
     "filters.if.colour: unknown key (value 1); remove it or check its spelling"),
    ("signal.level_dbm", 99, "signal.level_dbm: 99 is invalid; must be <= 60"),
    ("lo", {"mode": "fixed"}, "lo.fixed_hz: missing; it is required when mode is 'fixed'"),
    ("rf", {"start_hz": "88 MHz", "stop_hz": "108 MHz"}, "rf.step_hz: missing; it is required when stop_hz > start_hz"),
    ("if", {"center_hz": "100 kHz", "bandwidth_hz": "200 kHz"},
     "if.bandwidth_hz: 200 kHz puts the lower passband edge at or below 0 Hz (centre 100 kHz)"),
    ("schema_version", 2, "schema_version: 2 is invalid; must be 1"),
]


@pytest.mark.parametrize(("path", "value", "expected"), BAD_FIELDS, ids=[f"{p}={v!r}"[:40] for p, v, _ in BAD_FIELDS])
def test_bad_field_is_one_line_naming_field_and_value(path, value, expected):
    # Source of the rule: project brief and STYLE.md section 5 (name the field, repeat the value).
    data = mutate(plan_dict(), path, value)
    with pytest.raises(PlanError) as info:
        loads_plan(json.dumps(data))
    message = str(info.value)
    assert "\n" not in message
    if expected is None:
        assert message.startswith(f"{path}: 1000000000") and "must be a finite frequency" in message
    else:
        assert message == expected


@pytest.mark.parametrize(
    ("text", "expected", "why"),
    [
        ('{"name": "a", "name": "b"}', "name: duplicate key; each key may appear once", "duplicate keys"),
        ('{"rf": {"start_hz": NaN}}', "plan: NaN is invalid; JSON numbers must be finite", "NaN token"),
        ('{"rf": {"start_hz": Infinity}}', "plan: Infinity is invalid; JSON numbers must be finite", "Infinity token"),
        ('{"rf": {"start_hz": -Infinity}}', "plan: -Infinity is invalid; JSON numbers must be finite",
         "-Infinity token"),
        # hand-counted: the "}" after the trailing comma is character 25 of the line
        ('{"rf": {"start_hz": 1e6,}}',
         "plan file: malformed JSON at line 1 column 25: Expecting property name enclosed in double quotes",
         "trailing comma"),
        ("", "plan file: malformed JSON at line 1 column 1: Expecting value", "empty file"),
        ("[1, 2]", "plan: list is invalid; the top level must be a JSON object", "not an object"),
        ('{"rf": ' + "1" * 5000 + "}",
         "plan file: unreadable JSON number (Exceeds the limit (4300 digits) for integer string conversion)",
         "integer beyond Python's digit limit (regression: was a bare ValueError)"),
        ("[" * 100_000 + "]" * 100_000, "plan file: JSON nested too deeply", "nesting bomb"),
    ],
)
def test_bad_json_text(text, expected, why):
    with pytest.raises(PlanError) as info:
        loads_plan(text)
    assert str(info.value) == expected, why


def test_json_number_that_overflows_to_infinity():
    # json reads 1e400 as float('inf') (beyond the IEEE 754 double range, max ~1.8e308)
    text = json.dumps(mutate(plan_dict(), "if.center_hz", "__BIG__")).replace('"__BIG__"', "1e400")
    with pytest.raises(PlanError) as info:
        loads_plan(text)
    assert str(info.value) == "if.center_hz: inf is invalid; must be a finite frequency"


def test_non_utf8_bytes():
    with pytest.raises(PlanError) as info:
        loads_plan(b'{"name": "\xff"}')
    assert str(info.value) == "plan file: not UTF-8 text (invalid start byte at byte 10)"


def test_missing_required_field():
    data = plan_dict()
    del data["signal"]
    with pytest.raises(PlanError, match=r"^signal: missing; this field is required$"):
        plan_from_dict(data)


def test_several_problems_are_counted_on_one_line():
    data = mutate(mutate(plan_dict(), "rf.start_hz", 0), "max_order", 99)
    with pytest.raises(PlanError) as info:
        plan_from_dict(data)
    assert str(info.value).endswith("(and 1 more problem)") and "\n" not in str(info.value)


def test_low_side_lo_below_zero_is_refused():
    # derived by hand: 5 MHz - 10.7 MHz = -5.7 MHz, below 0 Hz
    data = plan_dict(rf={"start_hz": "5 MHz", "stop_hz": "6 MHz", "step_hz": "100 kHz"}, lo={"side": "low"})
    with pytest.raises(PlanError) as info:
        plan_from_dict(data)
    assert str(info.value) == (
        "lo.side: 'low' puts the LO at or below 0 Hz: "
        "rf.start_hz 5 MHz <= if.center_hz 10.7 MHz"
    )


@pytest.mark.parametrize(
    ("rf", "needle"),
    [
        ({"start_hz": "1 Hz", "stop_hz": "1 GHz", "step_hz": "1 Hz"},
         "rf: 1000000000 channels (1 Hz to 1 GHz in 1 Hz steps) is too many"),
        ({"start_hz": "1 Hz", "stop_hz": "1 THz", "step_hz": "1 Hz"},
         "channels (1 Hz to 1 THz in 1 Hz steps) is too many"),
        # the smallest step allowed over the widest range: 1e15 channels (a 1e-310 step is out of range)
        ({"start_hz": "1 Hz", "stop_hz": "1 THz", "step_hz": 1e-3},
         "channels (1 Hz to 1 THz in 0.001 Hz steps) is too many"),
    ],
)
def test_huge_sweep_is_refused_before_any_allocation(rf, needle):
    text = json.dumps(plan_dict(rf=rf))
    tracemalloc.start()
    try:
        with pytest.raises(SweepTooLargeError) as info:
            loads_plan(text)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    message = str(info.value)
    assert needle in message and "\n" not in message
    assert f"at most {MAX_CHANNELS}" in message or "more than" in message
    # 1e9 channels would need 8 GB for the channel array alone; validation stays tiny.
    assert peak < 1_000_000, f"peak traced memory {peak} bytes"
    assert isinstance(info.value, MixchartError)


def test_sweep_at_the_limit_is_accepted_and_validation_allocates_nothing():
    data = plan_dict(rf={"start_hz": "1 MHz", "stop_hz": 1e6 + (MAX_CHANNELS - 1) * 10.0, "step_hz": "10 Hz"})
    tracemalloc.start()
    try:
        plan = plan_from_dict(data)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert plan.rf.n_channels == MAX_CHANNELS
    assert peak < 1_000_000, "the channel grid is built only when asked for"


def test_if_inside_rf_band_is_legal_but_flagged():
    # Invented plan: 5-15 MHz tuning with a 10.7 MHz IF; the IF sits inside the tuning range.
    plan = plan_from_dict(plan_dict(rf={"start_hz": "5 MHz", "stop_hz": "15 MHz", "step_hz": "1 MHz"}, max_order=3))
    warnings = evaluate(plan).warnings
    flagged = [w for w in warnings if "overlaps the RF band" in w]
    assert flagged == [
        "IF passband 10.585 MHz-10.815 MHz overlaps the RF band 4.9 MHz-15.1 MHz: signals there feed straight through"
    ]
    # derived by hand: IF 10.7 -/+ 0.115 MHz; RF 5 - 0.1 to 15 + 0.1 MHz


def test_plan_without_the_overlap_is_not_flagged():
    warnings = evaluate(plan_from_dict(plan_dict(max_order=3))).warnings
    assert not [w for w in warnings if "overlaps the RF band" in w]


# ---------------------------------------------------------------- files


def test_load_missing_file(tmp_path):
    missing = tmp_path / "nope.json"
    with pytest.raises(PlanError) as info:
        load_plan(missing)
    assert str(info.value) == f"plan file: {str(missing)!r} cannot be read (No such file or directory)"


def test_load_a_folder(tmp_path):
    with pytest.raises(PlanError, match="cannot be read"):
        load_plan(tmp_path)


def test_load_too_large_file(tmp_path):
    big = tmp_path / "big.json"
    big.write_bytes(b" " * (MAX_PLAN_BYTES + 1))
    with pytest.raises(PlanError, match=rf"is {MAX_PLAN_BYTES + 1} bytes; at most {MAX_PLAN_BYTES}"):
        load_plan(big)


def test_plan_is_frozen():
    plan = plan_from_dict(plan_dict())
    with pytest.raises(pydantic.ValidationError, match="frozen"):
        plan.max_order = 9  # type: ignore[misc]
    assert isinstance(plan, Plan) and plan.max_order == 5
