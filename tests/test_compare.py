"""Plans side by side (mixchart.compare): rows matched as an engineer means "the same product".

The margins compared are the evaluation's own (tested against outside sources elsewhere);
what is checked here is the matching, the sign of the delta and the plan differences.
"""

from __future__ import annotations

import math

import numpy as np

from mixchart.analysis import evaluate
from mixchart.compare import COMPARE_COLUMNS, compare_frame, headline, plan_differences
from mixchart.state import example_plan


def _pair(**changes):
    plan, folder = example_plan("fm_receiver")
    ref = evaluate(plan, base_dir=folder)
    edited = evaluate(plan.with_changes(changes), base_dir=folder)
    return edited, ref


def test_the_image_is_matched_by_name_across_a_flip_of_the_injection_side():
    edited, ref = _pair(**{"lo.side": "low"})
    frame = compare_frame(edited, ref)
    assert tuple(frame.columns) == COMPARE_COLUMNS
    image = frame[frame["label"] == "image"]
    assert len(image) == 1  # one row, though its sign differs: f_LO + f_IF high-side, f_LO - f_IF low-side
    row = image.iloc[0]
    assert row["sign"] == -1 and row["ref_sign"] == 1
    worst = {lab: m for lab, m in zip(ref.to_frame()["label"], ref.to_frame()["margin_db"], strict=True)}
    assert row["ref_margin_db"] == worst["image"]
    assert math.isclose(row["delta_margin_db"], row["margin_db"] - row["ref_margin_db"])


def test_generic_spurs_are_matched_by_harmonics_and_sign_and_missing_rows_are_nan():
    edited, ref = _pair(max_order=9)
    frame = compare_frame(edited, ref)
    spurs = frame[frame["label"] == "spur"]
    assert not spurs.duplicated(["kind", "rf_harmonic", "lo_harmonic", "sign"]).any()
    high = spurs[(spurs["rf_harmonic"] + spurs["lo_harmonic"]) > 7]  # only the edited plan goes past order 7
    assert len(high) > 0 and high["ref_margin_db"].isna().all() and high["delta_margin_db"].isna().all()
    low = spurs[(spurs["rf_harmonic"] + spurs["lo_harmonic"]) <= 7]
    np.testing.assert_allclose(low["delta_margin_db"], 0.0, atol=1e-9)  # same plan below order 7
    # the worst of either plan leads
    lower = np.fmin(frame["margin_db"], frame["ref_margin_db"]).to_numpy()
    assert np.all(np.diff(lower) >= 0)


def test_plan_differences_and_headline_answer_what_the_edit_bought():
    plan, folder = example_plan("fm_receiver")
    moved = plan.with_changes({"if.center_hz": 21.4e6, "name": "other name"})
    assert plan_differences(moved, plan) == [("if.center_hz", "10.7 MHz", "21.4 MHz")]  # the name is left out
    assert plan_differences(plan, plan) == []
    edited, ref = evaluate(moved, base_dir=folder), evaluate(plan, base_dir=folder)
    line = headline(edited, ref, "10.7 MHz IF")
    delta = edited.summary.worst_margin_db - ref.summary.worst_margin_db
    assert line.startswith("against \u201c10.7 MHz IF\u201d: worst margin ")
    assert f"(\u0394 {delta:+.1f} dB)".replace("-", "\u2212") in line
    assert f"failing channels {ref.summary.n_failing_channels} of 201" in line
