"""The chart's pure functions against hand-derived geometry.

``products.tuning_plane_strips`` (the regions of the RF-LO plane where a product lands in
the IF band) and ``chart.chart_data`` (the column data every chart source is built from).
Every expected value below is derived by hand from f = |m·f_RF ± n·f_LO| and the plan's
numbers, never copied from the code's output.
"""

from __future__ import annotations

import copy
import math
import re

import numpy as np
import pytest

from mixchart.analysis import evaluate
from mixchart.chart import CATEGORIES, CLOSE_DB, ChartData, ViewOptions, build_chart, chart_data
from mixchart.cli import example_path
from mixchart.physics.loci import tuning_plane_strips
from mixchart.plan import load_plan, plan_from_dict
from mixchart.units import format_frequency

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


def test_strip_colours_tell_the_same_story_as_the_table(fm):
    # One verdict (issue "a planner you can drive", item 5): a strip takes its product's worst margin
    # across the tuning range after the filters, the table's row; the image and half-IF strips take
    # the verdict of the image and half-IF responses (the table's rows of those names).
    ev, data = fm
    strips = data.sources["tuning_strips"]
    wbp = ev.worst_by_product
    for label, category, m, n, margin in zip(strips["label"], strips["category"], strips["m"], strips["n"],
                                             strips["margin"], strict=True):
        if label.startswith("wanted"):
            assert category == "wanted"
            continue
        if label.startswith(("image ", "half-IF ")):
            rows = wbp[wbp["label"] == label.split(" (")[0]]
        else:
            sign = 1 if "sum" in label else -1
            rows = wbp[(wbp["kind"] == "product") & (wbp["rf_harmonic"] == m) & (wbp["lo_harmonic"] == n)
                       & (wbp["sign"] == sign)]
        worst = float(rows["margin_db"].min()) if len(rows) else math.inf
        assert (margin == worst) or (math.isnan(margin) and math.isinf(worst)), label
        want = "violates" if worst < 0 else "close" if worst < CLOSE_DB else "clear"
        assert category == want, (label, worst)
    # The (2,2) difference strip: its table level violates the requirement before the filters
    # (-64.61 dBc against 70 dB: one RF order step, the even-n residual of the 30 dB balance and
    # the -20 dBc LO second harmonic at -3 dBm, moved 1 dB per dB to -30 dBm, derived by hand),
    # but after the IF filter it is clear, and so is its colour now.
    k = strips["label"].index("(2,2) difference")
    residual = 20 * math.log10(10 ** (-30 / 20) + 10 ** (-20 / 20))
    assert strips["level"][k] == pytest.approx(-20 + residual - 27)
    assert -strips["level"][k] - 70 < 0 and strips["category"][k] == "clear"
    # the image is the plan's real weak point at 108 MHz: the strip and the table agree it fails
    k = strips["label"].index("image (1,1)")
    assert strips["category"][k] == "violates" and strips["margin"][k] < 0


def test_hiding_orders_and_clear_products_removes_them(fm):
    ev, _ = fm
    low = chart_data(ev, ViewOptions(channel_hz=98e6, max_order_shown=4))
    assert all(m + n <= 4 for m, n in zip(low.sources["tuning_strips"]["m"], low.sources["tuning_strips"]["n"],
                                          strict=True))
    busy = chart_data(ev, ViewOptions(channel_hz=98e6, show_clear=False))
    assert "clear" not in set(busy.sources["tuning_strips"]["category"])


# ---------------------------------------------------------------------- invented plans, end to end
#
# A down-converter: RF 10-20 MHz in 1 MHz steps, 100 kHz signal, high-side tracking LO,
# IF 5 MHz with a 200 kHz passband (4.9-5.1 MHz).  So f_LO = f_RF + 5 MHz: 15-25 MHz, and
# the middle channel 15 MHz has f_LO = 20 MHz.  An up-converter with the same numbers: the
# 5 MHz IF goes in, RF 10-20 MHz comes out, f_LO = f_RF + 5 MHz (high side).

IF_C, IF_B = 5 * MHz, 0.2 * MHz


def converter(direction: str = "down", **changes) -> dict:
    """The invented plan above (``direction`` "down" or "up"); ``changes`` replace top-level keys."""
    data = {
        "name": f"test {direction}-converter",
        "direction": direction,
        "rf": {"start_hz": "10 MHz", "stop_hz": "20 MHz", "step_hz": "1 MHz"},
        "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -30},
        "lo": {"mode": "tracking", "side": "high"},
        "if": {"center_hz": "5 MHz", "bandwidth_hz": "200 kHz"},
        "max_order": 5,
        "mixer": {"rf_ref_dbm": -30},
        "requirement": {"min_rejection_db": 60},
    }
    data.update(copy.deepcopy(changes))
    return data


def _cut(xs: np.ndarray, ys: np.ndarray, y: float) -> tuple[float, float] | None:
    """Where the horizontal line at ``y`` crosses a convex polygon: (x_min, x_max), or None."""
    hits = []
    for k in range(len(xs)):
        x0, y0, x1, y1 = xs[k], ys[k], xs[(k + 1) % len(xs)], ys[(k + 1) % len(xs)]
        if min(y0, y1) <= y <= max(y0, y1):
            if y0 == y1:
                hits += [x0, x1]
            else:
                hits.append(x0 + (y - y0) * (x1 - x0) / (y1 - y0))
    return (min(hits), max(hits)) if hits else None


def _cuts_at(data: ChartData, y_mhz: float) -> dict[tuple[int, int], list[tuple[float, float, str, str]]]:
    """Every shown strip's cut at LO = ``y_mhz``: (m, n) -> [(x_min, x_max, label, category)]."""
    s = data.sources["tuning_strips"]
    out: dict[tuple[int, int], list] = {}
    for xs, ys, m, n, label, cat in zip(s["xs"], s["ys"], s["m"], s["n"], s["label"], s["category"], strict=True):
        cut = _cut(np.asarray(xs), np.asarray(ys), y_mhz)
        if cut is not None and cut[1] - cut[0] > 1e-9:
            out.setdefault((int(m), int(n)), []).append((*cut, label, cat))
    return out


@pytest.fixture(scope="module")
def down() -> tuple:
    ev = evaluate(plan_from_dict(converter("down")))
    return ev, chart_data(ev, ViewOptions(channel_hz=15 * MHz))


@pytest.fixture(scope="module")
def up() -> tuple:
    ev = evaluate(plan_from_dict(converter("up", max_order=3)))
    return ev, chart_data(ev, ViewOptions(channel_hz=15 * MHz))


def test_down_plan_line_and_current_channel(down):
    _, data = down
    # derived by hand: 11 channels 10, 11, ..., 20 MHz; f_LO = f_RF + 5 MHz (high side)
    line = data.sources["tuning_plan"]
    np.testing.assert_allclose(line["x"], np.arange(10, 21))
    np.testing.assert_allclose(line["y"], np.arange(10, 21) + 5.0)
    meta = data.meta
    assert meta["channel_index"] == 5 and meta["channel_hz"] == 15 * MHz and meta["lo_hz"] == 20 * MHz
    assert data.sources["tuning_now"]["x"] == [15.0] and data.sources["tuning_now"]["y"] == [20.0]
    # RF band: 10 - 0.05 to 20 + 0.05 MHz (half the 100 kHz signal each side); IF 4.9-5.1 MHz
    assert (data.sources["rf_band"]["x0"][0], data.sources["rf_band"]["x1"][0]) == pytest.approx((9.95, 20.05))
    band = data.sources["out_output_band"]
    assert (band["y0"][0], band["y1"][0]) == pytest.approx((4.9, 5.1))
    # the tuning window holds the RF band, the LO range 15-25 MHz and the image side up to
    # f_LO,max + f_IF = 30 MHz (chart.py's _windows: "the RF band and its image side, the LO range")
    x0, x1, y0, y1 = meta["tuning_window"]
    assert x0 <= 9.95 and x1 >= 30.0 and y0 <= 15.0 and y1 >= 25.0
    assert meta["tuning_x_label"] == "RF input (MHz)" and meta["output_y_label"] == "IF output (MHz)"


def test_down_strips_cut_along_the_current_lo(down):
    _, data = down
    cuts = _cuts_at(data, 20.0)  # the current channel's LO, 20 MHz
    # Derived by hand, f_LO = 20 MHz, IF 4.9-5.1 MHz: an input at x responds through (m, n) when
    # |m·x ± n·20| is in [4.9, 5.1], i.e. x = |n·20 ± [4.9, 5.1]| / m, a band B/m = 0.2/m wide.
    wanted = [c for c in cuts[(1, 1)] if c[3] == "wanted"]
    image = [c for c in cuts[(1, 1)] if c[3] != "wanted"]
    # wanted: 20 - x in [4.9, 5.1] -> x in [14.9, 15.1], around the 15 MHz channel
    assert len(wanted) == 1 and wanted[0][:2] == pytest.approx((14.9, 15.1)) and wanted[0][2] == "wanted (1,1)"
    # image (1,1) across the LO: x - 20 in [4.9, 5.1] -> [24.9, 25.1] = f_RF + 2·f_IF = 25 MHz
    assert len(image) == 1 and image[0][:2] == pytest.approx((24.9, 25.1)) and image[0][2] == "image (1,1)"
    # (2,2): |2x - 40| in [4.9, 5.1] -> x in [17.45, 17.55] (half-IF, f_LO - f_IF/2 = 17.5 MHz) and
    # [22.45, 22.55]; each 0.1 MHz = B/2 wide
    assert sorted(c[:2] for c in cuts[(2, 2)]) == [pytest.approx((17.45, 17.55)), pytest.approx((22.45, 22.55))]
    # (2,1): |2x - 20| in [4.9, 5.1] -> [12.45, 12.55] (the other branch, [7.45, 7.55], is left of
    # the window, which starts below the RF band at 9.95 but above 7.55: see the window check)
    assert data.meta["tuning_window"][0] > 7.55
    assert [c[:2] for c in cuts[(2, 1)]] == [pytest.approx((12.45, 12.55))]
    # (3,2): |3x - 40| in [4.9, 5.1] -> [34.9/3, 35.1/3] and [44.9/3, 45.1/3], each 0.2/3 wide
    assert sorted(c[:2] for c in cuts[(3, 2)]) == [
        pytest.approx((34.9 / 3, 35.1 / 3)), pytest.approx((44.9 / 3, 45.1 / 3))
    ]
    # (2,3): |2x - 60| in [4.9, 5.1] -> [27.45, 27.55] (and [32.45, 32.55] if the window reaches it)
    twothree = sorted(c[:2] for c in cuts[(2, 3)])
    assert twothree[0] == pytest.approx((27.45, 27.55))
    # every cut is B/m wide (published relation: an IF passband B maps to B/m at the input)
    for (m, _n), found in cuts.items():
        for x_lo, x_hi, _label, _cat in found:
            if data.meta["tuning_window"][0] < x_lo and x_hi < data.meta["tuning_window"][1]:  # not clipped
                assert x_hi - x_lo == pytest.approx(0.2 / m, rel=1e-9), (m, _n)


def test_the_wanted_strip_holds_every_channel_of_the_plan(down):
    ev, data = down
    s = data.sources["tuning_strips"]
    k = s["category"].index("wanted")
    assert s["category"].count("wanted") == 1 and (s["m"][k], s["n"][k]) == (1, 1)
    # the wanted strip is |x - y| in [4.9, 5.1] with y above x: at every channel's LO (x + 5)
    # it covers [x - 0.1, x + 0.1] (derived by hand), so each plan point is inside it
    for x, y in zip(ev.channels_hz / MHz, ev.lo_hz / MHz, strict=True):
        x_lo, x_hi = _cut(np.asarray(s["xs"][k]), np.asarray(s["ys"][k]), y)
        assert (x_lo, x_hi) == pytest.approx((x - 0.1, x + 0.1))
    assert s["color"][k] == CATEGORIES["wanted"][1]


def test_strip_category_colour_and_style_follow_the_requirement(down):
    ev, data = down
    s = data.sources["tuning_strips"]
    req = ev.plan.requirement.min_rejection_db
    # each category's strips are drawn by a renderer of their own (named strips_<category>, showing
    # the source's rows of that category) with that category's hatch, colour and outline
    handle = build_chart(data)
    styles = {}
    for r in handle.tuning.renderers:
        if r.name.startswith("strips_"):
            cat, g = r.name.removeprefix("strips_"), r.glyph
            assert r.data_source is handle.sources["tuning_strips"]
            assert (r.view.filter.column_name, r.view.filter.group) == ("category", cat)
            assert g.hatch_color == g.line_color == CATEGORIES[cat][1]
            styles[cat] = {(g.hatch_pattern, float(g.hatch_weight), float(g.line_width))}
    assert set(styles) == set(CATEGORIES)
    for label, cat, colour in zip(s["label"], s["category"], s["color"], strict=True):
        assert colour == CATEGORIES[cat][1]  # the legend's colour for the category
        if cat == "wanted":
            continue
        # the strip's after-filter margin (its product's worst across the range): < 0 violates,
        # < CLOSE_DB close, else clear
        margin = s["margin"][s["label"].index(label)]
        want = ("clear" if math.isnan(margin) else "violates" if margin < 0
                else "close" if margin < CLOSE_DB else "clear")
        assert cat == want, label
    # the image is the (1,1) conversion itself, 0 dBc by definition of dBc, with no preselector:
    # its response margin is 0 - 60 = -60 dB (derived by hand), violates
    k = s["label"].index("image (1,1)")
    assert s["level"][k] == pytest.approx(0.0) and s["category"][k] == "violates"
    assert s["margin"][k] == pytest.approx(-req)
    # one style per category, each its own (a violation's outline no thinner than a clear product's)
    assert all(len(v) == 1 for v in styles.values())
    assert len({next(iter(v)) for v in styles.values()}) == len(styles)
    if "violates" in styles and "clear" in styles:
        assert next(iter(styles["violates"]))[2] > next(iter(styles["clear"]))[2]


def test_down_points_along_the_lo_are_the_hand_enumerated_responses(down):
    _, data = down
    pts = data.sources["tuning_points"]
    x0, x1 = data.meta["tuning_window"][:2]
    # Derived by hand: the responses of order <= 5 with f_LO = 20 MHz sit at |n·20 ± 5| / m
    # (centre of IF), m >= 1; the wanted (1,1) at 15 MHz is left out (it is not a spur):
    #   (1,0) 5          (1,1) 25 image     (1,2) 35, 45      (1,3) 55, 65     (1,4) 75, 85
    #   (2,0) 2.5        (2,1) 7.5, 12.5    (2,2) 17.5 half-IF, 22.5           (2,3) 27.5, 32.5
    #   (3,0) 5/3        (3,1) 5, 25/3      (3,2) 35/3, 15                     (4,0) 1.25
    #   (4,1) 3.75, 6.25 (5,0) 1
    hand = {(1, 0): [5], (1, 1): [25], (1, 2): [35, 45], (1, 3): [55, 65], (1, 4): [75, 85], (2, 0): [2.5],
            (2, 1): [7.5, 12.5], (2, 2): [17.5, 22.5], (2, 3): [27.5, 32.5], (3, 0): [5 / 3], (3, 1): [5, 25 / 3],
            (3, 2): [35 / 3, 15], (4, 0): [1.25], (4, 1): [3.75, 6.25], (5, 0): [1]}
    expected = sorted((m, n, f) for (m, n), fs in hand.items() for f in fs if x0 <= f <= x1)
    found = sorted((int(m), int(n), float(x)) for m, n, x in zip(pts["m"], pts["n"], pts["x"], strict=True))
    assert [e[:2] for e in expected] == [f[:2] for f in found]
    np.testing.assert_allclose([f[2] for f in found], [e[2] for e in expected], rtol=1e-12)
    np.testing.assert_array_equal(pts["y"], 20.0)  # all on the current LO line
    labels = {(int(m), int(n), round(float(x), 6)): lb for m, n, x, lb in
              zip(pts["m"], pts["n"], pts["x"], pts["label"], strict=True)}
    assert labels[(1, 1, 25.0)] == "image"  # f_RF + 2·f_IF
    assert labels[(2, 2, 17.5)] == "half-IF"  # f_LO - f_IF/2, between the channel and the LO
    assert labels[(2, 2, 22.5)] == "spur"  # the (2,2) on the far side of the LO is not the half-IF
    # each point lies inside a shown strip of its own (m, n) (the two functions agree)
    cuts = _cuts_at(data, 20.0)
    for m, n, x in zip(pts["m"], pts["n"], pts["x"], strict=True):
        assert any(lo - 1e-9 <= x <= hi + 1e-9 for lo, hi, *_ in cuts[(int(m), int(n))]), (m, n, x)
    # point colours follow their own margin (the response rule is the engine's; only the mapping is checked)
    for margin, cat, colour in zip(pts["margin"], pts["category"], pts["color"], strict=True):
        assert cat == ("violates" if margin < 0 else "close" if margin < CLOSE_DB else "clear")
        assert colour == CATEGORIES[cat][1]


def test_down_output_plane_wanted_arm_and_image_arm(down):
    _, data = down
    lines = data.sources["out_lines"]
    # Derived by hand: at f_LO = 20 MHz the (1,1) difference is the V y = |x - 20|; the arm
    # x < 20 (y = 20 - x) holds the wanted input 15 MHz -> 5 MHz; the arm x > 20 (y = x - 20)
    # holds the image 25 MHz -> 5 MHz.
    arms = {}
    for x0, y0, x1, y1, m, n, label, cat in zip(lines["x0"], lines["y0"], lines["x1"], lines["y1"], lines["m"],
                                                 lines["n"], lines["label"], lines["category"], strict=True):
        # every line lies on y = |m·x ± n·20| at both ends
        for x, y in ((x0, y0), (x1, y1)):
            assert min(abs(y - abs(m * x - n * 20)), abs(y - (m * x + n * 20))) <= 1e-9 * 40, (m, n, x, y)
        if (m, n) == (1, 1):
            arms[label] = (min(x0, x1), max(x0, x1), cat, (x0, y0, x1, y1))
    lo, hi, cat, seg = arms["(1,1) wanted"]
    assert cat == "wanted" and lo <= 15 <= hi and hi <= 20 + 1e-9
    x0, y0, x1, y1 = seg
    assert y0 + (15 - x0) * (y1 - y0) / (x1 - x0) == pytest.approx(5.0)  # through (15 MHz, 5 MHz)
    lo, hi, cat, _ = arms["(1,1) image arm"]
    assert lo >= 20 - 1e-9 and lo <= 25 <= hi and cat == "violates"
    # the wanted point of the output plane: input 15 MHz at the 5 MHz IF, margin NaN (documented in
    # chart_layers._point_columns: the wanted row has no margin)
    pts = data.sources["out_points"]
    w = [i for i, lb in enumerate(pts["label"]) if lb == "wanted"]
    assert w and all((pts["x"][i], pts["y"][i]) == pytest.approx((15.0, 5.0)) for i in w)
    assert all(math.isnan(pts["margin"][i]) for i in w)


def test_normalised_output_plane_is_divided_by_the_lo(down):
    ev, _ = down
    data = chart_data(ev, ViewOptions(channel_hz=15 * MHz, normalised=True))
    assert data.meta["out_scale"] == 20 * MHz and data.meta["out_unit"] == "× LO"
    # derived by hand: the wanted arm y = 1 - x passes through (15/20, 5/20) = (0.75, 0.25)
    lines = data.sources["out_lines"]
    k = lines["label"].index("(1,1) wanted")
    x0, y0, x1, y1 = lines["x0"][k], lines["y0"][k], lines["x1"][k], lines["y1"][k]
    assert y0 + (0.75 - x0) * (y1 - y0) / (x1 - x0) == pytest.approx(0.25)
    band = data.sources["out_output_band"]
    assert (band["y0"][0], band["y1"][0]) == pytest.approx((4.9 / 20, 5.1 / 20))
    assert data.meta["output_x_label"] == "RF input / LO"


def test_up_strips_along_the_current_lo(up):
    _, data = up
    assert data.meta["lo_hz"] == 20 * MHz and data.meta["tuning_x_label"] == "RF output (MHz)"
    cuts = _cuts_at(data, 20.0)
    # Derived by hand, up-conversion: the IF band 4.9-5.1 MHz through (m, n) with f_LO = 20 MHz
    # lands on x = |m·[4.9, 5.1] ± n·20|, a band m·B = 0.2·m wide at the output.
    wanted = [c for c in cuts[(1, 1)] if c[3] == "wanted"]
    other = [c for c in cuts[(1, 1)] if c[3] != "wanted"]
    # wanted: 20 - IF -> [14.9, 15.1] around the 15 MHz channel (high-side LO takes the difference)
    assert len(wanted) == 1 and wanted[0][:2] == pytest.approx((14.9, 15.1)) and wanted[0][2] == "wanted (1,1)"
    # unwanted sideband: 20 + IF -> [24.9, 25.1] = f_RF + 2·f_IF
    assert len(other) == 1 and other[0][:2] == pytest.approx((24.9, 25.1)) and other[0][2] == "(1,1) sum"
    # (2,1): |2·IF ± 20| -> 20 - [9.8, 10.2] = [9.8, 10.2] and 20 + [9.8, 10.2] = [29.8, 30.2], 0.4 = 2B wide
    assert sorted(c[:2] for c in cuts[(2, 1)]) == [pytest.approx((9.8, 10.2)), pytest.approx((29.8, 30.2))]
    # (2,0) and (3,0): the IF harmonics 2·IF = [9.8, 10.2] and 3·IF = [14.7, 15.3], for every LO
    assert [c[:2] for c in cuts[(2, 0)]] == [pytest.approx((9.8, 10.2))]
    assert [c[:2] for c in cuts[(3, 0)]] == [pytest.approx((14.7, 15.3))]


def test_up_points_output_plane_and_rf_tint(up):
    _, data = up
    pts = data.sources["tuning_points"]
    # Derived by hand, order <= 3, IF 5 MHz, f_LO 20 MHz, output products |m·5 ± n·20| in the window
    # (the wanted 15 MHz left out): (0,1) 20 LO leakage, (1,1) 25 unwanted sideband, (2,1) 10 and 30,
    # (2,0) 10, (3,0) 15; (1,0) 5, (0,2) 40, (1,2) 35 and 45, (0,3) 60 are outside the window.
    x0, x1 = data.meta["tuning_window"][:2]
    hand = [(0, 1, 20), (1, 1, 25), (2, 1, 10), (2, 1, 30), (2, 0, 10), (3, 0, 15),
            (1, 0, 5), (0, 2, 40), (1, 2, 35), (1, 2, 45), (0, 3, 60)]
    expected = sorted((m, n, float(f)) for m, n, f in hand if x0 <= f <= x1)
    found = sorted((int(m), int(n), float(x)) for m, n, x in zip(pts["m"], pts["n"], pts["x"], strict=True))
    assert found == [pytest.approx(e) for e in expected]
    labels = dict(zip(zip(pts["m"], pts["n"], strict=True), pts["label"], strict=True))
    assert labels[(1, 1)] == "unwanted sideband" and labels[(0, 1)] == "LO leakage"
    # output plane: the IF input 5 MHz against the RF output; the wanted arm y = 20 - x holds (5, 15)
    lines = data.sources["out_lines"]
    k = lines["label"].index("(1,1) wanted")
    lx0, ly0, lx1, ly1 = lines["x0"][k], lines["y0"][k], lines["x1"][k], lines["y1"][k]
    assert ly0 + (5 - lx0) * (ly1 - ly0) / (lx1 - lx0) == pytest.approx(15.0)
    assert data.meta["output_x_label"] == "IF input (MHz)" and data.meta["output_y_label"] == "RF output (MHz)"
    # no RF filter described: a transmitter's output filter is then an ideal brick wall over the RF
    # range widened by half the signal (analysis docstring), 9.95-20.05 MHz: tinted at full strength
    # (chart docstring: strongest in the passband), nothing outside
    for name, a, b in (("tuning_skirt", "x0", "x1"), ("out_output_skirt", "y0", "y1")):
        sk = data.sources[name]
        assert np.min(sk[a]) == pytest.approx(9.95) and np.max(sk[b]) == pytest.approx(20.05)
        np.testing.assert_allclose(sk["alpha"], 0.30)
        np.testing.assert_array_equal(sk["atten_db"], 0.0)
        np.testing.assert_allclose(sk[a][1:], sk[b][:-1])  # contiguous rows
    assert len(data.sources["out_input_skirt"]["x0"]) == 0  # no IF filter described: no input tint


def test_an_unfiltered_receiver_has_no_rf_tint_and_a_brick_wall_if_tint(down):
    _, data = down
    # analysis docstring: a receiver without a described preselector rejects nothing by filtering
    assert len(data.sources["tuning_skirt"]["x0"]) == 0
    # the undescribed IF filter is an ideal brick wall over the IF passband 4.9-5.1 MHz
    sk = data.sources["out_output_skirt"]
    assert np.min(sk["y0"]) == pytest.approx(4.9) and np.max(sk["y1"]) == pytest.approx(5.1)
    np.testing.assert_allclose(sk["alpha"], 0.30)


def test_a_brick_wall_if_filter_weaker_than_the_requirement_tints_its_stopband():
    # IF brick wall 4.9-5.1 MHz with 40 dB stopband against a 60 dB requirement: the tint is
    # 0.30 in the passband and 0.30·(1 - 40/60) = 0.10 in the stopband (chart docstring: the
    # tint fades to nothing where the filter alone meets the requirement; _skirt's linear rule)
    plan = converter(filters={"if": {"kind": "brickwall", "response": "bandpass", "f_center_hz": "5 MHz",
                                     "bandwidth_hz": "200 kHz", "stop_atten_db": 40}})
    data = chart_data(evaluate(plan_from_dict(plan)), ViewOptions(channel_hz=15 * MHz))
    sk = data.sources["out_output_skirt"]
    mid = 0.5 * (np.asarray(sk["y0"]) + np.asarray(sk["y1"]))
    inside = (mid > 4.9) & (mid < 5.1)
    np.testing.assert_allclose(sk["alpha"][inside], 0.30)
    np.testing.assert_allclose(sk["alpha"][~inside], 0.10)
    np.testing.assert_allclose(sk["atten_db"][~inside], 40.0)
    o = data.meta["output_window"]
    assert np.min(sk["y0"]) == pytest.approx(o[2]) and np.max(sk["y1"]) == pytest.approx(o[3])  # whole axis


def test_skirt_helper_directly():
    from mixchart.chart import _skirt
    from mixchart.filters import build_filter

    # no filter: 0 dB inside the band, infinite outside -> rows exactly over the band, in scaled units
    rows = _skirt(None, 0.0, 20 * MHz, None, (4.9 * MHz, 5.1 * MHz), 60.0, MHz)
    assert np.min(rows["x0"]) == pytest.approx(4.9) and np.max(rows["x1"]) == pytest.approx(5.1)
    np.testing.assert_allclose(rows["alpha"], 0.30)
    assert (np.asarray(rows["x1"]) > np.asarray(rows["x0"])).all()
    # a filter that alone meets the requirement (40 dB stopband, 30 dB required) is not tinted outside
    filt = build_filter({"kind": "brickwall", "response": "bandpass", "f_center_hz": 5e6, "bandwidth_hz": 2e5,
                         "stop_atten_db": 40})
    rows = _skirt(filt, 0.0, 20 * MHz, None, filt.passband_hz(), 30.0, MHz)
    assert np.min(rows["x0"]) == pytest.approx(4.9) and np.max(rows["x1"]) == pytest.approx(5.1)
    # the same filter against 60 dB: 0.30·(1 - 40/60) = 0.10 outside, from 0 to 20 MHz
    rows = _skirt(filt, 0.0, 20 * MHz, None, filt.passband_hz(), 60.0, MHz)
    assert np.min(rows["x0"]) == pytest.approx(0.0) and np.max(rows["x1"]) == pytest.approx(20.0)
    assert set(np.round(rows["alpha"], 12)) == {0.1, 0.3}


@pytest.mark.parametrize("which", ["down", "up"])
def test_every_column_has_one_length_and_finite_numbers(which, down, up):
    _, data = down if which == "down" else up
    for name, columns in data.sources.items():
        lengths = {len(v) for v in columns.values()}
        assert len(lengths) == 1, (name, {k: len(v) for k, v in columns.items()})
        for key, values in columns.items():
            if key in ("xs", "ys"):
                assert all(np.isfinite(np.asarray(v)).all() and len(v) >= 3 for v in values), (name, key)
                continue
            arr = np.asarray(values)
            if arr.dtype.kind not in "fiu":
                continue
            if key == "margin" and name in ("tuning_strips", "out_lines"):
                # chart: a locus with no finite margin (the wanted conversion, a product never
                # evaluated at this order) is NaN, drawn as wanted or clear, never as a violation
                nan = np.isnan(arr)
                assert all(c in ("wanted", "clear") for c in np.asarray(columns["category"])[nan]), name
                continue
            if key == "margin" and "label" in columns:
                # chart_layers._point_columns: the wanted row and co-channel responses have no margin, shown
                # as NaN; nothing else is NaN
                nan = np.isnan(arr)
                kinds = np.asarray(columns["kind"])[nan] if "kind" in columns else np.full(nan.sum(), "product")
                assert all(lb == "wanted" or k == "response"
                           for lb, k in zip(np.asarray(columns["label"])[nan], kinds, strict=True)), name
                assert np.isfinite(arr[~nan]).all(), name
            elif key == "rejection" and "kind" in columns:
                # chart_layers._point_columns: only responses have an input-referred rejection; products NaN
                response = np.asarray(columns["kind"]) == "response"
                assert np.isnan(arr[~response]).all() and np.isfinite(arr[response]).all(), name
            else:
                assert np.isfinite(arr).all(), (name, key)
    for key in ("tuning_window", "output_window"):
        assert len(data.meta[key]) == 4 and all(math.isfinite(v) for v in data.meta[key])


def test_low_side_receiver_with_the_lo_below_the_if_marks_the_difference_arm_wanted():
    # RF 100-110 MHz, IF 70 MHz, low-side LO = f_RF - 70 MHz: 30-40 MHz.  Channel 105 MHz, f_LO 35 MHz.
    # Derived by hand: the wanted output is 105 - 35 = 70 MHz, the difference arm y = x - 35; the sum
    # y = x + 35 gives 140 MHz at 105 MHz, not the IF.
    plan = plan_from_dict({"direction": "down", "rf": {"start_hz": "100 MHz", "stop_hz": "110 MHz", "step_hz": "1 MHz"},
                           "signal": {"bandwidth_hz": "100 kHz"}, "lo": {"mode": "tracking", "side": "low"},
                           "if": {"center_hz": "70 MHz", "bandwidth_hz": "200 kHz"}, "max_order": 3})
    ev = evaluate(plan)
    assert ev.lo_hz[5] == 35 * MHz and ev.f_wanted_out_hz[5] == 70 * MHz  # the engine agrees
    lines = chart_data(ev, ViewOptions(channel_hz=105 * MHz)).sources["out_lines"]
    wanted = [k for k, lb in enumerate(lines["label"]) if lb == "(1,1) wanted"]
    assert len(wanted) == 1
    k = wanted[0]
    x0, y0, x1, y1 = lines["x0"][k], lines["y0"][k], lines["x1"][k], lines["y1"][k]
    assert y0 + (105 - x0) * (y1 - y0) / (x1 - x0) == pytest.approx(70.0)


def test_output_plane_lines_take_the_verdict_of_what_they_carry(fm):
    # A line is coloured by the worst margin at this channel of the rows on it: the wanted signal's
    # product (m, n, sign) and, for a receiver's difference line, the responses (m, n) where it
    # crosses the IF; with clear products hidden, no red line is left where nothing fails.
    ev, _ = fm
    channel = 108e6
    data = chart_data(ev, ViewOptions(channel_hz=channel, show_clear=False))
    frame = ev.channel_frame(ev.nearest_channel(channel))
    lines = data.sources["out_lines"]
    assert lines["label"], "some lines are shown"
    for label, m, n, cat, margin in zip(lines["label"], lines["m"], lines["n"], lines["category"], lines["margin"],
                                        strict=True):
        if cat == "wanted":
            continue
        assert cat in ("violates", "close")  # clear ones are hidden
        sign = 1 if "sum" in label else -1
        on_line = frame[(frame["rf_harmonic"] == m) & (frame["lo_harmonic"] == n)
                        & (((frame["kind"] == "product") & (frame["sign"] == sign))
                           | ((frame["kind"] == "response") & (sign == -1)))]
        assert margin == pytest.approx(on_line["margin_db"].min()), label
        assert (cat == "violates") == (on_line["margin_db"].min() < 0), label


def test_a_tracking_preselector_is_shaded_along_the_plan_line(fm):
    # Issue "a planner you can drive", item 6.  The FM example's three tuned circuits (Q 40) track the
    # channel: no fixed band at the current channel; instead nested bands follow the plan line, each
    # edge where the tuned-circuit loss centred on that point's channel reaches its level
    # (textbook formula, tests/reference_filters.py tuned_circuit_loss_db; the grid steps 2.3 % in offset).
    from reference_filters import tuned_circuit_loss_db

    ev, data = fm
    assert len(data.sources["tuning_skirt"]["x0"]) == 0
    track = data.sources["tuning_track"]
    assert len(track["xs"]) >= 3 and list(track["alpha"]) == sorted(track["alpha"], reverse=True)
    lo_of = dict(zip(np.round(ev.lo_hz / MHz, 6), ev.channels_hz, strict=False))
    for xs, ys, level in zip(track["xs"], track["ys"], track["atten_db"], strict=True):
        for x, y in zip(xs, ys, strict=True):
            channel = lo_of[round(y, 6)]
            loss = tuned_circuit_loss_db(x * MHz, channel, 40, 3)
            assert loss <= level + 1e-9
            # one grid step (2.3 % of the offset from the channel) further out the loss is above it
            beyond = channel + (x * MHz - channel) * 1.0233 + (1.0 if x * MHz >= channel else -1.0)
            assert tuned_circuit_loss_db(beyond, channel, 40, 3) > level


@pytest.mark.parametrize("which", ["down", "up"])
def test_hover_texts_show_a_dash_for_no_number_and_say_where_the_level_is(which, down, up):
    # Item 9: the wanted row's margin reads "—", not NaN; a product has no input-referred rejection
    # ("—"); the level says which port it is at (IF output for a receiver, RF output for a transmitter).
    _, data = down if which == "down" else up
    pts = data.sources["out_points"]
    port = "IF" if which == "down" else "RF"
    assert all(t.endswith(f"dBc at the {port} output") for t in pts["level_text"])
    for label, kind, margin, text, rej in zip(pts["label"], pts["kind"], pts["margin"], pts["margin_text"],
                                              pts["rejection_text"], strict=True):
        if label == "wanted":
            assert text == "—"
        elif np.isfinite(margin):
            assert text == f"{margin:+.1f} dB"
        if kind == "product":
            assert rej == "—"
    assert "wanted" in pts["label"]


def test_the_limiting_rows_are_never_off_the_chart_unseen():
    # Item 7: the Ku converter's LO leakage (9.75 GHz, -16.5 dB) and LO harmonics sit far above the
    # output plane's IF window; each within CLOSE_DB of its requirement is marked at the edge (the
    # worst first, at most five), inside the window, its text naming it, where it is and its margin.
    ev = evaluate(load_plan(example_path("ku_block_converter")))
    data = chart_data(ev)
    x0, x1, y0, y1 = data.meta["output_window"]
    off = data.sources["out_offchart"]
    frame = ev.channel_frame(data.meta["channel_index"])
    scale = data.meta["out_scale"]
    outside = frame[(frame["kind"] == "product") & (frame["label"] != "wanted") & (frame["margin_db"] < CLOSE_DB)
                    & ((frame["f_center_hz"] / scale > y1) | (frame["f_center_hz"] / scale < y0))]
    assert len(outside) >= 5
    want = outside.sort_values("margin_db", kind="stable").head(5)
    assert list(off["margin"]) == pytest.approx(list(want["margin_db"]))
    assert all(x0 <= x <= x1 and y0 <= y <= y1 for x, y in zip(off["x"], off["y"], strict=True))
    first = want.iloc[0]
    assert off["text"][0] == (f"{first['label']} ({first['rf_harmonic']},{first['lo_harmonic']}) at "
                              f"{format_frequency(first['f_center_hz'])}, off the chart: {first['margin_db']:+.1f} dB")
    assert off["category"][0] == "violates"


def test_margin_against_channel_is_every_channels_worst_margin(fm):
    # Item 14: a plot of worst margin against channel, on the tuning plane's RF axis, with the
    # current channel marked; it is the evaluation's per-channel worst margin, coloured alike.
    ev, data = fm
    src = data.sources["margin_channels"]
    np.testing.assert_allclose(src["x"], ev.channels_hz / MHz)
    np.testing.assert_allclose(src["margin"], ev.worst_margin_db)
    assert all(c == ("violates" if m < 0 else "close" if m < CLOSE_DB else "clear")
               for c, m in zip(src["category"], src["margin"], strict=True))
    now = data.sources["margin_now"]
    i = ev.nearest_channel(98e6)
    assert now["x"] == [pytest.approx(ev.channels_hz[i] / MHz)] and now["y"] == [pytest.approx(ev.worst_margin_db[i])]
    handle = build_chart(data)
    assert handle.margin.x_range is handle.tuning.x_range  # zoom one, zoom both
    # its y range is set from Python (a range BokehJS fits after painting makes it paint twice):
    # every plotted margin and both guide lines (0 dB, CLOSE_DB) lie inside it
    lo, hi = data.meta["margin_y_window"]
    assert (handle.margin.y_range.start, handle.margin.y_range.end) == (lo, hi)
    shown = np.concatenate([src["y"], now["y"], [0.0, CLOSE_DB]])
    assert lo < shown.min() and shown.max() < hi
    # a plan change that moves the margins moves the range with them
    from mixchart.chart import update_chart

    worse = evaluate(ev.plan.with_changes({"requirement.min_rejection_db": ev.plan.requirement.min_rejection_db + 20}))
    moved = chart_data(worse, ViewOptions(channel_hz=98e6))
    update_chart(handle, moved)
    assert (handle.margin.y_range.start, handle.margin.y_range.end) == moved.meta["margin_y_window"]
    assert moved.meta["margin_y_window"][0] < lo - 19.0  # every margin 20 dB lower


# ---------------------------------------------------------------------- axes, units, clutter, tooltips
#
# Issue "Axes, units, clutter" and "Tooltips".  An AM broadcast receiver invented for these tests:
# RF 530-1700 kHz in 10 kHz steps, 10 kHz signal, high-side LO, a 455 kHz IF 10 kHz wide.

def _am_receiver() -> dict:
    return {"name": "test AM receiver", "direction": "down",
            "rf": {"start_hz": "530 kHz", "stop_hz": "1700 kHz", "step_hz": "10 kHz"},
            "signal": {"bandwidth_hz": "10 kHz", "level_dbm": -40}, "lo": {"mode": "tracking", "side": "high"},
            "if": {"center_hz": "455 kHz", "bandwidth_hz": "10 kHz"}, "max_order": 5,
            "requirement": {"min_rejection_db": 50}}


@pytest.mark.parametrize(("plan", "units", "labels"), [
    # FM: RF 88-108 MHz, LO 98.7-118.7 MHz, the IF axis 10.7 MHz +/- 3.5 x 230 kHz: all in MHz
    ("fm_receiver", {"tuning_x": "MHz", "tuning_y": "MHz", "output_x": "MHz", "output_y": "MHz"},
     ("RF input (MHz)", "LO (MHz)", "RF input (MHz)", "IF output (MHz)")),
    # AM: the IF axis 455 kHz +/- 3.5 x 10 kHz = 420-490 kHz reads in kHz; the RF and LO axes (about
    # 0.4-2.7 MHz, their middles 1.6 MHz) in MHz
    ("am", {"tuning_x": "MHz", "tuning_y": "MHz", "output_x": "MHz", "output_y": "kHz"},
     ("RF input (MHz)", "LO (MHz)", "RF input (MHz)", "IF output (kHz)")),
    # uplink: the IF input axis 0-380 MHz in MHz (not 0.14 GHz), the RF output and the LO in GHz
    ("uplink_transmitter", {"tuning_x": "GHz", "tuning_y": "GHz", "output_x": "MHz", "output_y": "GHz"},
     ("RF output (GHz)", "LO (GHz)", "IF input (MHz)", "RF output (GHz)")),
])
def test_each_axis_picks_its_own_unit(plan, units, labels):
    # Each axis's unit shows its middle with 1 to 3 integer digits (engineering notation, common
    # practice, no source), so its tick labels read between about 1 and 1000; the label names it.
    ev = evaluate(plan_from_dict(_am_receiver()) if plan == "am" else load_plan(example_path(plan)))
    data = chart_data(ev)
    meta = data.meta
    assert meta["units"] == units
    assert (meta["tuning_x_label"], meta["tuning_y_label"], meta["output_x_label"], meta["output_y_label"]) == labels
    hz = {"kHz": 1e3, "MHz": 1e6, "GHz": 1e9}
    assert meta["scales"] == {axis: hz[u] for axis, u in units.items()}
    windows = {"tuning_x": meta["tuning_window"][:2], "tuning_y": meta["tuning_window"][2:],
               "output_x": meta["output_window"][:2], "output_y": meta["output_window"][2:]}
    for axis, (lo, hi) in windows.items():
        assert 1 <= 0.5 * (lo + hi) < 1000, (axis, lo, hi)
    # every source is in its own axis's unit: the bands, the current channel and its LO, derived from the plan
    plan_ = ev.plan
    s = data.sources
    half = plan_.signal.bandwidth_hz / 2
    assert s["rf_band"]["x0"][0] * meta["scales"]["tuning_x"] == pytest.approx(plan_.rf.start_hz - half)
    assert s["tuning_now"]["x"][0] * meta["scales"]["tuning_x"] == pytest.approx(meta["channel_hz"])
    assert s["tuning_now"]["y"][0] * meta["scales"]["tuning_y"] == pytest.approx(meta["lo_hz"])
    out_band = (plan_.if_.f_low_hz, plan_.if_.f_high_hz) if plan_.direction == "down" else (
        plan_.rf.start_hz - half, plan_.rf.stop_hz + half)
    in_band = (plan_.rf.start_hz - half, plan_.rf.stop_hz + half) if plan_.direction == "down" else (
        plan_.if_.f_low_hz, plan_.if_.f_high_hz)
    assert s["out_output_band"]["y0"][0] * meta["scales"]["output_y"] == pytest.approx(out_band[0])
    assert s["out_input_band"]["x1"][0] * meta["scales"]["output_x"] == pytest.approx(in_band[1])
    # the app converts a dragged band with its source's own scale (app.PlannerApp._drag_handler)
    assert meta["source_scales"] == {"rf_band": meta["scales"]["tuning_x"],
                                     "out_input_band": meta["scales"]["output_x"],
                                     "out_output_band": meta["scales"]["output_y"]}
    # a point on an output-plane line, mapped back to Hz with both axes' scales, lies on |m·x ± n·LO|
    lines = s["out_lines"]
    for x0, y0, m, n in zip(lines["x0"], lines["y0"], lines["m"], lines["n"], strict=True):
        x, y = x0 * meta["scales"]["output_x"], y0 * meta["scales"]["output_y"]
        lo = meta["lo_hz"]
        assert min(abs(y - abs(m * x - n * lo)), abs(y - (m * x + n * lo))) <= 1e-9 * (abs(x) + n * lo + y), (m, n)


def test_the_output_axis_centres_on_the_passband(fm):
    # FM: IF passband 10.585-10.815 MHz (230 kHz); the output axis is the passband and 3 widths each
    # side: 10.585 - 0.69 = 9.895 to 10.815 + 0.69 = 11.505 MHz (derived by hand), centred on 10.7 MHz.
    # The rows within CLOSE_DB of their requirement above it (at the 98 MHz channel the LO leakage at
    # 108.7 MHz, ...) would stretch it past ten passband widths (2.3 MHz): they stay marked at its edge.
    _, data = fm
    y0, y1 = data.meta["output_window"][2:]
    assert (y0, y1) == pytest.approx((9.895, 11.505))
    assert 0.5 * (y0 + y1) == pytest.approx(10.7)
    off = data.sources["out_offchart"]
    assert any(t.startswith("LO leakage (0,1) at 108.7 MHz") for t in off["text"]), off["text"]


def test_the_output_axis_stretches_to_a_near_product_within_ten_passband_widths():
    # Ku converter: IF passband 0.95-1.95 GHz (1 GHz).  The axis would be 0 (clamped) to 4.95 GHz; the
    # LO leakage at 9.75 GHz (-16.5 dB) is within ten passband widths (10 GHz) of 0, so the axis
    # stretches to it plus 4 % of the span: 9.75 x 1.04 = 10.14 GHz (derived by hand), and the LO
    # leakage is a dot on the plane, no longer an edge marker; the LO harmonics (19.5 GHz and up) are
    # beyond the ten widths and stay marked.
    ev = evaluate(load_plan(example_path("ku_block_converter")))
    data = chart_data(ev)
    assert data.meta["output_window"][2:] == pytest.approx((0.0, 10.14))
    pts, off = data.sources["out_points"], data.sources["out_offchart"]
    assert "LO leakage" in pts["label"] and not any(t.startswith("LO leakage") for t in off["text"])
    assert off["text"] and all(t.startswith("LO harmonic") for t in off["text"])


def test_output_axis_window_by_hand():
    from mixchart.chart_axes import output_axis_window

    # band 4.9-5.1 MHz (0.2 MHz): 4.3-5.7 MHz; 5.5 is inside; 5.9 stretches it to 4.3-5.9 (1.6 MHz, under
    # the 2 MHz cap of ten widths); 7.0 (2.7 MHz) and 100 MHz would not fit; 4 % of 1.6 MHz beyond 5.9
    near = np.array([100.0, 7.0, 5.9, 5.5]) * MHz
    assert output_axis_window((4.9 * MHz, 5.1 * MHz), near) == pytest.approx((4.3 * MHz, (5.9 + 0.064) * MHz))
    assert output_axis_window((4.9 * MHz, 5.1 * MHz), []) == pytest.approx((4.3 * MHz, 5.7 * MHz))
    # never below 0 Hz: 0.95-1.95 GHz gives 0-4.95 GHz
    assert output_axis_window((0.95e9, 1.95e9), [np.nan]) == pytest.approx((0.0, 4.95e9))


def _lab(colour: str) -> np.ndarray:
    """CIELAB (D65) of an sRGB hex colour: sRGB decoding and matrix of IEC 61966-2-1, L*a*b* of CIE 15:2004."""
    rgb = np.array([int(colour[i:i + 2], 16) / 255 for i in (1, 3, 5)])
    linear = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    m = np.array([[0.4124564, 0.3575761, 0.1804375], [0.2126729, 0.7151522, 0.0721750],
                  [0.0193339, 0.1191920, 0.9503041]])
    xyz = m @ linear / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def test_one_colour_one_meaning():
    # Item 5: "blue" means one thing.  The palette maps each meaning (margin categories, the wanted
    # conversion, filter shading, the plan's ink, the grid, the background) to a colour, injectively,
    # and every colour chart.py, chart_data.py, chart_layers.py or chart_style.py writes is one of them.
    from pathlib import Path

    import mixchart.chart
    from mixchart.chart_style import PALETTE, VERDICT_COLOURS

    # the verdict's text colours (PASS / FAIL, the banner and the report) are meanings of their own
    colours = [c.upper() for c in [*PALETTE.values(), *VERDICT_COLOURS.values()]]
    assert len(set(colours)) == len(colours)
    assert {k: v[1] for k, v in CATEGORIES.items()} == {k: PALETTE[k] for k in CATEGORIES}
    for module in ("chart.py", "chart_data.py", "chart_layers.py", "chart_style.py"):
        text = (Path(mixchart.chart.__file__).parent / module).read_text(encoding="utf-8")
        assert {c.upper() for c in re.findall(r"#[0-9A-Fa-f]{6}\b", text)} <= set(colours), module
    # The conversion checked against a published value: sRGB red is L*a*b* (53.24, 80.09, 67.20)
    # (Lindbloom's colour calculator, D65); white is (100, 0, 0).
    np.testing.assert_allclose(_lab("#FF0000"), [53.2408, 80.0925, 67.2032], atol=0.01)
    np.testing.assert_allclose(_lab("#FFFFFF"), [100.0, 0.0, 0.0], atol=0.01)
    # Far apart (CIE76 colour difference above 30, a just-noticeable difference being about 2.3:
    # Sharma, Digital Color Imaging Handbook, 2003), except the two neutral backdrops, grid and background.
    names = list(PALETTE)
    for i, a in enumerate(names):
        for b in names[i + 1:]:
            if {a, b} != {"grid", "background"}:
                assert np.linalg.norm(_lab(PALETTE[a]) - _lab(PALETTE[b])) > 30, (a, b)
    # Only the wanted conversion is blue: a chromatic colour (C* > 10) with a hue between the sRGB cyan
    # and blue primaries' (their CIELAB hue angles, computed here with the same formulas)
    def hue(c):
        lab = _lab(c)
        return float(np.degrees(np.arctan2(lab[2], lab[1])) % 360), float(np.hypot(lab[1], lab[2]))

    cyan, blue = hue("#00FFFF")[0], hue("#0000FF")[0]
    blues = [k for k, c in PALETTE.items() if hue(c)[1] > 10 and cyan <= hue(c)[0] <= blue]
    assert blues == ["wanted"]


def test_nothing_translucent_but_the_green_shading_and_strips_drawn_worst_on_top(down, fm):
    # Item 3: overlapping strips do not blend.  Strips are hatched (no fill, hatch and outline opaque),
    # lines, dots and marks opaque; the one translucent layer is the filter green (over white or over
    # itself, darker).  Rows are drawn in DRAW_ORDER, the worst on top.
    from bokeh.models import GlyphRenderer

    from mixchart.chart_style import DRAW_ORDER, PALETTE, STRIP_HATCH

    _, data = fm
    handle = build_chart(data)
    for fig in (handle.tuning, handle.output, handle.margin):
        for r in fig.renderers:
            if not isinstance(r, GlyphRenderer):
                continue
            glyph = r.glyph
            for kind in ("fill", "line", "hatch", "text"):
                alpha = getattr(glyph, f"{kind}_alpha", None)
                colour = getattr(glyph, f"{kind}_color", None)
                if alpha is None or colour is None:
                    continue
                translucent = not isinstance(alpha, (int, float)) or 0 < alpha < 1
                if kind == "hatch" and getattr(glyph, "hatch_pattern", None) is None:
                    continue
                if translucent:
                    assert colour == PALETTE["filter"], (r.name, kind, alpha, colour)
    strip_renderers = [r for r in handle.tuning.renderers if r.name.startswith("strips_")]
    assert [r.name for r in strip_renderers] == [f"strips_{c}" for c in DRAW_ORDER]  # the worst drawn last
    assert all(r.glyph.hatch_pattern == STRIP_HATCH[r.view.filter.group][0] for r in strip_renderers)
    rank = {c: i for i, c in enumerate(DRAW_ORDER)}
    for which in (fm[1], down[1]):
        for name in ("tuning_strips", "out_lines", "out_points", "tuning_points"):
            ranks = [rank[c] for c in which.sources[name]["category"]]
            assert ranks == sorted(ranks), name


def test_the_half_if_locus_has_the_tables_name(fm, down):
    # Item "Tooltips": the (2,2) response on the wanted side of the LO is "half-IF" in the table (the
    # engine's label, products.LABELS); its strip and its output-plane arm say exactly that.
    from mixchart.physics.products import HALF_IF, LABELS

    ev, data = fm
    table = ev.to_frame()
    name = LABELS[HALF_IF]
    assert name in set(table["label"]) and name == "half-IF"
    strips = data.sources["tuning_strips"]
    named = [k for k, lb in enumerate(strips["label"]) if lb.startswith(name)]
    assert [strips["label"][k] for k in named] == [f"{name} (2,2)"]
    # its verdict is the table's half-IF row (the worst over the band), like the image strip's
    k = named[0]
    assert strips["margin"][k] == pytest.approx(table.loc[table["label"] == name, "margin_db"].min())
    assert strips["category"][k] == "violates"
    # every named strip's name is one of the table's labels, spelled the same
    for label in strips["label"]:
        head = label.split(" (")[0]
        if head not in ("wanted",) and not re.match(r"^\(\d+,\d+\)", label):
            assert head in set(table["label"]), label
    lines = data.sources["out_lines"]
    assert f"(2,2) {name} arm" in lines["label"]
    # down-converter by hand: LO 20 MHz, IF 5 MHz: the half-IF responds at 20 - 2.5 = 17.5 MHz, inside the
    # strip cut 17.45-17.55 MHz; the (2,2) on the far side of the LO (22.45-22.55 MHz) is not it
    _, d = down
    cuts = _cuts_at(d, 20.0)[(2, 2)]
    by_label = {lb: (lo, hi) for lo, hi, lb, _ in cuts}
    assert by_label[f"{name} (2,2)"] == pytest.approx((17.45, 17.55))
    assert by_label["(2,2) difference"] == pytest.approx((22.45, 22.55))


def test_one_hover_per_renderer_the_topmost_row_and_none_under_a_dot():
    # Item "Tooltips": each hovered renderer has one HoverTool showing one row (the last drawn, the
    # topmost), and a renderer's hover is filtered out while a renderer drawn above it is under the
    # pointer (the browser test counts the tooltips on screen).
    from bokeh.models import HoverTool

    data = chart_data(evaluate(plan_from_dict(converter("down"))), ViewOptions(channel_hz=15 * MHz))
    handle = build_chart(data)
    # a strip's hover yields to the strips drawn over it (a worse category), the marks and the dots
    on_top = {"strips_clear": {"strips_wanted", "strips_close", "strips_violates"},
              "strips_wanted": {"strips_close", "strips_violates"}, "strips_close": {"strips_violates"},
              "strips_violates": set()}
    above = {**{k: v | {"lo_points", "channel_marks"} for k, v in on_top.items()},
             "channel_marks": {"lo_points"}, "lo_points": set(),
             "product_lines": {"product_points", "offchart_marks"}, "offchart_marks": {"product_points"},
             "product_points": set(), "margin_points": set()}
    seen = {}
    for fig in (handle.tuning, handle.output, handle.margin):
        for tool in fig.tools:
            if isinstance(tool, HoverTool):
                (renderer,) = tool.renderers
                assert tool.limit == 1 and tool.sort_by == [("$index", "descending")]
                callbacks = list(tool.filters.values())
                seen[renderer.name] = {r.name for cb in callbacks for r in cb.args["above"]}
    assert seen == above



def test_the_legend_explains_every_colour_hatch_and_mark(up, down):
    # Items 3 and 4: the legend draws what the chart draws: each category's line (colour, width) and
    # hatched strip (pattern, colour), each marker shape, the dashed bands and the green shading.
    import html.parser

    from mixchart.chart_style import LINE_WIDTH, PALETTE, STRIP_HATCH, legend_html

    class Entries(html.parser.HTMLParser):
        def __init__(self):
            super().__init__()
            self.entries, self.current = {}, None

        def handle_starttag(self, tag, attrs):
            attrs = dict(attrs)
            if "data-meaning" in attrs:
                self.current = attrs["data-meaning"]
                self.entries[self.current] = []
            elif self.current is not None:
                self.entries[self.current].append((tag, attrs))

    parser = Entries()
    parser.feed(legend_html("down"))
    entries = parser.entries
    assert set(entries) == {*CATEGORIES, "plan", "channel", "response", "dot", "offchart", "band", "filter"}
    for cat, (_, colour) in CATEGORIES.items():
        tags = entries[cat]
        line = next(a for t, a in tags if t == "line")
        assert line["stroke"] == colour and float(line["stroke-width"]) == LINE_WIDTH[cat]
        swatch = next(a for t, a in tags if t == "svg" and "data-hatch" in a)
        assert swatch["data-hatch"] == STRIP_HATCH[cat][0]
        assert next(a for t, a in tags if t == "path")["stroke"] == colour  # the hatch lines
        assert next(a for t, a in tags if t == "rect")["stroke"] == colour  # the outline
    shapes = {"channel": "circle", "response": "path", "dot": "circle", "offchart": "path"}
    for key, tag in shapes.items():
        assert any(t == tag and a.get("stroke") == PALETTE["plan"] for t, a in entries[key]), key
    assert next(a for t, a in entries["band"] if t == "line")["stroke-dasharray"]
    assert all(a.get("fill") in (None, PALETTE["filter"]) or a.get("fill", "").startswith("url(")
               for t, a in entries["filter"] if t == "rect")
    # the diamonds' meaning follows the direction, and the built chart's legend is that of its plan
    assert "a response at the current LO" in legend_html("down")
    assert "an output product at the current LO" in legend_html("up")
    assert build_chart(up[1]).legend.text == legend_html("up")
    assert build_chart(down[1]).legend.text == legend_html("down")


def test_bands_are_handle_dragged_boxes_and_a_plain_drag_pans():
    # Item 3 of the planner issue: pan by default, bands move only from their handles and along their own axis.
    pytest.importorskip("bokeh")
    from bokeh.models import BoxAnnotation, BoxEditTool, CustomJS, PanTool

    from mixchart.chart import build_chart, update_chart
    from mixchart.chart_bands import BAND_JS
    from mixchart.state import example_plan

    plan, folder = example_plan("fm_receiver")
    ev = evaluate(plan, base_dir=folder)
    data = chart_data(ev)
    handle = build_chart(data)
    for fig in (handle.tuning, handle.output):
        assert isinstance(fig.toolbar.active_drag, PanTool) and fig.toolbar.active_scroll is None
        assert not any(isinstance(t, BoxEditTool) for t in fig.toolbar.tools)
    boxes = handle.bands
    assert set(boxes) == {"rf_band", "out_output_band", "out_input_band"}
    for name, box in boxes.items():
        vertical = name != "out_output_band"
        assert isinstance(box, BoxAnnotation) and box.editable and box.use_handles
        assert box.movable == box.resizable == ("x" if vertical else "y")
        keys, edges = (("x0", "x1"), ("left", "right")) if vertical else (("y0", "y1"), ("bottom", "top"))
        assert [getattr(box, e) for e in edges] == pytest.approx([data.sources[name][k][0] for k in keys])
        links = [cb for cbs in box.js_property_callbacks.values() for cb in cbs]
        assert links and all(isinstance(cb, CustomJS) and cb.code == BAND_JS for cb in links)
        assert all(cb.args["src"] is handle.sources[name] for cb in links)
    # an update (e.g. an undo, or the snapped value after a drag) moves the box to the band's new place
    moved = chart_data(evaluate(plan.with_changes({"if.center_hz": 10.8e6}), base_dir=folder))
    update_chart(handle, moved)
    band = moved.sources["out_output_band"]
    assert (boxes["out_output_band"].bottom, boxes["out_output_band"].top) == pytest.approx(
        (band["y0"][0], band["y1"][0]))


@pytest.mark.parametrize("name", ["fm_receiver", "ku_block_converter", "hf_upconverting_receiver"])
def test_named_responses_from_the_columns_are_the_frames(name):
    # Evaluation.responses_at reads the image and half-IF of a channel from the engine's columns
    # (no frame); they are the rows the channel's own frame names, the same numbers.
    from mixchart.chart import _NAMED_RESPONSES, _named_responses

    ev = evaluate(load_plan(example_path(name)))
    for index in (0, len(ev.channels_hz) // 2, len(ev.channels_hz) - 1):
        fast = ev.responses_at(index, _NAMED_RESPONSES)
        assert sorted(fast) == sorted(_named_responses(ev.channel_frame(index)))
    with pytest.raises(IndexError):
        ev.responses_at(len(ev.channels_hz), _NAMED_RESPONSES)
