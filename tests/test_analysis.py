"""Evaluating a plan: level model, margins, summaries, frames (mixchart.analysis).

Level-model expectations are derived by hand from the formulas in the
mixchart.analysis.block module docstring and the built-in table rules of
mixchart.levels (each derivation is written beside the value), or come from a
textbook worked example.  The in-band product set is checked against the
brute-force reference in tests/reference.py.
"""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from reference_filters import tuned_circuit_loss_db

import mixchart.analysis.sweep as sweep
import reference as ref  # tests/reference.py (pytest puts tests/ on sys.path)
from mixchart import evaluate, load_plan
from mixchart.analysis import FRAME_COLUMNS
from mixchart.cli import example_path
from mixchart.levels import FLOOR_DBC
from mixchart.plan import plan_from_dict

kHz, MHz = 1e3, 1e6


def receiver(**changes) -> dict:
    """An invented VHF receiver plan: 100-110 MHz, 10.7 MHz IF, high-side LO."""
    data = {
        "name": "test receiver",
        "direction": "down",
        "rf": {"start_hz": "100 MHz", "stop_hz": "110 MHz", "step_hz": "1 MHz"},
        "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -30},
        "lo": {"mode": "tracking", "side": "high"},
        "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "200 kHz"},
        "max_order": 7,
        "mixer": {"rf_ref_dbm": -30},
        "requirement": {"min_rejection_db": 60},
    }
    data.update(copy.deepcopy(changes))
    return data


def rows(frame: pd.DataFrame, kind: str, m: int, n: int, sign: int) -> pd.DataFrame:
    sel = (frame["kind"] == kind) & (frame["rf_harmonic"] == m) & (frame["lo_harmonic"] == n) & (frame["sign"] == sign)
    return frame[sel]


# ------------------------------------------------------------ textbook image rejection


@pytest.mark.parametrize(
    ("channel", "image_hz", "expected_db", "source"),
    [
        # rho = f_i/f_s - f_s/f_i = 1910/1000 - 1000/1910 = 1.3864; alpha = sqrt(1 + (Q rho)^2)
        # = sqrt(1 + 138.64^2) = 138.65 -> 20 log10(138.65) = 42.84 dB
        ("1000 kHz", 1910 * kHz, 42.84,
         "textbook worked example (from memory: Kennedy & Davis, Electronic Communication Systems, image "
         "rejection with Q = 100 and a 455 kHz IF: alpha = 138.6 at 1000 kHz); derived by hand above"),
        # rho = 25.91/25 - 25/25.91 = 0.07152; alpha = sqrt(1 + 7.152^2) = 7.222 -> 17.17 dB
        ("25 MHz", 25.91 * MHz, 17.17,
         "same textbook example at 25 MHz (alpha = 7.22, from memory); derived by hand above"),
    ],
)
def test_single_tuned_preselector_image_rejection(channel, image_hz, expected_db, source):
    plan = plan_from_dict({
        "direction": "down",
        "rf": {"start_hz": channel, "stop_hz": channel},
        # a 1 Hz signal in a 2 Hz IF, so the image band is the image frequency to 1 Hz
        "signal": {"bandwidth_hz": "1 Hz"},
        "if": {"center_hz": "455 kHz", "bandwidth_hz": "2 Hz"},
        "max_order": 3,
        "filters": {"rf": {"kind": "tuned", "q_loaded": 100, "stages": 1, "tracks_channel": True}},
    })
    frame = evaluate(plan).channel_frame(0)
    image = frame[frame["label"] == "image"]
    assert len(image) == 1
    assert image["f_center_hz"].iloc[0] == pytest.approx(image_hz, rel=1e-12), "image = f_RF + 2 f_IF"
    assert image["rejection_db"].iloc[0] == pytest.approx(expected_db, abs=0.01), source
    # a linear (1,1) response: the output is just the preselector's relative loss
    assert image["level_dbc"].iloc[0] == pytest.approx(-expected_db, abs=0.01)


def test_image_rejection_uses_the_image_band_edge_nearest_the_channel():
    # With a 10 kHz IF the image band of a 1000 kHz channel is 1905-1915 kHz; the edge nearest
    # the channel (1905 kHz) loses least in a filter centred on the channel, so the band's least
    # loss (analysis docstring) is the loss there.
    # By hand: rho = 1.905 - 1/1.905 = 1.38005, 10 log10(1 + 138.005^2) = 42.80 dB.
    plan = plan_from_dict({
        "direction": "down",
        "rf": {"start_hz": "1000 kHz", "stop_hz": "1000 kHz"},
        "signal": {"bandwidth_hz": "5 kHz"},
        "if": {"center_hz": "455 kHz", "bandwidth_hz": "10 kHz"},
        "max_order": 3,
        "filters": {"rf": {"kind": "tuned", "q_loaded": 100, "tracks_channel": True}},
    })
    image = evaluate(plan).channel_frame(0).query("label == 'image'")
    rho = 1.905 - 1 / 1.905
    assert image["rejection_db"].iloc[0] == pytest.approx(10 * math.log10(1 + (100 * rho) ** 2), abs=1e-6)
    assert image["f_low_hz"].iloc[0] == pytest.approx(1905 * kHz)


# ------------------------------------------------------------ level model by hand


def test_preselector_loss_a_lowers_an_m_n_response_by_m_times_a():
    # Power-series model (analysis docstring): an unwanted input reduced by A dB reaches the
    # mixer A dB weaker, and its m-th harmonic falls m·A dB.  A brick-wall band-pass around
    # the channel gives exactly A = 40 dB to every response outside it (derived by hand).
    base = receiver(rf={"start_hz": "100 MHz", "stop_hz": "100 MHz"})
    filtered = receiver(
        rf={"start_hz": "100 MHz", "stop_hz": "100 MHz"},
        filters={"rf": {"kind": "brickwall", "response": "bandpass", "f_center_hz": "100 MHz",
                        "bandwidth_hz": "1 MHz", "stop_atten_db": 40}},
    )
    a = evaluate(plan_from_dict(base)).channel_frame(0)
    b = evaluate(plan_from_dict(filtered)).channel_frame(0)
    key = ["kind", "rf_harmonic", "lo_harmonic", "sign"]
    joined = a.merge(b, on=key, suffixes=("_bare", "_filt"))
    responses = joined[joined["kind"] == "response"]
    outside = (responses["f_high_hz_bare"] < 99.5 * MHz) | (responses["f_low_hz_bare"] > 100.5 * MHz)
    # levels never go below the table floor (mixchart.levels.FLOOR_DBC), so leave those out
    outside &= responses["level_dbc_filt"] > FLOOR_DBC
    assert outside.sum() >= 40
    drop = responses["level_dbc_bare"] - responses["level_dbc_filt"]
    np.testing.assert_allclose(drop[outside], 40.0 * responses["rf_harmonic"][outside], atol=1e-9)
    # the extra RF rejection a failing response needs is its input-referred shortfall: X dB more
    # loss lowers the output m·X dB, so the rejection (P_u - P_w) - level/m rises by X
    fail = b[(b["kind"] == "response") & (b["margin_db"] < 0)]
    np.testing.assert_allclose(fail["extra_rf_db"], -fail["margin_db"], atol=1e-12)
    # the wanted input sits in the passband, so products (driven by the wanted signal) do not move
    products = joined[joined["kind"] == "product"]
    finite = np.isfinite(products["level_dbc_bare"])
    np.testing.assert_array_equal(products["level_dbc_bare"][finite], products["level_dbc_filt"][finite])


@pytest.mark.parametrize("direction", ["down", "up"])
def test_drive_scaling_is_m_minus_one_db_per_db(direction):
    # An m-th order product grows m dB per dB of drive and the wanted output 1 dB per dB, so
    # relative to the wanted it moves (m - 1) dB per dB; LO leakage (m = 0) falls 1 dB per dB
    # (standard power-series / intercept-point result, e.g. from memory: S. A. Maas, Microwave Mixers).
    # brick-wall output filters with a finite stop loss keep every product finite; their loss
    # does not depend on the drive
    data = receiver(max_order=5, filters={"if": {"kind": "brickwall", "response": "bandpass", "f_center_hz": "10.7 MHz",
                                                 "bandwidth_hz": "300 kHz", "stop_atten_db": 60}})
    if direction == "up":
        data = receiver(direction="up", max_order=5,
                        rf={"start_hz": "200 MHz", "stop_hz": "210 MHz", "step_hz": "1 MHz"},
                        filters={"rf": {"kind": "brickwall", "response": "bandpass", "f_center_hz": "205 MHz",
                                        "bandwidth_hz": "20 MHz", "stop_atten_db": 60}})
    low = evaluate(plan_from_dict(data)).channel_frame(0)
    data["signal"]["level_dbm"] = -20
    high = evaluate(plan_from_dict(data)).channel_frame(0)
    key = ["kind", "rf_harmonic", "lo_harmonic", "sign"]
    joined = low.merge(high, on=key, suffixes=("_lo", "_hi"))
    finite = (np.isfinite(joined["level_dbc_lo"]) & (joined["level_dbc_lo"] > FLOOR_DBC)
              & (joined["level_dbc_hi"] > FLOOR_DBC))
    assert finite.sum() >= 10
    step = (joined["level_dbc_hi"] - joined["level_dbc_lo"])[finite]
    np.testing.assert_allclose(step, 10.0 * (joined["rf_harmonic"][finite] - 1), atol=1e-9)
    assert (joined["rf_harmonic"][finite] == 0).any() or direction == "down"


def test_interferer_level_scales_a_response_m_db_per_db_and_leaves_image_rejection_alone():
    # An unwanted input 10 dB stronger raises its (m, n) output m·10 dB (power series); the
    # rejection (how much stronger than the wanted it must be) of a (1,1) image is level-independent.
    a = evaluate(plan_from_dict(receiver(max_order=5))).channel_frame(0)
    data = receiver(max_order=5)
    data["signal"]["interferer_level_dbm"] = -20
    b = evaluate(plan_from_dict(data)).channel_frame(0)
    ra, rb = a[a["kind"] == "response"].set_index(["rf_harmonic", "lo_harmonic", "sign"]), \
        b[b["kind"] == "response"].set_index(["rf_harmonic", "lo_harmonic", "sign"])
    rb = rb.loc[ra.index]
    m = ra.index.get_level_values("rf_harmonic").to_numpy()
    live = (ra["level_dbc"] > FLOOR_DBC).to_numpy()
    np.testing.assert_allclose((rb["level_dbc"] - ra["level_dbc"])[live], 10.0 * m[live], atol=1e-9)
    assert rb.loc[(1, 1, 1), "rejection_db"] == pytest.approx(ra.loc[(1, 1, 1), "rejection_db"], abs=1e-12)


def test_if_brickwall_takes_its_stop_loss_off_out_of_band_products():
    # Products outside a brick-wall IF filter lose its 80 dB stop-band loss (derived by hand from
    # the analysis docstring: level = T(m,n) + (m-1)(P - P_ref) - [A_IF(product) - A_IF(wanted)]).
    data = receiver(
        rf={"start_hz": "100 MHz", "stop_hz": "100 MHz"},
        filters={"if": {"kind": "brickwall", "response": "bandpass", "f_center_hz": "10.7 MHz",
                        "bandwidth_hz": "300 kHz", "stop_atten_db": 80}},
        requirement={"min_rejection_db": 90},
    )
    frame = evaluate(plan_from_dict(data)).channel_frame(0)
    total = rows(frame, "product", 1, 1, 1)  # 100 + 110.7 = 210.7 MHz, far outside the IF
    assert total["label"].iloc[0] == "sum product"
    assert total["f_center_hz"].iloc[0] == pytest.approx(210.7 * MHz)
    assert total["level_dbc"].iloc[0] == pytest.approx(-80.0), "T(1,1) = 0 dBc by definition, minus 80 dB"
    assert total["if_atten_db"].iloc[0] == pytest.approx(80.0)
    assert total["margin_db"].iloc[0] == pytest.approx(-10.0), "margin = -(-80) - 90 = -10 dB"
    assert total["extra_if_db"].iloc[0] == pytest.approx(10.0), "10 dB more IF rejection would pass it"


def test_without_an_if_filter_out_of_band_products_do_not_reach_the_output():
    # analysis docstring: an undescribed output filter is an ideal brick wall over the passband
    frame = evaluate(plan_from_dict(receiver(rf={"start_hz": "100 MHz", "stop_hz": "100 MHz"}))).channel_frame(0)
    products = frame[frame["kind"] == "product"]
    out = products[~products["in_band"]]
    assert len(out) > 0 and (out["level_dbc"] == -np.inf).all() and (out["margin_db"] == np.inf).all()


def test_margin_is_rejection_minus_requirement():
    # Definitions (analysis docstring): a product's margin is -level - requirement; a response's
    # is its input-referred rejection (P_u - P_w) - level/m less the requirement; passes iff >= 0.
    data = receiver(filters={"rf": {"kind": "tuned", "q_loaded": 30, "stages": 2, "tracks_channel": True},
                             "if": {"kind": "butterworth", "response": "bandpass", "order": 3,
                                    "f_center_hz": "10.7 MHz", "bandwidth_hz": "250 kHz"}},
                    requirement={"min_rejection_db": 70})
    evaluation = evaluate(plan_from_dict(data))
    req = evaluation.plan.requirement.min_rejection_db
    frame = evaluation.channel_frame(7)
    spurs = frame[frame["label"] != "wanted"]
    # the shown level is floored once at -300 dBc; margins come from the unfloored level, so they
    # follow the shown level wherever it is above the floor, and are never smaller beneath it
    finite = np.isfinite(spurs["level_dbc"]) & (spurs["level_dbc"] > FLOOR_DBC)
    floored = spurs["level_dbc"] == FLOOR_DBC
    m = spurs["rf_harmonic"].where(spurs["kind"] == "response", 1)  # products: the output ratio itself
    np.testing.assert_allclose(spurs["margin_db"][finite], -spurs["level_dbc"][finite] / m[finite] - req, atol=1e-9)
    assert floored.any() and (spurs["margin_db"][floored] >= -FLOOR_DBC / m[floored] - req - 1e-9).all()
    assert (frame["passes"] == (frame["margin_db"] >= 0)).all()
    assert (frame.loc[frame["label"] == "wanted", "margin_db"] == np.inf).all()
    # rejection of a product is -level; of a response (P_u - P_w) - level/m, with P_u = P_w here
    np.testing.assert_allclose(spurs["rejection_db"][finite], -spurs["level_dbc"][finite] / m[finite], atol=1e-9)
    assert (spurs.loc[finite, "rf_harmonic"] > 1).any() and (spurs.loc[finite, "kind"] == "response").any()


def test_spur_free_fraction_by_hand():
    # Invented receiver: channels 100..110 MHz (11), high-side LO, 10.7 MHz IF, images at
    # f + 21.4 MHz = 121.4 .. 131.4 MHz.  A brick-wall low-pass preselector with its edge at
    # 126 MHz passes the images of 100..104 MHz (image band low edge 121.3 .. 125.3 MHz) and
    # stops those of 105..110 MHz (126.3 MHz and up).  With a 9 dB requirement only an
    # unfiltered (1,1) image (0 dBc) fails: margin -0 - 9 = -9 dB.  Everything else in the
    # built-in double-balanced table at the reference drive is below -9.54 dBc ((1,3): -20 log10 3).
    # So 6 of 11 channels are spur-free (derived by hand).
    data = receiver(
        filters={"rf": {"kind": "brickwall", "response": "lowpass", "f_edge_hz": "126 MHz", "stop_atten_db": 100}},
        requirement={"min_rejection_db": 9},
    )
    evaluation = evaluate(plan_from_dict(data))
    summary = evaluation.summary
    assert summary.spur_free_fraction == pytest.approx(6 / 11)
    assert summary.n_channels == 11 and summary.n_failing_channels == 5 and summary.n_failing_rows == 5
    assert summary.worst_margin_db == pytest.approx(-9.0)
    assert summary.worst_label == "image (1,1)" and summary.worst_channel_hz == 100 * MHz
    assert summary.line().startswith(
        "FAIL: worst margin -9.0 dB (image (1,1) at 100 MHz); spur-free 54.5% of 11 channels"
    )
    assert (evaluation.hits["label"] == "image").all() and len(evaluation.hits) == 5
    np.testing.assert_allclose(evaluation.hits["channel_hz"].sort_values(), [100e6, 101e6, 102e6, 103e6, 104e6])
    # On the passing channels the worst is the (3,1) response: built-in table rule 2 gives
    # -(3 - 1)·20 = -40 dBc and rule 1 0 dB for n = 1 (m, n odd: not balanced out); its
    # input-referred rejection is 40/3 = 13.33 dB, margin 13.33 - 9 = 4.33 dB (derived by hand
    # from mixchart.levels' stated rules and the equal-output definition of rejection).
    np.testing.assert_allclose(evaluation.worst_margin_db[5:], 40 / 3 - 9, atol=1e-9)
    worst = evaluation.channels_frame().iloc[5:]
    assert (worst["label"] == "spur").all() and (worst["rf_harmonic"] == 3).all() and (worst["lo_harmonic"] == 1).all()


@pytest.mark.parametrize(
    ("name", "inverted", "source"),
    [
        ("fm_receiver", "yes", "high-side LO, difference: inverted (textbook)"),
        ("uplink_transmitter", "no", "low-side LO, sum f_IF + f_LO: upright (textbook)"),
    ],
)
def test_summary_inversion(name, inverted, source):
    assert evaluate(load_plan(example_path(name))).summary.inverted == inverted, source


def test_low_side_receiver_is_not_inverted():
    data = receiver(lo={"mode": "tracking", "side": "low"}, max_order=3)
    assert evaluate(plan_from_dict(data)).summary.inverted == "no"


def test_uplink_example_channel_zero_by_hand():
    evaluation = evaluate(load_plan(example_path("uplink_transmitter")))
    assert evaluation.lo_hz[0] == pytest.approx(2170 * MHz), "derived by hand: 2310 - 140 = 2170 MHz (low side)"
    frame = evaluation.channel_frame(0)
    wanted = frame[frame["label"] == "wanted"]
    assert len(wanted) == 1 and wanted["f_center_hz"].iloc[0] == pytest.approx(2310 * MHz), "140 + 2170 = 2310 MHz"
    side = frame[frame["label"] == "unwanted sideband"]
    assert side["f_center_hz"].iloc[0] == pytest.approx(2030 * MHz), "derived by hand: 2170 - 140 = 2030 MHz"
    leak = frame[frame["label"] == "LO leakage"]
    assert leak["f_center_hz"].iloc[0] == pytest.approx(2170 * MHz)
    assert (frame["kind"] == "product").all(), "a transmitter has no receiver responses"


def test_sum_conversion_receiver_labels_the_channel_as_wanted():
    # Regression: a receiver whose wanted output is the sum, with the RF above the LO
    # (fixed LO 3 MHz, RF 7 MHz, IF 10 MHz: 7 + 3 = 10).  The wanted input is
    # |f_LO - f_IF| = |3 - 10| = 7 MHz (branch -1); the other (1,1) input, the image, is
    # f_LO + f_IF = 13 MHz (13 - 3 = 10).  Derived by hand.
    plan = plan_from_dict({
        "direction": "down",
        "rf": {"start_hz": "7 MHz", "stop_hz": "7 MHz"},
        "signal": {"bandwidth_hz": "10 kHz"},
        "lo": {"mode": "fixed", "fixed_hz": "3 MHz"},
        "if": {"center_hz": "10 MHz", "bandwidth_hz": "30 kHz"},
        "max_order": 3,
    })
    evaluation = evaluate(plan)
    frame = evaluation.channel_frame(0)
    wanted = frame[(frame["label"] == "wanted") & (frame["kind"] == "response")]
    image = frame[frame["label"] == "image"]
    assert wanted["f_center_hz"].tolist() == pytest.approx([7 * MHz])
    assert image["f_center_hz"].tolist() == pytest.approx([13 * MHz])
    wanted_product = frame[(frame["label"] == "wanted") & (frame["kind"] == "product")]
    assert wanted_product["f_center_hz"].tolist() == pytest.approx([10 * MHz])
    assert wanted_product["sign"].tolist() == [1]
    assert "image" in evaluation.summary.worst_label, "with no preselector the 13 MHz image is the worst (0 dBc)"


# ------------------------------------------------------------ frames and JSON


@pytest.mark.parametrize("name", ["fm_receiver", "uplink_transmitter"])
def test_frames_have_the_documented_columns(name):
    evaluation = evaluate(load_plan(example_path(name)))
    for frame in (evaluation.to_frame(), evaluation.channels_frame(), evaluation.hits, evaluation.channel_frame(0)):
        assert list(frame.columns) == list(FRAME_COLUMNS)
    assert len(evaluation.channels_frame()) == evaluation.summary.n_channels
    assert not (evaluation.to_frame()["label"] == "wanted").any()


def test_hits_columns_when_nothing_fails():
    data = receiver(requirement={"min_rejection_db": 0}, max_order=3,
                    filters={"rf": {"kind": "brickwall", "response": "lowpass", "f_edge_hz": "115 MHz"}})
    evaluation = evaluate(plan_from_dict(data))
    assert evaluation.summary.worst_margin_db >= 0 and evaluation.summary.spur_free_fraction == 1.0
    assert len(evaluation.hits) == 0 and list(evaluation.hits.columns) == list(FRAME_COLUMNS)
    assert evaluation.summary.line().startswith("PASS")


@pytest.mark.parametrize("name", ["fm_receiver", "uplink_transmitter"])
def test_to_json_dict_is_strict_json(name):
    payload = evaluate(load_plan(example_path(name))).to_json_dict()
    text = json.dumps(payload, allow_nan=False)  # raises on NaN or infinity
    back = json.loads(text)
    assert back["plan"] == payload["plan"] and set(back) == {"plan", "summary", "warnings", "worst_by_product", "hits"}
    assert set(back["worst_by_product"][0]) == set(FRAME_COLUMNS)


def test_to_json_dict_turns_infinities_into_null():
    payload = evaluate(plan_from_dict(receiver(max_order=3))).to_json_dict()
    json.dumps(payload, allow_nan=False)
    values = [v for row in payload["worst_by_product"] for v in row.values()]
    assert all(not (isinstance(v, float) and not math.isfinite(v)) for v in values)


def assert_same_evaluation(a, b):
    pd.testing.assert_frame_equal(a.to_frame(), b.to_frame(), check_exact=True)
    pd.testing.assert_frame_equal(a.channels_frame(), b.channels_frame(), check_exact=True)
    pd.testing.assert_frame_equal(a.hits, b.hits, check_exact=True)
    np.testing.assert_array_equal(a.worst_margin_db, b.worst_margin_db)
    assert a.summary == b.summary and a.warnings == b.warnings


@pytest.mark.parametrize("name", ["fm_receiver", "uplink_transmitter"])
def test_chunked_evaluation_equals_one_block(name):
    plan = load_plan(example_path(name))
    one = evaluate(plan, chunk_channels=plan.rf.n_channels)
    for chunk in (7, 1, 64):
        assert_same_evaluation(evaluate(plan, chunk_channels=chunk), one)


@pytest.mark.parametrize("max_rows", [3, 25, 200])
def test_chunking_keeps_the_worst_hits_of_the_whole_sweep(monkeypatch, max_rows):
    # Regression: with more failing rows than MAX_HIT_ROWS, the kept rows were the first
    # channels' failures, not the worst ones, and depended on the chunk size.
    monkeypatch.setattr(sweep, "MAX_HIT_ROWS", max_rows)  # where evaluate() reads it
    # no preselector: every channel fails on its image (0 dBc, margin -60 dB: many ties) and on
    # several weaker responses, well over 25 failing rows in all
    plan = plan_from_dict(receiver(rf={"start_hz": "100 MHz", "stop_hz": "110 MHz", "step_hz": "500 kHz"}))
    one = evaluate(plan, chunk_channels=plan.rf.n_channels)
    assert one.summary.n_failing_rows > 2 * max_rows and len(one.hits) == max_rows
    for chunk in (1, 7, 50):
        assert_same_evaluation(evaluate(plan, chunk_channels=chunk), one)
    # brute force: the most negative margins over every channel's every row, ties in channel order
    every = pd.concat([one.channel_frame(i) for i in range(plan.rf.n_channels)], ignore_index=True)
    failing = every[every["margin_db"] < 0]
    np.testing.assert_array_equal(one.hits["margin_db"].to_numpy(), np.sort(failing["margin_db"].to_numpy())[:max_rows])
    # equal margins are listed in channel order
    for _, group in one.hits.groupby("margin_db"):
        assert group["channel_hz"].is_monotonic_increasing


def test_bad_chunk_sizes_still_work():
    plan = plan_from_dict(receiver(max_order=3))
    one = evaluate(plan)
    assert_same_evaluation(evaluate(plan, chunk_channels=0), one)
    assert_same_evaluation(evaluate(plan, chunk_channels=3.7), one)


def test_channel_frame_index_checks():
    evaluation = evaluate(plan_from_dict(receiver(max_order=3)))
    with pytest.raises(IndexError, match=r"out of range 0\.\.10"):
        evaluation.channel_frame(11)
    assert evaluation.nearest_channel(104.4 * MHz) == 4


# ------------------------------------------------------------ brute force vs engine


def random_plan(rng) -> dict:
    direction = "down" if rng.random() < 0.7 else "up"
    n_ch = int(rng.integers(1, 12))
    start = float(rng.uniform(2e6, 3e9))
    step = float(rng.uniform(1e3, 0.02 * start))
    if_c = float(rng.uniform(0.05, 0.6) * start)
    if_bw = float(rng.uniform(0.001, 0.3) * if_c)
    bw = float(rng.uniform(0.1, 1.0) * if_bw)
    side = "low" if rng.random() < 0.4 else "high"
    lo = {"mode": "tracking", "side": side}
    if rng.random() < 0.3:
        lo["step_hz"] = float(rng.uniform(0.5, 2.0) * step)
    if rng.random() < 0.15:
        lo = {"mode": "fixed", "fixed_hz": float(start + if_c)}
    return {
        "direction": direction,
        "rf": {"start_hz": start, "stop_hz": start + (n_ch - 1) * step, "step_hz": step},
        "signal": {"bandwidth_hz": bw},
        "lo": lo,
        "if": {"center_hz": if_c, "bandwidth_hz": if_bw},
        "max_order": int(rng.integers(2, 10)),
    }


@pytest.mark.parametrize("seed", range(10))
def test_evaluate_matches_brute_force(seed):
    plan = plan_from_dict(random_plan(np.random.default_rng(1000 + seed)))
    evaluation = evaluate(plan, chunk_channels=4)
    expected = ref.sweep(plan)
    assert len(expected) == evaluation.channels_hz.size
    for i, row in enumerate(expected):
        assert evaluation.channels_hz[i] == pytest.approx(row["channel"], rel=1e-12)
        assert evaluation.lo_hz[i] == pytest.approx(row["lo"], rel=1e-12)
        frame = evaluation.channel_frame(i)
        products = frame[frame["kind"] == "product"]
        got_in = {(int(r.rf_harmonic), int(r.lo_harmonic), int(r.sign)) for r in products.itertuples() if r.in_band}
        assert got_in == row["in_band"], f"channel {i}"
        got = {(int(r.rf_harmonic), int(r.lo_harmonic), int(r.sign)): (r.f_center_hz, r.f_low_hz, r.f_high_hz)
               for r in products.itertuples()}
        want = {(m, n, s): (c, lo, hi) for m, n, s, c, lo, hi in row["products"]}
        assert got.keys() == want.keys()
        for key in want:
            assert got[key] == pytest.approx(want[key], rel=1e-12, abs=1e-6), key
        responses = frame[frame["kind"] == "response"]
        got_r = {(int(r.rf_harmonic), int(r.lo_harmonic), int(r.sign)): (r.f_center_hz, r.f_low_hz, r.f_high_hz)
                 for r in responses.itertuples()}
        want_r = {(m, n, b): (c, lo, hi) for m, n, b, c, lo, hi in row["responses"]}
        assert got_r.keys() == want_r.keys()
        for key in want_r:
            assert got_r[key] == pytest.approx(want_r[key], rel=1e-12, abs=1e-6), key


# ------------------------------------------------------------ levels and margins vs the plain-Python reference

#: Invented plans for the level comparison (demo scenarios, not real products).  Each
#: exercises a different part of the documented level model.
LEVEL_PLANS = {
    # receiver, tracking 2-stage tuned preselector, Butterworth IF filter, LO on a 7 kHz grid
    # (grid error: the wanted output sits off the IF centre), interferer 20 dB above the wanted,
    # wanted drive 10 dB below the table's reference (drive scaling)
    "down, tracking tuned preselector + Butterworth IF": {
        "name": "invented airband receiver", "direction": "down",
        "rf": {"start_hz": "118 MHz", "stop_hz": "136 MHz", "step_hz": "2 MHz"},
        "signal": {"bandwidth_hz": "25 kHz", "level_dbm": -40, "interferer_level_dbm": -20},
        "lo": {"mode": "tracking", "side": "high", "step_hz": "7 kHz"},
        "if": {"center_hz": "21.4 MHz", "bandwidth_hz": "50 kHz"},
        "max_order": 9, "mixer": {"rf_ref_dbm": -30},
        "filters": {"rf": {"kind": "tuned", "q_loaded": 25, "stages": 2, "tracks_channel": True},
                    "if": {"kind": "butterworth", "response": "bandpass", "order": 4,
                           "f_center_hz": "21.4 MHz", "bandwidth_hz": "40 kHz"}},
        "requirement": {"min_rejection_db": 70},
    },
    # transmitter, Chebyshev output filter (its ripple and skirts act on the products; the
    # wanted at the band edges sits in the ripple), Butterworth IF filter on the input, drive
    # 5 dB above the reference, single-balanced table (m-even products not cancelled)
    "up, Chebyshev output filter": {
        "name": "invented L-band transmitter", "direction": "up",
        "rf": {"start_hz": "1.2 GHz", "stop_hz": "1.3 GHz", "step_hz": "10 MHz"},
        "signal": {"bandwidth_hz": "8 MHz", "level_dbm": -5},
        "lo": {"mode": "tracking", "side": "low"},
        "if": {"center_hz": "70 MHz", "bandwidth_hz": "10 MHz"},
        "max_order": 11, "mixer": {"rf_ref_dbm": -10, "topology": "single_balanced"},
        "filters": {"rf": {"kind": "chebyshev1", "response": "bandpass", "order": 5, "ripple_db": 0.5,
                           "f_center_hz": "1.25 GHz", "bandwidth_hz": "150 MHz"},
                    "if": {"kind": "butterworth", "response": "bandpass", "order": 3,
                           "f_center_hz": "70 MHz", "bandwidth_hz": "20 MHz"}},
        "requirement": {"min_rejection_db": 60},
    },
    # block down-converter: one fixed LO for the whole band, so the wanted output moves across
    # a wide IF; fixed Butterworth preselector and low-pass IF filter; single-ended table; wanted
    # 40 dB below the reference, so high-order products reach the -300 dBc floor
    "down, fixed-LO block converter": {
        "name": "invented 2.3 GHz block converter", "direction": "down",
        "rf": {"start_hz": "2.30 GHz", "stop_hz": "2.40 GHz", "step_hz": "10 MHz"},
        "signal": {"bandwidth_hz": "5 MHz", "level_dbm": -60, "interferer_level_dbm": -30},
        "lo": {"mode": "fixed", "fixed_hz": "1.9 GHz"},
        "if": {"center_hz": "450 MHz", "bandwidth_hz": "120 MHz"},
        "max_order": 13, "mixer": {"rf_ref_dbm": -20, "topology": "single_ended"},
        "filters": {"rf": {"kind": "butterworth", "response": "bandpass", "order": 5,
                           "f_center_hz": "2.35 GHz", "bandwidth_hz": "200 MHz"},
                    "if": {"kind": "butterworth", "response": "lowpass", "order": 7, "f_edge_hz": "600 MHz"}},
        "requirement": {"min_rejection_db": 50},
    },
    # transmitter with an emission mask (mixchart.requirements): a tight dBm segment over the
    # allocation's neighbours, a dBc segment above, the gaps at output_spur_dbc; bands that span
    # two pieces are judged in each part
    "up, emission mask in dBc and dBm": {
        "name": "invented L-band transmitter with a mask", "direction": "up",
        "rf": {"start_hz": "1.2 GHz", "stop_hz": "1.3 GHz", "step_hz": "10 MHz"},
        "signal": {"bandwidth_hz": "8 MHz", "level_dbm": -5},
        "lo": {"mode": "tracking", "side": "low"},
        "if": {"center_hz": "70 MHz", "bandwidth_hz": "10 MHz"},
        "max_order": 9, "mixer": {"rf_ref_dbm": -10},
        "filters": {"rf": {"kind": "butterworth", "response": "bandpass", "order": 3,
                           "f_center_hz": "1.25 GHz", "bandwidth_hz": "200 MHz"}},
        "requirement": {"output_spur_dbc": -45, "emission_mask": [
            {"f_low_hz": "1.05 GHz", "f_high_hz": "1.19 GHz", "limit": -62, "unit": "dBm"},
            {"f_low_hz": "1.31 GHz", "f_high_hz": "1.5 GHz", "limit": -55, "unit": "dBc"}]},
    },
    # transmitter whose LO sits on a 3 MHz grid: the IF from the modem is held (lo.grid_holds
    # 'input', the default), so the output and every product move by the LO's grid error
    "up, LO on a grid, IF held": {
        "name": "invented L-band transmitter on a coarse grid", "direction": "up",
        "rf": {"start_hz": "1.2 GHz", "stop_hz": "1.3 GHz", "step_hz": "10 MHz"},
        "signal": {"bandwidth_hz": "8 MHz", "level_dbm": -5},
        "lo": {"mode": "tracking", "side": "low", "step_hz": "3 MHz"},
        "if": {"center_hz": "70 MHz", "bandwidth_hz": "10 MHz"},
        "max_order": 7, "mixer": {"rf_ref_dbm": -10},
        "filters": {"rf": {"kind": "chebyshev1", "response": "bandpass", "order": 5, "ripple_db": 0.5,
                           "f_center_hz": "1.25 GHz", "bandwidth_hz": "150 MHz"}},
        "requirement": {"min_rejection_db": 60},
    },
    # receiver with separate limits: responses need 75 dB input-referred, products -50 dBc
    "down, separate rejection and spur limits": {
        "name": "invented VHF receiver, split limits", "direction": "down",
        "rf": {"start_hz": "140 MHz", "stop_hz": "150 MHz", "step_hz": "1 MHz"},
        "signal": {"bandwidth_hz": "25 kHz", "level_dbm": -50, "interferer_level_dbm": -20,
                   "interferer_bandwidth_hz": "200 kHz"},
        "lo": {"mode": "tracking", "side": "high"},
        "if": {"center_hz": "21.4 MHz", "bandwidth_hz": "30 kHz"},
        "max_order": 7, "mixer": {"rf_ref_dbm": -30},
        "filters": {"rf": {"kind": "tuned", "q_loaded": 20, "stages": 2, "tracks_channel": True},
                    "if": {"kind": "butterworth", "response": "bandpass", "order": 4,
                           "f_center_hz": "21.4 MHz", "bandwidth_hz": "30 kHz"}},
        "requirement": {"min_rejection_db": 99, "response_rejection_db": 75, "output_spur_dbc": -50},
    },
    # no filters at all: ideal brick wall over the IF, no preselection (low-side LO)
    "down, no filters": receiver(lo={"mode": "tracking", "side": "low"}, requirement={"min_rejection_db": 20}),
    # no filters, transmitter: ideal brick wall over the tuning range widened by half the signal;
    # an octave tuning range, so LO leakage and low-order spurs of other channels fall inside it
    "up, no filters": receiver(direction="up", rf={"start_hz": "100 MHz", "stop_hz": "200 MHz", "step_hz": "5 MHz"},
                               signal={"bandwidth_hz": "1 MHz", "level_dbm": -25},
                               **{"if": {"center_hz": "45 MHz", "bandwidth_hz": "2 MHz"}}),
}


def _row_key(kind, m, n, sign):
    return (str(kind), int(m), int(n), int(sign))


def assert_same_db(got: float, want: float, what: str) -> None:
    """Equal within 1e-9 dB, or the same infinity."""
    if math.isinf(want) or math.isinf(got):
        assert got == want, what
    else:
        assert abs(got - want) <= 1e-9, f"{what}: engine {got!r}, reference {want!r}"


@pytest.mark.parametrize("name", list(LEVEL_PLANS))
def test_evaluate_levels_and_margins_match_the_plain_python_reference(name):
    # tests/reference.py:sweep_levels restates the level model of the analysis docstring and
    # DEVELOPERS.md in plain Python (filters from their textbook formulas); the engine must
    # agree to 1e-9 dB on every channel's worst margin and label, on every product's worst case
    # across the sweep (to_frame), and on every row of a few channels.
    plan = plan_from_dict(LEVEL_PLANS[name])
    evaluation = evaluate(plan, chunk_channels=4)  # several blocks
    expected = ref.sweep_levels(plan)
    channels = expected["channels"]
    assert len(channels) == evaluation.channels_hz.size
    worst_rows = evaluation.channels_frame()
    for i, channel in enumerate(channels):
        assert evaluation.channels_hz[i] == pytest.approx(channel["channel"], rel=1e-12)
        assert_same_db(float(evaluation.worst_margin_db[i]), channel["worst_margin_db"], f"channel {i} worst margin")
        kind, label, m, n, sign = channel["worst"][:5]
        row = worst_rows.iloc[i]
        got_row = (row["kind"], row["label"], row["rf_harmonic"], row["lo_harmonic"], row["sign"])
        assert got_row == (kind, label, m, n, sign), i
    # worst case of each product/response across the sweep
    frame = evaluation.to_frame()
    got = {_row_key(*k): (margin, label) for *k, margin, label in
           zip(frame["kind"], frame["rf_harmonic"], frame["lo_harmonic"], frame["sign"], frame["margin_db"],
               frame["label"], strict=True)}
    want = expected["worst_by_product"]
    assert got.keys() == want.keys()
    for key, (margin, _channel, label) in want.items():
        assert_same_db(got[key][0], margin, f"worst of {key}")
        assert got[key][1] == label, key
    # every row (levels, margins, labels) of the first, a middle and the last channel
    for i in sorted({0, len(channels) // 2, len(channels) - 1}):
        rows_got = {_row_key(r.kind, r.rf_harmonic, r.lo_harmonic, r.sign): r
                    for r in evaluation.channel_frame(i).itertuples()}
        assert len(rows_got) == len(channels[i]["rows"])
        for kind, label, m, n, sign, centre, low, high, level, margin in channels[i]["rows"]:
            r = rows_got[(kind, m, n, sign)]
            assert r.label == label, (i, kind, m, n, sign)
            assert (r.f_center_hz, r.f_low_hz, r.f_high_hz) == pytest.approx((centre, low, high), rel=1e-12, abs=1e-6)
            assert_same_db(r.level_dbc, level, f"channel {i} {kind} ({m},{n},{sign}) level")
            assert_same_db(r.margin_db, margin, f"channel {i} {kind} ({m},{n},{sign}) margin")
    # the comparison is not vacuous: the plan has failing and passing finite margins
    margins = [row[9] for channel in channels for row in channel["rows"] if math.isfinite(row[9])]
    assert min(margins) < 0 < max(margins)


@pytest.mark.parametrize("name", ["fm_receiver", "uplink_transmitter", "ku_block_converter", "hf_upconverting_receiver",
                                  "ism_transmitter"])
def test_example_plans_match_the_plain_python_reference(name):
    # the packaged example plans, every channel: worst margin and label, and the worst case of
    # every product/response, as in the test above
    path = example_path(name)
    evaluation = evaluate(load_plan(path))
    expected = ref.sweep_levels(evaluation.plan, base_dir=path.parent)
    labels = evaluation.channels_frame()["label"]
    for i, channel in enumerate(expected["channels"]):
        assert_same_db(float(evaluation.worst_margin_db[i]), channel["worst_margin_db"], f"channel {i}")
        assert labels.iloc[i] == channel["worst"][1], i
    frame = evaluation.to_frame()
    got = {_row_key(*k): margin for *k, margin in
           zip(frame["kind"], frame["rf_harmonic"], frame["lo_harmonic"], frame["sign"], frame["margin_db"],
               strict=True)}
    assert got.keys() == expected["worst_by_product"].keys()
    for key, (margin, _channel, _label) in expected["worst_by_product"].items():
        assert_same_db(got[key], margin, str(key))


@pytest.mark.parametrize("seed", range(10))
def test_evaluate_worst_margins_match_the_reference_on_random_plans(seed):
    plan = plan_from_dict(random_plan(np.random.default_rng(2000 + seed)))
    evaluation = evaluate(plan, chunk_channels=3)
    expected = ref.sweep_levels(plan)
    labels = evaluation.channels_frame()["label"]
    for i, channel in enumerate(expected["channels"]):
        assert_same_db(float(evaluation.worst_margin_db[i]), channel["worst_margin_db"], f"channel {i}")
        assert labels.iloc[i] == channel["worst"][1]
    frame = evaluation.to_frame()
    got = {_row_key(*k): margin for *k, margin in
           zip(frame["kind"], frame["rf_harmonic"], frame["lo_harmonic"], frame["sign"], frame["margin_db"],
               strict=True)}
    assert got.keys() == expected["worst_by_product"].keys()
    for key, (margin, _channel, _label) in expected["worst_by_product"].items():
        assert_same_db(got[key], margin, str(key))


@pytest.mark.parametrize(
    ("loss", "expected_db", "source"),
    [
        (lambda: ref.butterworth_loss_db(1.0, 5), 10 * math.log10(2),
         "Butterworth edge is the half-power point for every order: 10 log10(2) = 3.0103 dB (definition)"),
        (lambda: ref.butterworth_loss_db(2.0, 5), 30.11,
         "derived by hand: 10 log10(1 + 2^10) = 30.107 dB (also the mixchart.filters.build_filter doctest)"),
        (lambda: ref.butterworth_loss_db(1e200, 10), 40000.0,
         "derived by hand: 10 log10(1 + (1e200)^20) = 10·4000 = 40000 dB, computed without overflow"),
        (lambda: ref.chebyshev1_loss_db(1.0, 4, 0.5), 0.5,
         "Chebyshev I: T_n(1) = 1, so the loss at the ripple edge is the ripple"),
        (lambda: ref.chebyshev1_loss_db(0.0, 4, 0.5), 0.5, "Chebyshev I, even order: |T_4(0)| = 1, ripple at DC"),
        (lambda: ref.chebyshev1_loss_db(0.0, 5, 0.5), 0.0, "Chebyshev I, odd order: T_5(0) = 0, 0 dB at DC"),
        # T_3(2) = 4·2^3 - 3·2 = 26; eps^2 = 10^0.05 - 1 = 0.122018; 10 log10(1 + 0.122018·676) = 19.216 dB
        (lambda: ref.chebyshev1_loss_db(2.0, 3, 0.5), 19.216, "derived by hand (T_3(x) = 4x^3 - 3x)"),
        (lambda: ref.tuned_circuit_loss_db(1910e3, 1000e3, 100, 1), 42.84,
         "textbook worked example (from memory: Kennedy & Davis, image rejection alpha = 138.6 with Q = 100, "
         "455 kHz IF, 1000 kHz channel)"),
        (lambda: ref.tuned_circuit_loss_db(1910e3, 1000e3, 100, 3), 128.515,
         "three identical stages, dB add: derived by hand 3·20 log10(138.65) = 3·42.838 = 128.515 dB"),
    ],
)
def test_reference_filter_formulas(loss, expected_db, source):
    # the plain-Python reference's own filter formulas, checked against hand-derived values
    assert loss() == pytest.approx(expected_db, abs=5e-3), source


def test_tracking_output_filter_passes_a_spur_that_covers_the_channel():
    # Invented transmitter: IF 400 MHz, signal 40 MHz wide, channels 1150 and 1850 MHz, low-side LO
    # (750 MHz for 1150 MHz), output filter = two tuned circuits tracking the channel.  Product
    # (5,1,-1) = |5·400 - 750| = 1250 MHz, 5·40 = 200 MHz wide: 1150-1350 MHz, so it covers the
    # channel itself, where the tracking filter loses 0 dB: it reaches the output unfiltered
    # (derived by hand).  Taken at 1350 MHz (nearest the 1500 MHz tuning-range centre) the filter
    # would give it 2·10 log10(1 + (20·(1350/1150 - 1150/1350))^2) = 32.57 dB of rejection it
    # does not have.
    plan = plan_from_dict({
        "direction": "up",
        "rf": {"start_hz": "1150 MHz", "stop_hz": "1850 MHz", "step_hz": "700 MHz"},
        "signal": {"bandwidth_hz": "40 MHz", "level_dbm": -10},
        "lo": {"mode": "tracking", "side": "low"},
        "if": {"center_hz": "400 MHz", "bandwidth_hz": "50 MHz"},
        "max_order": 7,
        "mixer": {"rf_ref_dbm": -10},
        "filters": {"rf": {"kind": "tuned", "q_loaded": 20, "stages": 2, "tracks_channel": True}},
    })
    spur = rows(evaluate(plan).channel_frame(0), "product", 5, 1, -1)
    assert (spur["f_low_hz"].iloc[0], spur["f_high_hz"].iloc[0]) == pytest.approx((1150 * MHz, 1350 * MHz))
    assert spur["rf_atten_db"].iloc[0] == pytest.approx(0.0, abs=1e-9)
    assert spur["level_dbc"].iloc[0] == pytest.approx(spur["table_dbc"].iloc[0], abs=1e-9), "drive = reference"


# ------------------------------------------------------------ properties


@st.composite
def plans(draw):
    direction = draw(st.sampled_from(["down", "up"]))
    # 100 kHz to 10 MHz keeps every frequency, scaled by up to 2^+-8, inside the plan's physical
    # ranges (1 Hz to 1 THz; bandwidths and steps >= 1 mHz)
    if_c = draw(st.floats(1e5, 1e7))
    if_bw = if_c * draw(st.floats(1e-4, 0.5))
    bw = if_bw * draw(st.floats(0.05, 1.0))
    side = draw(st.sampled_from(["high", "low"]))
    start = draw(st.floats(1.01, 50.0)) * if_c if side == "low" else draw(st.floats(0.05, 50.0)) * if_c
    n_ch = draw(st.integers(1, 6))
    step = start * draw(st.floats(1e-4, 0.05))
    order = draw(st.integers(2, 9))
    return {
        "direction": direction,
        "rf": {"start_hz": start, "stop_hz": start + (n_ch - 1) * step, "step_hz": step},
        "signal": {"bandwidth_hz": bw},
        "lo": {"mode": "tracking", "side": side},
        "if": {"center_hz": if_c, "bandwidth_hz": if_bw},
        "max_order": order,
    }


def scaled(data: dict, k: float) -> dict:
    out = copy.deepcopy(data)
    for section, key in (("rf", "start_hz"), ("rf", "stop_hz"), ("rf", "step_hz"), ("signal", "bandwidth_hz"),
                         ("if", "center_hz"), ("if", "bandwidth_hz")):
        out[section][key] = data[section][key] * k
    return out


FREQ_COLUMNS = ["channel_hz", "lo_hz", "f_center_hz", "f_low_hz", "f_high_hz"]
SETTINGS = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(data=plans(), power=st.integers(-8, 8))
def test_scaling_every_frequency_scales_every_product_and_response(data, power):
    # Multiplying every frequency by 2^k is exact in floating point and the heterodyne relations
    # are homogeneous, so every product and response band scales by exactly 2^k and every
    # level (a function of frequency ratios only, here with no filters) stays (derived by hand).
    k = 2.0**power
    a = evaluate(plan_from_dict(data))
    b = evaluate(plan_from_dict(scaled(data, k)))
    for i in range(a.channels_hz.size):
        fa, fb = a.channel_frame(i), b.channel_frame(i)
        fb = fb.set_index(["kind", "rf_harmonic", "lo_harmonic", "sign"]).loc[
            fa.set_index(["kind", "rf_harmonic", "lo_harmonic", "sign"]).index].reset_index()
        np.testing.assert_array_equal(fa[FREQ_COLUMNS].to_numpy() * k, fb[FREQ_COLUMNS].to_numpy())
        np.testing.assert_array_equal(fa["level_dbc"].to_numpy(), fb["level_dbc"].to_numpy())
        np.testing.assert_array_equal(fa["in_band"].to_numpy(), fb["in_band"].to_numpy())


@SETTINGS
@given(data=plans(), k=st.floats(0.01, 100.0))
def test_scaling_by_any_factor_scales_products(data, k):
    a = evaluate(plan_from_dict(data))
    b = evaluate(plan_from_dict(scaled(data, k)))
    assert a.channels_hz.size == b.channels_hz.size
    fa, fb = a.channel_frame(0), b.channel_frame(0)
    fb = fb.set_index(["kind", "rf_harmonic", "lo_harmonic", "sign"]).loc[
        fa.set_index(["kind", "rf_harmonic", "lo_harmonic", "sign"]).index].reset_index()
    scale = max(data["rf"]["stop_hz"], data["if"]["center_hz"]) * k
    np.testing.assert_allclose(fa[FREQ_COLUMNS].to_numpy() * k, fb[FREQ_COLUMNS].to_numpy(),
                               rtol=1e-9, atol=1e-9 * scale)


@SETTINGS
@given(data=plans())
def test_wanted_is_found_once_per_channel_and_lands_in_the_passband(data):
    evaluation = evaluate(plan_from_dict(data))
    if_low = data["if"]["center_hz"] - data["if"]["bandwidth_hz"] / 2
    if_high = data["if"]["center_hz"] + data["if"]["bandwidth_hz"] / 2
    for i in range(evaluation.channels_hz.size):
        frame = evaluation.channel_frame(i)
        wanted = frame[frame["label"] == "wanted"]
        kinds = ["product", "response"] if data["direction"] == "down" else ["product"]
        assert sorted(wanted["kind"]) == kinds, "exactly one wanted product (and one wanted response for a receiver)"
        product = wanted[wanted["kind"] == "product"].iloc[0]
        assert (product["rf_harmonic"], product["lo_harmonic"]) == (1, 1)
        assert product["margin_db"] == np.inf
        # no LO grid: the wanted output sits on its passband centre (IF, or the channel), to rounding
        if data["direction"] == "down":
            assert product["f_center_hz"] == pytest.approx(data["if"]["center_hz"], rel=1e-9)
            assert product["f_low_hz"] >= if_low * (1 - 1e-9) and product["f_high_hz"] <= if_high * (1 + 1e-9)
            assert product["in_band"]
            response = wanted[wanted["kind"] == "response"].iloc[0]
            assert response["f_center_hz"] == pytest.approx(evaluation.channels_hz[i], rel=1e-9)
        else:
            assert product["f_center_hz"] == pytest.approx(evaluation.channels_hz[i], rel=1e-9)
            assert product["in_band"]
    assert not any("do not fit" in w for w in evaluation.warnings), "the signal fits the IF by construction"


@SETTINGS
@given(data=plans())
def test_no_negative_frequency_and_order_limits_hold(data):
    evaluation = evaluate(plan_from_dict(data))
    order = data["max_order"]
    frames = [evaluation.to_frame(), evaluation.channels_frame(), evaluation.hits, evaluation.channel_frame(0)]
    for frame in frames:
        if frame.empty:
            continue
        assert (frame[["f_center_hz", "f_low_hz", "f_high_hz", "lo_hz", "channel_hz"]] >= 0).all().all()
        assert (frame["f_low_hz"] <= frame["f_high_hz"]).all()
        assert (frame["order"] == frame["rf_harmonic"] + frame["lo_harmonic"]).all()
        assert (frame["order"] <= order).all() and (frame["order"] >= 1).all()
        assert (frame["rf_harmonic"] >= 0).all() and (frame["lo_harmonic"] >= 0).all()
        assert (frame.loc[frame["kind"] == "response", "rf_harmonic"] >= 1).all()
    full = evaluation.channel_frame(0)
    per_kind = full.groupby("kind").size().to_dict()
    assert per_kind["product"] == order * (order + 1), "derived by hand: N(N+1) products"
    if data["direction"] == "down":
        assert per_kind["response"] == order**2, "derived by hand: N^2 responses"


# ------------------------------------------------------------ LO filter: a drive check, not a level


def test_lo_filter_skirt_under_the_lo_is_flagged():
    # Receiver LO 110.7-120.7 MHz (high side of 100-110 MHz, 10.7 MHz IF).  A fixed 3rd-order
    # Butterworth LO band-pass at 125 MHz, 10 MHz wide.  Derived by hand at the lowest LO:
    # Omega = (110.7/125 - 125/110.7)·125/10 = (0.88560 - 1.12918)·12.5 = -3.0447,
    # loss = 10 log10(1 + 3.0447^6) = 29.04 dB, the largest over the LO range.
    lo_filter = {"kind": "butterworth", "response": "bandpass", "order": 3,
                 "f_center_hz": "125 MHz", "bandwidth_hz": "10 MHz"}
    evaluation = evaluate(plan_from_dict(receiver(filters={"lo": lo_filter})))
    (line,) = [w for w in evaluation.warnings if w.startswith("filters.lo:")]
    assert "the LO at 110.7 MHz is 29.0 dB down the filter's skirt (channel 100 MHz)" in line
    # not applied to levels: the margins are those of the same plan without the LO filter
    bare = evaluate(plan_from_dict(receiver()))
    assert np.array_equal(evaluation.worst_margin_db, bare.worst_margin_db)


def test_lo_filter_covering_the_lo_range_is_quiet():
    # Same receiver; LO band-pass centred on the LO range (115.7 MHz) and 40 MHz wide: at the
    # ends Omega = (110.7/115.7 - 115.7/110.7)·115.7/40 = -0.258, loss 10 log10(1 + 0.258^6)
    # = 0.001 dB (derived by hand), far under the 3 dB warning.
    lo_filter = {"kind": "butterworth", "response": "bandpass", "order": 3,
                 "f_center_hz": "115.7 MHz", "bandwidth_hz": "40 MHz"}
    evaluation = evaluate(plan_from_dict(receiver(filters={"lo": lo_filter})))
    assert not [w for w in evaluation.warnings if w.startswith("filters.lo:")]


def test_lo_filter_file_is_checked(tmp_path):
    plan = plan_from_dict(receiver(filters={"lo": {"kind": "touchstone", "path": "nowhere.s2p"}}))
    with pytest.raises(ValueError, match=r"^filters\.lo\.path: '.*nowhere\.s2p' is invalid; cannot be read"):
        evaluate(plan, base_dir=tmp_path)


def test_response_rejection_is_the_input_ratio_solved_for_equal_output():
    # Outside reference: the trade's definition of receiver spurious-response rejection (the
    # interferer-to-wanted input ratio at which the response output equals the wanted output),
    # solved numerically with scipy.optimize.brentq on the interferer level, against the
    # closed form (P_u - P_w) - level/m the engine reports.  FM example, first channel.
    from scipy.optimize import brentq

    data = json.loads(example_path("fm_receiver").read_text(encoding="utf-8"))
    data["signal"].pop("interferer_bandwidth_hz", None)  # a CW interferer, as the trade's test uses
    p_w = data["signal"]["level_dbm"]

    def row_at(p_u: float, m: int, n: int) -> pd.Series:
        data["signal"]["interferer_level_dbm"] = p_u
        frame = evaluate(plan_from_dict(data)).channel_frame(0)
        rows = frame[(frame["kind"] == "response") & (frame["rf_harmonic"] == m) & (frame["lo_harmonic"] == n)]
        return rows.sort_values("margin_db").iloc[0]

    for m, n in ((2, 2), (3, 3), (1, 1)):
        nominal = row_at(p_w, m, n)
        p_equal = brentq(lambda p, m=m, n=n: row_at(p, m, n)["level_dbc"], p_w - 50, 60.0, xtol=1e-9)
        assert nominal["rejection_db"] == pytest.approx(p_equal - p_w, abs=1e-6), (m, n)
        req = data["requirement"]["min_rejection_db"]
        assert nominal["margin_db"] == pytest.approx(p_equal - p_w - req, abs=1e-6), (m, n)
    # the half-IF of the FM example, worst over the band (108 MHz channel, LO 118.7 MHz, responding
    # band from 113.2925 MHz), derived by hand: T(2,2) = -20 + 20·log10(10^-1.5 + 10^-1) dBc at
    # -3 dBm (mixer_model rules 2-3, restated); the preselector's loss A at the band edge nearest
    # the channel, three tuned circuits of Q 40 (textbook formula, tests/reference_filters.py);
    # level = T + (P_u - A - P_ref) - A; rejection = -level/2: a FAIL by about 1.8 dB, where the
    # output ratio used before read +57.7 dB.
    del data["signal"]["interferer_level_dbm"]
    worst = evaluate(plan_from_dict(data)).worst_by_product
    half_if = worst[worst["label"] == "half-IF"]["margin_db"].min()
    t22 = -20 + 20 * math.log10(10 ** -1.5 + 10 ** -1)
    a = tuned_circuit_loss_db(113.2925e6, 108e6, 40, 3)
    level = t22 + (p_w - a + 3.0) - a
    assert half_if == pytest.approx(-level / 2 - 70, abs=1e-6)
    assert -2.0 < half_if < -1.7


def test_a_response_inside_the_wanted_channel_is_the_wanted_signal_not_an_interferer():
    # Tuned to 22.5 MHz with a 45 MHz IF, the (2,0) response sits at 45/2 = 22.5 MHz: on the
    # channel itself.  An "interferer" there is the wanted signal, whose own (2,0) product (its
    # second harmonic fed through to the IF) is judged as a product at the wanted drive; the
    # response has no margin (analysis FRAME_COLUMNS "margin_db").  Arithmetic by hand.
    data = receiver(rf={"start_hz": "22.5 MHz", "stop_hz": "22.5 MHz"}, signal={"bandwidth_hz": "3 kHz"},
                    **{"if": {"center_hz": "45 MHz", "bandwidth_hz": "15 kHz"}}, max_order=4,
                    filters={})
    frame = evaluate(plan_from_dict(data)).channel_frame(0)
    pick = (frame["rf_harmonic"] == 2) & (frame["lo_harmonic"] == 0)
    response = frame[pick & (frame["kind"] == "response")].iloc[0]
    product = frame[pick & (frame["kind"] == "product")].iloc[0]
    assert response["f_low_hz"] <= 22.5e6 <= response["f_high_hz"] and response["margin_db"] == math.inf
    assert product["in_band"] and math.isfinite(product["margin_db"])
