"""Which filter floor or data-span policy set a row's loss (the ``loss_limit`` column) and its warning.

The filter losses the column is judged against come from textbook formulas restated in
tests/reference_filters.py (the tuned circuit's ``10·log10(1 + (Q·(f/f0 − f0/f))²)`` per
stage, from memory: Kennedy & Davis) and from the Touchstone file read by scikit-rf, not
from mixchart's own filter code.  The floors are the documented common-practice defaults
(no source), restated in reference_filters.ULTIMATE_DEFAULT_DB.
"""

from __future__ import annotations

import copy
import json

import numpy as np
import pytest
import skrf
from reference_filters import ULTIMATE_DEFAULT_DB, tuned_circuit_loss_db
from test_filters import write_s2p

from mixchart import evaluate
from mixchart.plan import plan_from_dict
from mixchart.report import report_html

#: Invented receiver: 100 MHz channel, 10.7 MHz IF, high-side LO, a two-stage tracking tuned preselector.
RECEIVER = {
    "name": "loss-limit test receiver",
    "direction": "down",
    "rf": {"start_hz": "100 MHz", "stop_hz": "100 MHz"},
    "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -30},
    "lo": {"mode": "tracking", "side": "high"},
    "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "200 kHz"},
    "max_order": 7,
    "mixer": {"rf_ref_dbm": -30},
    "filters": {"rf": {"kind": "tuned", "q_loaded": 30, "stages": 2, "tracks_channel": True}},
    "requirement": {"min_rejection_db": 60},
}


def plan(**filters):
    data = copy.deepcopy(RECEIVER)
    data["filters"].update(filters)
    return plan_from_dict(data)


def textbook_least_db(low: float, high: float, f0: float = 100e6, q: float = 30, stages: int = 2) -> float:
    """Least tuned-circuit loss over [low, high]: at the band point nearest f0 (the loss grows away from it)."""
    return tuned_circuit_loss_db(min(max(f0, low), high), f0, q, stages)


@pytest.mark.parametrize(("max_atten_db", "expected_note"), [
    (None, f"filters.rf floor {ULTIMATE_DEFAULT_DB['tuned']:g} dB (assumed)"),
    (55.0, "filters.rf floor 55 dB"),
    (400.0, None),  # no response band of this plan is rejected 400 dB by two tuned circuits
])
def test_a_response_names_the_preselector_floor_exactly_where_the_response_alone_rejects_more(
        max_atten_db, expected_note):
    spec = {**RECEIVER["filters"]["rf"], **({} if max_atten_db is None else {"max_atten_db": max_atten_db})}
    frame = evaluate(plan(rf=spec)).channel_frame(0)
    responses = frame[(frame["kind"] == "response") & (frame["label"] != "wanted")]
    floor = ULTIMATE_DEFAULT_DB["tuned"] if max_atten_db is None else max_atten_db
    decided = np.array([textbook_least_db(lo, hi) > floor
                        for lo, hi in zip(responses["f_low_hz"], responses["f_high_hz"], strict=True)])
    assert decided.any() == (expected_note is not None)
    got = responses["loss_limit"].to_numpy()
    assert list(got[decided]) == [expected_note] * int(decided.sum())
    assert set(got[~decided]) <= {""}, "a row the response alone sets names nothing"


def test_products_name_the_if_filter_floor_and_the_warning_counts_the_assumed_rows():
    if_spec = {"kind": "butterworth", "response": "bandpass", "order": 3, "f_center_hz": "10.7 MHz",
               "bandwidth_hz": "300 kHz"}
    evaluation = evaluate(plan(**{"if": if_spec}))
    frame = evaluation.channel_frame(0)
    products = frame[frame["kind"] == "product"]
    # The LO leakage at 110.7 MHz: a 3rd-order Butterworth band-pass, geometric transform (as
    # scipy.signal.lp2bp): Omega = |f/f0 - f0/f|·f0/BW = 694, 10·log10(1 + Omega^6) = 170 dB > 80.
    leak = products[products["label"] == "LO leakage"]
    assert leak["loss_limit"].iloc[0] == "filters.if floor 80 dB (assumed)"
    wbp = evaluation.worst_by_product
    assumed = wbp["loss_limit"].str.contains("filters.if floor 80 dB (assumed)", regex=False)
    text = [w for w in evaluation.warnings if w.startswith("filters.if: the assumed ultimate rejection")]
    assert len(text) == 1
    n_fail = int((wbp.loc[assumed, "margin_db"] < 0).sum())
    assert f"sets the loss of {int(assumed.sum())} of {len(wbp)} worst-case rows, {n_fail} of them failing" in text[0]
    worst = wbp[assumed].sort_values("margin_db").iloc[0]
    assert f"margin {worst['margin_db']:+.1f} dB" in text[0]


def test_a_stated_floor_is_named_but_not_warned_about():
    spec = {**RECEIVER["filters"]["rf"], "max_atten_db": 55}
    evaluation = evaluate(plan(rf=spec))
    assert (evaluation.worst_by_product["loss_limit"] == "filters.rf floor 55 dB").any()
    assert not [w for w in evaluation.warnings if "assumed ultimate rejection" in w]


def test_a_cascade_names_the_stage_whose_floor_set_the_loss():
    stages = [{"kind": "tuned", "q_loaded": 30, "stages": 2, "tracks_channel": True, "max_atten_db": 30},
              {"kind": "butterworth", "response": "lowpass", "order": 3, "f_edge_hz": "150 MHz", "max_atten_db": 200}]
    frame = evaluate(plan(rf={"kind": "cascade", "stages": stages, "max_atten_db": 300})).channel_frame(0)
    image = frame[frame["label"] == "image"].iloc[0]
    # image band 121.3-121.5 MHz: two Q=30 circuits reject it by 2·10·log10(1 + (30·0.3797)²) = 42.2 dB > 30
    assert textbook_least_db(image["f_low_hz"], image["f_high_hz"]) > 30
    assert image["loss_limit"] == "filters.rf.stages.0 floor 30 dB"


def test_measured_data_outside_its_span_names_the_policy(tmp_path):
    # A measured preselector, 90-130 MHz, 0.1 dB/MHz away from 100 MHz (an invented file); the
    # (m,0) responses to inputs far below (14-15 MHz for (7,0)) lie outside its span.
    f_hz = np.linspace(90e6, 130e6, 81)
    s21 = 10 ** (-0.1 * np.abs(f_hz - 100e6) / 1e6 / 20)
    path = write_s2p(tmp_path / "presel.s2p", f_hz, s21)
    assert skrf.Network(str(path)).f[0] == pytest.approx(90e6)  # the span scikit-rf reads
    for policy, extra, note in (("hold", {}, "filters.rf outside its data: end values held"),
                                ("floor", {"outside_atten_db": 45}, "filters.rf outside its data: floor 45 dB")):
        spec = {"kind": "touchstone", "path": str(path), "outside": policy, **extra}
        evaluation = evaluate(plan(rf=spec))
        frame = evaluation.channel_frame(0)
        rows = frame[(frame["kind"] == "response") & (frame["label"] != "wanted")]
        outside = (rows["f_low_hz"] < 90e6) | (rows["f_high_hz"] > 130e6)
        assert outside.any() and (~outside).any()
        assert all(note in t for t in rows.loc[outside, "loss_limit"])
        assert not any("outside its data" in t for t in rows.loc[~outside, "loss_limit"])
        span = [w for w in evaluation.warnings if "read outside the file's span" in w]
        assert len(span) == 1 and ("end values are held" if policy == "hold" else "floor of 45 dB") in span[0]


def test_a_transmitter_without_an_output_filter_says_so_on_every_product():
    data = {"name": "tx", "direction": "up", "rf": {"start_hz": "900 MHz", "stop_hz": "900 MHz"},
            "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -10}, "lo": {"mode": "tracking", "side": "low"},
            "if": {"center_hz": "70 MHz", "bandwidth_hz": "1 MHz"}, "max_order": 5,
            "requirement": {"min_rejection_db": 60}}
    frame = evaluate(plan_from_dict(data)).channel_frame(0)
    assert set(frame["loss_limit"]) == {"no output filter: 0 dB taken"}


def test_the_column_reaches_the_json_and_the_report_escaped():
    data = copy.deepcopy(RECEIVER)
    data["name"] = "<b>meeting</b>"
    the_plan = plan_from_dict(data)
    evaluation = evaluate(the_plan)
    payload = json.loads(json.dumps(evaluation.to_json_dict()))
    assert any(r["loss_limit"] == "filters.rf floor 70 dB (assumed)" for r in payload["worst_by_product"])
    html = report_html(the_plan, evaluation=evaluation)
    assert "loss set by filters.rf floor 70 dB (assumed)" in html
    assert "<b>meeting</b>" not in html
