"""The two examples whose verdict the data-sheet mixer model flips, derived by hand.

Each verdict is recomputed here from data-sheet arithmetic (an isolation is the power into one
port less the power out of another) and the filters' textbook losses (tests/reference_filters.py:
the Chebyshev type I prototype through the geometric band-pass transform, as scipy.signal.lp2bp),
not read back from the engine.  The typical isolations and the -20 dBc LO second harmonic are
the model's stated common-practice defaults (mixchart.mixer_model), restated here.
"""

from __future__ import annotations

import math

import pytest
from reference_filters import chebyshev1_loss_db

from mixchart import evaluate, load_plan
from mixchart.cli import example_path

CL_DB = 20 * math.log10(math.pi / 2)  # ideal double-balanced conversion loss (from memory: Maas)
RESIDUAL_DB = 20 * math.log10(10 ** (-30 / 20) + 10 ** (-20 / 20))  # 30 dB balance (+) -20 dBc LO H2


def bandpass_loss_db(f_hz, f0_hz, bw_hz, order, ripple_db):
    """Chebyshev band-pass loss: Omega = |f/f0 - f0/f|·f0/BW (geometric transform), textbook prototype."""
    return chebyshev1_loss_db(abs(f_hz / f0_hz - f0_hz / f_hz) * f0_hz / bw_hz, order, ripple_db)


def test_the_ism_transmitter_fails_on_its_lo_leaking_through_the_lo_rf_isolation():
    # Top channel 927.5 MHz, LO 857.5 MHz.  LO at the RF port: +7 dBm less the typical 35 dB LO-RF
    # isolation = -28 dBm.  Wanted output: -10 dBm less the IF filter's loss at 70 MHz (its centre,
    # ~0 dB) less CL.  The output filter takes A(857.5 MHz) - A(927.5 MHz).  Limit -60 dBc.
    ev = evaluate(load_plan(example_path("ism_transmitter")))
    assert ev.summary.worst_label == "LO leakage (0,1)" and ev.summary.worst_channel_hz == 927.5e6
    rel = bandpass_loss_db(857.5e6, 915e6, 40e6, 4, 0.2) - bandpass_loss_db(927.5e6, 915e6, 40e6, 4, 0.2)
    level = (7.0 - 35.0) - (-10.0 - CL_DB) - rel
    assert ev.summary.worst_margin_db == pytest.approx(-60.0 - level, abs=1e-6)
    assert ev.summary.worst_margin_db < 0  # a FAIL; the former balance-based leakage (50 dB) passed +10.5 dB


def test_the_hf_receiver_fails_on_a_45_mhz_signal_feeding_straight_through_the_mixer():
    # The IF feedthrough (1,0) response: a 45 MHz input reaches the IF at the larger of
    # CL - iso(RF-IF) = 3.92 - 25 = -21.08 dBc and the even-n residual (-17.6 dBc, set by the LO's
    # assumed -20 dBc second harmonic), less the low-pass preselector's loss over the responding
    # band relative to its loss at the channel.  Limit 57 dB of input-referred rejection (m = 1).
    ev = evaluate(load_plan(example_path("hf_upconverting_receiver")))
    assert ev.summary.worst_label == "IF feedthrough (1,0)"
    feed = ev.worst_by_product.query("label == 'IF feedthrough'").iloc[0]
    ch = feed["channel_hz"]
    low = feed["f_low_hz"]  # the low-pass loses least at the band's low edge
    a_in = chebyshev1_loss_db(low / 31e6, 7, 0.1)
    a_w = chebyshev1_loss_db(ch / 31e6, 7, 0.1)
    rejection = -max(CL_DB - 25.0, RESIDUAL_DB) + a_in - a_w
    assert feed["rejection_db"] == pytest.approx(rejection, abs=1e-6)
    assert feed["margin_db"] == pytest.approx(rejection - 57.0, abs=1e-6) and feed["margin_db"] < 0
    # the (1,2) response the LO's second harmonic sets also fails, narrowly
    one_two = ev.worst_by_product.query("rf_harmonic == 1 and lo_harmonic == 2 and kind == 'response'")
    assert one_two["margin_db"].min() < 0
