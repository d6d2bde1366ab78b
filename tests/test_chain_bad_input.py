"""Bad chain plans (layout version 2): one line each, in the mixchart error family, naming the field.

Every bad input below must raise a subclass of :class:`ValueError` (through
:class:`mixchart.errors.MixchartError`) whose message is one line (no line break of any kind),
starts with the dotted name of the offending field (``chain.2.lo.mode``) and repeats the
offending value where there is one.  The plans are invented; none describes a real product.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import pytest

from mixchart.chains import analyse_chain
from mixchart.errors import MixchartError, PlanError, SweepTooLargeError
from mixchart.models.chain import ChainPlan
from mixchart.models.loading import dumps_any, load_any, loads_any, save_any
from mixchart.plan import Plan

EXAMPLE = Path(__file__).resolve().parents[1] / "mixchart/examples/chains/scanner_double_conversion.json"

#: A valid invented double-conversion receiver; each case below breaks one thing.
BASE = {
    "schema_version": 2, "name": "invented receiver", "direction": "down",
    "rf": {"start_hz": 144e6, "stop_hz": 146e6, "step_hz": 0.5e6},
    "signal": {"bandwidth_hz": 12.5e3},
    "chain": [
        {"kind": "mixer", "lo": {"side": "high"}, "if": {"center_hz": 45e6, "bandwidth_hz": 30e3}},
        {"kind": "amplifier", "gain_db": 20},
        {"kind": "mixer", "lo": {"mode": "fixed", "fixed_hz": 44.545e6},
         "if": {"center_hz": 455e3, "bandwidth_hz": 15e3}},
    ],
}


def plan_text(change=None) -> str:
    data = copy.deepcopy(BASE)
    if change is not None:
        change(data)
    return json.dumps(data)


def check_message(exc: BaseException, field: str, *values: str) -> str:
    """The family's rules for one error: ValueError, one line, the field first, the values repeated."""
    assert isinstance(exc, MixchartError) and isinstance(exc, ValueError), type(exc)
    text = str(exc)
    assert text == text.strip() and text.isprintable(), repr(text)  # no \n, \r, \u2028, ...
    assert text.startswith(field + ":"), text
    for value in values:
        assert value in text, (value, text)
    return text


def refused(change, field, *values, cls=PlanError, analyse=False):
    """Load (and with ``analyse`` sweep) the base plan changed by ``change``; check the error."""
    with pytest.raises(cls) as info:
        plan = loads_any(plan_text(change))
        if analyse:
            analyse_chain(plan)
    return check_message(info.value, field, *values)


def test_base_plan_is_valid():
    # the cases below fail because of their one change, not because of the base
    plan = loads_any(plan_text())
    assert isinstance(plan, ChainPlan)
    assert analyse_chain(plan).summary.n_channels == 5


# ---------------------------------------------------------------- the chain's structure
def test_chain_without_a_mixer():
    refused(lambda d: d.__setitem__("chain", [{"kind": "amplifier", "gain_db": 10}]), "chain", "mixer")


def test_adc_that_is_not_last():
    refused(lambda d: d["chain"].insert(1, {"kind": "adc", "sample_rate_hz": 100e6}), "chain.1.kind", "'adc'")


def test_adc_in_an_up_conversion_chain():
    def up(d):
        d["direction"] = "up"
        d["chain"] = [{"kind": "mixer", "input_port": "if", "lo": {"side": "high"},
                       "if": {"center_hz": 45e6, "bandwidth_hz": 30e3}},
                      {"kind": "adc", "sample_rate_hz": 100e6}]
    refused(up, "chain.1.kind", "'adc'", "'up'")


def test_tracking_mixer_fed_at_its_if_port_in_a_down_chain():
    def if_port(d):
        d["chain"][2] = {"kind": "mixer", "input_port": "if", "lo": {"side": "high"},
                         "if": {"center_hz": 45e6, "bandwidth_hz": 30e3}}
    refused(if_port, "chain.2.lo.mode", "'tracking'")


def test_first_mixer_of_an_up_chain_fed_at_rf():
    refused(lambda d: d.__setitem__("direction", "up"), "chain.0.input_port", "'rf'")


def test_several_mixers_with_an_output_grid():
    refused(lambda d: d["chain"][0]["lo"].update(grid_holds="output"), "chain.0.lo.grid_holds", "'output'")


def test_duplicate_stage_names():
    def same(d):
        d["chain"][0]["name"] = "mix"
        d["chain"][2]["name"] = "mix"
    refused(same, "chain.2.name", "'mix'", "stage 0 has that name")


def test_default_names_can_collide_with_a_given_one():
    # 'mixer 2' given to the first mixer is the second mixer's default name: the later stage is named
    refused(lambda d: d["chain"][0].update(name="mixer 2"), "chain.2.name", "'mixer 2'")


def test_empty_chain_names_the_chain():
    refused(lambda d: d.__setitem__("chain", []), "chain", "at least 1")


def test_empty_chain_repeats_the_empty_list():
    refused(lambda d: d.__setitem__("chain", []), "chain", "[]")


def test_too_many_stages():
    refused(lambda d: d.__setitem__("chain", d["chain"] + [{"kind": "amplifier", "gain_db": 1}] * 14),
            "chain", "at most 16")


def test_chain_not_an_array():
    refused(lambda d: d.__setitem__("chain", {"kind": "mixer"}), "chain", "JSON array")


def test_stage_not_an_object():
    refused(lambda d: d["chain"].__setitem__(1, 5), "chain.1", "5")


# ---------------------------------------------------------------- a stage's keys and kind
def test_unknown_key_in_a_stage():
    refused(lambda d: d["chain"][1].update(gain=3), "chain.1.gain", "unknown key", "3")


def test_unknown_key_holding_a_line_break_stays_one_line():
    text = refused(lambda d: d["chain"][1].update({"ga\nin": 3}), "chain.1.ga\\nin", "3")
    assert "\n" not in text


def test_unknown_stage_kind():
    refused(lambda d: d["chain"].__setitem__(1, {"kind": "attenuator", "loss_db": 3}), "chain.1.kind",
            "'attenuator'", "'amplifier'")


def test_unknown_stage_kind_with_a_line_break():
    refused(lambda d: d["chain"].__setitem__(1, {"kind": "amp\u2028lifier"}), "chain.1.kind", "amp\\u2028lifier")


def test_stage_without_a_kind():
    refused(lambda d: d["chain"].__setitem__(1, {"gain_db": 5}), "chain.1.kind", "missing")


def test_missing_required_field_of_a_stage():
    refused(lambda d: d["chain"].__setitem__(1, {"kind": "amplifier"}), "chain.1.gain_db", "missing")
    refused(lambda d: d["chain"].append({"kind": "adc"}), "chain.3.sample_rate_hz", "missing")


def test_filter_stage_without_its_filter_names_the_filter_key():
    refused(lambda d: d["chain"].insert(0, {"kind": "filter"}), "chain.0.filter", "missing")


def test_misspelt_key_in_a_filter_stage_gets_no_version_1_hint():
    text = refused(lambda d: d["chain"].insert(0, {"kind": "filter", "filtr": 1, "filter": {
        "kind": "brickwall", "response": "lowpass", "f_edge_hz": 1e9}}), "chain.0.filtr", "1")
    assert "filters" not in text


def test_bad_value_inside_a_filter_stage_names_the_nested_field():
    def bad_order(d):
        d["chain"].insert(0, {"kind": "filter", "filter": {"kind": "butterworth", "response": "lowpass",
                                                            "order": 0, "f_edge_hz": 1e9}})
    refused(bad_order, "chain.0.filter.order", "0")


def test_out_of_range_stage_values():
    refused(lambda d: d["chain"][1].update(gain_db=1e9), "chain.1.gain_db", "1000000000.0")
    refused(lambda d: d["chain"][1].update(max_order=4), "chain.1.max_order", "4")
    refused(lambda d: d["chain"].append({"kind": "adc", "sample_rate_hz": 1e6, "nyquist_zone": 0}),
            "chain.3.nyquist_zone", "0")
    refused(lambda d: d["chain"].append({"kind": "adc", "sample_rate_hz": 1e6, "harmonics_dbc": [5]}),
            "chain.3.harmonics_dbc.0", "5")


# ---------------------------------------------------------------- the layout version
def test_schema_version_3():
    refused(lambda d: d.__setitem__("schema_version", 3), "schema_version", "3", "1 and 2")


def test_schema_version_as_text():
    refused(lambda d: d.__setitem__("schema_version", "2"), "schema_version", "'2'")


def test_schema_version_true_is_refused_by_name():
    body = {"schema_version": True, "rf": {"start_hz": 144e6, "stop_hz": 144e6}, "signal": {"bandwidth_hz": 12.5e3},
            "if": {"center_hz": 45e6, "bandwidth_hz": 30e3}}
    with pytest.raises(PlanError) as info:
        loads_any(json.dumps(body))
    check_message(info.value, "schema_version", "True")


# ---------------------------------------------------------------- what the sweep refuses
def test_wanted_signal_misses_a_later_mixers_if_passband():
    # LO2 at 30 MHz puts the wanted second IF at 15 MHz, nowhere near 455 kHz
    refused(lambda d: d["chain"][2]["lo"].update(fixed_hz=30e6), "chain.2.if", "15 MHz", "447.5 kHz to 462.5 kHz",
            analyse=True)


def test_wanted_signal_misses_a_later_mixers_if_input_in_an_up_chain():
    # a transmitter: 10 MHz up to 110 MHz (fixed 100 MHz LO, the sum), then a mixer expecting 200 MHz
    def up(d):
        d["direction"] = "up"
        d["rf"] = {"start_hz": 900e6, "stop_hz": 901e6, "step_hz": 0.5e6}
        d["chain"] = [{"kind": "mixer", "input_port": "if", "lo": {"mode": "fixed", "fixed_hz": 100e6},
                       "if": {"center_hz": 10e6, "bandwidth_hz": 1e6}},
                      {"kind": "mixer", "input_port": "if", "lo": {"side": "high"},
                       "if": {"center_hz": 200e6, "bandwidth_hz": 2e6}}]
    refused(up, "chain.1.if", "110 MHz", "199 MHz to 201 MHz", analyse=True)


def test_adc_zone_that_cannot_hold_the_passband():
    # the 455 kHz IF sits in zone 1 of a 1 MHz converter, not zone 2
    refused(lambda d: d["chain"].append({"kind": "adc", "sample_rate_hz": 1e6, "nyquist_zone": 2}),
            "chain.3.nyquist_zone", "2", "zone 1", analyse=True)


def test_low_side_lo_below_zero():
    # a low-side LO = RF - IF with a 150 MHz IF: -6 MHz at the 144 MHz channel
    def low(d):
        d["chain"][0]["lo"]["side"] = "low"
        d["chain"][0]["if"]["center_hz"] = 150e6
    refused(low, "chain.0.lo", "-6 MHz", analyse=True)


def test_low_side_lo_at_zero():
    # the IF equal to the channel puts a low-side LO at exactly 0 Hz
    def zero(d):
        d["rf"] = {"start_hz": 45e6, "stop_hz": 45e6}
        d["chain"][0]["lo"]["side"] = "low"
    refused(zero, "chain.0.lo", "0 Hz", analyse=True)


def test_order_caps_carrying_too_many_bands():
    def big(d):
        d["max_order"] = 15
        d["chain"].append({"kind": "mixer", "lo": {"mode": "fixed", "fixed_hz": 1e6},
                           "if": {"center_hz": 545e3, "bandwidth_hz": 15e3}})
    text = refused(big, "chain", "bands per channel", cls=SweepTooLargeError, analyse=True)
    assert "max_order" in text


# ---------------------------------------------------------------- the JSON itself
@pytest.mark.parametrize("constant", ["NaN", "Infinity", "-Infinity"])
def test_json_non_finite_number(constant):
    text = plan_text().replace('"gain_db": 20', f'"gain_db": {constant}')
    assert constant in text
    with pytest.raises(PlanError) as info:
        loads_any(text)
    check_message(info.value, "plan", constant)


def test_json_duplicate_key():
    text = plan_text().replace('"gain_db": 20', '"gain_db": 20, "gain_db": 30')
    with pytest.raises(PlanError) as info:
        loads_any(text)
    check_message(info.value, "gain_db", "duplicate key")


def test_json_duplicate_top_level_key():
    text = plan_text().replace('"schema_version": 2', '"schema_version": 2, "schema_version": 2')
    with pytest.raises(PlanError) as info:
        loads_any(text)
    check_message(info.value, "schema_version", "duplicate key")


def test_json_malformed():
    with pytest.raises(PlanError) as info:
        loads_any(plan_text()[:-3])
    check_message(info.value, "plan file", "malformed JSON")


def test_json_top_level_not_an_object():
    with pytest.raises(PlanError) as info:
        loads_any("[1, 2]")
    check_message(info.value, "plan", "list")


# ---------------------------------------------------------------- round trips
@pytest.mark.parametrize("source", ["example", "base", "awkward floats"])
def test_version_2_round_trip_is_exact(source, tmp_path):
    # dumps_any writes floats with repr: the text parses back to an equal plan, and writes the same text
    if source == "example":
        plan = load_any(EXAMPLE)
    elif source == "base":
        plan = loads_any(plan_text())
    else:
        def awkward(d):
            d["rf"] = {"start_hz": 0.1 + 0.2 + 144e6, "stop_hz": 146.000000001e6, "step_hz": 1e6 / 3}
            d["signal"] = {"bandwidth_hz": 12.5e3 + 1e-7, "level_dbm": -47.123456789012345}
            d["chain"][1]["gain_db"] = 20.0 / 3
        plan = loads_any(plan_text(awkward))
    assert isinstance(plan, ChainPlan)
    text = dumps_any(plan)
    again = loads_any(text)
    assert again == plan
    assert dumps_any(again) == text
    path = save_any(plan, tmp_path / "plan.json")
    assert path.read_text(encoding="utf-8") == text
    assert load_any(path) == plan


def test_version_1_plan_still_loads_as_version_1():
    body = {"rf": {"start_hz": 144e6, "stop_hz": 144e6}, "signal": {"bandwidth_hz": 12.5e3},
            "if": {"center_hz": 45e6, "bandwidth_hz": 30e3}}
    plan = loads_any(json.dumps(body))
    assert isinstance(plan, Plan) and plan.schema_version == 1
    assert loads_any(dumps_any(plan)) == plan
