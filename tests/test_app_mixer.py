"""The planner's mixer pieces without a browser: the level-table heat map and the circuit controls.

Sources: the LevelTable the map shows (its values are the table's own, read back cell by cell), the plan
the controls change (read back from the state), and the project's error rules (one line naming the field).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("bokeh")

from mixchart.app_mixer import (
    MAP_LOW_DBC,
    MAP_NAME,
    circuit_changes,
    circuit_controls,
    level_map_data,
    level_table_map,
    make_circuit_handler,
    sync_circuit_controls,
    update_level_map,
)
from mixchart.levels import FLOOR_DBC
from mixchart.state import PlanState, example_plan


@pytest.fixture()
def state() -> PlanState:
    plan, folder = example_plan("fm_receiver")
    return PlanState(plan, folder)


def test_the_map_has_one_cell_per_product_up_to_the_order_with_the_tables_values(state):
    table, order = state.evaluation.level_table, state.plan.max_order
    data = level_map_data(table, order)
    cells = {(m, n) for m in range(order + 1) for n in range(order + 1) if 0 < m + n <= order}
    assert set(zip(data["m"], data["n"], strict=True)) == cells
    assert len({len(v) for v in data.values()}) == 1
    for m, n, level, colour, text in zip(*(data[k] for k in ("m", "n", "level_dbc", "colour_dbc", "text")),
                                         strict=True):
        value = float(table.level_dbc[m, n])
        if value <= FLOOR_DBC:
            assert math.isnan(level) and text.startswith("vanished")
        else:
            assert level == value and colour == min(max(value, MAP_LOW_DBC), 0.0)
            assert text.startswith(f"{value:.1f} dBc")
    assert data["text"][list(zip(data["m"], data["n"], strict=True)).index((1, 1))] == "0.0 dBc (wanted)"


def test_the_map_figure_is_named_and_hovers_the_value(state):
    handle = level_table_map(state.evaluation.level_table, 7)
    assert handle.figure.name == MAP_NAME and handle.source.name == f"{MAP_NAME}_source"
    hover = [t for t in handle.figure.tools if type(t).__name__ == "HoverTool"]
    assert hover and ("level", "@text") in hover[0].tooltips
    renderer = handle.figure.renderers[0]
    assert renderer.data_source is handle.source


def test_update_assigns_the_data_of_the_new_table(state):
    handle = level_table_map(state.evaluation.level_table, 7)
    source = handle.source
    assert state.try_update({"mixer.model": "diode_circuit"}) is None
    update_level_map(handle, state.evaluation.level_table, 7)
    assert handle.source is source
    assert source.data["level_dbc"] == level_map_data(state.evaluation.level_table, 7)["level_dbc"]
    update_level_map(handle, state.evaluation.level_table, 5)
    assert max(np.add(source.data["m"], source.data["n"])) == 5 and handle.figure.x_range.end == 5.5


def test_circuit_changes_map_widget_values_to_plan_paths():
    values = {"model": "diode_circuit", "is_a": " 2e-8 ", "ideality": "", "rs_ohm": "4.5", "mismatch_pct": 2.0,
              "lo_amp_db": 0.3, "lo_phase_deg": 1.9999999999999998}
    changes, error = circuit_changes(values, "double_balanced")
    assert error is None
    assert changes == {"mixer.model": "diode_circuit", "mixer.circuit.is_a": 2e-8, "mixer.circuit.ideality": None,
                       "mixer.circuit.rs_ohm": 4.5,
                       "mixer.circuit.mismatch": [{"is_ratio": 1.02}, {}, {}, {}],
                       "mixer.circuit.lo_balun.amplitude_imbalance_db": 0.3,
                       "mixer.circuit.lo_balun.phase_imbalance_deg": 2.0}
    assert circuit_changes({**values, "mismatch_pct": 0.0}, "single_ended")[0]["mixer.circuit.mismatch"] is None
    assert len(circuit_changes(values, "single_balanced")[0]["mixer.circuit.mismatch"]) == 2
    assert circuit_changes({**values, "model": "switching"}, "double_balanced") == (
        {"mixer.model": "switching", "mixer.circuit": None}, None)
    bad, error = circuit_changes({**values, "rs_ohm": "six"}, "double_balanced")
    assert bad == {} and error.startswith("mixer.circuit.rs_ohm: 'six' is invalid")


def test_the_handler_changes_the_plan_and_the_margins_and_shows_errors(state):
    controls = circuit_controls(state.plan)
    handler = make_circuit_handler(state, controls)
    for name in ("model", "is_a", "ideality", "rs_ohm", "mismatch_pct", "lo_amp_db", "lo_phase_deg"):
        getattr(controls, name).observe(handler, names="value")
    assert controls.is_a.disabled  # the switching model has no circuit
    before = state.evaluation.summary.worst_margin_db
    controls.model.value = "diode_circuit"
    assert state.plan.mixer.model == "diode_circuit" and controls.error.value == ""
    assert "diode circuit model" in controls.summary.value
    controls.lo_phase_deg.value = 3.0
    assert state.plan.mixer.circuit.lo_balun.phase_imbalance_deg == 3.0
    assert state.evaluation.summary.worst_margin_db != before
    controls.is_a.value = "-1e-9"  # refused by the plan: the message names the field, the plan stays
    assert "mixer.circuit.is_a" in controls.error.value and state.plan.mixer.circuit.is_a is None
    controls.is_a.value = "<b>"  # not a number: escaped in the message
    assert "&lt;b&gt;" in controls.error.value


def test_sync_shows_a_plan_without_applying_it(state):
    controls = circuit_controls(state.plan)
    handler = make_circuit_handler(state, controls)
    controls.model.observe(handler, names="value")
    plan = state.plan.with_changes({"mixer.model": "diode_circuit", "mixer.circuit.rs_ohm": 4.0,
                                    "mixer.circuit.mismatch": [{"is_ratio": 0.97}, {}, {}, {}]})
    sync_circuit_controls(controls, plan)
    assert controls.model.value == "diode_circuit" and controls.rs_ohm.value == "4"
    assert controls.mismatch_pct.value == pytest.approx(-3.0) and not controls.is_a.disabled
    assert state.plan.mixer.model == "switching"  # showing a plan is not changing one
