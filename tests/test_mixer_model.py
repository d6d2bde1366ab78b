"""The built-in mixer level model (mixchart.mixer_model) against the physics it stands for.

Sources, named beside each check: time-domain simulations of switching mixers with a coherent
FFT (tests/sim_mixer.py: a +/-1 or 0/1 switch, one with a duty error, one driven by an LO with
a second harmonic, one whose switching instants move with the RF voltage); the Fourier series of
a square wave; scipy.signal for the LO filter; data-sheet arithmetic (an isolation is the ratio
of the power into one port to the power out of another); and the stated common-practice
defaults (no source), restated here rather than imported.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sim_mixer  # tests/sim_mixer.py
from scipy import signal

from mixchart import evaluate
from mixchart.context import build_context
from mixchart.levels import FLOOR_DBC, IDEAL_BALANCED_CONVERSION_LOSS_DB, default_conversion_loss_db
from mixchart.mixer_model import MixerSpec, builtin_table, single_ended_duty_db
from mixchart.plan import plan_from_dict

#: Ideal settings: no balance error, no LO second harmonic, ports isolated (300 dB, the field's bound).
IDEAL = {"balance_db": 300.0, "lo_harmonic2_dbc": -300.0, "rf_if_isolation_db": 300.0,
         "lo_if_isolation_db": 300.0, "lo_rf_isolation_db": 300.0}
#: Typical isolations restated from the mixer_model docstring (common practice, from memory).
TYPICAL = {"double_balanced": (35.0, 30.0, 25.0), "single_balanced": (20.0, 15.0, 15.0),
           "single_ended": (10.0, 10.0, 20 * math.log10(2))}


def table(topology="double_balanced", max_order=7, direction="down", lo_h2_rejection_db=0.0, **fields):
    return builtin_table(MixerSpec(topology=topology, **fields), max_order, direction=direction,
                         lo_h2_rejection_db=lo_h2_rejection_db)


# ---------------------------------------------------------------- rule 1: odd LO harmonics
@pytest.mark.parametrize("n", [1, 3, 5, 7])
def test_balanced_odd_lo_products_follow_the_square_wave_series(n):
    # Source: simulated +/-1 switching mixer (sim_mixer) and the closed form -20 log10(n) of the
    # square wave's Fourier series (from memory: S. A. Maas, Microwave Mixers; (1,3) at -9.54 dBc).
    out = sim_mixer.simulate(switch="bipolar", max_n=7)
    for topology in ("double_balanced", "single_balanced"):
        t = table(topology, max_order=8, **IDEAL)
        assert t.level_dbc[1, n] == pytest.approx(out.dbc(1, n), abs=0.01)
        assert t.level_dbc[1, n] == pytest.approx(-20 * math.log10(n), abs=1e-12)
        assert t.level_dbc[1, n + 1] <= FLOOR_DBC  # an ideal balance leaves no even n


# ---------------------------------------------------------------- rule 2: even-n residuals
def test_a_duty_error_puts_every_even_n_residual_and_the_feedthrough_at_one_level():
    # Source: simulated +/-1 switch of duty 0.5 + d, d = 10/1024 (exact on the simulation's 1024
    # samples per period): (1,0), (1,2), (1,4), (1,6) all sit at pi·d of the wanted, -30.26 dBc
    # (derived by hand from the Fourier series of a square wave of duty 0.5 + d).  The model's
    # balance_db is that level, flat in n.
    d = 10 / 1024
    out = sim_mixer.simulate(switch="bipolar", duty=0.5 + d, max_n=6)
    expected = 20 * math.log10(math.pi * d)
    balance = -expected
    t = table(balance_db=balance, lo_harmonic2_dbc=-300.0, rf_if_isolation_db=300.0)
    for n in (0, 2, 4, 6):
        assert out.dbc(1, n) == pytest.approx(expected, abs=0.05), n
        assert t.level_dbc[1, n] == pytest.approx(out.dbc(1, n), abs=0.05), n
    # the former 1/n envelope would have put (1,6) 15.6 dB lower; the simulation shows none of it
    assert out.dbc(1, 6) - out.dbc(1, 2) > -0.1


@pytest.mark.parametrize("h2_dbc", [-30.0, -20.0])
def test_an_lo_second_harmonic_sets_a_floor_under_the_even_n_residuals(h2_dbc):
    # Source: simulated switch driven by the LO's own zero crossings, the LO carrying a second
    # harmonic of amplitude a (sim_mixer.lo_driven_wave): the crossings move by a/pi of a cycle,
    # so every even n (and n = 0) sits at a relative to the wanted at the worst phase (first order
    # in a: the simulation, 16,384 samples per LO period, lies within 0.05 dB of it at -30 dBc and
    # within 0.35 dB below it at -20 dBc; at other phases it is lower).
    a = 10 ** (h2_dbc / 20)
    t = table(balance_db=300.0, lo_harmonic2_dbc=h2_dbc, rf_if_isolation_db=300.0)
    for phase in (0.0, 0.7, math.pi / 2 - 0.3):
        wave = sim_mixer.lo_driven_wave(2**20, 64, h2_amplitude=a, h2_phase_rad=phase)
        out = sim_mixer.simulate(switch="bipolar", wave=wave, max_n=6, lo_cycles=64, n_samples=2**20)
        for n in (0, 2, 4):
            assert out.dbc(1, n) <= t.level_dbc[1, n] + 0.05, (phase, n)
        if phase == 0.0:  # the worst phase: the model's level is reached
            assert out.dbc(1, 2) == pytest.approx(t.level_dbc[1, 2], abs=0.35)


def test_the_duty_error_and_the_lo_harmonic_add_in_amplitude_never_optimistically():
    # Source: the LO-driven switch with both a threshold offset c (a duty error: the crossings of
    # cos θ = c sit at acos(c), duty acos(c)/pi) and a second harmonic, its phase set to add to the
    # duty error or to take from it: the model's amplitude sum is never below the simulated level.
    c, a = -0.03, 10 ** (-30 / 20)
    duty_error = math.acos(c) / math.pi - 0.5
    balance = -20 * math.log10(math.pi * duty_error)
    t = table(balance_db=balance, lo_harmonic2_dbc=-30.0, rf_if_isolation_db=300.0)
    levels = []
    for phase in (0.0, math.pi):
        wave = sim_mixer.lo_driven_wave(2**20, 64, h2_amplitude=a, h2_phase_rad=phase, threshold=c)
        out = sim_mixer.simulate(switch="bipolar", wave=wave, max_n=4, lo_cycles=64, n_samples=2**20)
        levels.append(out.dbc(1, 2))
        assert out.dbc(1, 2) <= t.level_dbc[1, 2] + 0.05, phase
    assert max(levels) == pytest.approx(t.level_dbc[1, 2], abs=0.5)  # the worst phase reaches the sum
    assert min(levels) < max(levels) - 6  # and the other phase cancels: the two effects are one


def test_the_lo_filter_lowers_the_even_n_floor_by_its_rejection_of_the_second_harmonic():
    # An invented receiver with a 5th-order Butterworth low-pass on the LO, edge 1.15 x the highest LO:
    # its loss at 2 f_LO less its loss at f_LO, least over the LO range (scipy.signal.butter + freqs),
    # comes off the -20 dBc harmonic.
    edge = 1.15 * 130e6
    data = {"direction": "down", "rf": {"start_hz": "100 MHz", "stop_hz": "120 MHz", "step_hz": "5 MHz"},
            "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -30}, "lo": {"mode": "tracking", "side": "high"},
            "if": {"center_hz": "10 MHz", "bandwidth_hz": "200 kHz"}, "max_order": 5,
            "mixer": {"balance_db": 300.0, "rf_if_isolation_db": 300.0},
            "filters": {"lo": {"kind": "butterworth", "response": "lowpass", "order": 5, "f_edge_hz": edge,
                               "max_atten_db": 400}}}
    ctx = build_context(plan_from_dict(data), None)
    b, a = signal.butter(5, 2 * np.pi * edge, analog=True)
    lo = ctx.lo_hz
    _, h1 = signal.freqs(b, a, worN=2 * np.pi * lo)
    _, h2 = signal.freqs(b, a, worN=2 * np.pi * 2 * lo)
    rejection = float(np.min(20 * np.log10(np.abs(h1) / np.abs(h2))))
    assert rejection > 10  # the check means something
    assert ctx.table.level_dbc[1, 2] == pytest.approx(-20.0 - rejection, abs=1e-6)


# ---------------------------------------------------------------- rule 3: RF harmonics
def test_rf_harmonic_products_are_flat_across_n_as_the_physics_is_not_one_over_n():
    # Source: simulated switch whose instants move with the RF voltage the diodes share
    # (sim_mixer.lo_driven_wave with threshold = -k·x): the (3,n) products do not fall with n
    # (they rise: -58.0, -48.4, -44.1 dBc for n = 1, 3, 5 at k = 0.1).  The flat rule is far
    # nearer that than the former 1/n rule (-9.54, -13.98 dB from (3,1)).
    n_samples, k_rf, k_lo = 2**18, 37, 256
    x = np.cos(2 * np.pi * ((k_rf * np.arange(n_samples)) % n_samples) / n_samples)
    wave = sim_mixer.lo_driven_wave(n_samples, k_lo, threshold=-0.1 * x)
    out = sim_mixer.simulate(switch="bipolar", wave=wave, amplitude=0.1, max_m=3, max_n=5)
    t = table(max_order=8)
    for n in (3, 5):
        simulated = out.dbc(3, n) - out.dbc(3, 1)
        assert simulated > 0.0  # does not fall with n
        flat, one_over_n = t.level_dbc[3, n] - t.level_dbc[3, 1], -20 * math.log10(n)
        assert flat == 0.0
        assert abs(simulated - flat) < abs(simulated - one_over_n)


def test_the_rf_rule_is_anchored_at_the_lo_drive_not_at_the_plan_signal_level():
    # (3,1) is -2·20 = -40 dBc at 10 dB under the LO drive (common practice, no source); two
    # plans with the same mixer and different signal levels see the same absolute (3,1) power.
    t7, t10 = table(lo_drive_dbm=7.0), table(lo_drive_dbm=10.0)
    assert t7.rf_ref_dbm == -3.0 and t10.rf_ref_dbm == 0.0
    assert t7.level_dbc[3, 1] == -40.0
    assert t7.level_dbc_at(3, 1, -13.0) == pytest.approx(-60.0)  # (m-1) dB per dB below the anchor
    assert table(rf_ref_dbm=-30.0).rf_ref_dbm == -30.0  # a stated reference is kept


def test_double_balanced_even_m_is_suppressed_once():
    t = table(balance_db=30.0, lo_harmonic2_dbc=-40.0)
    assert t.level_dbc[2, 1] == pytest.approx(-20.0 - 30.0)  # even m, odd n: the RF-side balance
    residual = 20 * math.log10(10 ** (-30 / 20) + 10 ** (-40 / 20))  # amplitude sum, derived by hand
    assert t.level_dbc[2, 2] == pytest.approx(-20.0 + residual)  # even n: the residual, not both
    assert t.level_dbc[3, 2] == pytest.approx(-40.0 + residual)


# ---------------------------------------------------------------- rules 4-5: isolation
@pytest.mark.parametrize("topology", list(TYPICAL))
def test_lo_leakage_and_feedthrough_follow_the_data_sheet_isolations(topology):
    # Data-sheet arithmetic: LO leakage at the output is P_LO - isolation (LO-IF for a receiver,
    # LO-RF for a transmitter); relative to the wanted output P_ref - CL it is
    # P_LO - iso - P_ref + CL.  Feedthrough: CL - iso(RF-IF), never below the switching residual.
    lo_rf, lo_if, rf_if = TYPICAL[topology]
    cl = default_conversion_loss_db(topology)
    down, up = table(topology), table(topology, direction="up")
    assert down.level_dbc[0, 1] == pytest.approx(7.0 - lo_if - (-3.0 - cl))
    assert up.level_dbc[0, 1] == pytest.approx(7.0 - lo_rf - (-3.0 - cl))
    if topology == "single_ended":  # the 0/1 switch's own DC term, +3.92 dBc (derived by hand)
        assert down.level_dbc[1, 0] == pytest.approx(20 * math.log10(math.pi / 2), abs=1e-9)
    else:
        residual = 20 * math.log10(10 ** (-30 / 20) + 10 ** (-20 / 20))
        assert down.level_dbc[1, 0] == pytest.approx(max(cl - rf_if, residual))
    stated = table(topology, lo_if_isolation_db=45.0, rf_if_isolation_db=40.0, balance_db=60.0,
                   lo_harmonic2_dbc=-70.0)
    assert stated.level_dbc[0, 1] == pytest.approx(7.0 - 45.0 - (-3.0 - cl))
    if topology != "single_ended":
        assert stated.level_dbc[1, 0] == pytest.approx(cl - 40.0)
    assert stated.level_dbc[0, 3] - stated.level_dbc[0, 1] == pytest.approx(-20 * math.log10(3))


def test_a_receivers_lo_leakage_power_is_the_lo_drive_less_the_lo_if_isolation():
    # Data-sheet arithmetic on a whole plan: the (0,1) row's output power in dBm is
    # P_LO - iso(LO-IF) - (the IF filter's loss at f_LO), whatever the signal level.
    for level in (-60, -20):
        data = {"direction": "down", "rf": {"start_hz": "100 MHz", "stop_hz": "100 MHz"},
                "signal": {"bandwidth_hz": "100 kHz", "level_dbm": level},
                "lo": {"mode": "tracking", "side": "high"}, "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "200 kHz"},
                "max_order": 3, "mixer": {"lo_drive_dbm": 10.0, "lo_if_isolation_db": 33.0}}
        frame = evaluate(plan_from_dict(data)).channel_frame(0)
        leak = frame[frame["label"] == "LO leakage"].iloc[0]
        assert leak["level_dbm"] == pytest.approx(10.0 - 33.0 - leak["if_atten_db"], abs=1e-9)


def test_older_plans_lo_isolation_reads_as_before():
    # unbalanced_lo_isolation_db (older plans) was applied before a double-balanced mixer's balance
    spec = MixerSpec(unbalanced_lo_isolation_db=20.0, balance_db=30.0)
    assert spec.leakage_isolation_db("down") == 50.0
    assert MixerSpec(topology="single_balanced", unbalanced_lo_isolation_db=20.0).leakage_isolation_db("up") == 20.0


# ---------------------------------------------------------------- single-ended duty
def test_single_ended_levels_are_the_worst_over_the_conduction_duty_range():
    # Source: simulated 0/1 switching mixer at duties k/1024 across 0.2-0.5 (sim_mixer), each
    # (1,n) relative to the wanted at the same duty; the model's level is the worst over the range
    # (closed form |sin(n pi d)| / (n sin(pi d)), derived by hand), never below any simulated duty.
    t = table("single_ended")
    worst = {n: -math.inf for n in range(6)}
    for k in range(205, 513, 6):
        out = sim_mixer.simulate(switch="unipolar", duty=k / 1024, max_n=5)
        for n in worst:
            level = out.dbc(1, n)
            assert level <= t.level_dbc[1, n] + 1e-3, (k, n)
            worst[n] = max(worst[n], level)
    for n in (2, 3, 4, 5):
        assert worst[n] == pytest.approx(t.level_dbc[1, n], abs=0.1), n
    assert t.level_dbc[1, 2] == pytest.approx(20 * math.log10(math.cos(math.pi * 0.2)), abs=1e-6)  # -1.84 dBc
    assert t.level_dbc[1, 3] > -20 * math.log10(3)  # worse than at 50 % duty alone
    # the duty grid is fine enough: a 10x finer grid moves no level by more than 1e-4 dB
    n = np.arange(0, 26)
    fine = 20 * np.log10(np.max(np.abs(np.sin(np.maximum(n, 1) * np.pi * np.linspace(0.2, 0.5, 40001)[:, None]))
                                / (np.maximum(n, 1) * np.sin(np.pi * np.linspace(0.2, 0.5, 40001)[:, None])), axis=0))
    np.testing.assert_allclose(single_ended_duty_db(n)[1:], fine[1:], atol=1e-4)


def test_conversion_loss_is_the_ideal_switching_value():
    # from memory: S. A. Maas, Microwave Mixers (3.92 dB); simulated +/-1 switch above gives 2/pi
    out = sim_mixer.simulate(switch="bipolar")
    assert table().conversion_loss_db == pytest.approx(-20 * math.log10(out.amplitude(1, 1)), abs=1e-3)
    assert IDEAL_BALANCED_CONVERSION_LOSS_DB == pytest.approx(20 * math.log10(math.pi / 2))
