"""Warnings a reviewer expects (issue 8, item 14): each fires on its case and not otherwise."""

from __future__ import annotations

import copy

import numpy as np
import pytest

from mixchart.analysis import evaluate
from mixchart.plan import plan_from_dict

BASE = {
    "name": "warnings test plan (invented)",
    "direction": "down",
    "rf": {"start_hz": "100 MHz", "stop_hz": "110 MHz", "step_hz": "1 MHz"},
    "signal": {"bandwidth_hz": "100 kHz"},
    "lo": {"mode": "tracking", "side": "high"},
    "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "200 kHz"},
    "max_order": 5,
    "filters": {"if": {"kind": "butterworth", "response": "bandpass", "order": 3, "f_center_hz": "10.7 MHz",
                       "bandwidth_hz": "300 kHz"}},
}


def _warnings(**changes) -> list[str]:
    data = copy.deepcopy(BASE)
    for key, value in changes.items():
        data[key] = value
    return list(evaluate(plan_from_dict(data)).warnings)


def test_the_base_plan_has_none_of_these_warnings():
    text = " | ".join(_warnings())
    assert "half-IF" not in text and "transform" not in text and "moves the fixed LO" not in text


def test_half_if_not_analysed_below_order_4():
    # the half-IF response is (2,2): order 4, so max_order 3 leaves it out
    assert any(w.startswith("max_order: 3 < 4, so the half-IF") for w in _warnings(max_order=3))
    assert not any("half-IF" in w for w in _warnings(max_order=4))


def test_the_step_grid_moving_a_fixed_lo_is_said():
    # 110.7 MHz on a 1 MHz grid: nearest grid point 111 MHz, moved by 300 kHz (derived by hand)
    lo = {"mode": "fixed", "fixed_hz": "110.7 MHz", "step_hz": "1 MHz"}
    found = [w for w in _warnings(lo=lo, rf={"start_hz": "100 MHz", "stop_hz": "100 MHz"}) if "fixed LO" in w]
    assert found == ["lo.step_hz: the step grid moves the fixed LO 110.7 MHz by 300 kHz; "
                     "the analysis uses the LO on the grid"]
    on_grid = {"mode": "fixed", "fixed_hz": "110 MHz", "step_hz": "1 MHz"}
    assert not any("fixed LO" in w for w in _warnings(lo=on_grid, rf={"start_hz": "99 MHz", "stop_hz": "99 MHz"}))


def test_an_arithmetic_transform_on_a_wide_filter_is_said():
    # a 20 MHz wide preselector at 105 MHz is 19.0 % wide: far beyond the ~5 % the narrow-band
    # transform suits; a 2 MHz one (1.9 %) is fine
    wide = {"kind": "butterworth", "response": "bandpass", "order": 3, "f_center_hz": "105 MHz",
            "bandwidth_hz": "20 MHz", "transform": "arithmetic"}
    filters = {**BASE["filters"], "rf": wide}
    assert any(w.startswith("filters.rf.transform: the arithmetic (narrow-band) transform on a 19.0% wide")
               for w in _warnings(filters=filters))
    narrow = {**wide, "bandwidth_hz": "2 MHz"}
    assert not any("transform" in w for w in _warnings(filters={**BASE["filters"], "rf": narrow}))


def test_the_lo_grid_rounds_to_nearest_with_halves_up():
    # Rule stated in plan.LoSetting.step_hz: nearest grid point, exact halves up.  Channels
    # 100-103 Hz, high-side IF 1 Hz, LO grid 2 Hz: nominal LO 101, 102, 103, 104 Hz, i.e. 50.5,
    # 51, 51.5, 52 grid steps -> 51, 51, 52, 52 -> 102, 102, 104, 104 Hz (derived by hand;
    # halves-to-even would give 100, 102, 104, 104 and an LO error alternating in sign).
    data = {
        "name": "grid rounding (invented)", "direction": "down",
        "rf": {"start_hz": 100, "stop_hz": 103, "step_hz": 1},
        "signal": {"bandwidth_hz": 0.1}, "lo": {"mode": "tracking", "side": "high", "step_hz": 2},
        "if": {"center_hz": 1, "bandwidth_hz": 0.5}, "max_order": 3,
    }
    assert plan_from_dict(data).lo_hz().tolist() == [102.0, 102.0, 104.0, 104.0]


def test_measured_data_read_outside_its_span_is_counted(tmp_path):
    # A Touchstone IF filter measured only over 10.0-11.4 MHz (invented data, flat 1 dB loss).
    # The FM-like receiver's products land far outside that span (e.g. the (1,0) feedthrough at
    # 100-110 MHz), so their losses use the held end value: the warning counts those rows.
    f_hz = np.linspace(10.0e6, 11.4e6, 15)
    lines = ["# Hz S MA R 50"] + [f"{f:.6g} 0 0 0.891 0 0.891 0 0 0" for f in f_hz]
    (tmp_path / "if.s2p").write_text("\n".join(lines) + "\n", encoding="utf-8")
    data = copy.deepcopy(BASE)
    data["filters"] = {"if": {"kind": "touchstone", "path": str(tmp_path / "if.s2p")}}
    result = evaluate(plan_from_dict(data))
    found = [w for w in result.warnings if w.startswith("filters.if:")]
    assert len(found) == 1 and "read outside the file's span 10 MHz to 11.4 MHz" in found[0]
    products = result.worst_by_product[result.worst_by_product["kind"] == "product"]
    outside = ((products["f_low_hz"] < 10.0e6) | (products["f_high_hz"] > 11.4e6)).sum()
    assert outside > 0 and f"{outside} of {len(products)} worst-case rows" in found[0]
    # measured wide enough: no warning
    wide = np.linspace(1e3, 1e9, 200)
    lines = ["# Hz S MA R 50"] + [f"{f:.9g} 0 0 0.891 0 0.891 0 0 0" for f in wide]
    (tmp_path / "wide.s2p").write_text("\n".join(lines) + "\n", encoding="utf-8")
    data["filters"] = {"if": {"kind": "touchstone", "path": str(tmp_path / "wide.s2p")}}
    assert not any(w.startswith("filters.if:") for w in evaluate(plan_from_dict(data)).warnings)


def test_drives_are_checked_at_the_mixer_for_the_wanted_and_the_interferer():
    # Built-in table at -3 dBm RF (10 dB under the default +7 dBm LO).  A +20 dBm interferer reaches
    # the mixer 13 dB above the LO drive (no preselector): compression, and 23 dB beyond the
    # table's reference (> RF_EXTRAPOLATION_LIMIT_DB = 10 dB).  Derived by hand.
    found = _warnings(signal={"bandwidth_hz": "100 kHz", "level_dbm": 0, "interferer_level_dbm": 20})
    assert any(w.startswith("signal.interferer_level_dbm: the interferer's RF drive 20 dBm is 23.0 dB")
               for w in found)
    assert any(w.startswith("mixer.lo_drive_dbm: an RF drive of 20.0 dBm") for w in found)
    # A 15 dB loss ahead of the mixer (a fixed band-pass far off the channels) lowers the wanted
    # drive: -30 - 15 = -45 dBm at 100 MHz, said with the filter named
    lossy = {"kind": "brickwall", "response": "bandpass", "f_center_hz": "300 MHz", "bandwidth_hz": "10 MHz",
             "stop_atten_db": 15}
    found = _warnings(filters={**BASE["filters"], "rf": lossy}, signal={"bandwidth_hz": "100 kHz", "level_dbm": -30})
    assert any(w.startswith("signal.level_dbm: the wanted drive at the mixer is -45.0 dBm") for w in found)
    # the base plan (-30 dBm, no preselector) says none of these
    quiet = " | ".join(_warnings())
    assert "compresses" not in quiet and "signal.interferer_level_dbm" not in quiet and "wanted drive" not in quiet


def test_a_cw_interferer_is_said_and_an_interferer_bandwidth_widens_every_response_band():
    # An input B_u wide centred at f gives an (m,n) output m·B_u wide, which reaches the IF while
    # m·f is within m·B_u/2 of [IF_low, IF_high] + n·LO: the band of responding centres widens
    # by B_u/2 on each side whatever m (derived by hand; products.response_bands docstring).
    cw = evaluate(plan_from_dict({**BASE, "signal": {"bandwidth_hz": "100 kHz"}}))
    assert any(w.startswith("signal.interferer_bandwidth_hz: not given") for w in cw.warnings)
    wide = evaluate(plan_from_dict({**BASE, "signal": {"bandwidth_hz": "100 kHz", "interferer_bandwidth_hz": 1e6}}))
    assert not any(w.startswith("signal.interferer_bandwidth_hz") for w in wide.warnings)
    a, b = cw.channel_frame(0), wide.channel_frame(0)
    key = ["kind", "rf_harmonic", "lo_harmonic", "sign"]
    a, b = (f[f["kind"] == "response"].sort_values(key).reset_index(drop=True) for f in (a, b))
    assert len(a) == len(b) > 5
    np.testing.assert_allclose(b["f_high_hz"] - a["f_high_hz"], 0.5e6, rtol=1e-9)
    np.testing.assert_allclose(b["f_low_hz"], np.maximum(a["f_low_hz"] - 0.5e6, 0.0), rtol=1e-9, atol=1e-6)


def test_an_up_converter_on_an_lo_grid_moves_its_output_unless_told_to_hold_it():
    # Transmitter, low-side LO, IF 70 MHz, LO grid 3 MHz: channel 1.2 GHz wants LO 1.13 GHz, which
    # snaps to 1.131 GHz (376.67 steps -> 377).  With the IF held at 70 MHz (the physical case,
    # the default) the output is 70 + 1131 = 1201 MHz; with the output held the IF input becomes
    # 1200 - 1131 = 69 MHz.  Arithmetic by hand.
    data = {"name": "grid", "direction": "up", "rf": {"start_hz": "1.2 GHz", "stop_hz": "1.2 GHz"},
            "signal": {"bandwidth_hz": "1 MHz"}, "lo": {"mode": "tracking", "side": "low", "step_hz": "3 MHz"},
            "if": {"center_hz": "70 MHz", "bandwidth_hz": "10 MHz"}}
    held_if = evaluate(plan_from_dict(data))
    assert held_if.lo_hz[0] == 1131e6
    assert held_if.f_wanted_in_hz[0] == 70e6 and held_if.f_wanted_out_hz[0] == 1201e6
    assert any("the IF input is held" in w and "move off the channel" in w for w in held_if.warnings)
    data["lo"]["grid_holds"] = "output"
    held_out = evaluate(plan_from_dict(data))
    assert held_out.f_wanted_in_hz[0] == pytest.approx(69e6) and held_out.f_wanted_out_hz[0] == 1200e6
    assert any("the IF input is retuned" in w for w in held_out.warnings)


def test_every_row_says_the_drive_it_was_read_at_and_whether_the_table_holds_there():
    # Table stated at -30 dBm RF, +7 dBm LO.  Products are read at the wanted drive, -30 dBm (no
    # preselector): within 10 dB of the reference and 37 dB under the LO, so valid.  Responses
    # are read at the interferer's drive, +20 dBm (no preselector loss): 50 dB from the
    # reference and above the LO drive, so flagged (thresholds: levels.RF_EXTRAPOLATION_LIMIT_DB,
    # checks.COMPRESSION_MARGIN_DB; arithmetic by hand).
    data = copy.deepcopy(BASE)
    data["signal"] = {"bandwidth_hz": "100 kHz", "level_dbm": -30, "interferer_level_dbm": 20}
    data["mixer"] = {"rf_ref_dbm": -30}
    frame = evaluate(plan_from_dict(data)).channel_frame(0)
    products, responses = frame[frame["kind"] == "product"], frame[frame["kind"] == "response"]
    assert (products["mixer_drive_dbm"] == -30).all() and products["drive_ok"].all()
    assert (responses["mixer_drive_dbm"] == 20).all() and not responses["drive_ok"].any()
    # behind a tuned preselector the interferer's drive is 20 dB less the loss at its band
    data["filters"] = {**BASE["filters"], "rf": {"kind": "tuned", "q_loaded": 30, "stages": 1,
                                                 "tracks_channel": True}}
    frame = evaluate(plan_from_dict(data)).channel_frame(0)
    responses = frame[frame["kind"] == "response"]
    image = responses[responses["label"] == "image"].iloc[0]
    # image of 100 MHz with a 110.7 MHz LO: 121.4 MHz; one tuned circuit, Q 30:
    # 10 log10(1 + (30 (121.4/100 - 100/121.4))^2) (Kennedy & Davis tuned-circuit formula)
    loss = 10 * np.log10(1 + (30 * (121.4 / 100 - 100 / 121.4)) ** 2)
    assert image["mixer_drive_dbm"] == pytest.approx(20 - loss, abs=0.05)
