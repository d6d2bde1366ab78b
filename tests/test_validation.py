"""One error family, one line, built from pydantic's structured errors (never its wording).

Rule under test: project brief ("errors come from one family subclassing
ValueError, repeat the bad value and name the field").
"""

from __future__ import annotations

import json
from pathlib import Path

import pydantic
import pytest

from mixchart import FilterError, MixchartError, PlanError, loads_plan
from mixchart.filters import build_filter, parse_filter_spec
from mixchart.validation import from_validation_error

EXAMPLES = Path(__file__).resolve().parents[1] / "mixchart" / "examples"


def _fm() -> dict:
    return json.loads((EXAMPLES / "fm_receiver.json").read_text())


@pytest.mark.parametrize(
    ("spec", "expected"),
    [
        ({"kind": "butterworth", "response": "lowpass", "order": 0, "f_edge_hz": 1e6},
         "filters.rf.order: 0 is invalid; must be >= 1"),
        ({"kind": "nope"}, "filters.rf.kind: 'nope' is invalid; must be one of"),
        ({"response": "lowpass"}, "filters.rf.kind: missing"),
        (7, "filters.rf: 7 is invalid; must be a JSON object"),
        ({"kind": "cascade", "stages": [{"kind": "tuned", "f_center_hz": 1e6, "q_loaded": -1}]},
         "filters.rf.stages.0.q_loaded: -1 is invalid; must be >= 0.5"),
    ],
)
def test_filter_builders_raise_the_family(spec, expected):
    for call in (lambda: build_filter(spec, field_prefix="filters.rf."), lambda: parse_filter_spec(spec)):
        with pytest.raises(FilterError) as info:
            call()
        assert isinstance(info.value, MixchartError) and isinstance(info.value, ValueError)
        assert len(str(info.value).splitlines()) == 1
    with pytest.raises(FilterError, match="^" + expected.replace("(", r"\(").replace("[", r"\[")):
        build_filter(spec, field_prefix="filters.rf.")


def test_messages_come_from_error_structure_not_wording(monkeypatch):
    # A pydantic release that rewords every message must not change ours.
    original = pydantic.ValidationError.errors

    def reworded(self, *args, **kwargs):
        out = original(self, *args, **kwargs)
        return [dict(err, msg="REWORDED") for err in out]

    monkeypatch.setattr(pydantic.ValidationError, "errors", reworded)
    data = _fm()
    data["max_order"] = 99
    with pytest.raises(PlanError, match=r"^max_order: 99 is invalid; must be <= 25$"):
        loads_plan(json.dumps(data))
    data = _fm()
    data["direction"] = "sideways"
    with pytest.raises(PlanError, match=r"^direction: 'sideways' is invalid; must be 'down' or 'up'$"):
        loads_plan(json.dumps(data))
    data = _fm()
    data["rf"]["stop_hz"] = 1e6  # below start: our own validator's message
    with pytest.raises(PlanError, match=r"^rf\.stop_hz: .* is below start_hz"):
        loads_plan(json.dumps(data))


@pytest.mark.parametrize("key", ["bad\nkey", "bad\rkey", "bad\u2028key", "tab\there", "nul\x00"])
def test_unknown_and_duplicate_keys_stay_on_one_line(key):
    data = _fm()
    data["rf"][key] = 1
    with pytest.raises(PlanError) as info:
        loads_plan(json.dumps(data))
    assert len(str(info.value).splitlines()) == 1
    assert "unknown key" in str(info.value)
    text = '{"name": "a", ' + json.dumps(key) + ": 1, " + json.dumps(key) + ": 2}"
    with pytest.raises(PlanError) as info:
        loads_plan(text)
    assert len(str(info.value).splitlines()) == 1


def test_nested_cascade_if_filter_cannot_track_at_load():
    data = _fm()
    tuned = {"kind": "tuned", "q_loaded": 50, "tracks_channel": True}
    data["filters"]["if"] = {"kind": "cascade", "stages": [
        {"kind": "butterworth", "response": "bandpass", "order": 3, "f_center_hz": 10.7e6, "bandwidth_hz": 1e6},
        {"kind": "cascade", "stages": [tuned]},
    ]}
    with pytest.raises(PlanError, match=r"^filters\.if\.stages\.1\.stages\.0\.tracks_channel: True is invalid; "
                                        r"an IF filter cannot track the channel"):
        loads_plan(json.dumps(data))


def test_from_validation_error_counts_further_problems():
    class Model(pydantic.BaseModel):
        a: int
        b: int

    with pytest.raises(pydantic.ValidationError) as info:
        Model.model_validate({"a": "x", "b": "y"})
    err = from_validation_error(info.value, {"a": "x", "b": "y"}, PlanError, root="plan")
    assert str(err) == "a: 'x' is invalid; must be a whole number (and 1 more problem)"
