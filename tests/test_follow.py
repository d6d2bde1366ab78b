"""Filters follow the band they were centred on, and a wanted signal down a filter skirt is reported."""

from __future__ import annotations

import pytest

from mixchart.analysis import evaluate
from mixchart.app import PlanState, example_plan


def test_moving_the_if_moves_an_if_filter_centred_on_it() -> None:
    plan, folder = example_plan("fm_receiver")
    assert plan.filters.if_.f_center_hz == plan.if_.center_hz  # the example's filter sits on the IF
    state = PlanState(plan, folder)
    assert state.try_update({"if.center_hz": "11.7 MHz"}) is None
    assert state.plan.filters.if_.f_center_hz == 11.7e6
    assert state.evaluation.warnings == ()


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
