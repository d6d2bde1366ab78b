"""Filters follow the band they were centred on, and a wanted signal down a filter skirt is reported."""

from __future__ import annotations

import math

import numpy as np
import pytest

from mixchart.analysis import evaluate
from mixchart.state import PlanState, example_plan


def test_moving_the_if_moves_an_if_filter_centred_on_it() -> None:
    plan, folder = example_plan("fm_receiver")
    assert plan.filters.if_.f_center_hz == plan.if_.center_hz  # the example's filter sits on the IF
    state = PlanState(plan, folder)
    assert state.try_update({"if.center_hz": "11.7 MHz"}) is None
    assert state.plan.filters.if_.f_center_hz == 11.7e6
    # nothing is down a skirt; the only warnings state the assumed ultimate rejections of both filters
    # and the worst-case rows those assumptions decide
    assumed = [w for w in state.evaluation.warnings
               if ".max_atten_db: not given" in w or ": the assumed ultimate rejection" in w
               or w.startswith("mixer: ")]
    assert assumed[0].startswith("mixer: lo_if_isolation_db (30 dB)")
    assert sorted(w[:10] for w in assumed[1:]) == ["filters.if", "filters.if", "filters.rf", "filters.rf"]
    assert [w for w in state.evaluation.warnings if w not in assumed] == []


def test_an_if_filter_centred_elsewhere_stays_and_the_loss_is_reported() -> None:
    plan, folder = example_plan("fm_receiver")
    plan = plan.with_changes({"filters.if.f_center_hz": "10.71 MHz"})
    state = PlanState(plan, folder)
    assert state.try_update({"if.center_hz": "11.7 MHz"}) is None
    assert state.plan.filters.if_.f_center_hz == 10.71e6
    text = " ".join(state.evaluation.warnings)
    # 4th-order Butterworth band-pass, 280 kHz wide at 10.71 MHz: 11.7 MHz is far down its skirt
    assert "filters.if: the wanted signal at 11.7 MHz is" in text and "dB down" in text


def test_moving_the_rf_band_moves_a_fixed_output_filter_centred_on_it() -> None:
    plan, folder = example_plan("uplink_transmitter")
    assert plan.filters.rf.f_center_hz == 0.5 * (plan.rf.start_hz + plan.rf.stop_hz)
    state = PlanState(plan, folder)
    assert state.apply_band_drag("rf", 2.2e9, 2.3e9) is None
    # derived by hand: same 100 MHz width, centre 2.25 GHz -> channels 2.21-2.29 GHz
    assert (state.plan.rf.start_hz, state.plan.rf.stop_hz) == (2.21e9, 2.29e9)
    assert state.plan.filters.rf.f_center_hz == pytest.approx(2.25e9)


def test_fixed_preselector_off_the_channel_is_reported() -> None:
    plan, _ = example_plan("fm_receiver")
    plan = plan.with_changes(
        {"filters.rf": {"kind": "butterworth", "response": "bandpass", "order": 3,
                        "f_center_hz": "98 MHz", "bandwidth_hz": "10 MHz"}}
    )
    warnings = " ".join(evaluate(plan).warnings)
    # 88 and 108 MHz are outside a 93-103 MHz preselector: the edge channels are many dB down
    assert "filters.rf: the wanted signal at" in warnings


def test_a_filter_that_nulls_the_wanted_signal_gives_finite_margins_and_a_warning() -> None:
    # A geometric band-stop centred exactly on the IF has an exact zero of transmission there
    # (infinite loss).  Relative levels must stay defined: no NaN, no numpy warning (warnings are
    # errors in this suite), and the warning says the wanted signal is far down the filter.
    plan, _ = example_plan("fm_receiver")
    plan = plan.with_changes(
        {"filters.if": {"kind": "butterworth", "response": "bandstop", "order": 3,
                        "f_center_hz": "10.7 MHz", "bandwidth_hz": "300 kHz"}, "lo.step_hz": None}
    )
    ev = evaluate(plan)
    frame = ev.to_frame()
    assert not frame["margin_db"].isna().any()
    assert not frame["level_dbc"].isna().any()
    assert "filters.if: the wanted signal at 10.7 MHz is" in " ".join(ev.warnings)


def test_a_transmitter_without_an_output_filter_emits_every_product() -> None:
    # A transmitter emits every product.  With no output filter described the loss is 0 dB
    # everywhere (never an ideal brick wall) and the summary warns.  One 1 MHz wide channel at
    # 1000 MHz from a 350 MHz IF, low-side LO 650 MHz.  Derived by hand: the unwanted sideband
    # (1,1) difference at |350 - 650| = 300 MHz is at 0 dBc in the built-in double-balanced
    # table (m = 1, n = 1: the same level as the wanted), so its margin is -0 - 60 = -60 dB.
    # (The old brick-wall default called this plan "nothing reaches the output", PASS +inf.)
    from mixchart.plan import plan_from_dict

    data = {
        "direction": "up",
        "rf": {"start_hz": "1000 MHz", "stop_hz": "1000 MHz"},
        "signal": {"bandwidth_hz": "1 MHz"},
        "lo": {"mode": "tracking", "side": "low"},
        "if": {"center_hz": "350 MHz", "bandwidth_hz": "2 MHz"},
        "max_order": 5,
        "requirement": {"min_rejection_db": 60},
    }
    result = evaluate(plan_from_dict(data))
    sideband = result.worst_by_product.query("label == 'unwanted sideband'").iloc[0]
    assert sideband["margin_db"] == -60.0 and sideband["f_center_hz"] == 300e6
    # worse still, the LO itself: 7 dBm less the typical 35 dB LO-RF isolation of a double-balanced
    # mixer (mixer_model, common practice) = -28 dBm, against a wanted output of -30 - 3.92 dBm:
    # +5.92 dBc, margin -65.92 dB (data-sheet arithmetic, derived by hand)
    assert result.summary.worst_label == "LO leakage (0,1)"
    assert result.summary.worst_margin_db == pytest.approx(-60 - (-28 + 30 + 20 * math.log10(math.pi / 2)))
    assert any(w.startswith("filters.rf: no output filter described") for w in result.warnings)
    # with a real output filter (a 20 MHz wide brick wall with 80 dB of stopband loss) the
    # sideband is 80 dB down: margin 80 - 60 = +20 dB, and the warning is gone
    data["filters"] = {"rf": {"kind": "brickwall", "response": "bandpass", "f_center_hz": "1000 MHz",
                              "bandwidth_hz": "20 MHz", "stop_atten_db": 80}}
    filtered = evaluate(plan_from_dict(data))
    sideband = filtered.worst_by_product
    sideband = sideband[sideband["label"] == "unwanted sideband"]
    assert sideband["margin_db"].iloc[0] == pytest.approx(20.0)
    assert not any(w.startswith("filters.rf: no output filter") for w in filtered.warnings)


def test_failing_channels_are_listed() -> None:
    # Derived by hand: three tracking tuned circuits of Q 40 reject the image of a 100 MHz
    # channel (121.4 MHz) by 3·10·log10(1 + (40·(121.4/100 - 100/121.4))^2) = 71.7 dB > 70 dB,
    # and the rejection falls as the channel rises, so only channels above 100 MHz can fail;
    # at 108 MHz it is 3·10·log10(1 + (40·(129.4/108 - 108/129.4))^2) = 69.7 dB < 70 dB.
    plan, _ = example_plan("fm_receiver")
    ev = evaluate(plan)
    failing = ev.failing_channels_hz()
    assert failing.size == ev.summary.n_failing_channels > 0
    image = ev.hits[ev.hits["label"] == "image"]["channel_hz"].to_numpy()
    assert image.min() > 100e6 and image.max() == 108e6
    assert set(failing) == set(ev.channels_hz[ev.worst_margin_db < 0])


def test_an_up_converter_with_a_fixed_lo_below_the_if_takes_if_minus_lo() -> None:
    # Derived by hand: a 1000 MHz IF and a fixed 300 MHz LO give the 700 MHz channel through
    # IF - LO = 700 MHz, so the wanted IF input is 1000 MHz (difference, LO below the input:
    # no inversion).  The old rule (sum when the channel is above the LO) took an IF of
    # 700 - 300 = 400 MHz, outside the IF passband, and every product with it.
    from mixchart.plan import plan_from_dict

    plan = plan_from_dict({
        "direction": "up",
        "rf": {"start_hz": "690 MHz", "stop_hz": "710 MHz", "step_hz": "10 MHz"},
        "signal": {"bandwidth_hz": "1 MHz"},
        "lo": {"mode": "fixed", "fixed_hz": "300 MHz"},
        "if": {"center_hz": "1000 MHz", "bandwidth_hz": "40 MHz"},
        "max_order": 5,
    })
    ev = evaluate(plan)
    np.testing.assert_allclose(ev._context.f_in_hz, [990e6, 1000e6, 1010e6])
    assert (ev._context.wanted_sign == -1).all() and ev.summary.inverted == "no"
    wanted = ev.channel_frame(1)
    wanted = wanted[wanted["label"] == "wanted"].iloc[0]
    assert (wanted["rf_harmonic"], wanted["lo_harmonic"], wanted["sign"]) == (1, 1, -1)
    assert wanted["f_center_hz"] == 700e6
    # no warning that the channels miss the IF passband: they all fit it
    assert not any("do not fit the IF passband" in w for w in ev.warnings)
