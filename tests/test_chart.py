"""The chart's pure functions against hand-derived geometry.

``products.tuning_plane_strips`` (the regions of the RF-LO plane where a product lands in
the IF band) and ``chart.chart_data`` (the column data every chart source is built from).
Every expected value below is derived by hand from f = |m·f_RF ± n·f_LO| and the plan's
numbers, never copied from the code's output.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from mixchart.analysis import evaluate
from mixchart.chart import CLOSE_DB, ChartData, ViewOptions, chart_data
from mixchart.cli import example_path
from mixchart.plan import load_plan
from mixchart.products import tuning_plane_strips

MHz = 1e6


def _area(xs: np.ndarray, ys: np.ndarray) -> float:
    """Shoelace area of a polygon (vertices in order)."""
    return 0.5 * abs(float(np.dot(xs, np.roll(ys, -1)) - np.dot(ys, np.roll(xs, -1))))


# ---------------------------------------------------------------------- tuning-plane strips

WINDOW = (10 * MHz, 20 * MHz, 0.0, 40 * MHz)  # RF 10-20 MHz (x) by LO 0-40 MHz (y)
IF_LOW, IF_HIGH = 4.9 * MHz, 5.1 * MHz


def test_down_strips_are_the_if_band_regions_derived_by_hand():
    strips = tuning_plane_strips("down", 2, IF_LOW, IF_HIGH, WINDOW)
    found = {(int(m), int(n), int(s)): (x, y) for m, n, s, x, y in
             zip(strips.rf_harmonic, strips.lo_harmonic, strips.sign, strips.xs, strips.ys, strict=True)}
    # Derived by hand, inside x 10-20 MHz, y 0-40 MHz:
    #   (0,1): LO leakage, y in [4.9, 5.1]           -> a 10 x 0.2 rectangle, area 2
    #   (0,2): 2y in [4.9, 5.1] -> y in [2.45, 2.55] -> a 10 x 0.1 rectangle, area 1
    #   (1,1): |x - y| in [4.9, 5.1]: two branches, y = x - 5 (low side) and y = x + 5 (high
    #          side), each a parallelogram 0.2 high over 10 wide -> area 2 each
    #   (1,0): x in the IF band: off the window; (2,0), (1,1) sum (x + y = 5): off the window.
    #   Order 2 has no other product that reaches this window.
    assert set(found) == {(0, 1, 1), (0, 2, 1), (1, 1, -1)}
    assert len(strips) == 4  # (1,1) difference twice: one strip per branch
    areas = sorted(_area(x / MHz, y / MHz) for x, y in zip(strips.xs, strips.ys, strict=True))
    assert areas == pytest.approx([1.0, 2.0, 2.0, 2.0], rel=1e-9)
    for m, n, s, x, y in zip(strips.rf_harmonic, strips.lo_harmonic, strips.sign, strips.xs, strips.ys,
                             strict=True):
        # every vertex lies in the window and maps into the IF band through its own product
        assert (x >= WINDOW[0] - 1).all() and (x <= WINDOW[1] + 1).all()
        assert (y >= WINDOW[2] - 1).all() and (y <= WINDOW[3] + 1).all()
        f_out = np.abs(m * x + s * n * y)
        assert (f_out >= IF_LOW - 1.0).all() and (f_out <= IF_HIGH + 1.0).all(), (m, n, s)
    # the two (1,1) strips are the lines y = x -/+ 5 MHz, 0.2 MHz high, over the full x span
    ones = [(x, y) for m, n, x, y in zip(strips.rf_harmonic, strips.lo_harmonic, strips.xs, strips.ys, strict=True)
            if (m, n) == (1, 1)]
    offsets = sorted(round(float(np.mean(y - x)) / MHz, 9) for x, y in ones)
    assert offsets == [-5.0, 5.0]


def test_a_strip_of_order_m_is_the_if_width_over_m():
    # (2,2) difference: |2x - 2y| in [4.9, 5.1] -> y = x +/- 2.5 MHz, 0.1 MHz high (B/m with m = 2)
    window = (10 * MHz, 20 * MHz, 5 * MHz, 25 * MHz)
    strips = tuning_plane_strips("down", 4, IF_LOW, IF_HIGH, window)
    twos = [(x, y) for m, n, s, x, y in zip(strips.rf_harmonic, strips.lo_harmonic, strips.sign, strips.xs,
                                             strips.ys, strict=True) if (m, n, s) == (2, 2, -1)]
    assert len(twos) == 2
    for x, y in twos:
        assert _area(x / MHz, y / MHz) == pytest.approx(10 * 0.1, rel=1e-9)  # 10 wide, 0.1 high
        assert abs(float(np.mean(y - x))) / MHz == pytest.approx(2.5, rel=1e-9)


def test_up_strips_land_the_if_band_on_the_output():
    # Up-conversion: the IF band (x-independent input) mixed with the LO y lands on x.
    # (1,1) sum: x = y + IF -> the strip y in [x - 5.1, x - 4.9]; area over x 10-20: 2.
    strips = tuning_plane_strips("up", 2, IF_LOW, IF_HIGH, WINDOW)
    seen = 0
    for m, n, s, x, y in zip(strips.rf_harmonic, strips.lo_harmonic, strips.sign, strips.xs, strips.ys,
                             strict=True):
        if_hz = np.abs(x - s * n * y) / m if m else None  # x = |m·IF + s·n·y|, solved for IF on one branch
        if (m, n, s) == (1, 1, 1):
            assert _area(x / MHz, y / MHz) == pytest.approx(2.0, rel=1e-9)
            assert ((if_hz >= IF_LOW - 1) & (if_hz <= IF_HIGH + 1)).all()
            seen += 1
    assert seen == 1


def test_a_window_that_no_product_reaches_gives_no_strip():
    # RF 100-101 MHz, LO 300-301 MHz, IF 4.9-5.1 MHz, order 2: |m·x ± n·y| is at least
    # 300 - 2·101 = 98 MHz (for (1,1) diff: 199 MHz; (2,1): 99 MHz) -- never 5 MHz
    assert len(tuning_plane_strips("down", 2, IF_LOW, IF_HIGH, (100 * MHz, 101 * MHz, 300 * MHz, 301 * MHz))) == 0


def test_strips_validate_their_direction():
    with pytest.raises(ValueError, match="direction"):
        tuning_plane_strips("dwon", 2, IF_LOW, IF_HIGH, WINDOW)


# ---------------------------------------------------------------------- chart_data


@pytest.fixture(scope="module")
def fm() -> tuple:
    ev = evaluate(load_plan(example_path("fm_receiver")))
    return ev, chart_data(ev, ViewOptions(channel_hz=98e6))


def test_every_source_has_columns_of_one_length(fm):
    _, data = fm
    assert isinstance(data, ChartData)
    for name, columns in data.sources.items():
        lengths = {len(v) for v in columns.values()}
        assert len(lengths) == 1, (name, {k: len(v) for k, v in columns.items()})


def test_the_plan_line_and_the_marks_follow_the_tracking_lo(fm):
    ev, data = fm
    plan, scale = ev.plan, data.meta["scale"]
    assert data.meta["unit"] == "MHz" and scale == MHz
    line = data.sources["tuning_plan"]
    x, y = np.asarray(line["x"]) * scale, np.asarray(line["y"]) * scale
    # 88-108 MHz in 100 kHz steps: 201 channels; high-side LO = channel + 10.7 MHz on a 25 kHz grid
    assert x.size == 201 and x[0] == pytest.approx(88 * MHz) and x[-1] == pytest.approx(108 * MHz)
    assert np.abs(y - (x + 10.7 * MHz)).max() <= plan.lo.step_hz / 2 + 1.0


def test_the_current_channel_and_the_bands(fm):
    _, data = fm
    meta = data.meta
    # 98 MHz is channel (98 - 88) / 0.1 = 100; its LO 98 + 10.7 = 108.7 MHz (on the 25 kHz grid)
    assert meta["channel_index"] == 100 and meta["channel_hz"] == 98 * MHz
    assert meta["lo_hz"] == pytest.approx(108.7 * MHz)
    now = data.sources["tuning_now"]
    assert now["x"][0] == pytest.approx(98.0) and now["y"][0] == pytest.approx(108.7)
    # RF band: first channel - half the 200 kHz signal to last + half: 87.9-108.1 MHz
    assert (data.sources["rf_band"]["x0"][0], data.sources["rf_band"]["x1"][0]) == pytest.approx((87.9, 108.1))
    # IF passband: 10.7 MHz +/- 230/2 kHz = 10.585-10.815 MHz
    band = data.sources["out_output_band"]
    assert (band["y0"][0], band["y1"][0]) == pytest.approx((10.585, 10.815))
    # the windows contain what they show
    x0, x1, y0, y1 = meta["tuning_window"]
    assert x0 < 87.9 and x1 > 108.1 and y0 < 98.7 and y1 > 118.7


def test_strip_colours_follow_their_level_against_the_requirement(fm):
    ev, data = fm
    strips = data.sources["tuning_strips"]
    req = ev.plan.requirement.min_rejection_db
    for level, category, label in zip(strips["level"], strips["category"], strips["label"], strict=True):
        if label.startswith("wanted"):
            assert category == "wanted"
            continue
        margin = -level - req  # margin = rejection - requirement (chart.py's strip rule)
        want = "violates" if margin < 0 else "close" if margin < CLOSE_DB else "clear"
        assert category == want, (label, level)
    # the (2,2) level is the built-in table's: -20·log10(2) switching (6.02 dB) - 1 RF order step
    # (20 dB) - balance (30 dB), both m and n even (double-balanced) -> -56.02 dBc (levels.py rules)
    twos = [lv for lv, lb in zip(strips["level"], strips["label"], strict=True) if lb.startswith("(2,2)")]
    assert twos and all(lv == pytest.approx(-20 * math.log10(2) - 20 - 30) for lv in twos)


def test_hiding_orders_and_clear_products_removes_them(fm):
    ev, _ = fm
    low = chart_data(ev, ViewOptions(channel_hz=98e6, max_order_shown=4))
    assert all(m + n <= 4 for m, n in zip(low.sources["tuning_strips"]["m"], low.sources["tuning_strips"]["n"],
                                          strict=True))
    busy = chart_data(ev, ViewOptions(channel_hz=98e6, show_clear=False))
    assert "clear" not in set(busy.sources["tuning_strips"]["category"])
