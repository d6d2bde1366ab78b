"""Sampling physics (mixchart.physics.sampling) against numpy FFT simulations and hand derivations.

The outside sources are: the sampling process itself, simulated by sampling ``cos(2π·f·t)`` at
``t = n/fs`` and taking ``numpy.fft``; trigonometric identities; the Jacobi-Anger expansion
``exp(j·x·sin θ) = Σ J_n(x)·exp(j·n·θ)`` (Abramowitz & Stegun 9.1.41-9.1.43, from memory: equation
numbers) evaluated with ``scipy.special.jv``; and hand derivations written beside each value.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import jv

from mixchart.errors import MixchartError, PlanError, SweepTooLargeError, UnitError
from mixchart.physics import (
    alias_input_bands,
    check_band_in_zone,
    clock_spur_sideband_dbc,
    clock_spur_sideband_hz,
    fold_band,
    fold_hz,
    harmonic_bands,
    nyquist_zone,
    zone_band_hz,
)

REPO = Path(__file__).resolve().parents[1]
FS_HZ = 122.88e6  # invented sample rate for the simulations
N = 4096  # FFT length of every simulation
BIN_HZ = FS_HZ / N


def sampled(f_hz, n=N, fs_hz=FS_HZ):
    """Samples of cos(2π·f·t) at t = k/fs, one row per frequency."""
    return np.cos(2 * np.pi * np.atleast_1d(np.asarray(f_hz, dtype=np.float64))[..., None] * (np.arange(n) / fs_hz))


def hann_spectrum(x):
    return np.abs(np.fft.rfft(x * np.hanning(x.shape[-1]), axis=-1))


# ---------------------------------------------------------------- zones and fold_hz


@pytest.mark.parametrize(
    ("f_hz", "zone", "folded_hz", "inverted"),
    [
        # derived by hand from zone z: (z-1)·fs/2 <= f < z·fs/2 and fold = f mod fs, reflected above fs/2 (fs = 100 MHz)
        (10e6, 1, 10e6, False),
        (60e6, 2, 40e6, True),
        (110e6, 3, 10e6, False),
        (160e6, 4, 40e6, True),
        (50e6, 2, 50e6, True),  # an edge k·fs/2 belongs to zone k + 1 (the stated convention)
        (100e6, 3, 0.0, False),
        (150e6, 4, 50e6, True),
        (0.0, 1, 0.0, False),
    ],
)
def test_zone_and_fold_by_hand(f_hz, zone, folded_hz, inverted):
    assert nyquist_zone(f_hz, 100e6) == zone
    f, inv = fold_hz(f_hz, 100e6)
    assert f == folded_hz and bool(inv) == inverted


@pytest.mark.parametrize("zone", [1, 2, 3, 4, 5, 6])
def test_fold_hz_matches_the_fft_of_a_sampled_tone(zone):
    # numpy FFT of cos(2π·f·k/fs), Hann window: the peak bin of the sampled tone is where fold_hz says, within one bin.
    f_hz = (zone - 1 + 0.137 + 0.11 * zone) * FS_HZ / 2 + 0.3 * BIN_HZ  # off-bin, away from the zone edges
    assert nyquist_zone(f_hz, FS_HZ) == zone
    spec = hann_spectrum(sampled(f_hz))[0]
    peak = int(np.argmax(spec))
    expected_bin = fold_hz(f_hz, FS_HZ)[0] / BIN_HZ
    assert abs(peak - expected_bin) <= 1.0
    # Sharper: a parabola through the log magnitudes of the three top bins (common practice, no source;
    # its bias with a Hann window is a few hundredths of a bin, from memory) finds the tone to 0.05 bin.
    a, b, c = np.log(spec[peak - 1 : peak + 2])
    assert abs(peak + 0.5 * (a - c) / (a - 2 * b + c) - expected_bin) <= 0.05


@pytest.mark.parametrize("zone", [1, 2, 3, 4, 5, 6])
def test_fold_hz_inversion_flips_the_order_of_two_tones(zone):
    # numpy FFT of the sampled pair: a strong tone at f, a weak one at f + δ; in an even zone the weak one lands below.
    f_hz = (zone - 1 + 0.41) * FS_HZ / 2
    delta_hz = 40 * BIN_HZ
    spec = hann_spectrum(sampled(f_hz) + 0.5 * sampled(f_hz + delta_hz))[0]
    strong = int(np.argmax(spec))
    spec[max(strong - 8, 0) : strong + 9] = 0.0
    weak = int(np.argmax(spec))
    assert bool(fold_hz(f_hz, FS_HZ)[1]) == (weak < strong) == (zone % 2 == 0)
    assert abs(weak - fold_hz(f_hz + delta_hz, FS_HZ)[0] / BIN_HZ) <= 1.0


# ---------------------------------------------------------------- fold_band

BAND_CASES = [  # (low, high) in units of fs; what each is, derived by hand
    (0.1, 0.2),  # inside zone 1: one piece
    (0.4, 0.6),  # straddles fs/2: folds back onto itself, two pieces
    (0.9, 1.05),  # straddles fs
    (1.45, 1.52),  # straddles 3·fs/2
    (0.3, 0.8),  # exactly fs/2 wide over two zones: pieces [0.3, 0.5] and [0.2, 0.5], not the whole zone
    (0.45, 1.1),  # spans zones 1-3: the whole first zone
    (0.1, 1.3),  # wider than fs: the whole first zone
    (0.5, 1.0),  # exactly zone 2: one inverted piece [0, 0.5]
    (0.0, 0.6),  # holds all of zone 1: covers the first zone with two pieces
    (0.7, 0.7),  # a single tone
    (0.5, 0.5),  # a tone on a zone edge
]


def check_fold_band(low_hz, high_hz, fs_hz):
    # Reference: fold 20 001 points of the band one by one with fold_hz (itself checked by the FFT above).
    # Folding is continuous, so the image of the band is the one interval [min, max] of the folded points.
    band = fold_band(low_hz, high_hz, fs_hz)
    points = np.linspace(low_hz, high_hz, 20_001)
    f, inv = fold_hz(points, fs_hz)
    step, tol = (high_hz - low_hz) / 20_000 + 1e-9 * fs_hz, 1e-9 * fs_hz
    lows, highs, invs = band.low_hz[band.valid], band.high_hz[band.valid], band.inverted[band.valid]
    assert band.valid[0] and 1 <= band.count <= 2
    assert lows.min() == pytest.approx(f.min(), abs=step) and highs.max() == pytest.approx(f.max(), abs=step)
    in_piece = (f[:, None] >= lows - tol) & (f[:, None] <= highs + tol)
    assert in_piece.any(axis=1).all()  # every folded point lies in a piece
    assert bool(band.covers_zone) == bool(lows.min() <= 0.0 and highs.max() >= fs_hz / 2)
    if band.count == 2:  # the two pieces share the edge they fold about and have opposite senses
        assert invs[0] != invs[1] and ((lows == 0).all() or (highs == fs_hz / 2).all())
    # derived by hand: a band that holds a whole zone [j, j+1]·fs/2 covers the first zone; one that lies in
    # no single zone [a, a+1]·fs/2 and gives one piece spans 3+ zones: [0, fs/2] with no sense
    j = np.ceil(2 * low_hz / fs_hz)
    if (j + 1) * fs_hz / 2 <= high_hz:
        assert band.covers_zone
    one_zone = high_hz <= (np.floor(2 * low_hz / fs_hz) + 1) * fs_hz / 2
    if band.count == 1 and not one_zone:
        assert band.covers_zone and lows.tolist() == [0.0] and highs.tolist() == [fs_hz / 2] and not invs[0]
        return band
    # A point on a zone edge folds to 0 or fs/2 with either sense; leave those out of the sense check.
    off_edge = np.abs(np.round(2 * points / fs_hz) * fs_hz / 2 - points) > tol
    same = in_piece & (inv[:, None] == invs)
    assert same[off_edge].any(axis=1).all()  # each point lies in a piece of its own sense
    for i in range(lows.size):  # ... and each piece's edges are reached by points of its sense
        mine = f[(inv == invs[i]) & off_edge]
        if mine.size:
            assert mine.min() <= lows[i] + 2 * step and mine.max() >= highs[i] - 2 * step
    return band


@pytest.mark.parametrize(("low", "high"), BAND_CASES)
def test_fold_band_matches_folding_the_points(low, high):
    band = check_fold_band(low * 100e6, high * 100e6, 100e6)
    # derived by hand, as marked in BAND_CASES
    if (low, high) == (0.3, 0.8):
        assert band.low_hz.tolist() == pytest.approx([30e6, 20e6]) and band.high_hz.tolist() == [50e6, 50e6]
        assert band.inverted.tolist() == [False, True]
    if (low, high) in {(0.45, 1.1), (0.1, 1.3), (0.0, 0.6), (0.5, 1.0)}:
        assert band.covers_zone


@settings(max_examples=60, deadline=None)
@given(st.floats(0, 3), st.floats(0, 1.2))
def test_fold_band_property(low, width):
    # Reference: as above, random bands up to 1.2·fs wide anywhere in zones 1-7.
    check_fold_band(low * 100e6, (low + width) * 100e6, 100e6)


def test_fold_band_broadcasts():
    band = fold_band(np.array([10e6, 40e6]), np.array([20e6, 60e6]), 100e6)
    assert band.low_hz.shape == (2, 2) and band.count.tolist() == [1, 2]


# ---------------------------------------------------------------- alias_input_bands


def test_alias_input_bands_by_hand():
    # derived by hand: fs 100 MHz, passband 10-20 MHz: [k·fs ± 10, k·fs ± 20] MHz up to 250 MHz
    bands = alias_input_bands(10e6, 20e6, 100e6, 250e6)
    assert bands.low_hz.tolist() == [10e6, 80e6, 110e6, 180e6, 210e6]
    assert bands.high_hz.tolist() == [20e6, 90e6, 120e6, 190e6, 220e6]
    assert bands.k.tolist() == [0, 1, 1, 2, 2] and bands.zone.tolist() == [1, 2, 3, 4, 5]
    assert bands.inverted.tolist() == [False, True, False, True, False]


def test_alias_input_bands_are_heard_in_the_passband():
    # numpy FFT: a tone at each band's midpoint peaks inside the passband; a pair around it shows the sense.
    low_hz, high_hz = 20e6, 35e6
    bands = alias_input_bands(low_hz, high_hz, FS_HZ, 500e6)
    # derived by hand: at 122.88 MS/s the zone-8 band is 456.52-471.52 MHz; zone 9's starts at 511.52 MHz > 500 MHz
    assert bands.zone.tolist() == list(range(1, 9))
    mid = (bands.low_hz + bands.high_hz) / 2
    delta_hz = 40 * BIN_HZ
    spec = hann_spectrum(sampled(mid - delta_hz / 2) + 0.5 * sampled(mid + delta_hz / 2))
    strong = np.argmax(spec, axis=1)
    assert np.all((strong >= low_hz / BIN_HZ - 1) & (strong <= high_hz / BIN_HZ + 1))
    above = np.take_along_axis(spec, strong[:, None] + 40, axis=1)[:, 0]
    below = np.take_along_axis(spec, strong[:, None] - 40, axis=1)[:, 0]
    assert ((below > above) == bands.inverted).all()
    assert (nyquist_zone(mid, FS_HZ) == bands.zone).all()


def _edges_near(fs, low, high, f_max, data):
    k = data.draw(st.integers(0, f_max // fs + 1))
    edge = data.draw(st.sampled_from([k * fs - high, k * fs - low, k * fs + low, k * fs + high]))
    return min(max(edge + data.draw(st.integers(-2, 2)), 0), f_max)


@settings(max_examples=200, deadline=None)
@given(st.data())
def test_alias_input_bands_property(data):
    # Reference: the definition of aliasing: f folds into [low, high] iff fold_hz(f) is in it (fold_hz is
    # checked by the FFT above).  Whole-Hz values keep the float arithmetic exact, so edges are exact.
    fs = data.draw(st.integers(1_000, 10**9))
    low = data.draw(st.integers(0, fs // 2 - 1))
    high = data.draw(st.integers(low + 1, fs // 2))
    f_max = data.draw(st.integers(0, 20 * fs))
    f = data.draw(st.one_of(st.integers(0, f_max), st.just(None)))
    if f is None:
        f = _edges_near(fs, low, high, f_max, data)
    bands = alias_input_bands(float(low), float(high), float(fs), float(f_max))
    folded = fold_hz(float(f), float(fs))[0]
    inside = (bands.low_hz <= f) & (f <= bands.high_hz)
    assert bool(low <= folded <= high) == bool(inside.any())
    assert (bands.low_hz <= f_max).all() and (bands.high_hz > 0).all()


def test_alias_input_bands_refuses_a_huge_list():
    with pytest.raises(SweepTooLargeError, match=r"^f_max_hz: 1000000000\.0 is invalid"):
        alias_input_bands(1.0, 2.0, 10.0, 1e9)


# ---------------------------------------------------------------- zones of a plan


def test_zone_band_hz_by_hand():
    # derived by hand: zone z is [(z-1)·fs/2, z·fs/2]
    low, high = zone_band_hz(np.array([1, 2, 3]), 100e6)
    assert low.tolist() == [0.0, 50e6, 100e6] and high.tolist() == [50e6, 100e6, 150e6]


@pytest.mark.parametrize(
    ("low_hz", "high_hz", "zone"),
    [(70e6, 100e6, 2), (61.44e6, 122.88e6, 2), (0.0, 61.44e6, 1), (130e6, 180e6, 3)],  # edges included
)
def test_check_band_in_zone_accepts(low_hz, high_hz, zone):
    assert check_band_in_zone(low_hz, high_hz, FS_HZ, zone, "adc.nyquist_zone") is None


@pytest.mark.parametrize(
    ("low_hz", "high_hz", "zone", "message"),
    [
        (60e6, 70e6, 2, "adc.nyquist_zone: 2 (61.44 MHz to 122.88 MHz) cannot hold the passband 60 MHz to 70 MHz; "
                        "it spans zones 1 to 2"),
        (130e6, 150e6, 2, "adc.nyquist_zone: 2 (61.44 MHz to 122.88 MHz) cannot hold the passband 130 MHz to 150 MHz; "
                          "it spans zone 3"),
    ],
)
def test_check_band_in_zone_refuses(low_hz, high_hz, zone, message):
    # derived by hand: zone 2 at 122.88 MS/s is 61.44-122.88 MHz
    with pytest.raises(PlanError) as err:
        check_band_in_zone(low_hz, high_hz, FS_HZ, zone, "adc.nyquist_zone")
    assert str(err.value) == message


@pytest.mark.parametrize("zone", [0, -1, 1.5, True, "2"])
def test_check_band_in_zone_refuses_a_bad_zone(zone):
    with pytest.raises(PlanError, match=r"^adc\.nyquist_zone: .* is invalid; must be a whole number >= 1$"):
        check_band_in_zone(70e6, 80e6, FS_HZ, zone, "adc.nyquist_zone")


# ---------------------------------------------------------------- clock spurs


def sampled_with_pm_clock(f_in_hz, offset_hz, beta):
    """Sample cos(2π·f_in·t) at the instants where the clock phase 2π·fs·t + β·sin(2π·d·t) reaches 2πk.

    The instants are solved by fixed-point iteration (no small-β shortcut), so the simulation does not
    assume the formula under test.
    """
    k = np.arange(N, dtype=np.float64)
    t = k / FS_HZ
    for _ in range(8):  # contraction factor β·d/fs < 1e-3: converged to rounding
        t = (k - beta / (2 * np.pi) * np.sin(2 * np.pi * offset_hz * t)) / FS_HZ
    return np.cos(2 * np.pi * f_in_hz * t)


@pytest.mark.parametrize("carrier_bin", [1000, 2748, 4096 + 1500, 10240 + 1200])  # zones 1, 2, 3, 6
def test_clock_spur_sidebands_match_a_simulation(carrier_bin):
    beta = 2e-3
    # Jacobi-Anger: the clock cos(2π·fs·t + β·sin(2π·d·t)) has J1(β)/J0(β) at fs ± d (-60 dBc here).
    spur_dbc = 20 * math.log10(jv(1, beta) / jv(0, beta))
    offset_bins = 37
    f_in_hz, offset_hz = carrier_bin * BIN_HZ, offset_bins * BIN_HZ  # coherent: every line on a bin
    x = np.fft.rfft(sampled_with_pm_clock(f_in_hz, offset_hz, beta))
    carrier = round(float(fold_hz(f_in_hz, FS_HZ)[0]) / BIN_HZ)
    upper_hz, lower_hz = clock_spur_sideband_hz(f_in_hz, FS_HZ, offset_hz)
    upper, lower = round(float(upper_hz) / BIN_HZ), round(float(lower_hz) / BIN_HZ)
    assert abs(np.abs(x[carrier]) / (N / 2) - 1) < 1e-3  # the tone is where fold_hz puts it
    even = nyquist_zone(f_in_hz, FS_HZ) % 2 == 0
    assert upper - carrier == (-offset_bins if even else offset_bins) and lower - carrier == -(upper - carrier)
    # Jacobi-Anger on the sampled phase 2π·f_in·t_k: the input-side upper sideband is -J1/J0, the lower +J1/J0;
    # the signs survive folding, so they tell which input sideband sits where.
    assert np.real(x[upper] / x[carrier]) < 0 < np.real(x[lower] / x[carrier])
    expected_dbc = clock_spur_sideband_dbc(f_in_hz, FS_HZ, spur_dbc)
    for b in (upper, lower):
        measured_dbc = 20 * math.log10(np.abs(x[b]) / np.abs(x[carrier]))
        assert measured_dbc == pytest.approx(float(expected_dbc), abs=0.3)
        assert measured_dbc == pytest.approx(spur_dbc + 20 * math.log10(carrier_bin / N), abs=0.3)


# ---------------------------------------------------------------- harmonics


def test_harmonic_bands_by_hand():
    # derived by hand: k-th harmonic of [10, 12] MHz is [10k, 12k] MHz
    k, low, high = harmonic_bands(10e6, 12e6, 4)
    assert k.tolist() == [2, 3, 4] and low.tolist() == [20e6, 30e6, 40e6] and high.tolist() == [24e6, 36e6, 48e6]
    assert harmonic_bands(np.array([1.0, 2.0]), np.array([1.5, 2.5]), 3)[1].shape == (2, 2)


def test_harmonics_fold_where_a_nonlinear_sampled_tone_puts_them():
    # numpy FFT of a memoryless front end y = x + 0.1·x² + 0.05·x³ on a zone-2 tone; cos² = 1/2 + cos 2θ/2 and
    # cos³ = (3·cos θ + cos 3θ)/4 (trig identities) give harmonic amplitudes 0.05 and 0.0125.
    f_hz = 2867 * BIN_HZ
    x = sampled(f_hz)[0]
    spec = np.abs(np.fft.rfft(x + 0.1 * x**2 + 0.05 * x**3)) / (N / 2)
    _, low, _ = harmonic_bands(f_hz, f_hz, 3)
    bins = np.round(fold_hz(low, FS_HZ)[0] / BIN_HZ).astype(int)
    assert spec[bins] == pytest.approx([0.05, 0.0125], rel=1e-9)


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("call", "cls", "start"),
    [
        (lambda: fold_hz(10e6, 0.0), UnitError, "fs_hz: 0.0 is invalid; must be a finite frequency > 0 Hz"),
        (lambda: fold_hz(10e6, -1e6), UnitError, "fs_hz: -1000000.0 is invalid"),
        (lambda: fold_hz(float("nan"), 1e6), UnitError, "f_hz: nan is invalid; must be a finite frequency >= 0 Hz"),
        (lambda: fold_hz([1.0, -5.0], 100.0), UnitError, "f_hz: -5.0 is invalid"),
        (lambda: nyquist_zone("abc", 1e6), UnitError, "f_hz: 'abc' is invalid"),
        (lambda: nyquist_zone(1e300, 1e-300), UnitError, "f_hz: 1e+300 is invalid; 2·f/fs must be at most 2**51"),
        (lambda: nyquist_zone(1.0, float("inf")), UnitError, "fs_hz: inf is invalid"),
        (lambda: fold_band(20.0, 10.0, 100.0), UnitError, "f_high_hz: 10.0 is invalid; must be >= f_low_hz"),
        (lambda: fold_band(-1.0, 10.0, 100.0), UnitError, "f_low_hz: -1.0 is invalid"),
        (lambda: alias_input_bands(10e6, 60e6, 100e6, 1e9), UnitError, "f_high_hz: 60000000.0 is invalid; must be "
         "above f_low_hz (10 MHz) and at most fs_hz/2 (50 MHz)"),
        (lambda: alias_input_bands(10e6, 20e6, 100e6, float("nan")), UnitError, "f_max_hz: nan is invalid"),
        (lambda: clock_spur_sideband_dbc(0.0, 1e6, -60.0), UnitError, "f_in_hz: 0.0 is invalid"),
        (lambda: clock_spur_sideband_dbc(1e6, 1e6, float("nan")), UnitError, "spur_dbc: nan is invalid"),
        (lambda: clock_spur_sideband_hz(1e6, 1e6, -1.0), UnitError, "offset_hz: -1.0 is invalid"),
        (lambda: harmonic_bands(1e6, 2e6, 1), UnitError, "max_harmonic: 1 is invalid; must be a whole number"),
        (lambda: harmonic_bands(1e6, 2e6, 2.5), UnitError, "max_harmonic: 2.5 is invalid"),
        (lambda: zone_band_hz(0, 1e6), PlanError, "zone: 0 is invalid"),
        (lambda: check_band_in_zone(70e6, 60e6, FS_HZ, 2, "adc.nyquist_zone"), UnitError, "f_high_hz: 60000000.0"),
    ],
)
def test_bad_input_is_one_line_naming_the_argument(call, cls, start):
    with pytest.raises(cls) as err:
        call()
    assert isinstance(err.value, MixchartError) and isinstance(err.value, ValueError)
    assert str(err.value).startswith(start) and "\n" not in str(err.value)


def test_physics_imports_no_bokeh_or_ipywidgets():
    probe = (
        "import sys, mixchart.physics, mixchart.physics.sampling\n"
        "print(sorted(n for n in sys.modules if n.split('.')[0] in {'bokeh', 'ipywidgets', 'jupyter_bokeh'}))"
    )
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    done = subprocess.run([sys.executable, "-c", probe], cwd=REPO, env=env, capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"
