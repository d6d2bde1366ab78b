"""Tests of mixchart.filters against published formulas, scipy.signal and scikit-rf.

Every expected value names its source beside the check.  scipy.signal's analog
prototypes (buttap, cheb1ap, ellipap), its frequency transforms (lp2hp_zpk,
lp2bp_zpk, lp2bs_zpk) and freqs_zpk are an outside reference implementation;
scikit-rf is the outside reference for Touchstone files and circuit networks.
"""

from __future__ import annotations

import functools
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import skrf
from hypothesis import given, settings
from hypothesis import strategies as st
from pydantic import ValidationError
from scipy import signal

from mixchart.errors import FilterError
from mixchart.filters import (
    BrickWall,
    Cascade,
    MeasuredFilter,
    PrototypeFilter,
    TunedCircuit,
    parse_filter_spec,
)
from mixchart.filters import build_filter as build_floored


def build_filter(spec, **kw):
    """A built filter whose ``atten_db`` gives the ideal response (``floored=False``).

    The shape checks against scipy.signal below compare the prototypes themselves, whose loss
    grows without bound; the ultimate rejection that limits it (``max_atten_db``) is tested
    separately with :func:`build_floored`.
    """
    filt = build_floored(spec, **kw)
    filt.atten_db = functools.partial(filt.atten_db, floored=False)
    return filt

REPO = Path(__file__).resolve().parents[1]
HALF_POWER_DB = 10 * math.log10(2)  # definition of the -3 dB (half-power) point


def scipy_atten_db(zpk, f_hz):
    """Attenuation in dB of an analog zpk (scipy.signal.freqs_zpk), frequency axis in Hz.

    Analog responses are scale-free, so a zpk designed with edges in Hz is
    evaluated directly at frequencies in Hz.
    """
    _, h = signal.freqs_zpk(*zpk, worN=np.asarray(f_hz, dtype=float))
    return -20 * np.log10(np.abs(h))


def lowpass(kind, order, f_edge_hz=1e6, **extra):
    return build_filter({"kind": kind, "response": "lowpass", "order": order, "f_edge_hz": f_edge_hz, **extra})


# ----------------------------------------------------------------------------- Butterworth


def test_butterworth_order5_at_twice_cutoff():
    filt = lowpass("butterworth", 5, f_edge_hz="10 MHz")
    got = float(filt.atten_db(20e6))
    # Published Butterworth magnitude formula |H|^2 = 1/(1+Omega^(2N)):
    # 10*log10(1 + 2**10) = 10*log10(1025) = 30.107 dB (derived by hand).
    assert got == pytest.approx(10 * math.log10(1 + 2**10), abs=1e-9)
    assert got == pytest.approx(30.10, abs=0.01)


@pytest.mark.parametrize("order", [1, 2, 3, 5, 8, 13, 20])
def test_butterworth_matches_scipy_buttap(order):
    f_hz = np.concatenate([np.linspace(0, 3e6, 301), np.geomspace(3e6, 1e9, 50)])
    filt = lowpass("butterworth", order)
    # scipy.signal.buttap: normalised prototype, -3 dB at Omega = 1.
    z, p, k = signal.buttap(order)
    want = scipy_atten_db((z, p * 1e6, k * 1e6**order), f_hz)
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-9, atol=1e-9)


def test_butterworth_edge_is_half_power():
    # Butterworth definition: -3.0103 dB (half power) at the cut-off for every order.
    for order in (1, 4, 9):
        assert float(lowpass("butterworth", order).atten_db(1e6)) == pytest.approx(HALF_POWER_DB, abs=1e-12)


# ----------------------------------------------------------------------------- Chebyshev I


def test_chebyshev_order5_ripple05_at_twice_edge():
    filt = lowpass("chebyshev1", 5, ripple_db=0.5)
    # Chebyshev I formula 10*log10(1 + eps^2 T_N(Omega)^2), eps^2 = 10^(ripple/10) - 1,
    # with the textbook polynomial T_5(x) = 16x^5 - 20x^3 + 5x (recurrence T_{n+1} = 2x T_n - T_{n-1}).
    t5 = 16 * 2**5 - 20 * 2**3 + 5 * 2  # = 362, derived by hand
    eps_sq = 10 ** (0.5 / 10) - 1
    assert float(filt.atten_db(2e6)) == pytest.approx(10 * math.log10(1 + eps_sq * t5**2), abs=1e-9)
    # by hand: 10 log10(1 + 0.12202 * 362^2) = 42.04 dB
    assert float(filt.atten_db(2e6)) == pytest.approx(42.0, abs=0.05)


@pytest.mark.parametrize("order", [1, 2, 3, 4, 5, 8, 12])
@pytest.mark.parametrize("ripple_db", [0.01, 0.5, 3.0])
def test_chebyshev_matches_scipy_cheb1ap(order, ripple_db):
    f_hz = np.concatenate([np.linspace(0, 3e6, 601), np.geomspace(3e6, 1e8, 40)])
    filt = lowpass("chebyshev1", order, ripple_db=ripple_db)
    # scipy.signal.cheb1ap: ripple-band edge at Omega = 1, passband maximum 0 dB.
    z, p, k = signal.cheb1ap(order, ripple_db)
    want = scipy_atten_db((z, p * 1e6, k * 1e6**order), f_hz)
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-8, atol=1e-8)


def test_chebyshev_far_stopband_is_finite_and_warning_free():
    filt = lowpass("chebyshev1", 20, ripple_db=1.0)
    got = filt.atten_db([1e6 * 1e100, 1e300, np.inf, 0.0])
    # Asymptote of the Chebyshev formula, derived by hand: T_N(x) ~ 2^(N-1) x^N, so
    # atten ~ 10log10(eps^2) + 20(N-1)log10(2) + 20 N log10(Omega) for large Omega.
    eps_sq = 10 ** (1.0 / 10) - 1
    asym = 10 * math.log10(eps_sq) + 20 * 19 * math.log10(2) + 20 * 20 * 100
    assert got[0] == pytest.approx(asym, rel=1e-12)
    assert np.isfinite(got[1]) and got[2] == np.inf
    # Even order: T_N(0) = +-1, so the loss at DC equals the ripple (Chebyshev polynomial property).
    assert got[3] == pytest.approx(1.0, abs=1e-12)


# ----------------------------------------------------------------------------- elliptic


@pytest.mark.parametrize(("order", "ripple_db", "stop_db"), [(1, 1.0, 40.0), (2, 0.5, 30.0), (3, 0.1, 50.0),
                                                             (5, 0.5, 60.0), (6, 1.0, 80.0), (9, 0.2, 90.0)])
def test_elliptic_matches_scipy_ellip(order, ripple_db, stop_db):
    f_hz = np.concatenate([np.linspace(0, 5e6, 1001), np.geomspace(5e6, 1e9, 60)])
    filt = lowpass("elliptic", order, f_edge_hz="1 MHz", ripple_db=ripple_db, stop_atten_db=stop_db)
    got = filt.atten_db(f_hz)
    # scipy.signal.ellip(analog=True), edge given in Hz (analog responses are scale-free).
    want = scipy_atten_db(signal.ellip(order, ripple_db, stop_db, 1e6, analog=True, output="zpk"), f_hz)
    finite = np.isfinite(want) & (want < 250)  # at the exact transmission zeros both are huge
    np.testing.assert_allclose(got[finite], want[finite], rtol=1e-7, atol=1e-7)

    # Passband maximum 0 dB and ripple <= ripple_db (elliptic definition; scipy.signal.ellipap docs).
    passband = filt.atten_db(np.linspace(0, 1e6, 20001))
    assert passband.min() == pytest.approx(0.0, abs=1e-5) and passband.min() >= -1e-9
    assert passband.max() <= ripple_db + 1e-9
    # Stopband: scipy.signal.ellipord says which stopband edge Omega_s an order-N filter
    # meets with stop_db; beyond it the loss must stay >= stop_db.
    omegas = np.geomspace(1.0001, 1e4, 1500)
    omega_s = next(w for w in omegas if signal.ellipord(1, w, ripple_db, stop_db, analog=True)[0] <= order)
    beyond = got[f_hz >= omega_s * 1e6]
    assert beyond.size and beyond.min() >= stop_db - 1e-6


def test_elliptic_order20_against_ellipap_and_far_out():
    filt = lowpass("elliptic", 20, f_edge_hz=1.0, ripple_db=0.1, stop_atten_db=120.0)
    f_hz = np.linspace(0, 1.5, 3001)
    z, p, k = signal.ellipap(20, 0.1, 120.0)  # scipy.signal.ellipap, normalised edge at 1
    want = scipy_atten_db((z, p, k), f_hz)
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-6, atol=1e-6)
    # Even order: equiripple stopband down to Omega -> inf, so the loss there is still >= stop_atten_db
    # (elliptic definition; the even-order response tends to a constant, not to zero).
    assert filt.atten_db(np.inf) >= 120.0 - 1e-6
    assert np.isfinite(filt.atten_db(1e300))


# ----------------------------------------------------------------------------- band transforms


def band(kind="butterworth", response="bandpass", order=5, f_center_hz=10e6, bandwidth_hz=1e6, **extra):
    return build_filter({"kind": kind, "response": response, "order": order, "f_center_hz": f_center_hz,
                         "bandwidth_hz": bandwidth_hz, **extra})


def geometric_edges(f0_hz, bw_hz):
    """Edges with f_lo * f_hi = f0^2 and f_hi - f_lo = BW, solved by hand (quadratic)."""
    lo = math.sqrt(f0_hz**2 + (bw_hz / 2) ** 2) - bw_hz / 2
    return lo, lo + bw_hz


def test_narrow_bandpass_geometric_and_arithmetic_agree_near_centre():
    f0, bw = 10e6, 0.1e6  # BW/f0 = 1 %
    f_hz = np.linspace(f0 - bw / 2, f0 + bw / 2, 201)
    geo = band(bandwidth_hz=bw).atten_db(f_hz)
    ari = band(bandwidth_hz=bw, transform="arithmetic").atten_db(f_hz)
    # Narrow-band approximation (f/f0 - f0/f ~ 2(f-f0)/f0): 0.1 dB is the brief's bound.
    assert np.max(np.abs(geo - ari)) < 0.1


def test_wide_bandpass_geometric_is_log_symmetric_arithmetic_is_linear_symmetric():
    f0, bw = 10e6, 5e6  # BW/f0 = 50 %
    geo, ari = band(bandwidth_hz=bw), band(bandwidth_hz=bw, transform="arithmetic")
    k = np.linspace(1.01, 3, 50)
    # Geometric transform is invariant under f -> f0^2/f (derived by hand from f/f0 - f0/f).
    np.testing.assert_allclose(geo.atten_db(f0 * k), geo.atten_db(f0 / k), rtol=1e-12)
    # Arithmetic transform is invariant under f0 + d -> f0 - d (derived by hand).
    d = np.linspace(0, 4.9e6, 50)
    np.testing.assert_allclose(ari.atten_db(f0 + d), ari.atten_db(f0 - d), rtol=1e-12)
    # ...and so they differ clearly for a wide filter.
    assert np.max(np.abs(geo.atten_db(f0 * k) - ari.atten_db(f0 * k))) > 3.0


@pytest.mark.parametrize("order", [1, 3, 5])
@pytest.mark.parametrize("rel_bw", [0.01, 0.5, 1.5])
def test_bandpass_matches_scipy_butter_bandpass(order, rel_bw):
    f0, bw = 10e6, 10e6 * rel_bw
    lo, hi = geometric_edges(f0, bw)
    f_hz = np.geomspace(f0 / 50, f0 * 50, 801)
    filt = band(order=order, bandwidth_hz=bw)
    # scipy.signal.butter(btype="bandpass", analog=True) with the -3 dB edges (lp2bp).
    want = scipy_atten_db(signal.butter(order, [lo, hi], btype="bandpass", analog=True, output="zpk"), f_hz)
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-7, atol=1e-7)
    assert filt.passband_hz() == pytest.approx((lo, hi), rel=1e-12)
    np.testing.assert_allclose(filt.atten_db([lo, hi]), HALF_POWER_DB, atol=1e-9)


def test_chebyshev_bandpass_matches_scipy_lp2bp():
    f0, bw = 70e6, 20e6
    f_hz = np.geomspace(1e6, 1e9, 900)
    filt = band("chebyshev1", order=4, f_center_hz=f0, bandwidth_hz=bw, ripple_db=0.25)
    # scipy.signal.lp2bp_zpk(cheb1ap): s -> (s^2 + w0^2)/(s BW), w0 the geometric centre.
    want = scipy_atten_db(signal.lp2bp_zpk(*signal.cheb1ap(4, 0.25), wo=f0, bw=bw), f_hz)
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-7, atol=1e-7)


@pytest.mark.parametrize(("kind", "extra"), [("butterworth", {}), ("chebyshev1", {"ripple_db": 1.0}),
                                             ("elliptic", {"ripple_db": 0.5, "stop_atten_db": 50.0})])
def test_highpass_matches_scipy_lp2hp(kind, extra):
    f_hz = np.concatenate([[0.0], np.geomspace(1e3, 1e9, 700), [np.inf]])
    filt = build_filter({"kind": kind, "response": "highpass", "order": 5, "f_edge_hz": 1e6, **extra})
    proto = {"butterworth": lambda: signal.buttap(5), "chebyshev1": lambda: signal.cheb1ap(5, 1.0),
             "elliptic": lambda: signal.ellipap(5, 0.5, 50.0)}[kind]()
    with np.errstate(divide="ignore"):  # scipy's own response is exactly 0 at f = 0
        want = scipy_atten_db(signal.lp2hp_zpk(*proto, wo=1e6), f_hz[1:-1])  # scipy.signal.lp2hp_zpk
    got = filt.atten_db(f_hz)
    finite = want < 250
    np.testing.assert_allclose(got[1:-1][finite], want[finite], rtol=1e-7, atol=1e-7)
    assert got[0] == np.inf  # a high-pass passes nothing at 0 Hz (transmission zero at DC)
    assert got[-1] == pytest.approx(0.0, abs=1e-9)  # passband maximum at infinite frequency (odd order)
    assert filt.passband_hz() == (1e6, math.inf)


@pytest.mark.parametrize("transform", ["geometric", "arithmetic"])
def test_bandstop_matches_scipy_lp2bs_and_butter_bandstop(transform):
    f0, bw = 10e6, 2e6
    f_hz = np.concatenate([[0.0], np.geomspace(1e5, 1e9, 1200), [f0, np.inf]])
    filt = band("chebyshev1", "bandstop", order=3, f_center_hz=f0, bandwidth_hz=bw, ripple_db=0.5, transform=transform)
    got = filt.atten_db(f_hz)
    assert got[-2] == np.inf and got[-1] == pytest.approx(0.0, abs=1e-12)  # notch at f0, passes at infinity
    if transform == "geometric":
        assert got[0] == pytest.approx(0.0, abs=1e-12)  # Omega = 0 at DC (exact transform only)
        # scipy.signal.lp2bs_zpk: s -> s BW/(s^2 + w0^2), the reciprocal of the band-pass transform.
        want = scipy_atten_db(signal.lp2bs_zpk(*signal.cheb1ap(3, 0.5), wo=f0, bw=bw), f_hz[1:-2])
        np.testing.assert_allclose(got[1:-2], want, rtol=1e-7, atol=1e-7)
        lo, hi = geometric_edges(f0, bw)
        # scipy.signal.butter(btype="bandstop", analog=True) with the same edges.
        bs = band("butterworth", "bandstop", order=4, f_center_hz=f0, bandwidth_hz=bw)
        want = scipy_atten_db(signal.butter(4, [lo, hi], btype="bandstop", analog=True, output="zpk"), f_hz[1:-2])
        np.testing.assert_allclose(bs.atten_db(f_hz[1:-2]), want, rtol=1e-7, atol=1e-7)
    else:
        lo, hi = f0 - bw / 2, f0 + bw / 2  # arithmetic edges, by definition
    # Element by element: pytest >= 9.2's approx refuses nested sequences such as a list of tuples.
    bands = filt.passbands_hz()
    assert len(bands) == 2 and all(len(b) == 2 for b in bands)
    np.testing.assert_allclose(np.array(bands, dtype=float), [[0.0, lo], [hi, math.inf]], rtol=1e-6, atol=1e-12)
    assert filt.passband_hz() == (0.0, math.inf)
    # Chebyshev definition: loss equals the ripple at the ripple-band edges.
    np.testing.assert_allclose(filt.atten_db([lo, hi]), 0.5, atol=1e-9)


def test_lowpass_matches_scipy_butter_lowpass():
    f_hz = np.geomspace(1e3, 1e10, 500)
    filt = lowpass("butterworth", 7, f_edge_hz="455 kHz")
    # scipy.signal.butter(btype="lowpass", analog=True).
    want = scipy_atten_db(signal.butter(7, 455e3, analog=True, output="zpk"), f_hz)
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-8, atol=1e-8)
    assert filt.passband_hz() == (0.0, 455e3)


# ----------------------------------------------------------------------------- tuned circuits


def test_tuned_circuit_image_rejection_worked_example():
    # Standard communications-textbook worked example of image rejection (from memory:
    # Kennedy, "Electronic Communication Systems", superheterodyne receiver chapter; page not checked):
    # Q = 100 RF stage, 455 kHz IF, signal 1000 kHz -> image 1000 + 2*455 = 1910 kHz,
    # rho = 1910/1000 - 1000/1910 = 1.386, alpha = sqrt(1 + Q^2 rho^2) = 138.6 (book figure, from memory).
    filt = build_filter({"kind": "tuned", "f_center_hz": "1000 kHz", "q_loaded": 100})
    f_image_hz = 1000e3 + 2 * 455e3
    rho = f_image_hz / 1000e3 - 1000e3 / f_image_hz
    assert rho == pytest.approx(1.386, abs=5e-4)
    alpha = math.sqrt(1 + (100 * rho) ** 2)
    assert alpha == pytest.approx(138.6, abs=0.05)
    assert float(filt.atten_db(f_image_hz)) == pytest.approx(20 * math.log10(alpha), abs=1e-9)
    assert float(filt.atten_db(f_image_hz)) == pytest.approx(42.8, abs=0.05)
    # Cascaded identical stages: rejections multiply, so the dB add (same textbook, from memory).
    two = build_filter({"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 100, "stages": 2})
    assert float(two.atten_db(f_image_hz)) == pytest.approx(2 * 20 * math.log10(alpha), abs=1e-9)


def test_tuned_circuit_matches_scikit_rf_series_lc():
    # A series L-C between two 50-ohm ports (scikit-rf media.DefinedGammaZ0) is a single tuned
    # circuit with loaded Q = w0 L / (2 Z0); |S21|^2 = 1/(1 + Q^2 rho^2) (derived by hand:
    # S21 = 2 Z0 / (2 Z0 + j w0 L rho)).
    f0, q, z0 = 10.7e6, 25.0, 50.0
    ind = q * 2 * z0 / (2 * np.pi * f0)
    cap = 1 / ((2 * np.pi * f0) ** 2 * ind)
    f_hz = np.geomspace(1e6, 100e6, 400)
    media = skrf.media.DefinedGammaZ0(frequency=skrf.Frequency.from_f(f_hz, unit="Hz"), z0_port=z0)
    net = media.inductor(ind) ** media.capacitor(cap)
    want = -20 * np.log10(np.abs(net.s[:, 1, 0]))
    filt = build_filter(TunedCircuit(kind="tuned", f_center_hz=f0, q_loaded=q))
    np.testing.assert_allclose(filt.atten_db(f_hz), want, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("stages", [1, 2, 5])
def test_tuned_passband_edges_are_half_power(stages):
    filt = build_filter({"kind": "tuned", "f_center_hz": 10e6, "q_loaded": 40, "stages": stages})
    lo, hi = filt.passband_hz()
    # Half-power definition of bandwidth; for one stage BW = f0/Q (textbook, from memory).
    np.testing.assert_allclose(filt.atten_db([lo, hi]), HALF_POWER_DB, atol=1e-9)
    if stages == 1:
        assert hi - lo == pytest.approx(10e6 / 40, rel=1e-12)
    assert lo * hi == pytest.approx(10e6**2, rel=1e-12)  # geometric symmetry of f/f0 - f0/f


def test_tracking_filters_follow_the_channel():
    fixed = build_filter({"kind": "tuned", "f_center_hz": 20e6, "q_loaded": 30})
    tracked = build_filter({"kind": "tuned", "q_loaded": 30, "tracks_channel": True})
    f_hz = np.geomspace(1e6, 1e8, 50)
    # Same circuit, centre given at evaluation time: the responses are identical (by definition).
    np.testing.assert_allclose(tracked.atten_db(f_hz, 20e6), fixed.atten_db(f_hz), rtol=1e-14)
    centres = np.array([5e6, 10e6, 40e6])
    np.testing.assert_allclose(tracked.atten_db(centres, centres), 0.0, atol=1e-12)  # 0 dB at the centre
    grid = tracked.atten_db(f_hz[:, None], centres[None, :])  # broadcasting
    assert grid.shape == (50, 3)
    fixed_10mhz = build_filter(TunedCircuit(kind="tuned", f_center_hz=10e6, q_loaded=30))
    np.testing.assert_allclose(grid[:, 1], fixed_10mhz.atten_db(f_hz))
    assert tracked.passband_hz(10e6)[0] < 10e6 < tracked.passband_hz(10e6)[1]
    with pytest.raises(FilterError, match="f_center_hz"):
        tracked.atten_db(f_hz)
    with pytest.raises(FilterError, match="f_center_hz"):
        tracked.passband_hz()
    # A fixed filter ignores a centre; a tracking one with a spec centre falls back to it.
    np.testing.assert_array_equal(fixed.atten_db(f_hz, 3e6), fixed.atten_db(f_hz))
    fallback = build_filter({"kind": "tuned", "f_center_hz": 20e6, "q_loaded": 30, "tracks_channel": True})
    np.testing.assert_array_equal(fallback.atten_db(f_hz), fixed.atten_db(f_hz))


def test_tracking_bandpass_prototype_and_its_lower_edge():
    spec = {"kind": "butterworth", "response": "bandpass", "order": 3, "bandwidth_hz": 2e6, "tracks_channel": True}
    tracked = build_filter(spec)
    f_hz = np.linspace(1e6, 50e6, 99)
    np.testing.assert_allclose(tracked.atten_db(f_hz, 10e6), band(order=3, bandwidth_hz=2e6).atten_db(f_hz))
    # Rule of the brief: a band-pass whose lower edge is at or below 0 Hz is an error.
    with pytest.raises(FilterError, match=r"f_center_hz: 1000000.0 .*lower band edge"):
        tracked.atten_db(f_hz[:2], np.array([10e6, 1e6]))
    with pytest.raises(FilterError, match=r"f_center_hz: .*broadcast"):
        tracked.atten_db(f_hz, np.array([10e6, 11e6]))
    with pytest.raises(FilterError, match="f_center_hz"):
        tracked.atten_db(f_hz, 0.0)


# ----------------------------------------------------------------------------- brick wall, cascade


@pytest.mark.parametrize(
    ("spec", "inside", "outside"),
    [
        ({"response": "lowpass", "f_edge_hz": 10e6}, [0, 5e6, 10e6], [10.001e6, 1e9, np.inf]),
        ({"response": "highpass", "f_edge_hz": 10e6}, [10e6, 1e9, np.inf], [0, 9.999e6]),
        ({"response": "bandpass", "f_center_hz": 10e6, "bandwidth_hz": 2e6}, [9e6, 10e6, 11e6], [0, 8.9e6, 11.1e6]),
        ({"response": "bandstop", "f_center_hz": 10e6, "bandwidth_hz": 2e6}, [0, 8.9e6, 11.1e6], [9.01e6, 10e6]),
    ],
)
def test_brickwall_is_zero_inside_and_stop_outside(spec, inside, outside):
    # Definition of the ideal filter in the brief: 0 dB in the passband (edges included), stop_atten_db outside.
    filt = build_filter(BrickWall(kind="brickwall", stop_atten_db=77.0, **spec))
    np.testing.assert_array_equal(filt.atten_db(inside), 0.0)
    np.testing.assert_array_equal(filt.atten_db(outside), 77.0)
    # Default stop_atten_db = 200 dB, as specified for this module (design choice, no outside source).
    np.testing.assert_array_equal(build_filter({"kind": "brickwall", **spec}).atten_db(outside), 200.0)


def test_cascade_adds_db_and_intersects_passbands():
    a = {"kind": "butterworth", "response": "highpass", "order": 3, "f_edge_hz": 5e6}
    b = {"kind": "tuned", "f_center_hz": 10e6, "q_loaded": 5}
    c = {"kind": "chebyshev1", "response": "lowpass", "order": 4, "f_edge_hz": 30e6, "ripple_db": 0.1}
    casc = build_filter({"kind": "cascade", "stages": [a, {"kind": "cascade", "stages": [b, c]}]})
    f_hz = np.geomspace(1e5, 1e9, 300)
    # Losses of filters in series add in dB (|H| multiply), by definition of the cascade.
    want = build_filter(a).atten_db(f_hz) + build_filter(b).atten_db(f_hz) + build_filter(c).atten_db(f_hz)
    np.testing.assert_allclose(casc.atten_db(f_hz), want, rtol=1e-14)
    lo_b, hi_b = build_filter(b).passband_hz()
    assert casc.passband_hz() == (max(5e6, lo_b), min(30e6, hi_b))
    disjoint = build_filter({"kind": "cascade", "stages": [a | {"f_edge_hz": 40e6}, c]})
    assert disjoint.passbands_hz() == [] and all(math.isnan(x) for x in disjoint.passband_hz())


def test_cascade_with_tracking_stage_needs_a_centre():
    casc = build_filter({"kind": "cascade", "stages": [{"kind": "tuned", "q_loaded": 10, "tracks_channel": True},
                                                       {"kind": "brickwall", "response": "lowpass", "f_edge_hz": 1e9}]})
    assert casc.tracks_channel
    with pytest.raises(FilterError, match=r"stages\.0\.f_center_hz"):
        casc.atten_db(1e6)
    assert float(casc.atten_db(1e6, 1e6)) == 0.0  # at its own centre, inside the brick wall


# ----------------------------------------------------------------------------- Touchstone


def write_s2p(path, f_hz, s21, s11=None, header="# Hz S DB R 50"):
    """Write a 2-port Touchstone v1 file in dB/angle (Touchstone 1.1 format: one line per frequency)."""
    s11 = np.full(len(f_hz), 0.1 + 0j) if s11 is None else s11
    db = lambda x: 20 * np.log10(np.abs(x))  # noqa: E731
    ang = lambda x: np.degrees(np.angle(x))  # noqa: E731
    lines = ["! written by tests/test_filters.py", header]
    for i, f in enumerate(f_hz):
        cols = [f, db(s11[i]), ang(s11[i]), db(s21[i]), ang(s21[i]), db(s21[i]), ang(s21[i]), db(s11[i]), ang(s11[i])]
        lines.append(" ".join(f"{x:.12g}" for x in cols))
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def butter_s2p(tmp_path):
    f_hz = np.linspace(1e6, 100e6, 199)
    _, h = signal.freqs_zpk(*signal.butter(5, 20e6, analog=True, output="zpk"), worN=f_hz)
    return write_s2p(tmp_path / "butter5_20MHz.s2p", f_hz, h), f_hz, h


def test_touchstone_reads_s21_like_scikit_rf_and_the_formula(butter_s2p):
    path, f_hz, h = butter_s2p
    filt = build_filter(MeasuredFilter(kind="touchstone", path=path.name), base_dir=path.parent)  # relative to base_dir
    got = filt.atten_db(f_hz)
    with np.errstate(divide="ignore"):
        ref = skrf.Network(str(path))
    # scikit-rf's own reading of S21 (reference Touchstone reader).
    np.testing.assert_allclose(got, -ref.s_db[:, 1, 0], atol=1e-9)
    # The generating formula (scipy.signal.butter analog response), to the 12 digits written.
    np.testing.assert_allclose(got, -20 * np.log10(np.abs(h)), atol=1e-8)
    # Between samples: linear in dB versus frequency, as specified (midpoint = mean of neighbours).
    mid = (f_hz[:-1] + f_hz[1:]) / 2
    np.testing.assert_allclose(filt.atten_db(mid), (got[:-1] + got[1:]) / 2, atol=1e-9)
    # ...and close to the formula there (Butterworth formula; 0.5 MHz steps).
    want_mid = 10 * np.log10(1 + (mid / 20e6) ** 10)
    np.testing.assert_allclose(filt.atten_db(mid), want_mid, atol=0.05)
    # Other ports: S11 written as 0.1 -> 20 dB loss (|S11| = 0.1, by construction).
    s11 = build_filter({"kind": "touchstone", "path": str(path), "port_out": 1, "port_in": 1})
    np.testing.assert_allclose(s11.atten_db(f_hz), 20.0, atol=1e-9)
    # -3 dB passband around the least-loss point; held below the first point, so it starts at 0 Hz.
    lo, hi = filt.passband_hz()
    assert lo == 0.0 and float(filt.atten_db(hi)) == pytest.approx(got.min() + 3.0, abs=1e-9)


def test_touchstone_outside_hold_and_error(butter_s2p):
    path, f_hz, _ = butter_s2p
    hold = build_filter({"kind": "touchstone", "path": str(path)})
    ends = hold.atten_db([f_hz[0], f_hz[-1]])
    np.testing.assert_array_equal(hold.atten_db([0.0, 0.5e6]), ends[0])  # held, not extrapolated
    np.testing.assert_array_equal(hold.atten_db([200e6, np.inf]), ends[1])
    strict = build_filter({"kind": "touchstone", "path": str(path), "outside": "error"})
    strict.atten_db(f_hz)  # inside: fine
    with pytest.raises(FilterError, match=r"f_hz: 150000000.0 is invalid; outside the range 1 MHz to 100 MHz"):
        strict.atten_db([50e6, 150e6])
    with pytest.raises(FilterError, match=r"f_hz: 0.0"):
        strict.atten_db(0.0)
    assert strict.passband_hz()[0] == f_hz[0]  # no hold: the measured data bound the passband


def test_touchstone_units_ri_and_version2(tmp_path):
    # Touchstone option line "# MHz S RI R 50": frequencies in MHz, real/imaginary pairs (Touchstone 1.1 spec).
    (tmp_path / "ri.s2p").write_text("# MHz S RI R 50\n1 0 0 0.5 0 0.5 0 0 0\n2 0 0 0 0.25 0 0.25 0 0\n")
    filt = build_filter({"kind": "touchstone", "path": str(tmp_path / "ri.s2p")})
    # |S21| = 0.5 -> 6.0206 dB, 0.25 -> 12.041 dB (20*log10, by hand).
    np.testing.assert_allclose(filt.atten_db([1e6, 2e6]), [20 * math.log10(2), 20 * math.log10(4)], atol=1e-12)
    # A version 2.0 file written by scikit-rf itself.
    freq = skrf.Frequency.from_f([1e6, 2e6, 3e6], unit="Hz")
    s = np.full((3, 2, 2), 0.1 + 0j)
    s[:, 1, 0] = [0.9, 0.5, 0.1]
    skrf.Network(frequency=freq, s=s).write_touchstone(str(tmp_path / "v2.s2p"), version="2.0", form="db")
    v2 = build_filter({"kind": "touchstone", "path": "v2.s2p"}, base_dir=tmp_path)
    np.testing.assert_allclose(v2.atten_db([1e6, 2e6, 3e6]), -20 * np.log10([0.9, 0.5, 0.1]), atol=1e-9)


@pytest.mark.parametrize(
    ("name", "text", "match"),
    [
        ("one_port.s1p", "# Hz S DB R 50\n1e6 -1 0\n2e6 -2 0\n", "1 port"),
        ("unsorted.s2p", "# Hz S DB R 50\n1e6 0 0 -1 0 -1 0 0 0\n3e6 0 0 -3 0 -3 0 0 0\n2e6 0 0 -2 0 -2 0 0 0\n",
         "increasing"),
        ("repeated.s2p", "# Hz S DB R 50\n1e6 0 0 -1 0 -1 0 0 0\n1e6 0 0 -3 0 -3 0 0 0\n", "increasing"),
        ("empty.s2p", "! nothing here\n# Hz S DB R 50\n", "no frequency points"),
        ("text.s2p", "# Hz S DB R 50\n1e6 0 0 -1 0 abc 0 0 0\n", "not a readable Touchstone file"),
        ("short.s2p", "# Hz S DB R 50\n1e6 0 0 -1 0 -1 0 0\n2e6 0 0 -1 0 -1 0 0\n", "not a readable Touchstone file"),
        ("nan.s2p", "# Hz S DB R 50\n1e6 0 0 nan 0 -1 0 0 0\n", "not numeric"),
    ],
)
def test_touchstone_bad_files(tmp_path, name, text, match):
    (tmp_path / name).write_text(text)
    with pytest.raises(FilterError, match=rf"^stages\.0\.path: '.*{name}' is invalid; .*({match})"):
        build_filter({"kind": "cascade", "stages": [{"kind": "touchstone", "path": name}]}, base_dir=tmp_path)


def test_touchstone_missing_file_and_noise_data(tmp_path):
    with pytest.raises(FilterError, match=r"path: .*nowhere.s2p' is invalid; cannot be read"):
        build_filter({"kind": "touchstone", "path": str(tmp_path / "nowhere.s2p")})
    # Touchstone 1.1: 2-port noise parameters follow the S data (5 numbers a line); they are ignored.
    text = "# Hz S DB R 50\n1e6 0 0 -1 0 -1 0 0 0\n2e6 0 0 -2 0 -2 0 0 0\n1e6 1 0.5 0 0.2\n2e6 1 0.5 0 0.2\n"
    (tmp_path / "noise.s2p").write_text(text)
    filt = build_filter({"kind": "touchstone", "path": "noise.s2p"}, base_dir=tmp_path)
    np.testing.assert_allclose(filt.atten_db([1e6, 2e6]), [1.0, 2.0], atol=1e-12)


BP = {"kind": "butterworth", "response": "bandpass", "order": 4, "f_center_hz": 1e6, "bandwidth_hz": 1e5}
EVERY_KIND = [
    BP,
    BP | {"kind": "chebyshev1", "response": "bandstop", "ripple_db": 1.0, "transform": "arithmetic"},
    BP | {"kind": "elliptic", "ripple_db": 1.0, "stop_atten_db": 60.0},
    {"kind": "elliptic", "response": "highpass", "order": 3, "f_edge_hz": 1e6, "ripple_db": 1.0,
     "stop_atten_db": 60.0},
    {"kind": "chebyshev1", "response": "lowpass", "order": 20, "f_edge_hz": 1e6, "ripple_db": 1.0},
    {"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 50, "stages": 3},
    {"kind": "brickwall", "response": "bandstop", "f_center_hz": 1e6, "bandwidth_hz": 1e5},
    {"kind": "cascade", "stages": [BP, {"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 5}]},
]


@pytest.mark.parametrize("spec", EVERY_KIND, ids=lambda spec: f"{spec['kind']}-{spec.get('response', '')}")
def test_zero_centre_and_infinite_frequency_give_no_warning_and_no_nan(spec):
    # The brief: f = 0 and f = inf must not warn (warnings are errors here) and must not give NaN.
    got = build_filter(spec).atten_db([0.0, 1e-300, 1e6, 1e300, np.inf])
    assert not np.any(np.isnan(got)) and np.all(got >= -1e-9)


# ----------------------------------------------------------------------------- bad input


KINDS = {"butterworth", "chebyshev1", "elliptic", "tuned", "brickwall", "touchstone", "cascade"}
GOOD_LP = {"kind": "butterworth", "response": "lowpass", "order": 3, "f_edge_hz": "10 MHz"}
GOOD_BP = {"kind": "chebyshev1", "response": "bandpass", "order": 3, "f_center_hz": 10e6, "bandwidth_hz": 1e6,
           "ripple_db": 0.5}


@pytest.mark.parametrize(
    ("spec", "field"),
    [
        (GOOD_LP | {"order": 0}, "order"),
        (GOOD_LP | {"order": 21}, "order"),
        (GOOD_LP | {"order": 2.5}, "order"),
        (GOOD_BP | {"ripple_db": -0.5}, "ripple_db"),
        (GOOD_BP | {"ripple_db": 0}, "ripple_db"),
        (GOOD_BP | {"ripple_db": float("nan")}, "ripple_db"),
        ({k: v for k, v in GOOD_BP.items() if k != "ripple_db"}, "ripple_db"),
        (GOOD_LP | {"ripple_db": 1.0}, "ripple_db"),
        (GOOD_BP | {"kind": "elliptic"}, "stop_atten_db"),
        (GOOD_BP | {"kind": "elliptic", "stop_atten_db": 0.4}, "stop_atten_db"),
        (GOOD_BP | {"stop_atten_db": 40}, "stop_atten_db"),
        (GOOD_BP | {"f_center_hz": 0.5e6}, "f_center_hz"),
        (GOOD_BP | {"f_center_hz": 0.4e6, "transform": "arithmetic"}, "f_center_hz"),
        (GOOD_BP | {"response": "bandstop", "bandwidth_hz": 30e6}, "f_center_hz"),
        ({k: v for k, v in GOOD_BP.items() if k != "bandwidth_hz"}, "bandwidth_hz"),
        ({k: v for k, v in GOOD_BP.items() if k != "f_center_hz"}, "f_center_hz"),
        ({k: v for k, v in GOOD_LP.items() if k != "f_edge_hz"}, "f_edge_hz"),
        (GOOD_LP | {"bandwidth_hz": 1e6}, "bandwidth_hz"),
        (GOOD_BP | {"f_edge_hz": 1e6}, "f_edge_hz"),
        (GOOD_LP | {"tracks_channel": True}, "tracks_channel"),
        (GOOD_LP | {"f_edge_hz": "10 Mz"}, "f_edge_hz"),
        (GOOD_LP | {"f_edge_hz": -1e6}, "f_edge_hz"),
        (GOOD_LP | {"transform": "log"}, "transform"),
        (GOOD_LP | {"cutoff": 1e6}, "cutoff"),
        (GOOD_LP | {"kind": "bessel"}, "kind"),
        ({k: v for k, v in GOOD_LP.items() if k != "kind"}, "kind"),
        ({"kind": "tuned", "q_loaded": 50}, "f_center_hz"),
        ({"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 0}, "q_loaded"),
        ({"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 10, "stages": 0}, "stages"),
        ({"kind": "brickwall", "response": "highpass", "f_edge_hz": 1e6, "stop_atten_db": -3}, "stop_atten_db"),
        ({"kind": "touchstone", "path": "a.s2p", "port_in": 0}, "port_in"),
        ({"kind": "touchstone", "path": "a.s2p", "tracks_channel": True}, "tracks_channel"),
        ({"kind": "touchstone", "path": ""}, "path"),
        ({"kind": "cascade", "stages": []}, "stages"),
        ({"kind": "cascade", "stages": [GOOD_LP | {"order": 0}]}, "stages.0.order"),
    ],
)
def test_bad_specs_are_rejected_naming_the_field(spec, field):
    # Rule: project brief (one error family; one line naming the field and repeating the value).
    with pytest.raises(FilterError) as info:
        parse_filter_spec(spec)
    message = str(info.value)
    assert message.startswith(f"{field}: "), message
    assert len(message.splitlines()) == 1
    with pytest.raises(FilterError) as info:
        build_filter(spec, field_prefix="filters.rf.")
    assert str(info.value).startswith(f"filters.rf.{field}: ")


def test_models_are_frozen_and_constructible_directly():
    spec = PrototypeFilter(kind="elliptic", response="lowpass", order=4, f_edge_hz="1 MHz", ripple_db=0.1,
                           stop_atten_db=60)
    assert spec.f_edge_hz == 1e6  # "1 MHz" parsed by mixchart.units
    with pytest.raises(ValidationError):
        spec.order = 5  # type: ignore[misc]
    casc = Cascade(kind="cascade", stages=[spec, TunedCircuit(kind="tuned", f_center_hz=1e6, q_loaded=3)])
    assert parse_filter_spec(casc.model_dump(mode="json")) == casc  # JSON round trip
    assert parse_filter_spec(casc.model_dump(mode="json", exclude_defaults=True)) == casc  # kind is never dropped
    assert hash(casc) == hash(parse_filter_spec(casc.model_dump(mode="json")))


@pytest.mark.parametrize("f_hz", [-1.0, float("nan"), [1e6, -5.0]])
def test_negative_or_nan_frequency_is_an_error(f_hz):
    with pytest.raises(FilterError, match=r"^f_hz: .* must be >= 0 Hz"):
        build_filter(GOOD_LP).atten_db(f_hz)


# ----------------------------------------------------------------------------- properties

PROTOTYPES = st.one_of(
    st.builds(lambda n: {"kind": "butterworth", "order": n}, st.integers(1, 12)),
    st.builds(lambda n, r: {"kind": "chebyshev1", "order": n, "ripple_db": r},
              st.integers(1, 12), st.floats(0.01, 3.0)),
    st.builds(lambda n, r, s: {"kind": "elliptic", "order": n, "ripple_db": r, "stop_atten_db": r + s},
              st.integers(1, 10), st.floats(0.01, 3.0), st.floats(10.0, 100.0)),
)


@settings(max_examples=60, deadline=None)
@given(PROTOTYPES, st.lists(st.floats(0, 1e12), min_size=1, max_size=50))
def test_property_loss_nonnegative_and_passband_reference_zero(proto, f_hz):
    # Passive prototype: |H| <= 1 everywhere, max 1 in the passband (definition of the prototypes).
    filt = lowpass(proto["kind"], proto["order"], f_edge_hz=1e6, **{k: v for k, v in proto.items()
                                                                     if k not in ("kind", "order")})
    assert np.all(filt.atten_db(f_hz) >= -1e-9)
    passband = filt.atten_db(np.linspace(0, 1e6, 4001))
    assert passband.min() == pytest.approx(0.0, abs=1e-3)
    # 1e-6 dB: an order-10 elliptic design is accurate to ~1e-9 dB, not to the last bit
    assert passband.max() <= proto.get("ripple_db", HALF_POWER_DB) + 1e-6


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 20), st.lists(st.floats(1.0, 1e9), min_size=2, max_size=60),
       st.sampled_from(["lowpass", "highpass"]))
def test_property_butterworth_skirts_are_monotone(order, f_hz, response):
    # Butterworth: 10log10(1 + Omega^2N) increases with Omega (maximally flat, no ripple).
    f_sorted = np.sort(np.asarray(f_hz))
    filt = build_filter({"kind": "butterworth", "response": response, "order": order, "f_edge_hz": 1e6})
    step = np.diff(filt.atten_db(f_sorted))
    assert np.all(step >= -1e-9) if response == "lowpass" else np.all(step <= 1e-9)


@settings(max_examples=40, deadline=None)
@given(PROTOTYPES, st.floats(1.0, 1e3), st.floats(0.001, 1.99))
def test_property_geometric_bandpass_is_log_symmetric(proto, k, rel_bw):
    # Geometric band-pass: Omega(f0 k) == Omega(f0 / k) (derived by hand from f/f0 - f0/f).
    extra = {key: v for key, v in proto.items() if key not in ("kind", "order")}
    filt = band(proto["kind"], order=proto["order"], f_center_hz=10e6, bandwidth_hz=10e6 * rel_bw, **extra)
    up, down = filt.atten_db([10e6 * k, 10e6 / k])
    assert up == pytest.approx(down, rel=1e-9, abs=1e-9)


# ----------------------------------------------------------------------------- hygiene


def test_engine_module_never_imports_bokeh_or_ipywidgets():
    code = "import sys, mixchart.filters; print(sorted(m for m in ('bokeh', 'ipywidgets') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_large_array_in_one_call_matches_point_by_point():
    # Functional part only: one call over 2e6 points returns one value per point, the same as
    # evaluating each point alone (no timing here; speed lives in benchmarks/bench_engine.py).
    filt = band("chebyshev1", order=7, ripple_db=0.5)
    f_hz = np.linspace(0, 100e6, 2_000_000)
    out = filt.atten_db(f_hz)
    assert out.shape == f_hz.shape and out.dtype == np.float64
    assert not np.isnan(out).any()
    picks = np.linspace(0, f_hz.size - 1, 25).astype(int)
    one_by_one = np.array([float(filt.atten_db(np.array([f]))[0]) for f in f_hz[picks]])
    np.testing.assert_allclose(out[picks], one_by_one, rtol=1e-12, atol=1e-12)
