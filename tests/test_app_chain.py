"""The chain planner, driven from Python: the diagram, the end-to-end plane, a mixer's planes, re-planning."""

from __future__ import annotations

import json

import numpy as np
import pytest

from mixchart.app import planner
from mixchart.app_chain import ChainPlanner, end_to_end_data
from mixchart.chains import analyse_chain
from mixchart.chains.setup import set_up
from mixchart.chains.stage_view import apply_stage_plan, mixer_indices, stage_plan
from mixchart.cli import CHAIN_EXAMPLES, example_path
from mixchart.models import chain_from_dict, load_any

SCANNER = example_path("scanner_double_conversion")


def view_of(plan, index):
    return stage_plan(set_up(plan), index)


@pytest.mark.parametrize("name", sorted(CHAIN_EXAMPLES))
def test_a_mixer_s_view_written_back_unchanged_leaves_the_chain_as_it_was(name):
    plan = load_any(example_path(name))
    for i in mixer_indices(plan):
        assert apply_stage_plan(plan, i, view_of(plan, i)) == plan


def test_the_first_mixer_s_view_is_the_single_conversion_it_does():
    """Its products and responses are the chain's first conversion: the same LO at every channel."""
    plan = load_any(SCANNER)
    view = view_of(plan, 2)
    assert view.direction == "down" and view.rf == plan.rf and view.if_ == plan.chain[2].if_
    # the preselector is the nearest filter before it, across the LNA
    assert view.filters.if_ == plan.chain[3].filter and view.filters.rf == plan.chain[0].filter
    from mixchart.analysis import evaluate

    setup = set_up(plan)
    lo_chain = setup.nodes[3].lo_hz[2]
    ev = evaluate(view)
    np.testing.assert_array_equal(ev.lo_hz, lo_chain)
    # the mixer's drive in its view is its drive in the chain (the LNA's gain counted)
    drive = view.signal.level_dbm - setup.elements[0].point_loss_db(setup.nodes[2].f_hz, setup.nodes[0])
    np.testing.assert_allclose(drive, setup.nodes[2].level_dbm, atol=1e-9)


def test_planner_opens_a_chain_with_its_diagram_plane_and_first_mixer():
    widget = planner(SCANNER)
    app = widget.app
    assert isinstance(app, ChainPlanner)
    texts = [getattr(c, "value", getattr(c, "description", "")) for c in app.diagram.children]
    assert "mixer 1" in texts and "mixer 2" in texts
    assert any("100 MHz to 500 MHz" in t and "normal sense" in t for t in texts)
    assert any("1.05 GHz" in t and "inverted" in t for t in texts)
    assert app.stage_app.state.plan.name.endswith(": mixer 1")
    assert "limited by mixer 1" in app.banner.value and "licensed practice" in app.banner.value
    data = app.sources["tracks"].data
    assert len(data["xs"]) > 0 and all(c.startswith("#") for c in data["colour"])
    assert "IF/3 feedthrough at mixer 1" in "".join(data["path"])


def test_clicking_a_mixer_shows_its_planes():
    app = planner(SCANNER).app
    button = next(c for c in app.diagram.children if getattr(c, "description", "") == "mixer 2")
    button.click()
    assert app.selected == 4 and app.stage_app.state.plan.name.endswith(": mixer 2")
    assert app.stage_app.state.plan.rf.start_hz == app.stage_app.state.plan.rf.stop_hz == 1050e6


def test_moving_a_mixer_s_if_re_plans_the_chain_and_the_next_tracking_lo_follows():
    app = planner(SCANNER).app
    assert app.stage_app.state.try_update({"if.center_hz": 1100e6}) is None
    assert app.plan.chain[2].if_.center_hz == 1100e6
    nodes = app.result.nodes
    assert nodes.loc[5, "lo_low_hz"] == pytest.approx(1100e6 - 10.7e6)  # mixer 2's low-side LO follows
    assert app.result.summary == analyse_chain(app.plan).summary
    assert any("1.1 GHz" in getattr(c, "value", "") for c in app.diagram.children)


def test_an_edit_the_chain_cannot_take_keeps_the_last_valid_chain_and_says_why(tmp_path):
    data = json.loads(SCANNER.read_text())
    data["chain"][4]["lo"] = {"mode": "fixed", "fixed_hz": "1039.3 MHz"}
    path = tmp_path / "fixed_lo2.json"
    path.write_text(json.dumps(data))
    app = planner(path).app
    before = app.plan
    assert app.stage_app.state.try_update({"if.center_hz": 1100e6}) is None  # the mixer's own view takes it
    assert app.plan == before and "chain.4.if" in app.message.value and "last valid plan" in app.message.value


def test_user_text_is_escaped_in_the_chain_planner():
    data = json.loads(SCANNER.read_text())
    data["chain"][1]["name"] = "<script>alert(1)</script>"
    app = ChainPlanner(chain_from_dict(data))
    html = "".join(getattr(c, "value", "") for c in app.diagram.children) + app.table.value + app.banner.value
    assert "<script>" not in html and "&lt;script&gt;" in html


def test_the_end_to_end_plane_crosses_the_passband_where_each_response_is_heard():
    """Each path's line, at the channel's LOs, crosses the passband's centre at the path's own point."""
    result = analyse_chain(load_any(SCANNER))
    index = int(np.argmin(result.worst_margin_db))
    data = end_to_end_data(result, index)
    frame = result.channel_frame(index)
    near = frame[frame["margin_db"] < 10]
    assert len(data["tracks"]["xs"]) == min(len(near), 80) > 0
    centre = 0.5 * (result.pass_low_hz[index] + result.pass_high_hz[index]) / 1e6
    by_name = {f"{k}: {p}": (x / 1e6, s) for k, p, x, s in zip(near["kind"], near["path"], near["x_hz"],
                                                                 near["freq_slope"], strict=True)}
    for xs, ys, name in zip(data["tracks"]["xs"], data["tracks"]["ys"], data["tracks"]["path"], strict=True):
        x0, slope = by_name[name]
        if slope:
            x_at_centre = xs[0] + (centre - ys[0]) * (xs[1] - xs[0]) / (ys[1] - ys[0])
            assert x_at_centre == pytest.approx(x0, rel=1e-9, abs=1e-9)
    assert data["tracks"]["margin_db"] == sorted(data["tracks"]["margin_db"], reverse=True)
    # the wanted path crosses the passband at the channel
    wx, wy = data["wanted"]["x"], data["wanted"]["y"]
    x_at = wx[0] + (centre - wy[0]) * (wx[1] - wx[0]) / (wy[1] - wy[0])
    assert x_at == pytest.approx(result.channels_hz[index] / 1e6, rel=1e-9)


def test_the_channel_slider_moves_the_plane():
    app = planner(SCANNER).app
    before = dict(app.sources["tracks"].data)
    app.channel_slider.value = 0
    assert app.channel_label.value == "100 MHz" and "100 MHz" in app.figure.title.text
    assert app.sources["tracks"].data["path"] != before["path"] or app.sources["tracks"].data["xs"] != before["xs"]


def test_a_chain_result_plots_its_end_to_end_plane_lazily():
    result = analyse_chain(load_any(example_path("two_step_transmitter")))
    fig = result.plot()
    assert fig.name == "end_to_end" and "2.3 GHz" in fig.title.text  # the worst channel by default
    assert "2.2 GHz" in result.plot(0).title.text
    with pytest.raises(IndexError, match="index: 9999 is invalid"):
        result.plot(9999)


def test_saving_writes_the_chain_where_it_was_opened_atomically_and_exactly(tmp_path):
    path = tmp_path / "scanner.json"
    path.write_text(SCANNER.read_text())
    app = planner(path).app
    assert app.save_path.value == str(path)
    assert app.stage_app.state.try_update({"if.center_hz": 1100e6}) is None
    app.save_button.click()
    assert str(path) in app.save_message.value
    saved = load_any(path)
    assert saved == app.plan and saved.chain[2].if_.center_hz == 1100e6
    assert sorted(p.name for p in tmp_path.iterdir()) == ["scanner.json"]  # no temporary file left
    # the mixer's own File tab no longer saves its one-conversion view
    tabs = app.stage_app.controls.panel.children[0]
    assert "Save the chain" in tabs.children[4].value


def test_a_save_to_a_folder_that_does_not_exist_says_so_and_writes_nothing(tmp_path):
    app = planner(SCANNER).app
    app.save_path.value = str(tmp_path / "missing" / "x.json")
    assert app.save() is None and "missing" in app.save_message.value
    assert not (tmp_path / "missing").exists()


def test_a_one_mixer_chain_file_opens_as_a_chain_and_is_saved_as_one(tmp_path):
    """A version-2 file stays version 2: it is never rewritten in the version-1 layout."""
    from mixchart.models import migrate_v1, save_any
    from mixchart.plan import load_plan

    path = tmp_path / "fm_chain.json"
    save_any(migrate_v1(load_plan(example_path("fm_receiver"))), path)
    app = planner(path).app
    assert isinstance(app, ChainPlanner)
    app.save()
    assert load_any(path).schema_version == 2
