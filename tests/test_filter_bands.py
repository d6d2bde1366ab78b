"""A band's least loss (Filter.least_atten_db) and every filter's ultimate rejection (max_atten_db).

The least loss over a band is checked against the band densely sampled with scipy.signal's own
analog responses (freqs_zpk of ellipap/cheb1ap/buttap through lp2bp_zpk) or, for measured
data, against the Touchstone file read by scikit-rf: never against mixchart's own point
evaluation alone.  The floors are common practice (no source) and are checked as stated.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import skrf
from scipy import signal
from test_filters import write_s2p

from mixchart.errors import FilterError
from mixchart.filters import DEFAULT_MAX_ATTEN_DB, build_filter, parse_filter_spec

F0, BW = 100e6, 10e6


def scipy_band_least_db(zpk, low, high, points=40001):
    """Least loss over [low, high] of an analog zpk (scipy.signal.freqs_zpk), by dense sampling."""
    f = np.linspace(low, high, points)
    _, h = signal.freqs_zpk(*zpk, worN=f)
    with np.errstate(divide="ignore"):  # a sample exactly on a transmission zero
        return float(np.min(-20 * np.log10(np.abs(h))))


def random_bands(seed, n=300, lo=40e6, hi=200e6, width=30e6):
    rng = np.random.default_rng(seed)
    low = rng.uniform(lo, hi, n)
    return low, low + rng.uniform(0, width, n)


@pytest.mark.parametrize("order", [3, 4, 5, 6, 7, 8])
def test_elliptic_band_least_loss_is_exact(order):
    spec = {"kind": "elliptic", "response": "bandpass", "order": order, "f_center_hz": F0, "bandwidth_hz": BW,
            "ripple_db": 0.5, "stop_atten_db": 60.0, "max_atten_db": 400}
    filt = build_filter(spec)
    # scipy.signal.ellipap through lp2bp_zpk (geometric centre sqrt(f_lo f_hi) = F0): the reference response.
    z, p, k = signal.ellipap(order, 0.5, 60.0)
    f_lo, f_hi = math.hypot(F0, BW / 2) - BW / 2, math.hypot(F0, BW / 2) + BW / 2
    zpk = signal.lp2bp_zpk(z, p, k, wo=math.sqrt(f_lo * f_hi), bw=f_hi - f_lo)
    low, high = random_bands(order)
    got = filt.least_atten_db(low, high)
    want = np.array([scipy_band_least_db(zpk, a, b) for a, b in zip(low, high, strict=True)])
    # never more loss than the band really has (sampling can only overstate the least loss)
    assert np.all(got <= want + 1e-6)
    # and exact everywhere, to the sampling step: passband, skirts and equiripple stopband alike
    np.testing.assert_allclose(got, want, atol=2e-3)
    reaches_passband = (high >= f_lo) & (low <= f_hi)
    assert reaches_passband.sum() > 20 and (~reaches_passband).sum() > 20


def test_an_elliptic_zero_inside_a_band_does_not_hide_the_band():
    # A band straddling a transmission zero: the loss read at one point (the zero) is the 400 dB cap,
    # but the band passes through its edges.  scipy.signal.ellipap + lp2bp_zpk as the reference.
    spec = parse_filter_spec({"kind": "elliptic", "response": "bandpass", "order": 4, "f_center_hz": F0,
                              "bandwidth_hz": BW, "ripple_db": 0.5, "stop_atten_db": 40.0, "max_atten_db": 400})
    filt = build_filter(spec)
    z, p, k = signal.ellipap(4, 0.5, 40.0)
    f_lo, f_hi = math.hypot(F0, BW / 2) - BW / 2, math.hypot(F0, BW / 2) + BW / 2
    zpk = signal.lp2bp_zpk(z, p, k, wo=math.sqrt(f_lo * f_hi), bw=f_hi - f_lo)
    zeros_hz = np.sort(np.abs(zpk[0].imag))
    f_zero = float(zeros_hz[-1])  # the upper transmission zero
    assert float(filt.atten_db(f_zero, floored=False)) > 150
    band = (f_zero - 2e6, f_zero + 2e6)
    got = float(filt.least_atten_db(*band))
    assert got == pytest.approx(scipy_band_least_db(zpk, *band), abs=1e-3)
    assert got < 60


@pytest.mark.parametrize("response", ["bandpass", "bandstop", "lowpass", "highpass"])
@pytest.mark.parametrize("kind,extra", [("butterworth", {}), ("chebyshev1", {"ripple_db": 1.0})])
def test_monotone_and_chebyshev_band_least_loss_is_exact(kind, extra, response):
    order = 5
    edge = {"f_center_hz": F0, "bandwidth_hz": 4 * BW} if response.startswith("band") else {"f_edge_hz": F0}
    filt = build_filter({"kind": kind, "response": response, "order": order, "max_atten_db": 400, **edge, **extra})
    design = signal.buttap(order) if kind == "butterworth" else signal.cheb1ap(order, 1.0)
    if response.startswith("band"):
        half = 2 * BW
        f_lo, f_hi = math.hypot(F0, half) - half, math.hypot(F0, half) + half
        wo, bw = math.sqrt(f_lo * f_hi), f_hi - f_lo
        zpk = (signal.lp2bp_zpk if response == "bandpass" else signal.lp2bs_zpk)(*design, wo=wo, bw=bw)
    else:
        zpk = (signal.lp2lp_zpk if response == "lowpass" else signal.lp2hp_zpk)(*design, wo=F0)
    low, high = random_bands(7, n=150)
    got = filt.least_atten_db(low, high)
    # scipy.signal freqs_zpk, densely sampled: agrees to the sampling step
    want = np.array([scipy_band_least_db(zpk, a, b) for a, b in zip(low, high, strict=True)])
    assert np.all(got <= want + 1e-6)
    np.testing.assert_allclose(got, want, atol=2e-3)


def test_tuned_circuit_band_least_loss_is_at_the_point_nearest_the_centre():
    filt = build_filter({"kind": "tuned", "f_center_hz": F0, "q_loaded": 30, "stages": 2, "max_atten_db": 400})
    low, high = random_bands(3)
    got = filt.least_atten_db(low, high)
    # the published single-tuned-circuit formula 10 log10(1 + (Q (f/f0 - f0/f))^2) per stage, sampled densely
    want = []
    for a, b in zip(low, high, strict=True):
        f = np.linspace(a, b, 20001)
        want.append(np.min(2 * 10 * np.log10(1 + (30 * (f / F0 - F0 / f)) ** 2)))
    np.testing.assert_allclose(got, want, atol=1e-3)
    assert float(filt.least_atten_db(90e6, 110e6)) == 0.0  # the centre inside the band


def test_tracking_filter_band_least_loss_follows_the_centre():
    filt = build_filter({"kind": "tuned", "q_loaded": 20, "tracks_channel": True})
    centres = np.array([50e6, 100e6])
    got = filt.least_atten_db(np.array([60e6, 60e6]), np.array([70e6, 70e6]), centres)
    np.testing.assert_allclose(got, filt.atten_db(np.array([60e6, 70e6]), centres))


def test_measured_notch_inside_a_band_is_found(tmp_path):
    # A measured band-stop notch between two points of a coarse file: the band's least loss is
    # the least of the file's points inside it and its interpolated ends (scikit-rf's reading).
    f_hz = np.linspace(1e6, 100e6, 100)
    s21 = np.full(f_hz.size, 10 ** (-60 / 20), dtype=complex)
    s21[40:43] = 10 ** (-3 / 20)  # a spurious passband 41-43 MHz in a 60 dB stopband
    path = write_s2p(tmp_path / "notchy.s2p", f_hz, s21)
    filt = build_filter({"kind": "touchstone", "path": str(path), "max_atten_db": 400})
    ref = -skrf.Network(str(path)).s_db[:, 1, 0]
    low, high = random_bands(5, n=400, lo=0.0, hi=120e6, width=20e6)
    got = filt.least_atten_db(low, high)
    for a, b, g in zip(low, high, got, strict=True):
        inside = (f_hz >= a) & (f_hz <= b)
        ends = np.interp([a, b], f_hz, ref)  # linear in dB between points, held outside (the stated rule)
        assert g == pytest.approx(min(ends.min(), ref[inside].min() if inside.any() else np.inf), abs=1e-6)
    assert float(filt.least_atten_db(30e6, 60e6)) == pytest.approx(3.0, abs=1e-6)


def test_cascade_band_least_loss_is_a_lower_bound():
    stages = [{"kind": "tuned", "f_center_hz": F0, "q_loaded": 20},
              {"kind": "butterworth", "response": "lowpass", "order": 3, "f_edge_hz": 120e6}]
    filt = build_filter({"kind": "cascade", "stages": stages, "max_atten_db": 400})
    low, high = random_bands(11)
    got = filt.least_atten_db(low, high, floored=False)
    for a, b, g in zip(low, high, got, strict=True):
        f = np.linspace(a, b, 20001)
        assert g <= float(np.min(filt.atten_db(f, floored=False))) + 1e-9


def test_band_edges_are_checked():
    filt = build_filter({"kind": "tuned", "f_center_hz": F0, "q_loaded": 20})
    with pytest.raises(FilterError, match=r"f_high_hz: 1.0 is invalid; each band's high edge must be >= its low"):
        filt.least_atten_db(2.0, 1.0)
    with pytest.raises(FilterError, match=r"f_low_hz: -1.0"):
        filt.least_atten_db(-1.0, 1.0)


# ----------------------------------------------------------------------------- ultimate rejection


@pytest.mark.parametrize("spec", [
    {"kind": "butterworth", "response": "lowpass", "order": 7, "f_edge_hz": 1e6},
    {"kind": "elliptic", "response": "lowpass", "order": 7, "f_edge_hz": 1e6, "ripple_db": 0.1, "stop_atten_db": 120},
    {"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 50, "stages": 3},
    {"kind": "brickwall", "response": "lowpass", "f_edge_hz": 1e6},
    {"kind": "cascade", "stages": [{"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 50, "stages": 3},
                                   {"kind": "butterworth", "response": "lowpass", "order": 7, "f_edge_hz": 1e6}]},
])
def test_every_filter_has_a_stated_default_ultimate_rejection(spec):
    filt = build_filter(spec)
    floor = DEFAULT_MAX_ATTEN_DB[spec["kind"]]  # common practice, no source (documented in models/filters.py)
    assert filt.max_atten_db == floor and filt.max_atten_is_default
    f = np.geomspace(1e3, 1e12, 400)
    assert float(np.max(filt.atten_db(f))) == pytest.approx(floor)  # reached far out, never exceeded
    if spec["kind"] != "cascade":  # (a cascade's stages keep their own floors: tested below)
        np.testing.assert_array_equal(filt.atten_db(f), np.minimum(filt.atten_db(f, floored=False), floor))
    np.testing.assert_array_equal(filt.least_atten_db(f, f), filt.atten_db(f))
    stated = build_filter({**spec, "max_atten_db": 55.0})
    assert not stated.max_atten_is_default and float(np.max(stated.atten_db(f))) == pytest.approx(55.0)


def test_cascade_stages_keep_their_own_floor_and_the_assembly_its_own():
    a = {"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 50, "max_atten_db": 30}
    b = {"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 50, "max_atten_db": 40}
    far = 1e9
    assert float(build_filter({"kind": "cascade", "stages": [a, b]}).atten_db(far)) == pytest.approx(70.0)
    assert float(build_filter({"kind": "cascade", "stages": [a, b], "max_atten_db": 50}).atten_db(far)) == 50.0


def test_max_atten_db_is_checked():
    with pytest.raises(FilterError, match=r"max_atten_db: 0 is invalid; must be > 0"):
        parse_filter_spec({"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 5, "max_atten_db": 0})
    with pytest.raises(FilterError, match=r"max_atten_db: 401 is invalid; must be <= 400"):
        parse_filter_spec({"kind": "tuned", "f_center_hz": 1e6, "q_loaded": 5, "max_atten_db": 401})


def test_measured_outside_floor_policy(tmp_path):
    f_hz = np.linspace(10e6, 20e6, 11)
    path = write_s2p(tmp_path / "f.s2p", f_hz, np.full(11, 10 ** (-1 / 20), dtype=complex))
    filt = build_filter({"kind": "touchstone", "path": str(path), "outside": "floor", "outside_atten_db": 25})
    np.testing.assert_allclose(filt.atten_db([5e6, 15e6, 30e6]), [25.0, 1.0, 25.0], atol=1e-9)
    assert float(filt.least_atten_db(1e6, 9e6)) == 25.0
    assert float(filt.least_atten_db(1e6, 12e6)) == pytest.approx(1.0)
    with pytest.raises(FilterError, match=r"outside_atten_db: None is invalid; outside='floor' needs"):
        parse_filter_spec({"kind": "touchstone", "path": "x.s2p", "outside": "floor"})
    with pytest.raises(FilterError, match=r"outside_atten_db: 3.0 is invalid; used only with"):
        parse_filter_spec({"kind": "touchstone", "path": "x.s2p", "outside_atten_db": 3.0})


def test_an_elliptic_zero_at_the_image_band_edge_no_longer_passes_the_plan():
    # An invented receiver: 100 MHz channel, 45 MHz IF 2 MHz wide, high-side LO, so the image band is
    # 189-191 MHz.  The preselector is a 5th-order elliptic low-pass whose first transmission zero sits
    # on the image band's edge nearest the channel (189 MHz).  Read at that one point the image sees
    # the 120 dB floor and the plan passes 70 dB by about 50 dB; over the band it sees the stopband's
    # least loss, ~64 dB, and fails.  Reference: scipy.signal.ellipap + lp2lp_zpk sampled densely.
    from mixchart import evaluate
    from mixchart.plan import plan_from_dict

    z, p, k = signal.ellipap(5, 0.5, 50.0)
    edge_hz = 189e6 / np.sort(np.abs(z.imag))[0]
    spec = {"kind": "elliptic", "response": "lowpass", "order": 5, "ripple_db": 0.5, "stop_atten_db": 50,
            "f_edge_hz": edge_hz, "max_atten_db": 120}
    plan = plan_from_dict({
        "direction": "down", "rf": {"start_hz": "100 MHz", "stop_hz": "100 MHz"},
        "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -30}, "lo": {"mode": "tracking", "side": "high"},
        "if": {"center_hz": "45 MHz", "bandwidth_hz": "2 MHz"}, "max_order": 2, "mixer": {"rf_ref_dbm": -30},
        "filters": {"rf": spec}, "requirement": {"response_rejection_db": 70, "output_spur_dbc": -70},
    })
    image = evaluate(plan).channel_frame(0).query("label == 'image'")
    assert len(image) == 1
    assert image["f_low_hz"].iloc[0] == pytest.approx(189e6) and image["f_high_hz"].iloc[0] == pytest.approx(191e6)
    zpk = signal.lp2lp_zpk(z, p, k, wo=edge_hz)
    band_least = scipy_band_least_db(zpk, 189e6, 191e6)
    _, h_wanted = signal.freqs_zpk(*zpk, worN=[100e6])
    wanted_db = float(-20 * np.log10(np.abs(h_wanted[0])))
    # the one point the old rule read: on the zero, so only the floor limits it
    assert float(build_filter(spec).atten_db(189e6)) == pytest.approx(120.0)
    # the image is a (1,1) response: its rejection is the preselector's relative least loss over the band
    rejection = float(image["rejection_db"].iloc[0])
    assert rejection <= band_least - wanted_db + 1e-9  # never above the sampled least
    assert rejection == pytest.approx(band_least - wanted_db, abs=2e-3)
    assert 60.0 < rejection < 66.0  # the stopband's 50 dB level plus the zero's skirt, not the 120 dB floor
    assert float(image["margin_db"].iloc[0]) == pytest.approx(rejection - 70.0) and rejection - 70.0 < 0
