"""Mixing products, spurious responses, labels and spur loci (mixchart.physics.products and .loci).

Expected values are textbook heterodyne results or are derived by hand in the
comments; the brute-force comparisons use tests/reference.py, an independent
plain-Python implementation.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import reference as ref  # tests/reference.py (pytest puts tests/ on sys.path)
from mixchart.errors import MixchartError
from mixchart.physics.loci import clip_lines, output_plane_loci, tuning_plane_loci
from mixchart.physics.products import (
    HALF_IF,
    IF_FEEDTHROUGH,
    IF_FEEDTHROUGH_OUT,
    IMAGE,
    LABELS,
    LO_HARMONIC,
    LO_LEAKAGE,
    RF_FEEDTHROUGH,
    SPUR,
    SUM_PRODUCT,
    UNWANTED_SIDEBAND,
    WANTED,
    is_inverted,
    overlaps,
    product_bands,
    product_family,
    product_labels,
    response_bands,
    response_family,
    response_labels,
)

kHz, MHz = 1e3, 1e6


def pick(family, m, n, s):
    """Column of (m, n, sign/branch) in a product or response family."""
    third = family.sign if hasattr(family, "sign") else family.branch
    cols = np.flatnonzero((family.rf_harmonic == m) & (family.lo_harmonic == n) & (third == s))
    assert cols.size == 1, (m, n, s)
    return int(cols[0])


# ------------------------------------------------------------ families


@pytest.mark.parametrize(
    ("max_order", "products", "responses", "source"),
    [
        (1, 2, 1, "derived by hand: products (0,1),(1,0); responses (1,0)"),
        (2, 6, 4, "derived by hand: order k gives 2k products and 2k-1 responses; sum to N(N+1) and N^2"),
        (7, 56, 49, "derived by hand: 7*8 = 56, 7^2 = 49"),
        (15, 240, 225, "derived by hand: 15*16 = 240, 15^2 = 225"),
        (25, 650, 625, "derived by hand: 25*26 = 650, 25^2 = 625"),
    ],
)
def test_family_sizes(max_order, products, responses, source):
    assert len(product_family(max_order)) == products, source
    assert len(response_family(max_order)) == responses, source


@pytest.mark.parametrize("max_order", [1, 2, 5, 11, 25])
def test_family_order_limits(max_order):
    pf = product_family(max_order)
    assert pf.order.min() >= 1 and pf.order.max() == max_order
    assert (pf.rf_harmonic >= 0).all() and (pf.lo_harmonic >= 0).all()
    assert not ((pf.rf_harmonic == 0) & (pf.lo_harmonic == 0)).any(), "order 0 is not a product"
    # one sign when m or n is zero (|m f| or |n f| only), both signs otherwise
    single = (pf.rf_harmonic == 0) | (pf.lo_harmonic == 0)
    assert (pf.sign[single] == 1).all()
    rf = response_family(max_order)
    assert (rf.rf_harmonic >= 1).all() and rf.order.max() == max_order
    assert (rf.branch[rf.lo_harmonic == 0] == 1).all()
    keys = set(zip(pf.rf_harmonic.tolist(), pf.lo_harmonic.tolist(), pf.sign.tolist(), strict=True))
    assert len(keys) == len(pf), "no duplicates"


@pytest.mark.parametrize("bad", [0, 65, -1, 2.5, True, "7", None])
def test_family_rejects_bad_order(bad):
    with pytest.raises(MixchartError) as info:
        product_family(bad)
    assert str(info.value).startswith(f"max_order: {bad!r} is invalid;") and "\n" not in str(info.value)


def test_families_are_read_only():
    pf = product_family(3)
    with pytest.raises(ValueError):
        pf.rf_harmonic[0] = 9


# ------------------------------------------------------------ products by hand

#: VHF FM receiver, 100 MHz channel, high-side LO 110.7 MHz for a 10.7 MHz IF.
FM_RF, FM_LO = 100 * MHz, 110.7 * MHz


@pytest.mark.parametrize(
    ("m", "n", "s", "expected_hz", "source"),
    [
        (1, 1, -1, 10.7 * MHz, "derived by hand: 110.7 - 100 = 10.7 MHz (the wanted IF)"),
        (1, 1, 1, 210.7 * MHz, "derived by hand: 100 + 110.7 = 210.7 MHz (sum)"),
        (0, 1, 1, 110.7 * MHz, "LO leakage: f_LO"),
        (0, 2, 1, 221.4 * MHz, "derived by hand: 2 x 110.7 = 221.4 MHz"),
        (1, 0, 1, 100 * MHz, "RF feedthrough: f_RF"),
        (2, 1, -1, 89.3 * MHz, "derived by hand: 2 x 100 - 110.7 = 89.3 MHz"),
        (1, 2, -1, 121.4 * MHz, "derived by hand: 2 x 110.7 - 100 = 121.4 MHz"),
        (2, 2, -1, 21.4 * MHz, "derived by hand: 2 x 110.7 - 2 x 100 = 21.4 MHz (twice the IF)"),
        (3, 2, -1, 78.6 * MHz, "derived by hand: 3 x 100 - 2 x 110.7 = 78.6 MHz"),
        (3, 3, 1, 632.1 * MHz, "derived by hand: 3 x 210.7 = 632.1 MHz"),
        (5, 4, -1, 57.2 * MHz, "derived by hand: 5 x 100 - 4 x 110.7 = 500 - 442.8 = 57.2 MHz"),
    ],
)
def test_product_centres_by_hand(m, n, s, expected_hz, source):
    fam = product_family(9)
    centre, low, high = product_bands(np.array([FM_RF]), np.array([FM_LO]), 200 * kHz, fam)
    k = pick(fam, m, n, s)
    assert centre[0, k] == pytest.approx(expected_hz, rel=1e-12), source
    # an (m, n) product of a B-wide signal is m·B wide (m-th harmonic of every component)
    assert high[0, k] - low[0, k] == pytest.approx(m * 200 * kHz, rel=1e-9), "width m·B"


@pytest.mark.parametrize(
    ("f_in", "f_lo", "bw", "m", "n", "s", "expected", "source"),
    [
        (10 * MHz, 10.05 * MHz, 200 * kHz, 1, 1, -1, (50 * kHz, 0.0, 150 * kHz),
         "derived by hand: centre 50 kHz, half-width 100 kHz folds through 0 Hz -> [0, 150 kHz]"),
        (5 * MHz, 10 * MHz, 100 * kHz, 2, 1, -1, (0.0, 0.0, 100 * kHz),
         "derived by hand: 2 x 5 - 10 = 0 MHz, width 2 x 100 kHz -> [0, 100 kHz]"),
        (1 * MHz, 3 * MHz, 10 * kHz, 3, 1, 1, (6 * MHz, 6 * MHz - 15 * kHz, 6 * MHz + 15 * kHz),
         "derived by hand: 3 + 3 = 6 MHz, half-width 3 x 10 / 2 = 15 kHz"),
    ],
)
def test_product_bands_edges_by_hand(f_in, f_lo, bw, m, n, s, expected, source):
    fam = product_family(4)
    centre, low, high = product_bands(np.array([f_in]), np.array([f_lo]), bw, fam)
    k = pick(fam, m, n, s)
    assert (centre[0, k], low[0, k], high[0, k]) == pytest.approx(expected, rel=1e-12, abs=1e-6), source


# ------------------------------------------------------------ responses: textbook

IF_AM = 455 * kHz


@pytest.mark.parametrize(
    ("f_lo", "if_hz", "m", "n", "b", "expected_hz", "label_if_high_side", "source"),
    [
        # Medium-wave receiver, 455 kHz IF, 1000 kHz signal, high-side LO 1455 kHz.
        (1455 * kHz, IF_AM, 1, 1, 1, 1910 * kHz, IMAGE,
         "standard textbook example (from memory, e.g. Kennedy & Davis, Electronic Communication Systems): "
         "image = 1000 + 2 x 455 = 1910 kHz"),
        (1455 * kHz, IF_AM, 1, 1, -1, 1000 * kHz, WANTED, "derived by hand: 1455 - 455 = 1000 kHz (the channel)"),
        (1455 * kHz, IF_AM, 2, 2, -1, 1227.5 * kHz, HALF_IF,
         "derived by hand: half-IF at f_RF + IF/2 = 1000 + 227.5 = 1227.5 kHz = (2 x 1455 - 455)/2"),
        (1455 * kHz, IF_AM, 1, 0, 1, 455 * kHz, IF_FEEDTHROUGH, "an input at the IF itself"),
        (1455 * kHz, IF_AM, 2, 2, 1, 1682.5 * kHz, SPUR, "derived by hand: (2 x 1455 + 455)/2 = 1682.5 kHz"),
        (1455 * kHz, IF_AM, 1, 2, -1, 2455 * kHz, SPUR, "derived by hand: 2 x 1455 - 455 = 2455 kHz"),
        (1455 * kHz, IF_AM, 3, 1, -1, 1000 * kHz / 3, SPUR, "derived by hand: (1455 - 455)/3 = 333.33 kHz"),
        # VHF FM receiver, 10.7 MHz IF, 100 MHz signal, high-side LO 110.7 MHz.
        (110.7 * MHz, 10.7 * MHz, 1, 1, 1, 121.4 * MHz, IMAGE, "derived by hand: 100 + 2 x 10.7 = 121.4 MHz"),
        (110.7 * MHz, 10.7 * MHz, 2, 2, -1, 105.35 * MHz, HALF_IF, "derived by hand: 100 + 10.7/2 = 105.35 MHz"),
    ],
)
def test_high_side_responses_textbook(f_lo, if_hz, m, n, b, expected_hz, label_if_high_side, source):
    fam = response_family(5)
    half_bw = 5 * kHz
    centre, low, high = response_bands(np.array([f_lo]), if_hz - half_bw, if_hz + half_bw, fam)
    k = pick(fam, m, n, b)
    assert centre[0, k] == pytest.approx(expected_hz, rel=1e-12), source
    # an IF passband B wide maps to an input band B/m wide (derived by hand: f = (n f_LO ± f_IF)/m)
    assert high[0, k] - low[0, k] == pytest.approx(2 * half_bw / m, rel=1e-9)
    # high-side LO: the wanted input is below the LO, on the -1 branch
    labels = response_labels(fam, np.array([-1]))
    assert LABELS[labels[0, k]] == LABELS[label_if_high_side]


@pytest.mark.parametrize(
    ("m", "n", "b", "expected_hz", "label", "source"),
    [
        (1, 1, 1, 100 * MHz, WANTED, "derived by hand: 89.3 + 10.7 = 100 MHz"),
        (1, 1, -1, 78.6 * MHz, IMAGE, "derived by hand: low-side image 100 - 2 x 10.7 = 78.6 MHz"),
        (2, 2, 1, 94.65 * MHz, HALF_IF, "derived by hand: half-IF 100 - 10.7/2 = 94.65 MHz = (2 x 89.3 + 10.7)/2"),
    ],
)
def test_low_side_responses(m, n, b, expected_hz, label, source):
    fam = response_family(4)
    centre, _, _ = response_bands(np.array([89.3 * MHz]), 10.6 * MHz, 10.8 * MHz, fam)
    k = pick(fam, m, n, b)
    assert centre[0, k] == pytest.approx(expected_hz, rel=1e-12), source
    labels = response_labels(fam, np.array([1]))  # low side: wanted input above the LO
    assert labels[0, k] == label


def test_response_band_straddling_the_lo_harmonic_starts_at_zero():
    # derived by hand: 2 x 5.35 MHz = 10.7 MHz sits inside the 10.6-10.8 MHz IF, so
    # |2 f_LO - f_IF| runs from 0 up to 0.1 MHz (m = 1) for the (1,2) -1 branch.
    fam = response_family(3)
    centre, low, high = response_bands(np.array([5.35 * MHz]), 10.6 * MHz, 10.8 * MHz, fam)
    k = pick(fam, 1, 2, -1)
    assert (centre[0, k], low[0, k], high[0, k]) == pytest.approx((0.0, 0.0, 0.1 * MHz), abs=1e-6)


# ------------------------------------------------------------ labels


def test_product_labels_down_and_up():
    fam = product_family(3)
    down = product_labels(fam, "down", np.array([-1]))[0]
    up = product_labels(fam, "up", np.array([1]))[0]
    expect_down = {
        (1, 1, -1): WANTED, (1, 1, 1): SUM_PRODUCT, (0, 1, 1): LO_LEAKAGE, (0, 2, 1): LO_HARMONIC,
        (1, 0, 1): RF_FEEDTHROUGH, (2, 1, -1): SPUR,
    }
    expect_up = {(1, 1, 1): WANTED, (1, 1, -1): UNWANTED_SIDEBAND, (1, 0, 1): IF_FEEDTHROUGH_OUT, (0, 1, 1): LO_LEAKAGE}
    for key, code in expect_down.items():
        assert down[pick(fam, *key)] == code, key
    for key, code in expect_up.items():
        assert up[pick(fam, *key)] == code, key
    assert LABELS[IF_FEEDTHROUGH_OUT] == "IF feedthrough"
    assert (down == WANTED).sum() == 1 and (up == WANTED).sum() == 1


@pytest.mark.parametrize(
    ("f_in", "f_lo", "wanted_sign", "expected", "source"),
    [
        (100 * MHz, 110.7 * MHz, -1, True, "textbook: high-side injection (f_LO - f_RF) inverts the spectrum"),
        (100 * MHz, 89.3 * MHz, -1, False, "textbook: low-side injection (f_RF - f_LO) keeps it upright"),
        (140 * MHz, 2170 * MHz, 1, False, "textbook: the sum f_IF + f_LO keeps it upright"),
        (140 * MHz, 2450 * MHz, -1, True, "textbook: f_LO - f_IF (LO above) inverts"),
    ],
)
def test_spectrum_inversion(f_in, f_lo, wanted_sign, expected, source):
    assert bool(is_inverted(np.array([f_in]), np.array([f_lo]), np.array([wanted_sign]))[0]) is expected, source


@pytest.mark.parametrize(
    ("a", "b", "expected", "source"),
    [
        ((1.0, 2.0), (2.0, 3.0), True, "touching edges overlap (products.overlaps docstring: reported, not hidden)"),
        ((1.0, 2.0), (2.0000001, 3.0), False, "a gap, however small"),
        ((1.0, 5.0), (2.0, 3.0), True, "containment"),
        ((4.0, 5.0), (2.0, 3.0), False, "wholly above"),
    ],
)
def test_overlaps(a, b, expected, source):
    assert bool(overlaps(np.array(a[0]), np.array(a[1]), b[0], b[1])) is expected, source


# ------------------------------------------------------------ loci


def on_segment(lines, i, x, y, tol=1e-9):
    """True if (x, y) lies on segment i of ``lines``."""
    x0, y0, x1, y1 = lines.x0[i], lines.y0[i], lines.x1[i], lines.y1[i]
    cross = (x1 - x0) * (y - y0) - (y1 - y0) * (x - x0)
    length = np.hypot(x1 - x0, y1 - y0)
    within = min(x0, x1) - tol <= x <= max(x0, x1) + tol and min(y0, y1) - tol <= y <= max(y0, y1) + tol
    return abs(cross) <= tol * max(length, 1.0) and within


def segments_through(lines, m, n, s, x, y, edge=None):
    hits = []
    for i in range(len(lines)):
        if (lines.rf_harmonic[i], lines.lo_harmonic[i], lines.sign[i]) != (m, n, s):
            continue
        if edge is not None and lines.edge[i] != edge:
            continue
        if on_segment(lines, i, x, y):
            hits.append(i)
    return hits


# Normalised chart, x = f_RF/f_LO, y = f_IF/f_LO.  Wanted high-side line: y = 1 - x (the
# fold of (1,1,-1)).  Crossings with spur (m, n) derived by hand:
#   difference, upper arm  y = m x - n :  1 - x = m x - n  ->  x = (n+1)/(m+1)
#   difference, fold arm   y = n - m x :  1 - x = n - m x  ->  x = (n-1)/(m-1)
#   sum                    y = m x + n :  1 - x = m x + n  ->  x = (1-n)/(m+1)  (n = 0: RF harmonic)
NORMALISED_CROSSINGS = [
    (2, 1, -1, 2 / 3, 1 / 3, "x = (1+1)/(2+1) = 2/3, y = 1/3; check 2(2/3) - 1 = 1/3"),
    (3, 2, -1, 3 / 4, 1 / 4, "x = (2+1)/(3+1) = 3/4, y = 1/4; check 3(3/4) - 2 = 1/4"),
    (3, 1, -1, 1 / 2, 1 / 2, "x = (1+1)/(3+1) = 1/2, y = 1/2; check 3/2 - 1 = 1/2"),
    (4, 3, -1, 4 / 5, 1 / 5, "x = (3+1)/(4+1) = 4/5, y = 1/5; check 16/5 - 3 = 1/5"),
    (3, 2, -1, 1 / 2, 1 / 2, "fold arm: x = (2-1)/(3-1) = 1/2, y = 1/2; check 2 - 3/2 = 1/2"),
    (4, 3, -1, 2 / 3, 1 / 3, "fold arm: x = (3-1)/(4-1) = 2/3, y = 1/3; check 3 - 8/3 = 1/3"),
    (2, 0, 1, 1 / 3, 2 / 3, "sum with n = 0: x = 1/(2+1) = 1/3, y = 2/3 (RF 2nd harmonic on the IF)"),
    (3, 0, 1, 1 / 4, 3 / 4, "sum with n = 0: x = 1/4, y = 3/4"),
]


@pytest.mark.parametrize(("m", "n", "s", "x", "y", "derivation"), NORMALISED_CROSSINGS)
def test_output_plane_normalised_crossings(m, n, s, x, y, derivation):
    lines = output_plane_loci(7, 1.0, (0.0, 1.5, 0.0, 1.5))
    assert segments_through(lines, 1, 1, -1, x, y), f"wanted line y = 1 - x passes ({x}, {y})"
    assert segments_through(lines, m, n, s, x, y), f"derived by hand: {derivation}"


def test_output_plane_in_hertz_matches_the_normalised_chart():
    # Scaling the LO to 455 kHz scales both axes (derived by hand: y = |m x ± n f_LO| is homogeneous).
    lines = output_plane_loci(5, 455 * kHz, (0.0, 1.5 * 455 * kHz, 0.0, 1.5 * 455 * kHz))
    x, y = 2 / 3 * 455 * kHz, 1 / 3 * 455 * kHz
    assert segments_through(lines, 1, 1, -1, x, y), "wanted: 455 - 303.33 = 151.67 kHz"
    assert segments_through(lines, 2, 1, -1, x, y), "derived by hand: 2 x 303.33 - 455 = 151.67 kHz"
    assert not segments_through(lines, 3, 1, -1, x, y), "(3,1) crosses the wanted line elsewhere (x = 1/2)"


@pytest.mark.parametrize(
    ("m", "n", "s", "rf", "lo", "source"),
    [
        (1, 1, -1, 1000 * kHz, 1455 * kHz, "wanted: 1455 - 1000 = 455 kHz"),
        (1, 1, -1, 1910 * kHz, 1455 * kHz, "image: 1910 - 1455 = 455 kHz (textbook image example)"),
        (2, 2, -1, 1227.5 * kHz, 1455 * kHz, "half-IF: 2 x 1455 - 2 x 1227.5 = 455 kHz (derived by hand)"),
        (1, 1, -1, 1000 * kHz, 545 * kHz, "low-side LO: 1000 - 545 = 455 kHz"),
        (1, 0, 1, 455 * kHz, 1200 * kHz, "IF feedthrough: an RF of 455 kHz at any LO"),
        (0, 2, 1, 800 * kHz, 227.5 * kHz, "LO 2nd harmonic: 2 x 227.5 = 455 kHz at any RF"),
    ],
)
def test_tuning_plane_loci_pass_through_hand_points(m, n, s, rf, lo, source):
    lines = tuning_plane_loci(5, 450 * kHz, 460 * kHz, (0.0, 2500 * kHz, 0.0, 2500 * kHz))
    assert segments_through(lines, m, n, s, rf, lo, edge=0), source


def test_tuning_plane_edges_bound_the_strip():
    # (1,1,-1), high side: LO = RF + f_IF; lower edge 450 kHz, upper 460 kHz (derived by hand)
    lines = tuning_plane_loci(3, 450 * kHz, 460 * kHz, (0.0, 2000 * kHz, 0.0, 2500 * kHz), include_center=False)
    assert set(lines.edge.tolist()) == {-1, 1}
    assert segments_through(lines, 1, 1, -1, 1000 * kHz, 1450 * kHz, edge=-1)
    assert segments_through(lines, 1, 1, -1, 1000 * kHz, 1460 * kHz, edge=1)


@pytest.mark.parametrize(
    ("a", "b", "c", "expected", "source"),
    [
        (1.0, 1.0, 1.0, (0.0, 1.0, 1.0, 0.0), "x + y = 1 crosses the unit square corner to corner (by hand)"),
        (0.0, 1.0, 0.5, (0.0, 0.5, 1.0, 0.5), "horizontal y = 0.5"),
        (1.0, 0.0, 0.25, (0.25, 0.0, 0.25, 1.0), "vertical x = 0.25"),
    ],
)
def test_clip_lines_by_hand(a, b, c, expected, source):
    x0, y0, x1, y1, keep = clip_lines(np.array([a]), np.array([b]), np.array([c]), (0.0, 1.0, 0.0, 1.0))
    assert keep[0]
    got = {(x0[0], y0[0]), (x1[0], y1[0])}
    want = {(expected[0], expected[1]), (expected[2], expected[3])}
    assert {tuple(np.round(p, 12)) for p in got} == want, source


def test_clip_lines_misses():
    # x + y = 5 never meets the unit square (by hand); x + y = 0 touches it at one corner only
    *_, keep = clip_lines(np.array([1.0, 1.0]), np.array([1.0, 1.0]), np.array([5.0, 0.0]), (0.0, 1.0, 0.0, 1.0))
    assert keep.tolist() == [False, False]


# ------------------------------------------------------------ brute force vs engine


def random_case(rng):
    n_ch = int(rng.integers(1, 30))
    f_in = rng.uniform(1e5, 3e9, n_ch)
    f_lo = rng.uniform(1e5, 3e9, n_ch)
    if rng.random() < 0.3:  # force some near-coincidences: LO close to a multiple of the input
        f_lo = f_in * rng.integers(1, 4) + rng.uniform(-1e4, 1e4, n_ch)
        f_lo = np.abs(f_lo) + 1.0
    bw = float(rng.uniform(1e3, 5e7))
    if_c = float(rng.uniform(1e5, 5e8))
    if_bw = float(rng.uniform(1e2, if_c))
    order = int(rng.integers(1, 12))
    return f_in, f_lo, bw, if_c - if_bw / 2, if_c + if_bw / 2, order


@pytest.mark.parametrize("seed", range(12))
def test_product_and_response_bands_match_brute_force(seed):
    f_in, f_lo, bw, if_low, if_high, order = random_case(np.random.default_rng(seed))
    pf, rf = product_family(order), response_family(order)
    pc, pl, ph = product_bands(f_in, f_lo, bw, pf)
    rc, rl, rh = response_bands(f_lo, if_low, if_high, rf)
    hit = overlaps(pl, ph, if_low, if_high)
    for i in range(f_in.size):
        want_p = {(m, n, s): (c, lo, hi) for m, n, s, c, lo, hi in ref.product_list(f_in[i], f_lo[i], bw, order)}
        got_p = {
            (int(m), int(n), int(s)): (pc[i, k], pl[i, k], ph[i, k])
            for k, (m, n, s) in enumerate(zip(pf.rf_harmonic, pf.lo_harmonic, pf.sign, strict=True))
        }
        assert got_p.keys() == want_p.keys()
        for key, values in want_p.items():
            assert got_p[key] == pytest.approx(values, rel=1e-12, abs=1e-6), key
        in_band = {key for key, (_, lo, hi) in want_p.items() if ref.bands_overlap(lo, hi, if_low, if_high)}
        got_in = {
            key
            for k, key in enumerate(
                zip(pf.rf_harmonic.tolist(), pf.lo_harmonic.tolist(), pf.sign.tolist(), strict=True)
            )
            if hit[i, k]
        }
        assert got_in == in_band
        want_r = {(m, n, b): (c, lo, hi) for m, n, b, c, lo, hi in ref.response_list(f_lo[i], if_low, if_high, order)}
        got_r = {
            (int(m), int(n), int(b)): (rc[i, k], rl[i, k], rh[i, k])
            for k, (m, n, b) in enumerate(zip(rf.rf_harmonic, rf.lo_harmonic, rf.branch, strict=True))
        }
        assert got_r.keys() == want_r.keys()
        for key, values in want_r.items():
            assert got_r[key] == pytest.approx(values, rel=1e-12, abs=1e-6), key


# ------------------------------------------------------------ properties

freqs = st.floats(min_value=1e3, max_value=1e10, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None)
@given(f_in=freqs, f_lo=freqs, bw=st.floats(1.0, 1e7), order=st.integers(1, 15), power=st.integers(-6, 6))
def test_scaling_every_frequency_by_a_power_of_two_scales_every_band_exactly(f_in, f_lo, bw, order, power):
    # Multiplying by 2^k is exact in binary floating point, and |m f ± n g|, m B / 2 and
    # (n g ± f)/m commute with it, so every band edge scales exactly (derived by hand).
    k = 2.0**power
    pf, rf = product_family(order), response_family(order)
    a = product_bands(np.array([f_in]), np.array([f_lo]), bw, pf)
    b = product_bands(np.array([f_in * k]), np.array([f_lo * k]), bw * k, pf)
    for x, y in zip(a, b, strict=True):
        assert np.array_equal(x * k, y)
    if_low, if_high = 0.25 * f_in, 0.25 * f_in + bw
    a = response_bands(np.array([f_lo]), if_low, if_high, rf)
    b = response_bands(np.array([f_lo * k]), if_low * k, if_high * k, rf)
    for x, y in zip(a, b, strict=True):
        assert np.array_equal(x * k, y)


@settings(max_examples=60, deadline=None)
@given(f_in=freqs, f_lo=freqs, bw=st.floats(1.0, 1e7), order=st.integers(1, 15), k=st.floats(1e-3, 1e3))
def test_scaling_by_any_factor_scales_bands(f_in, f_lo, bw, order, k):
    pf = product_family(order)
    a = product_bands(np.array([f_in]), np.array([f_lo]), bw, pf)
    b = product_bands(np.array([f_in * k]), np.array([f_lo * k]), bw * k, pf)
    for x, y in zip(a, b, strict=True):
        np.testing.assert_allclose(x * k, y, rtol=1e-9, atol=1e-9 * k * max(f_in, f_lo))


@settings(max_examples=60, deadline=None)
@given(f_in=freqs, f_lo=freqs, bw=st.floats(1.0, 1e8), order=st.integers(1, 25))
def test_no_band_is_negative(f_in, f_lo, bw, order):
    for c, lo, hi in (
        product_bands(np.array([f_in]), np.array([f_lo]), bw, product_family(order)),
        response_bands(np.array([f_lo]), 0.3 * f_in, 0.3 * f_in + bw, response_family(order)),
    ):
        assert (c >= 0).all() and (lo >= 0).all() and (lo <= hi).all()
        assert (lo <= c + 1e-6 * hi).all() and (c <= hi + 1e-6 * hi).all()
