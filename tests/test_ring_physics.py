"""The diode circuit model (mixchart.ring_solver, mixchart.ring_table) against published theory.

Sources, named beside each check: the ideal switching mixer's Fourier series (a +/-1 square
wave: (1,n) at -20·log10(n), conversion loss 20·log10(pi/2) = 3.92 dB; from memory, S. A. Maas,
*Microwave Mixers*); a three-level switching wave with a dead zone, its Fourier series derived
by hand below; the power-series (m - 1) dB-per-dB rule for small drive (the standard
intermodulation result); first-order perturbation of a balanced circuit (derived by hand);
reciprocity of passive networks; the Wright omega closed form of a diode with series
resistance (scipy.special.wrightomega).  Numbers that are this project's own choices are
marked "common practice, no source".
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from mixchart.ring_solver import TYPICAL_DIODE, Balun, Circuit, Diode, build_network, solve_newton, solve_single_diode
from mixchart.ring_table import conversion_waveform, product_bin, solve_ring, tone_plan

IDEAL_CL_DB = 20 * math.log10(math.pi / 2)  # 3.92 dB, Maas (from memory)


def ring(lo_dbm, rf_dbm=-40.0, order=7, **kw):
    return solve_ring(Circuit(**kw), lo_drive_dbm=lo_dbm, rf_drive_dbm=rf_dbm, max_order=order)


# ---------------------------------------------------------------- the solver itself
def test_newton_matches_the_wright_omega_closed_form_for_one_diode():
    # Source: I = (nVt/R)·omega(ln(Is·R/nVt) + (V + Is·R)/nVt) - Is (Banwell and Jayakumar 2000, from memory),
    # evaluated by scipy.special.wrightomega; from deep reverse bias to 10 mA forward.
    circuit = Circuit(topology="single_ended", diodes=(TYPICAL_DIODE,))
    net = build_network(circuit)
    v = np.linspace(-5.0, 5.0, 4001)
    nvt = float(circuit.diode_arrays()[1][0])
    closed = solve_single_diode(v, float(net.z_ohm[0, 0]), TYPICAL_DIODE, nvt)
    newton, _, report = solve_newton(v[None, :], net.z_ohm, circuit)
    assert np.max(np.abs(newton[0] - closed) / (np.abs(closed) + TYPICAL_DIODE.is_a)) < 1e-12
    assert report.iterations < 40


@pytest.mark.parametrize("topology,count", [("double_balanced", 4), ("single_balanced", 2), ("single_ended", 1)])
def test_the_network_seen_by_the_diodes_is_reciprocal_and_passive(topology, count):
    # Source: reciprocity and passivity of resistive networks with ideal transformers (Z = Z^T, Z >= 0).
    net = build_network(Circuit(topology=topology, diodes=(TYPICAL_DIODE,) * count,
                                lo_balun=Balun(0.7, 3.0), rf_balun=Balun(-0.4, 0.0)))
    assert np.allclose(net.z_ohm, net.z_ohm.T, atol=1e-9)
    assert np.linalg.eigvalsh(net.z_ohm).min() > -1e-9


def test_no_two_products_share_a_bin():
    # Derived by hand: with the signal at 1 cycle and the LO at K, (m, n) sits at n·K ± m; checked by enumeration
    # for every m < K/2 and n < P/2 of the smallest record used (P = 64).
    for order in (5, 7, 25):
        k, p = tone_plan(order), 64
        seen = {}
        for m in range(k // 2):
            for n in range(p // 2):
                for sign in ((1, -1) if m and n else (1,)):
                    b = product_bin(m, n, sign, k)
                    assert 0 < b < k * p // 2 or (m, n) == (0, 0)
                    assert seen.setdefault(b, (m, n, sign)) == (m, n, sign)
        assert k > 2 * order


# ---------------------------------------------------------------- strong drive -> ideal switching
def test_strong_drive_approaches_ideal_switching():
    # Source: the +/-1 switching wave's series, (1,3) -9.54 dBc and (1,5) -13.98 dBc, conversion loss 3.92 dB
    # (Maas, from memory), plus the diodes' own loss derived by hand: in the ideal-switch limit the signal
    # passes the two conducting diodes in parallel (Rs/2) in series with the matched 2R loop, so
    # 20·log10(1 + Rs/(4R)) = 0.257 dB for Rs = 6 ohm, R = 50 ohm.
    drives = (10.0, 15.0, 20.0, 25.0)
    results = [ring(lo, order=5) for lo in drives]
    diode_loss = 20 * math.log10(1 + TYPICAL_DIODE.rs_ohm / (4 * 50.0))
    cl = [r.conversion_loss_db for r in results]
    assert all(a > b for a, b in itertools.pairwise(cl))  # falls towards the limit
    assert cl[-1] == pytest.approx(IDEAL_CL_DB + diode_loss, abs=0.05)
    for n, ideal in ((3, -20 * math.log10(3)), (5, -20 * math.log10(5))):
        errors = [abs(r.level_dbc[1, n] - ideal) for r in results]
        assert all(a > b for a, b in itertools.pairwise(errors)), (n, errors)
        assert errors[-1] < (0.1 if n == 3 else 0.2)
    assert results[-1].level_dbc[1, 3] == pytest.approx(-9.54, abs=0.1)
    # with no series resistance the limit is the ideal switch itself
    lossless = solve_ring(Circuit(diodes=(Diode(5e-9, 1.08, 0.0),) * 4), lo_drive_dbm=25.0, rf_drive_dbm=-40.0,
                          max_order=5)
    assert lossless.conversion_loss_db == pytest.approx(IDEAL_CL_DB, abs=0.03)


# ---------------------------------------------------------------- dead zone
def three_level_dbc(n: int, dead_rad: float) -> float:
    """(1,n) of a three-level switching wave with a dead zone of +/-dead_rad round each LO zero crossing, dBc.

    Derived by hand: s = +1 for |theta| < pi/2 - d, -1 for |theta - pi| < pi/2 - d, 0 between.  Its cosine
    coefficients are a_n = (2/pi)·[int_0^(pi/2-d) cos(n·t) dt - int_(pi/2+d)^pi cos(n·t) dt]
    = (4/(n·pi))·sin(n·pi/2)·cos(n·d), so relative to n = 1: |cos(n·d)| / (n·cos(d)) for odd n.
    """
    return 20 * math.log10(max(abs(math.cos(n * dead_rad)), 1e-15) / (n * math.cos(dead_rad)))


def test_a_weak_lo_opens_a_dead_zone_and_the_odd_lo_products_follow_the_three_level_wave():
    # Source: the three-level wave above, with the solved ring's own dead-zone angle: the LO phase round each zero
    # crossing where the ring's small-signal conversion gain is below half its peak (the half-gain rule is this
    # test's choice, no source).  In trend: each (1,n) null falls at the same LO drive in both, and away from the
    # nulls (and with a dead zone under 40 degrees) they agree within 4 dB.
    drives = (-2.0, 0.0, 2.0, 4.0, 7.0, 10.0)
    solved, predicted = {}, {}
    for lo in drives:
        theta, gain = conversion_waveform(Circuit(), lo_drive_dbm=lo, samples=8192)
        below = np.abs(gain) < 0.5 * np.abs(gain).max()
        dead = math.pi / 2 - theta[int(np.argmax(below))]
        assert 0 < dead < math.radians(40)
        table = ring(lo)
        for n in (3, 5, 7):
            solved[lo, n], predicted[lo, n] = float(table.level_dbc[1, n]), three_level_dbc(n, dead)
    for n in (3, 5, 7):
        null_solved = min(drives, key=lambda lo: solved[lo, n])
        null_predicted = min(drives, key=lambda lo: predicted[lo, n])
        assert null_solved == null_predicted, n
        for lo in drives:
            if predicted[lo, n] > -25.0:
                assert abs(solved[lo, n] - predicted[lo, n]) < 4.0, (lo, n, solved[lo, n], predicted[lo, n])
    # the dead zone widens as the drive falls: (1,3) leaves -9.54 dBc far behind at 0 dBm (its null, 30 degrees)
    assert solved[0.0, 3] < -25.0 and solved[10.0, 3] > -11.0


def test_small_signal_odd_lo_products_are_the_conversion_function_harmonics():
    # Derived by hand: to first order in the signal, the output is g(theta_LO)·e_sig, so (1,n) is the n-th
    # Fourier coefficient of the conversion function g over the first.
    _theta, gain = conversion_waveform(Circuit(), lo_drive_dbm=7.0, samples=8192)
    spectrum = np.abs(np.fft.rfft(gain))
    table = ring(7.0, rf_dbm=-60.0)
    for n in (3, 5, 7):
        if table.level_dbc[1, n] > -40:
            assert table.level_dbc[1, n] == pytest.approx(20 * math.log10(spectrum[n] / spectrum[1]), abs=0.05)
    # an ideal matched ring's g is a +/-1/2 square wave (derived by hand: the IF sees half the balun's EMF)
    assert np.abs(gain).max() == pytest.approx(0.5, abs=0.05)


# ---------------------------------------------------------------- balance
def test_perfect_balance_leaves_even_products_at_the_numerical_floor():
    # Derived by hand: an ideal ring is odd in the LO and in the signal (swapping a balun's ends flips the output),
    # so every product with even m or even n cancels.  The numerical floor reached here (float64, Newton to 1e-14
    # of the current): even products at or below -250 dBc, odd ones above -160 dBc, and the result's stated floor
    # (its error bound) above every even product.
    result = ring(7.0, rf_dbm=-20.0, order=5)
    h = np.arange(6)
    even = ((h[:, None] % 2 == 0) | (h[None, :] % 2 == 0)) & ~((h[:, None] == 0) & (h[None, :] == 0))
    odd = ~even & (h[:, None] > 0) & (h[None, :] > 0)
    assert result.raw_dbc[even].max() <= -250.0
    assert result.raw_dbc[odd].min() >= -160.0
    assert result.floor_dbc >= result.raw_dbc[even].max()
    assert result.floor_dbc <= -200.0
    assert result.dynamic_range_db == -result.floor_dbc


def test_mismatch_raises_the_even_products_monotonically_and_linearly():
    # Derived by hand: an Is ratio 1 + x moves one diode's junction by n·Vt·ln(1 + x), first order in x, so the
    # even residuals grow monotonically with x, about 20 dB per decade of x.
    levels = []
    for x in (0.003, 0.01, 0.03, 0.1):
        diodes = (Diode(TYPICAL_DIODE.is_a * (1 + x), TYPICAL_DIODE.ideality, TYPICAL_DIODE.rs_ohm),
                  *(TYPICAL_DIODE,) * 3)
        r = ring(7.0, rf_dbm=-20.0, order=5, diodes=diodes)
        levels.append([r.level_dbc[1, 2], r.level_dbc[2, 1], r.level_dbc[2, 2], r.level_dbc[0, 1]])
    levels = np.array(levels)
    assert (np.diff(levels, axis=0) > 0).all()
    assert levels[3, 0] - levels[1, 0] == pytest.approx(20.0, abs=1.5)
    assert levels[0].max() > -140.0  # far above the floor: resolved, not noise


def test_balun_imbalance_raises_the_lo_leakage_and_the_even_rf_products():
    # Derived by hand: a balun's amplitude or phase error leaves a common-mode LO at the ring, which the centre tap
    # passes to the IF (the LO-IF isolation falls) and which makes the ring's conduction uneven in the signal
    # (even-m products appear); more imbalance, more of both.
    iso, even_m = [], []
    for amp_db, phase in ((0.0, 0.0), (0.2, 1.0), (0.5, 5.0)):
        r = ring(7.0, rf_dbm=-20.0, order=5, lo_balun=Balun(amp_db, phase))
        iso.append(r.lo_if_isolation_db)
        even_m.append(r.level_dbc[2, 1])
    assert iso[0] > 150 and iso[0] > iso[1] > iso[2]
    assert even_m[0] < even_m[1] < even_m[2]


# ---------------------------------------------------------------- drive slope
def test_the_31_product_moves_two_db_per_db_of_small_signal_drive():
    # Source: the power-series (m - 1) rule: relative to the wanted output, an m-th order product moves (m - 1)
    # dB per dB of drive (standard intermodulation result); over a 20 dB span of small-signal drive.
    drives = (-70.0, -60.0, -50.0)
    level = [ring(7.0, rf_dbm=rf, order=5).level_dbc[3, 1] for rf in drives]
    slope = np.polyfit(drives, level, 1)[0]
    assert slope == pytest.approx(2.0, abs=0.05)
    assert (3 - 1) * (drives[-1] - drives[0]) == pytest.approx(level[-1] - level[0], abs=1.0)


# ---------------------------------------------------------------- the variants, one footing
def test_the_three_topologies_from_one_solver():
    # Sources: the ideal switching waves (derived by hand): the ring's +/-1 wave cancels even n and even m; the
    # diode pair's 0/1 wave keeps even n, cancels even m (its balun), ideal loss 20·log10(pi) = 9.94 dB plus the
    # same Rs/2 diode loss; one diode in a 3-resistor loop: 20·log10(pi·R_t/(2·sqrt(R_rf·R_if))) with
    # R_t = R_lo + R_rf + R_if + Rs = 156 ohm (derived by hand: the loop current, switched 0/1, into R_if).
    dbm = solve_ring(Circuit(), lo_drive_dbm=25.0, rf_drive_dbm=-40.0, max_order=3)
    sbm = solve_ring(Circuit(topology="single_balanced", diodes=(TYPICAL_DIODE,) * 2), lo_drive_dbm=25.0,
                     rf_drive_dbm=-40.0, max_order=3)
    se = solve_ring(Circuit(topology="single_ended", diodes=(TYPICAL_DIODE,)), lo_drive_dbm=25.0,
                    rf_drive_dbm=-40.0, max_order=3)
    diode_loss = 20 * math.log10(1 + TYPICAL_DIODE.rs_ohm / 200.0)
    assert sbm.conversion_loss_db == pytest.approx(20 * math.log10(math.pi) + diode_loss, abs=0.1)
    assert se.conversion_loss_db == pytest.approx(20 * math.log10(math.pi * 156.0 / (2 * 50.0)), abs=0.1)
    assert dbm.conversion_loss_db < sbm.conversion_loss_db < se.conversion_loss_db
    assert dbm.level_dbc[1, 2] == dbm.floor_dbc and sbm.level_dbc[1, 2] > -40.0  # even n: cancelled / kept
    assert sbm.level_dbc[2, 1] == sbm.floor_dbc and se.level_dbc[2, 1] > -120.0  # even m: cancelled / kept
    assert se.level_dbc[0, 1] > 0.0  # a single diode passes its LO straight to the IF
