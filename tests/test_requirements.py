"""Requirements in the trade's own terms (mixchart.requirements): which limit judges which row.

The rules checked here are the definitions of the mixchart.requirements module docstring:
response rejection is input-referred (dB), output spurs are dBc after the output filter, a
transmitter's emission mask judges each part of a product band against its segment's limit
(dBc, or dBm at the output), and the single ``min_rejection_db`` of older plans maps onto
``response_rejection_db = R`` and ``output_spur_dbc = -R``.  The engine-versus-plain-Python
comparison of mask plans is in tests/test_analysis.py (LEVEL_PLANS).
"""

from __future__ import annotations

import math

import jsonschema
import numpy as np
import pandas as pd
import pytest

from mixchart.analysis import evaluate
from mixchart.errors import PlanError
from mixchart.plan import dumps_plan, loads_plan, plan_from_dict, plan_json_schema

# 20·log10(pi/2): ideal double-balanced switching mixer (levels.py; from memory, Maas, Microwave Mixers)
IDEAL_DBM_CONVERSION_LOSS_DB = 20 * math.log10(math.pi / 2)


def transmitter(requirement: dict, **changes) -> dict:
    data = {
        "name": "invented L-band transmitter", "direction": "up",
        "rf": {"start_hz": "1.2 GHz", "stop_hz": "1.3 GHz", "step_hz": "20 MHz"},
        "signal": {"bandwidth_hz": "8 MHz", "level_dbm": -5},
        "lo": {"mode": "tracking", "side": "low"},
        "if": {"center_hz": "70 MHz", "bandwidth_hz": "10 MHz"},
        "max_order": 7, "mixer": {"rf_ref_dbm": -10},
        "requirement": requirement,
    }
    data.update(changes)
    return data


def receiver(requirement: dict) -> dict:
    return {
        "name": "invented VHF receiver", "direction": "down",
        "rf": {"start_hz": "140 MHz", "stop_hz": "150 MHz", "step_hz": "2 MHz"},
        "signal": {"bandwidth_hz": "25 kHz", "level_dbm": -50, "interferer_level_dbm": -20},
        "lo": {"mode": "tracking", "side": "high"},
        "if": {"center_hz": "21.4 MHz", "bandwidth_hz": "30 kHz"},
        "max_order": 7, "mixer": {"rf_ref_dbm": -30},
        "filters": {"rf": {"kind": "tuned", "q_loaded": 20, "stages": 2, "tracks_channel": True},
                    "if": {"kind": "butterworth", "response": "bandpass", "order": 4,
                           "f_center_hz": "21.4 MHz", "bandwidth_hz": "30 kHz"}},
        "requirement": requirement,
    }


def every_row(evaluation):
    """Every product and response of every channel, the wanted rows left out."""
    frame = pd.concat([evaluation.channel_frame(i) for i in range(evaluation.channels_hz.size)], ignore_index=True)
    return frame[np.isfinite(frame["margin_db"])]


def test_a_single_min_rejection_maps_onto_both_limits():
    # mapping (module docstring): min_rejection_db R == response_rejection_db R and output_spur_dbc -R
    old = evaluate(plan_from_dict(receiver({"min_rejection_db": 70})))
    new = evaluate(plan_from_dict(receiver({"min_rejection_db": 5, "response_rejection_db": 70,
                                            "output_spur_dbc": -70})))
    np.testing.assert_array_equal(old.worst_margin_db, new.worst_margin_db)
    a, b = every_row(old), every_row(new)
    np.testing.assert_array_equal(a["margin_db"].to_numpy(), b["margin_db"].to_numpy())
    assert set(a["requirement"]) == {"response rejection >= 70 dB", "output spur <= -70 dBc"}


def test_a_receiver_judges_responses_by_input_rejection_and_products_by_output_level():
    ev = evaluate(plan_from_dict(receiver({"min_rejection_db": 99, "response_rejection_db": 75,
                                           "output_spur_dbc": -50})))
    rows = every_row(ev)
    responses, products = rows[rows["kind"] == "response"], rows[rows["kind"] == "product"]
    assert len(responses) and len(products)
    # response: margin = input-referred rejection - 75 dB; product: margin = -50 dBc - level
    np.testing.assert_allclose(responses["margin_db"], responses["rejection_db"] - 75.0, atol=1e-9)
    shown = products["level_dbc"] > -300.0  # the -300 dBc display floor (margins use the unfloored level)
    np.testing.assert_allclose(products["margin_db"][shown], -50.0 - products["level_dbc"][shown], atol=1e-9)
    assert (products["margin_db"][~shown] >= -50.0 + 300.0).all()
    assert set(responses["requirement"]) == {"response rejection >= 75 dB"}
    assert set(responses["limit_unit"]) == {"dB"} and set(responses["limit"]) == {75.0}
    assert set(products["requirement"]) == {"output spur <= -50 dBc"} and set(products["limit_unit"]) == {"dBc"}


MASK = [{"f_low_hz": "1.05 GHz", "f_high_hz": "1.19 GHz", "limit": -62, "unit": "dBm"},
        {"f_low_hz": "1.31 GHz", "f_high_hz": "1.5 GHz", "limit": -55, "unit": "dBc"}]


def test_without_an_output_filter_each_band_takes_the_tightest_limit_it_touches():
    # No output filter: every product reaches the output at its table level (0 dB loss anywhere),
    # so its margin is the smallest, over the mask pieces its band touches, of limit - level, with
    # a dBm limit compared with level_dbc + the wanted output level.  The wanted output is the
    # drive less the ideal conversion loss: -5 dBm - 3.92 dB (no filters).
    ev = evaluate(plan_from_dict(transmitter({"output_spur_dbc": -45, "emission_mask": MASK})))
    wanted_out_dbm = -5.0 - IDEAL_DBM_CONVERSION_LOSS_DB
    pieces = [(0.0, 1.05e9, -45.0, 0.0), (1.05e9, 1.19e9, -62.0, wanted_out_dbm),
              (1.19e9, 1.31e9, -45.0, 0.0), (1.31e9, 1.5e9, -55.0, 0.0), (1.5e9, math.inf, -45.0, 0.0)]
    rows = every_row(ev)
    straddling = 0
    for row in rows.itertuples():
        touched = [limit - level_offset for low, high, limit, level_offset in pieces
                   if row.f_low_hz <= high and row.f_high_hz >= low]
        straddling += len(touched) > 1
        assert row.margin_db == pytest.approx(min(touched) - row.level_dbc, abs=1e-9), row.label
        assert row.level_dbm == pytest.approx(row.level_dbc + wanted_out_dbm, abs=1e-9)
    assert straddling > 0  # the check covers bands that span two pieces
    assert {"mask 1.05 GHz-1.19 GHz <= -62 dBm", "mask 1.31 GHz-1.5 GHz <= -55 dBc",
            "output spur <= -45 dBc"} <= set(rows["requirement"])


def test_a_mask_can_turn_a_pass_into_a_fail():
    # With no output filter the unwanted sideband (LO - IF, 1.06-1.16 GHz) leaves at 0 dBc, so a
    # 0 dBc general limit passes; a -62 dBm segment over it fails by -62 - (0 + wanted output
    # -8.92 dBm) = -53.08 dB.
    loose = evaluate(plan_from_dict(transmitter({"output_spur_dbc": 0}, max_order=2)))
    masked = evaluate(plan_from_dict(transmitter({"output_spur_dbc": 0, "emission_mask": MASK[:1]},
                                                 max_order=2)))
    assert loose.summary.worst_margin_db >= 0
    assert masked.summary.worst_margin_db == pytest.approx(-62 + 5 + IDEAL_DBM_CONVERSION_LOSS_DB, abs=1e-9)
    assert masked.worst_row["requirement"].str.startswith("mask").any()


def test_a_receiver_ignores_an_emission_mask_and_says_so():
    ev = evaluate(plan_from_dict(receiver({"emission_mask": MASK})))
    assert any(w.startswith("requirement.emission_mask:") for w in ev.warnings)
    assert not every_row(ev)["requirement"].str.startswith("mask").any()


@pytest.mark.parametrize(("requirement", "field", "value"), [
    ({"emission_mask": [MASK[0], {"f_low_hz": "1.1 GHz", "f_high_hz": "1.2 GHz", "limit": -50}]},
     "emission_mask[1].f_low_hz", "1.1 GHz"),
    ({"emission_mask": [{"f_low_hz": "1.2 GHz", "f_high_hz": "1.1 GHz", "limit": -50}]}, "f_high_hz", "1.1 GHz"),
    ({"emission_mask": [{"f_low_hz": "1.1 GHz", "f_high_hz": "1.2 GHz", "limit": 3}]}, "limit", "3"),
    ({"output_spur_dbc": 10}, "output_spur_dbc", "10"),
    ({"response_rejection_db": -1}, "response_rejection_db", "-1"),
    ({"emission_mask": [{"f_low_hz": "1.1 GHz", "f_high_hz": "1.2 GHz", "limit": -50, "unit": "dBW"}]},
     "unit", "dBW"),
])
def test_bad_requirements_get_one_line_naming_the_field(requirement, field, value):
    with pytest.raises(PlanError) as info:
        plan_from_dict(transmitter(requirement))
    message = str(info.value)
    assert "\n" not in message and field in message and value in message, message


def test_a_plan_with_a_mask_round_trips_exactly_and_meets_its_schema():
    plan = plan_from_dict(transmitter({"response_rejection_db": 65.5, "output_spur_dbc": -47.25,
                                       "emission_mask": MASK}))
    text = dumps_plan(plan)
    assert loads_plan(text) == plan and dumps_plan(loads_plan(text)) == text
    jsonschema.validate(plan.to_dict(), plan_json_schema())
    assert plan.requirement.emission_mask[0].f_low_hz == 1.05e9  # text parsed to Hz at the edge


@pytest.mark.parametrize("edge_hz", [900e6, 899.999e6])
def test_a_line_on_a_mask_segment_s_edge_is_judged_by_the_segment_alone(edge_hz):
    """The module docstring: segment edges belong to the segment (a gap never takes them).

    An invented transmitter: 100 MHz IF, low-side LO at 900 MHz, channel 1000 MHz; its LO leaks at
    exactly 900 MHz.  With the segment starting there (or just below) the LO line is judged
    against the segment's -10 dBc, never the -60 dBc of the gap below it; both engines agree.
    """
    from mixchart.analysis import evaluate
    from mixchart.chains import analyse_chain
    from mixchart.models import migrate_v1
    from mixchart.plan import plan_from_dict

    plan = plan_from_dict({
        "direction": "up", "rf": {"start_hz": "1000 MHz", "stop_hz": "1000 MHz"},
        "signal": {"bandwidth_hz": "1 MHz", "level_dbm": -10},
        "lo": {"mode": "tracking", "side": "low"}, "if": {"center_hz": "100 MHz", "bandwidth_hz": "2 MHz"},
        "mixer": {"lo_rf_isolation_db": 35, "rf_if_isolation_db": 30, "lo_harmonic2_dbc": -30},
        "requirement": {"output_spur_dbc": -60,
                        "emission_mask": [{"f_low_hz": edge_hz, "f_high_hz": "950 MHz", "limit": -10}]}})
    frame = evaluate(plan).to_frame()
    leak = frame[(frame["rf_harmonic"] == 0) & (frame["lo_harmonic"] == 1)].iloc[0]
    assert leak["requirement"].startswith("mask") and leak["limit"] == -10
    chain = analyse_chain(migrate_v1(plan)).paths
    row = chain[chain["path"] == "LO (0,1) in mixer"].iloc[0]
    assert row["limit"].startswith("mask") and row["margin_db"] == pytest.approx(leak["margin_db"], abs=1e-9)
