"""The planner app without a browser: state, wiring, drags, save/load.

The browser-level checks (that a real page draws and reacts) are in
tests/browser/.  Here the logic is driven as the widgets and BokehJS would
drive it, through the same entry points.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

from bokeh.core.serialization import Serializer

from mixchart.analysis import evaluate
from mixchart.app import PlannerApp, PlanState, example_plan
from mixchart.chart import ViewOptions, chart_data
from mixchart.plan import load_plan


@pytest.fixture()
def app() -> PlannerApp:
    plan, folder = example_plan("fm_receiver")
    return PlannerApp(PlanState(plan, folder))


def _data(app: PlannerApp) -> dict[str, dict]:
    def plain(v):
        if isinstance(v, list):  # e.g. patches' xs: a list of arrays
            return [np.asarray(x).tolist() if isinstance(x, np.ndarray) else x for x in v]
        return list(np.asarray(v).ravel())

    return {name: {k: plain(v) for k, v in src.data.items()} for name, src in app.chart.sources.items()}


def _browser_edit(app: PlannerApp, source_name: str, new_data: dict) -> None:
    """Send the message BokehJS sends when a tool edits a source (one ModelChanged event)."""
    source = app.chart.sources[source_name]
    # As BokehJS sends it: a plain event object, the model as a reference, the value serialised.
    content = {
        "event": "jsevent",
        "kind": "ModelChanged",
        "model": {"id": source.id},
        "attr": "data",
        "new": Serializer().encode(new_data),
    }
    app.bokeh._sync_model(app.bokeh, content, [])


def test_plan_change_updates_every_source_and_the_table(app: PlannerApp) -> None:
    before = _data(app)
    table_before = app.table.value
    assert app.state.try_update({"if.center_hz": "21.4 MHz", "lo.side": "low"}) is None
    after = _data(app)
    changed = {name for name in before if before[name] != after[name]}
    # Every source that depends on the IF or the LO must change (the RF band does not, and the
    # FM example's tracking preselector is shaded along the plan, tuning_track, its fixed-band
    # source tuning_skirt staying empty).
    assert before["tuning_skirt"]["x0"] == [] and after["tuning_skirt"]["x0"] == []
    assert changed >= set(before) - {"rf_band", "out_input_band", "tuning_skirt"}, set(before) - changed
    assert app.table.value != table_before
    assert "21.4 MHz" in app.status.value
    assert app.controls.if_center.value == "21.4 MHz"
    assert app.controls.side.value == "low"


def test_text_field_accepts_units_and_rejects_nonsense_without_losing_the_plan(app: PlannerApp) -> None:
    app.controls.if_center.value = "21.4MHz"
    assert app.state.plan.if_.center_hz == 21.4e6
    good = app.state.plan
    app.controls.if_center.value = "banana"
    assert "banana" in app.controls.errors["if_center"].value
    assert app.state.plan == good  # the chart keeps the last valid plan
    app.controls.rf_stop.value = "80 MHz"  # below the start
    assert "below" in app.controls.errors["rf_stop"].value
    assert app.state.plan == good
    app.controls.if_bandwidth.value = "50 MHz"  # wider than twice the IF centre
    assert "0 Hz" in app.controls.errors["if_bandwidth"].value
    assert "Traceback" not in app.controls.errors["if_bandwidth"].value


def test_a_browser_drag_of_the_if_band_changes_the_plan_exactly_once(app: PlannerApp) -> None:
    calls: list[str] = []
    app.state.observe(lambda _state, what: calls.append(what))
    drags: list[tuple] = []
    apply = app.state.apply_band_drag
    app.state.apply_band_drag = lambda *args: (drags.append(args), apply(*args))[1]
    scale = app._last_meta["out_scale"]
    _browser_edit(app, "out_output_band", {"y0": [12.0e6 / scale], "y1": [12.23e6 / scale]})
    assert calls == ["plan"], calls  # once, not twice
    assert len(drags) == 1  # jupyter_bokeh 4.1 alone would run the source callback twice
    # derived by hand: centre (12.0 + 12.23)/2 = 12.115 MHz, width 230 kHz unchanged
    assert app.state.plan.if_.center_hz == pytest.approx(12.115e6)
    assert app.state.plan.if_.bandwidth_hz == 230e3
    assert app.controls.if_center.value == "12.115 MHz"


def test_a_browser_drag_of_the_rf_band_moves_the_band_on_its_raster(app: PlannerApp) -> None:
    scale = app._last_meta["scale"]
    plan = app.state.plan
    half = plan.signal.bandwidth_hz / 2
    lo, hi = plan.rf.start_hz - half + 5.03e6, plan.rf.stop_hz + half + 5.03e6
    _browser_edit(app, "rf_band", {"x0": [lo / scale], "x1": [hi / scale]})
    new = app.state.plan.rf
    assert new.start_hz == pytest.approx(93.0e6)  # 88 MHz + 5.03 MHz snapped to the 100 kHz raster
    assert new.stop_hz - new.start_hz == pytest.approx(plan.rf.stop_hz - plan.rf.start_hz)


def test_a_drag_to_an_impossible_place_is_refused_and_the_band_goes_back(app: PlannerApp) -> None:
    good = app.state.plan
    scale = app._last_meta["out_scale"]
    _browser_edit(app, "out_output_band", {"y0": [-1.0e6 / scale], "y1": [0.5e6 / scale]})
    assert app.state.plan == good
    assert app.controls.errors["plan"].value
    band = app.chart.sources["out_output_band"].data
    assert band["y0"][0] * scale == pytest.approx(good.if_.f_low_hz)


def test_channel_slider_moves_the_output_plane(app: PlannerApp) -> None:
    if app.controls.channel.value == 0:  # the worst channel may be the first: start from another
        app.controls.channel.value = 1
    lines_before = _data(app)["out_lines"]
    app.controls.channel.value = 0
    ev = app.state.evaluation
    assert app.state.view.channel_hz == ev.channels_hz[0]
    assert "88 MHz" in app.controls.channel_text.value
    assert _data(app)["out_lines"] != lines_before
    assert app.chart.output.title.text.endswith("(channel 88 MHz)")


def test_view_options_do_not_change_the_plan(app: PlannerApp) -> None:
    plan = app.state.plan
    app.controls.normalised.value = True
    assert app.chart.output.xaxis[0].axis_label == "RF input / LO"
    app.controls.orders_shown.value = 3
    assert max(app.chart.sources["out_lines"].data["m"], default=0) <= 3
    assert app.state.plan == plan


def test_filter_controls_build_a_valid_spec(app: PlannerApp) -> None:
    fc = app.controls.if_filter
    fc.kind.value = "chebyshev1"
    fc.centre.value = "10.7 MHz"
    fc.bandwidth.value = "250 kHz"
    fc.order.value = 5
    spec = app.state.plan.filters.if_
    assert spec.kind == "chebyshev1" and spec.order == 5 and spec.bandwidth_hz == 250e3
    fc.spec_json.value = '{"kind": "butterworth", "response": "bandpass"}'  # incomplete
    assert "filters.if" in fc.error.value or "if" in fc.error.value
    assert app.state.plan.filters.if_ == spec


def test_compare_keeps_a_reference(app: PlannerApp) -> None:
    app.controls.ref_name.value = "high side"
    app.controls.keep_ref.click()
    app.state.try_update({"lo.side": "low"})
    text = app.compare.value
    assert "edited plan" in text and "high side (shown)" in text
    assert "high-side" in text and "low-side" in text  # each kept plan in words
    assert "<code>lo.side</code> high \u2192 low" in text  # what changed
    _, body = app.reference_box.children
    chart, table = body.children
    assert chart is app.reference_panel.widget
    # the reference keeps its own worst-case table, led by its worst row
    reference = app.state.reference[1]
    ref_first_row = reference.to_frame().iloc[0]
    assert ref_first_row["margin_db"] == reference.summary.worst_margin_db
    assert ref_first_row["label"] in table.value and f"{ref_first_row['margin_db']:+.1f}" in table.value
    assert "Reference: worst case" in table.value
    app.controls.clear_ref.click()
    assert app.compare.value == "" and not app.reference_box.children
    assert app.controls.ref_pick.disabled and app.controls.ref_pick.options == ()


def test_several_named_references_and_the_delta_margin_table(app: PlannerApp) -> None:
    # Item 16: several references, each named; the table lines the plans up row by row with a delta.
    from mixchart.compare import compare_frame

    c = app.controls
    c.keep_ref.click()  # blank name: the plan's name
    first = app.state.plan.name
    assert list(app.state.references) == [first] and c.ref_pick.value == first
    app.state.try_update({"if.center_hz": 21.4e6})
    c.ref_name.value = "IF 21.4 MHz"
    c.keep_ref.click()
    app.state.try_update({"lo.side": "low"})
    assert list(c.ref_pick.options) == [first, "IF 21.4 MHz"] and c.ref_pick.value == "IF 21.4 MHz"
    assert c.ref_name.value == ""  # ready for the next name
    c.ref_pick.value = first  # line the edited plan up against the first reference
    assert app.state.reference_name == first
    text = app.compare.value
    assert "<code>if.center_hz</code> 10.7 MHz \u2192 21.4 MHz" in text and "<code>lo.side</code> high" in text
    ref_ev, ev = app.state.reference[1], app.state.evaluation
    delta = ev.summary.worst_margin_db - ref_ev.summary.worst_margin_db
    assert f"\u0394 {delta:+.1f} dB".replace("-", "\u2212") in text  # the headline's answer
    frame = compare_frame(ev, ref_ev)
    row = frame[frame["label"] == "image"].iloc[0]
    assert f"{row['delta_margin_db']:+.1f}" in text.split("mixchart-delta-table")[1]
    # keeping the same name twice numbers it; dropping shows the newest left
    c.ref_name.value = "IF 21.4 MHz"
    c.keep_ref.click()
    assert "IF 21.4 MHz (2)" in app.state.references and app.state.reference_name == "IF 21.4 MHz (2)"
    c.clear_ref.click()
    assert app.state.reference_name == "IF 21.4 MHz" and "IF 21.4 MHz (2)" not in c.ref_pick.options


def test_the_reference_chart_follows_the_edited_channel_and_zoom(app: PlannerApp) -> None:
    app.state.keep_reference("as it was")
    app.state.try_update({"lo.side": "low"})
    app.state.set_view(channel_hz=95e6)
    ref = app.reference_panel.chart
    # the high-side reference's LO (channel + 10.7 MHz) lies above the low-side plan's LO window: that
    # axis keeps the reference's own window; the RF axes and the IF axis follow
    assert app.reference_panel.same_zoom == {"tuning_x": True, "tuning_y": False, "output_x": True, "output_y": True}
    assert "except the tuning plane&#x27;s LO axis" in app.reference_box.children[0].value
    assert ref.tuning.y_range.start <= 95 + 10.7 <= ref.tuning.y_range.end
    assert "channel 95 MHz" in ref.output.title.text  # the same channel
    # a zoom of the edited plane (as BokehJS reports it) moves the reference's plane with it
    app.chart.tuning.x_range.start, app.chart.tuning.x_range.end = 90.0, 92.0
    assert (ref.tuning.x_range.start, ref.tuning.x_range.end) == (90.0, 92.0)
    app.chart.output.y_range.end = 11.0
    assert ref.output.y_range.end == 11.0
    # a reference whose output axes differ keeps its own output window, and the label says so
    assert app.state.try_update({"if.center_hz": 455e3, "if.bandwidth_hz": 10e3, "filters.if": None}) is None
    assert app.reference_panel.same_zoom["tuning_x"] and not app.reference_panel.same_zoom["output_y"]
    assert "the output plane&#x27;s output axis" in app.reference_box.children[0].value
    app.chart.output.y_range.end = 0.5
    assert ref.output.y_range.end != 0.5


def test_save_load_reevaluates_to_what_the_screen_shows(app: PlannerApp, tmp_path) -> None:
    app.state.try_update({"if.center_hz": 10.8e6, "requirement.min_rejection_db": 65})
    path = app.save(str(tmp_path / "chosen.json"))
    assert path is not None and "Download" in app.controls.file_msg.value
    again = load_plan(path)
    assert again == app.state.plan
    ev = evaluate(again, base_dir=tmp_path)
    shown = app.state.evaluation
    assert ev.summary == shown.summary
    np.testing.assert_array_equal(ev.worst_margin_db, shown.worst_margin_db)
    # what the chart draws from the reloaded plan is what the screen shows, column by column
    reloaded, on_screen = chart_data(ev, app.state.view).sources, chart_data(shown, app.state.view).sources
    assert reloaded.keys() == on_screen.keys()
    for name in on_screen:
        assert reloaded[name].keys() == on_screen[name].keys(), name
        for column in on_screen[name]:
            np.testing.assert_equal(reloaded[name][column], on_screen[name][column], err_msg=f"{name}.{column}")


def test_upload_of_a_bad_file_shows_a_message_and_keeps_the_plan(app: PlannerApp) -> None:
    good = app.state.plan
    app._on_upload({"new": ({"name": "x.json", "content": memoryview(b'{"direction": "sideways"}')},)})
    assert "direction" in app.controls.file_msg.value
    assert app.state.plan == good
    text = json.dumps(good.with_changes({"name": "uploaded <b>plan</b>"}).to_dict()).encode()
    app._on_upload({"new": ({"name": "y.json", "content": memoryview(text)},)})
    assert app.state.plan.name == "uploaded <b>plan</b>"
    assert "uploaded &lt;b&gt;plan&lt;/b&gt;" in app.status.value  # user text is escaped


def test_state_is_usable_without_widgets() -> None:
    plan, folder = example_plan("uplink_transmitter")
    state = PlanState(plan, folder)
    seen: list[str] = []
    state.observe(lambda _s, what: seen.append(what))
    assert state.try_update({"if.center_hz": plan.if_.center_hz}) is None  # no change, no event
    assert seen == []
    assert state.try_update({"max_order": 99}) is not None
    state.set_view(channel_hz=2.35e9)
    assert seen == ["view"]
    assert state.channel_index == state.evaluation.nearest_channel(2.35e9)
    assert ViewOptions().channel_hz is None


def test_one_refresh_is_one_patch_message(app: PlannerApp) -> None:
    # jupyter_bokeh's stock widget sends one PATCH-DOC (3+ comm messages) per changed source;
    # ours collects a refresh's changes into one PATCH-DOC (header, metadata, content).
    sent: list[dict] = []
    original = app.bokeh.send
    app.bokeh.send = lambda content, buffers=None: (sent.append(content), original(content, buffers))[1]
    assert app.state.try_update({"requirement.min_rejection_db": 73.0}) is None
    assert len(sent) == 3, [list(m) for m in sent]
    header = json.loads(sent[0]["payload"])
    assert header["msgtype"] == "PATCH-DOC"
    events = json.loads(sent[2]["payload"])["events"]
    assert len(events) > 1  # several sources changed, all in this one message


def test_filter_form_shows_only_the_fields_of_its_kind(app: PlannerApp) -> None:
    fc = app.controls.rf_filter
    assert fc.kind.value == "tuned"  # the example's preselector
    shown = {f for f in ("order", "centre", "bandwidth", "q", "ripple", "stop")
             if getattr(fc, f).layout.display != "none"}
    assert shown == {"order", "centre", "q"} and fc.order.description == "stages"
    fc.kind.value = "elliptic"
    shown = {f for f in ("order", "centre", "bandwidth", "q", "ripple", "stop")
             if getattr(fc, f).layout.display != "none"}
    assert shown == {"order", "centre", "bandwidth", "ripple", "stop"} and fc.order.description == "order"
    assert fc.kind.layout.display != "none"  # hiding a field never hides the kind selector


def test_name_notes_and_interferer_level_are_editable(app: PlannerApp) -> None:
    app.controls.name.value = "tuner, option B"
    app.controls.notes.value = "try a 21.4 MHz IF next"
    assert (app.state.plan.name, app.state.plan.notes) == ("tuner, option B", "try a 21.4 MHz IF next")
    before = app.state.evaluation.to_frame()
    app.controls.interferer.value = "-20"  # unwanted inputs 10 dB above the -30 dBm wanted signal
    assert app.state.plan.signal.interferer_level_dbm == -20.0
    after = app.state.evaluation.to_frame()
    image = lambda f: f[(f["label"] == "image")]["level_dbc"].iloc[0]  # noqa: E731
    # derived by hand: a (1,1) response moves 1 dB per dB of interferer level (m = 1)
    assert image(after) - image(before) == pytest.approx(10.0)
    app.controls.interferer.value = "loud"
    assert "interferer_level_dbm" in app.controls.errors["plan"].value
    app.controls.interferer.value = ""
    assert app.state.plan.signal.interferer_level_dbm is None


def test_snapshot_from_the_app_writes_an_offline_report(app: PlannerApp, tmp_path) -> None:
    app.state.try_update({"name": "tuner <draft>"})
    app.state.keep_reference()
    app.state.try_update({"lo.side": "low"})
    path = app.snapshot(str(tmp_path / "meeting.html"))
    assert path is not None and "wrote" in app.controls.file_msg.value
    text = path.read_text(encoding="utf-8")
    assert "tuner &lt;draft&gt;" in text and "tuner <draft>" not in text  # user text escaped
    assert 'id="reference-json"' in text  # the kept reference travels with the snapshot
    assert "<script src=\"http" not in text  # BokehJS inline: opens offline


# ---------------------------------------------------------------- files stay where the user expects
def test_saves_and_snapshots_land_next_to_the_opened_plan_with_the_full_path_and_a_download(tmp_path) -> None:
    from mixchart.app import planner

    folder = tmp_path / "project"
    folder.mkdir()
    plan, _ = example_plan("uplink_transmitter")
    source = folder / "link_tx.json"
    source.write_text(json.dumps(plan.to_dict()), encoding="utf-8")
    app = planner(str(source)).app
    assert app.controls.save_path.value == "link_tx.json"  # the file-name field follows the opened plan
    app.controls.save_path.value = "link_tx_option_b.json"
    app.controls.save.click()
    written = folder / "link_tx_option_b.json"
    assert written.is_file() and load_plan(written) == app.state.plan
    msg = app.controls.file_msg.value
    assert str(written) in msg and 'download="link_tx_option_b.json"' in msg
    app.controls.snapshot.click()
    html_file = folder / "link_tx_option_b.html"
    assert html_file.is_file() and str(html_file) in app.controls.file_msg.value
    assert 'download="link_tx_option_b.html"' in app.controls.file_msg.value
    assert "data:text/html;base64," in app.controls.file_msg.value


def test_a_built_in_example_saves_into_the_working_directory(tmp_path, monkeypatch) -> None:
    from mixchart.app import planner

    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("MIXCHART_CWD", raising=False)
    app = planner().app
    assert app.state.save_dir == tmp_path.resolve()
    path = app.save()
    assert path == tmp_path.resolve() / "fm_receiver.json" and path.is_file()
    # mixchart serve runs its notebook in a temporary folder and passes the user's folder on
    elsewhere = tmp_path / "where_the_user_ran_serve"
    elsewhere.mkdir()
    monkeypatch.setenv("MIXCHART_CWD", str(elsewhere))
    assert planner().app.save() == elsewhere.resolve() / "fm_receiver.json"


def test_loading_a_plan_moves_the_save_folder_and_the_file_name(app: PlannerApp, tmp_path) -> None:
    other = tmp_path / "other"
    other.mkdir()
    (other / "ku.json").write_text(json.dumps(example_plan("ku_block_converter")[0].to_dict()), encoding="utf-8")
    app.controls.load_path.value = str(other / "ku.json")
    app.controls.load.click()
    assert app.state.save_dir == other.resolve() and app.controls.save_path.value == "ku.json"
    assert app.save() == other.resolve() / "ku.json"


def test_every_warning_is_on_screen_and_follows_the_plan(app: PlannerApp) -> None:
    import html as html_lib

    warnings = app.state.evaluation.warnings
    assert warnings
    for text in warnings:
        assert html_lib.escape(text) in app.warnings.value
    # a plan change that adds a warning shows it: the IF moved into the RF band
    assert app.state.try_update({"if.center_hz": "100 MHz", "if.bandwidth_hz": "230 kHz"}) is None
    new = [w for w in app.state.evaluation.warnings if w.startswith("IF passband")]
    assert new and html_lib.escape(new[0]) in app.warnings.value


def test_lo_mode_switches_both_ways(app: PlannerApp) -> None:
    app.state.set_view(channel_hz=98e6)
    lo_here = float(app.state.evaluation.lo_hz[app.state.channel_index])
    app.controls.lo_mode.value = "fixed"
    assert app.state.plan.lo.mode == "fixed" and app.state.plan.lo.fixed_hz == lo_here
    assert not app.controls.lo_fixed.disabled and app.controls.errors["plan"].value == ""
    app.controls.lo_mode.value = "tracking"
    assert app.state.plan.lo.mode == "tracking" and app.state.plan.lo.fixed_hz is None
    assert app.state.plan.lo.side == "high" and app.controls.errors["plan"].value == ""


# ---------------------------------------------------------------- safe gestures and undo
def test_a_moved_rf_band_keeps_its_channel_count_and_snaps_to_the_raster(app: PlannerApp) -> None:
    # Four drags of the FM band by odd amounts: 201 channels before and after each (derived by
    # hand: a move keeps the count; the start lands on the 100 kHz raster, nearest, ties up).
    n0 = app.state.plan.rf.n_channels
    half = app.state.plan.signal.bandwidth_hz / 2
    for shift in (0.43e6, -1.27e6, 2.05e6, 0.3333e6):
        plan = app.state.plan
        low, high = plan.rf.start_hz - half + shift, plan.rf.stop_hz + half + shift
        assert app.state.apply_band_drag("rf", low, high) is None
        assert app.state.plan.rf.n_channels == n0
        assert app.state.plan.rf.start_hz / 100e3 == pytest.approx(round(app.state.plan.rf.start_hz / 100e3), abs=1e-9)
    # ties go up: a start of 88.05 MHz on a 100 kHz raster is 88.1 MHz
    plan = app.state.plan
    shift = 88.05e6 - plan.rf.start_hz
    app.state.apply_band_drag("rf", plan.rf.start_hz - half + shift, plan.rf.stop_hz + half + shift)
    assert app.state.plan.rf.start_hz == pytest.approx(88.1e6)


def test_a_dragged_if_band_snaps_to_a_grid_of_its_decade(app: PlannerApp) -> None:
    # 230 kHz passband: grid 10^(5 - 2) = 1 kHz; a drag to 10.7234 MHz gives 10.723 MHz
    w_if = app.state.plan.if_.bandwidth_hz
    assert app.state.apply_band_drag("if", 10.7234e6 - w_if / 2, 10.7234e6 + w_if / 2) is None
    assert app.state.plan.if_.center_hz == pytest.approx(10.723e6)
    assert app.state.plan.if_.bandwidth_hz == w_if


def test_every_plan_change_can_be_undone_and_redone(app: PlannerApp, tmp_path) -> None:
    start = app.state.plan
    assert not app.state.can_undo and app.controls.undo.disabled and app.controls.redo.disabled
    app.controls.if_center.value = "10.8 MHz"  # a field
    after_field = app.state.plan
    w_if = after_field.if_.bandwidth_hz
    app.state.apply_band_drag("if", 11.0e6 - w_if / 2, 11.0e6 + w_if / 2)  # a drag
    after_drag = app.state.plan
    app.controls.side.value = "low"  # a button
    assert app.state.plan.lo.side == "low" and not app.controls.undo.disabled
    app.controls.undo.click()
    assert app.state.plan == after_drag and not app.controls.redo.disabled
    app.controls.undo.click()
    assert app.state.plan == after_field
    app.controls.undo.click()
    assert app.state.plan == start and app.controls.undo.disabled
    assert app.controls.if_center.value == "10.7 MHz"  # the widgets show the plan undone to
    app.controls.redo.click()
    app.controls.redo.click()
    assert app.state.plan == after_drag
    app.controls.redo.click()
    assert app.state.plan.lo.side == "low" and app.controls.redo.disabled
    # a new change after an undo forgets the redo
    app.controls.undo.click()
    app.controls.interferer.value = "-20"
    assert not app.state.can_redo
    # a load is undone too
    other = tmp_path / "ku.json"
    other.write_text(json.dumps(example_plan("ku_block_converter")[0].to_dict()), encoding="utf-8")
    before_load = app.state.plan
    assert app.state.load_path(other) is None
    app.controls.undo.click()
    assert app.state.plan == before_load


def test_an_invalid_entry_marks_the_banner_and_the_charts_until_it_is_corrected(app: PlannerApp) -> None:
    # Item 10: while a field holds an invalid entry the chart and the banner say they show the last
    # valid plan; correcting it clears the mark.
    mark = PlannerApp.STALE_MARK
    assert mark not in app.status.value and mark not in app.chart.tuning.title.text
    app.controls.if_center.value = "banana"
    assert mark in app.status.value
    assert app.chart.tuning.title.text.endswith(mark) and app.chart.output.title.text.endswith(mark)
    app.state.set_view(channel_hz=100e6)  # a redraw keeps the mark while the entry is still bad
    assert app.chart.output.title.text.endswith(mark)
    app.controls.if_center.value = "10.7 MHz"
    assert mark not in app.status.value and mark not in app.chart.output.title.text


def test_choosing_a_filter_kind_fills_the_fields_it_needs_from_the_plan(app: PlannerApp) -> None:
    # Item 10: a new filter kind gets a centre and a bandwidth derived from the plan (the IF filter
    # on the IF passband, 1.2 times as wide: 10.7 MHz, 1.2 x 230 kHz = 276 kHz), not an error.
    fc = app.controls.if_filter
    fc.kind.value = "none"
    assert app.state.plan.filters.if_ is None
    fc.centre.value, fc.bandwidth.value = "", ""
    fc.kind.value = "chebyshev1"
    spec = app.state.plan.filters.if_
    assert spec is not None and spec.kind == "chebyshev1" and fc.error.value == ""
    assert spec.f_center_hz == 10.7e6 and spec.bandwidth_hz == pytest.approx(276e3)
    # a field the user filled keeps its value
    fc.kind.value = "none"
    fc.bandwidth.value = "300 kHz"
    fc.kind.value = "butterworth"
    assert app.state.plan.filters.if_.bandwidth_hz == 300e3


def test_a_max_order_beyond_its_limit_is_refused_with_a_message_not_clamped(app: PlannerApp) -> None:
    before = app.state.plan
    app.controls.max_order.value = 999
    assert app.state.plan == before  # refused: the last valid plan stays
    message = app.controls.errors["plan"].value
    assert "max order (max_order): 999 is invalid" in message and "25" in message
    app.controls.max_order.value = 9
    assert app.state.plan.max_order == 9 and app.controls.errors["plan"].value == ""


def test_one_channel_in_full_lists_every_row_with_the_filter_losses_behind_it(app: PlannerApp) -> None:
    # Item 15: the selected channel's products and responses, worst first, with the table level, the
    # RF and IF filter losses and the level they give, the requirement and what set a filter's loss.
    import html as html_lib

    app.state.set_view(channel_hz=98e6)
    frame = app.state.evaluation.channel_frame(app.state.evaluation.nearest_channel(98e6))
    rows = frame[frame["label"] != "wanted"].sort_values("margin_db", kind="stable")
    text = app.channel_table.value
    assert "Channel 98 MHz (LO 108.7 MHz)" in text and f"({len(rows)} rows)" in text
    assert text.count("<tr>") == len(rows) + 1  # the head row and one per product or response
    first = rows.iloc[0]
    assert html_lib.escape(f"{first['kind']}: {first['label']}") in text and f"{first['margin_db']:+.1f}" in text
    assert text.index(f"{first['margin_db']:+.1f}") < text.index(f"{rows.iloc[-1]['margin_db']:+.1f}")
    app.state.set_view(channel_hz=88e6)  # it follows the channel
    assert "Channel 88 MHz" in app.channel_table.value


def test_clicking_the_margin_plot_picks_the_channel(app: PlannerApp) -> None:
    from bokeh.events import Tap

    app.chart.margin._trigger_event(Tap(app.chart.margin, x=95.04, y=0.0))
    assert app.state.view.channel_hz == pytest.approx(95.0e6)  # nearest channel on the 100 kHz raster


def test_one_column_has_one_name_in_the_cli_the_app_the_hover_and_the_report(app: PlannerApp) -> None:
    # Item 17: the filter-loss policy column reads the same on every surface.
    from mixchart.chart import _HOVER_POINTS
    from mixchart.cli import _text_table
    from mixchart.report import report_html

    name = "filter loss set by"
    ev = app.state.evaluation
    assert name in app.channel_table.value
    assert name in _text_table(ev.worst_row, 3)
    assert any(label == name for label, _ in _HOVER_POINTS)
    assert ev.worst_by_product["loss_limit"].ne("").any()  # the FM example has rows a floor decided
    assert f"({name} " in report_html(app.state.plan, base_dir=app.state.base_dir, evaluation=ev)
    for other in ("loss limited by", "need RF", "more RF rej."):
        assert other not in app.channel_table.value and other not in _text_table(ev.worst_row, 3)


def test_references_are_capped_and_a_wrong_name_is_refused(app: PlannerApp) -> None:
    from mixchart.errors import MixchartError
    from mixchart.state import MAX_REFERENCES

    names = [app.state.keep_reference(f"r{k}") for k in range(MAX_REFERENCES + 2)]
    assert list(app.state.references) == names[2:]  # the oldest went
    with pytest.raises(MixchartError, match=r"reference: 'nope' is not kept"):
        app.state.select_reference("nope")
    app.state.select_reference(None)
    assert app.state.reference is None and not app.reference_box.children


def test_messages_name_the_field_by_its_on_screen_label(app: PlannerApp) -> None:
    # Item 10: the engine names a field by its JSON path; the screen leads with the label the user reads.
    import html as html_lib

    c = app.controls
    c.max_order.value = 999
    assert html_lib.escape("max order (max_order): 999 is invalid; must be <= 25") in c.errors["plan"].value
    assert app.state.plan.max_order == 7  # refused, not clamped
    c.rf_start.value = "120 MHz"
    assert "RF stop (rf.stop_hz): 108 MHz is below" in c.errors["rf_start"].value
    c.rf_start.value = "88 MHz"
    c.if_filter.kind.value = "butterworth"
    c.if_filter.bandwidth.value = "-5 kHz"
    assert "IF filter bandwidth (filters.if.bandwidth_hz):" in c.if_filter.error.value
    c.if_filter.spec_json.value = ('{"kind": "brickwall", "response": "bandpass", "f_center_hz": 10.7e6, '
                                   '"bandwidth_hz": 2e5, "centre_hz": 1}')
    assert "IF filter (filters.if.centre_hz): unknown key" in c.if_filter.error.value


def test_the_undo_keys_reach_the_state_once_per_press(app: PlannerApp) -> None:
    # Item 3: Ctrl+Z / Ctrl+Shift+Z arrive as edits of the key_commands source (see mixchart/app_keys.py)
    assert "key_commands" not in app.chart.sources and app.key_commands.name == "key_commands"
    app.state.try_update({"lo.side": "low"})
    source = app.key_commands
    content = {"event": "jsevent", "kind": "ModelChanged", "model": {"id": source.id}, "attr": "data",
               "new": Serializer().encode({"command": ["undo"], "n": [1]})}
    app.bokeh._sync_model(app.bokeh, dict(content), [])
    assert app.state.plan.lo.side == "high"
    app.bokeh._sync_model(app.bokeh, dict(content), [])  # the same press again (delivered twice): no step
    assert app.state.plan.lo.side == "high" and app.state.can_redo
    content["new"] = Serializer().encode({"command": ["redo"], "n": [2]})
    app.bokeh._sync_model(app.bokeh, dict(content), [])
    assert app.state.plan.lo.side == "low"


def test_the_circuit_model_and_its_level_map_are_in_the_mixer_tab(app: PlannerApp) -> None:
    # Issue 12 in the app: the level table as a heat map beside the mixer controls, and the LO drive
    # moving the table and the margins.
    assert app.circuit.box in app.controls.panel.children[0].children[2].children
    cells_before = dict(app.level_map.source.data)
    app.circuit.model.value = "diode_circuit"
    assert app.state.plan.mixer.model == "diode_circuit"
    assert "diode" in app.circuit.summary.value.lower()
    assert dict(app.level_map.source.data) != cells_before  # the map shows the solved table
    margin_7 = app.state.evaluation.summary.worst_margin_db
    app.controls.lo_drive.value = 4.0
    assert app.state.plan.mixer.lo_drive_dbm == 4.0
    assert app.state.evaluation.summary.worst_margin_db != margin_7  # the margins follow the drive


def test_undo_and_redo_show_the_evaluation_each_plan_had_without_evaluating_again(monkeypatch) -> None:
    import mixchart.state as state_module

    plan, folder = example_plan("fm_receiver")
    state = PlanState(plan, folder)
    shown = [state.evaluation]
    for req in (61.0, 62.0, 63.0):
        assert state.try_update({"requirement.min_rejection_db": req}) is None
        shown.append(state.evaluation)
    calls: list[object] = []

    def counting(plan, **kwargs):
        calls.append(plan)
        return evaluate(plan, **kwargs)

    monkeypatch.setattr(state_module, "evaluate", counting)
    for i in (2, 1, 0):
        assert state.undo() is None and state.evaluation is shown[i]
    for i in (1, 2, 3):
        assert state.redo() is None and state.evaluation is shown[i]
    assert calls == []
    # the kept evaluation is the plan's own: the same tables as evaluating it now
    fresh = evaluate(state.plan, base_dir=folder)
    assert state.evaluation.worst_by_product.equals(fresh.worst_by_product)
    assert np.array_equal(state.evaluation.worst_margin_db, fresh.worst_margin_db)
    # only the newest KEEP_EVALUATIONS entries keep theirs: stepping further back evaluates
    n = state_module.KEEP_EVALUATIONS + 4
    for k in range(n):
        state.try_update({"requirement.min_rejection_db": 30.0 + k})
    calls.clear()
    for _ in range(n):
        assert state.undo() is None
    assert len(calls) == n - state_module.KEEP_EVALUATIONS


def test_a_plan_that_reads_a_file_is_evaluated_again_on_undo(monkeypatch) -> None:
    import mixchart.state as state_module

    plan, folder = example_plan("fm_receiver")
    assert not state_module.reads_files(plan)
    table = Path(__file__).parent / "data" / "levels_dbc_rf-10dbm_lo7dbm_partial_madeup.csv"
    with_table = plan.with_changes({"mixer.table": str(table)})
    assert state_module.reads_files(with_table)
    assert state_module.reads_files(plan.with_changes({"filters.if": {"kind": "touchstone", "path": "if.s2p"}}))
    state = PlanState(with_table, folder)
    state.try_update({"requirement.min_rejection_db": 61.0})
    calls: list[object] = []
    monkeypatch.setattr(state_module, "evaluate", lambda p, **k: calls.append(p) or evaluate(p, **k))
    assert state.undo() is None
    assert calls == [with_table]  # read anew: the file may have been edited meanwhile
