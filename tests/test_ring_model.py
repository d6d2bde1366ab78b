"""The diode circuit model in a plan (mixchart.ring_model): fields, JSON, cache, warnings, errors, margins.

Sources: the plan schema and the project's error rules (DEVELOPERS.md: one line naming the field
and repeating the value); the demo plans here are invented, with values chosen to show the effect
(said beside each); the physics behind their verdicts is checked in tests/test_ring_physics.py.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from mixchart import evaluate, load_plan
from mixchart.cli import example_path
from mixchart.cli import main as cli_main
from mixchart.errors import CircuitError, MixchartError, PlanError
from mixchart.plan import dumps_plan, loads_plan, plan_from_dict, plan_json_schema
from mixchart.ring_model import cache_info, circuit_from_spec
from mixchart.ring_solver import Circuit, Diode
from mixchart.ring_table import solve_ring

CIRCUIT = {"is_a": 2e-8, "ideality": 1.1, "rs_ohm": 4.5,
           "mismatch": [{"is_ratio": 1.02}, {"rs_ratio": 0.97}, {}, {"ideality_ratio": 1.01}],
           "lo_balun": {"amplitude_imbalance_db": 0.3, "phase_imbalance_deg": 2.0},
           "rf_balun": {"amplitude_imbalance_db": -0.2}, "if_port_ohm": 75.0}


def fm(**mixer):
    plan = load_plan(example_path())
    return plan.with_changes({f"mixer.{k}": v for k, v in mixer.items()})


def transmitter(lo_dbm: float):
    """Invented demo: a 900 MHz transmitter whose (3,1) output product (LO + 3·IF, 1040 MHz) lands inside a wide
    output filter; the requirement (-70 dBc) and filter are chosen so that the ring's own (3,1) decides the verdict
    (isolations stated high and no LO harmonic, so nothing assumed competes)."""
    return plan_from_dict({
        "name": "invented demo: 900 MHz transmitter, diode ring estimate",
        "direction": "up",
        "rf": {"start_hz": "900 MHz", "stop_hz": "900 MHz"},
        "signal": {"bandwidth_hz": "200 kHz", "level_dbm": -10},
        "lo": {"mode": "fixed", "fixed_hz": "830 MHz"},
        "if": {"center_hz": "70 MHz", "bandwidth_hz": "1 MHz"},
        "mixer": {"model": "diode_circuit", "lo_drive_dbm": lo_dbm, "lo_rf_isolation_db": 90,
                  "lo_if_isolation_db": 90, "rf_if_isolation_db": 90, "lo_harmonic2_dbc": -300},
        "filters": {"rf": {"kind": "butterworth", "response": "bandpass", "order": 9, "f_center_hz": "970 MHz",
                           "bandwidth_hz": "168 MHz", "max_atten_db": 120}},
        "requirement": {"output_spur_dbc": -70},
    })


# ---------------------------------------------------------------- fields and JSON
def test_old_plans_load_unchanged_with_the_switching_model():
    plan = load_plan(example_path())
    assert plan.mixer.model == "switching" and plan.mixer.circuit is None
    assert "built-in" in evaluate(plan).level_table.description


def test_a_circuit_plan_round_trips_exactly_and_meets_its_schema():
    import jsonschema

    plan = fm(model="diode_circuit", circuit=CIRCUIT)
    text = dumps_plan(plan)
    assert loads_plan(text) == plan and dumps_plan(loads_plan(text)) == text
    jsonschema.validate(plan.to_dict(), plan_json_schema())
    assert plan.mixer.circuit.mismatch[0].is_ratio == 1.02
    c = circuit_from_spec(plan.mixer.circuit, "double_balanced")
    assert c.diodes[0].is_a == pytest.approx(2.04e-8) and c.diodes[3].ideality == pytest.approx(1.111)
    assert c.if_port_ohm == 75.0 and c.lo_balun.phase_imbalance_deg == 2.0


def test_the_schema_command_shows_the_circuit_fields(capsys):
    assert cli_main(["schema"]) in (0, None)
    schema = json.loads(capsys.readouterr().out)
    text = json.dumps(schema)
    for name in ("diode_circuit", "is_a", "ideality", "rs_ohm", "mismatch", "phase_imbalance_deg", "if_port_ohm"):
        assert name in text, name


@pytest.mark.parametrize("mixer,field,value", [
    ({"model": "diode_circuit", "circuit": {"is_a": -1e-9}}, "mixer.circuit.is_a", "-1e-09"),
    ({"model": "diode_circuit", "circuit": {"ideality": 0.9}}, "mixer.circuit.ideality", "0.9"),
    ({"model": "diode_circuit", "circuit": {"mismatch": [{}, {}, {"ideality_ratio": 0.9}, {}]}},
     "mixer.circuit.mismatch.2.ideality_ratio", "0.9"),
    ({"model": "diode_circuit", "circuit": {"mismatch": [{}, {}]}}, "mixer.circuit.mismatch", "2"),
    ({"model": "diode_circuit", "circuit": {"lo_balun": {"phase_imbalance_deg": 90}}},
     "mixer.circuit.lo_balun.phase_imbalance_deg", "90"),
    ({"circuit": {"rs_ohm": 3.0}}, "mixer.circuit", "diode_circuit"),
    ({"model": "ring"}, "mixer.model", "ring"),
])
def test_bad_circuit_fields_get_one_line_naming_the_field_and_value(mixer, field, value):
    data = load_plan(example_path()).to_dict()
    data["mixer"].update(mixer)
    with pytest.raises(PlanError) as info:
        plan_from_dict(data)
    message = str(info.value)
    assert "\n" not in message and message.startswith(field) and value in message, message


@pytest.mark.parametrize("kwargs,field", [
    ({"is_a": -1e-9, "ideality": 1.05, "rs_ohm": 5.0}, "is_a"),
    ({"is_a": 1e-9, "ideality": 0.95, "rs_ohm": 5.0}, "ideality"),
    ({"is_a": 1e-9, "ideality": 1.05, "rs_ohm": float("nan")}, "rs_ohm"),
])
def test_bad_diodes_are_refused_by_the_engine_too(kwargs, field):
    with pytest.raises(CircuitError, match=rf"^diode\.{field}: "):
        Diode(**kwargs)


# ---------------------------------------------------------------- solve failures: errors, never a NaN
def test_a_drive_too_low_to_conduct_is_an_error_naming_the_lo_drive():
    plan = fm(model="diode_circuit", lo_drive_dbm=-30.0)
    with pytest.raises(CircuitError) as info:
        evaluate(plan)
    message = str(info.value)
    assert message.startswith("mixer.lo_drive_dbm: -30.0 is invalid; too low for the diodes to conduct"), message
    assert isinstance(info.value, MixchartError) and "\n" not in message


def test_a_solve_that_does_not_converge_is_an_error():
    with pytest.raises(CircuitError, match="did not converge in 3 iterations"):
        solve_ring(Circuit(), lo_drive_dbm=7.0, rf_drive_dbm=-30.0, max_order=5, max_iterations=3)
    with pytest.raises(CircuitError, match="did not converge by doubling the samples"):
        solve_ring(Circuit(), lo_drive_dbm=20.0, rf_drive_dbm=-10.0, max_order=5, max_samples=2**12)


@pytest.mark.parametrize("lo,rf,topology", [(-3.0, -40.0, "double_balanced"), (17.0, 5.0, "double_balanced"),
                                            (7.0, -100.0, "single_balanced"), (10.0, 0.0, "single_ended")])
def test_tables_are_finite_over_the_drive_range(lo, rf, topology):
    count = {"double_balanced": 4, "single_balanced": 2, "single_ended": 1}[topology]
    c = Circuit(topology=topology, diodes=(Diode(5e-9, 1.08, 6.0),) * count)
    r = solve_ring(c, lo_drive_dbm=lo, rf_drive_dbm=rf, max_order=5)
    assert np.isfinite(r.level_dbc).all() and np.isfinite(r.raw_dbc).all()
    assert np.isfinite([r.conversion_loss_db, r.lo_if_isolation_db, r.lo_rf_isolation_db, r.rf_if_isolation_db]).all()
    assert r.level_dbc[1, 1] == 0.0 and (r.level_dbc >= r.floor_dbc).all() | (r.level_dbc == -300.0).any()
    assert r.convergence_db <= 0.01


# ---------------------------------------------------------------- in a plan
def test_a_circuit_plan_evaluates_and_states_its_assumptions():
    ev = evaluate(fm(model="diode_circuit"))
    table = ev.level_table
    assert table.description.startswith("diode circuit model: double-balanced ring")
    assert table.lo_ref_dbm == 7.0 and table.rf_ref_dbm == -30.0  # the plan's signal level (no interferer)
    assert np.isfinite(table.level_dbc).all()
    assert 4.0 < table.conversion_loss_db < 5.5
    warnings = " | ".join(ev.warnings)
    assert "typical medium-barrier silicon Schottky values are assumed (from memory" in warnings
    assert "ideally balanced" in warnings and "memoryless" in warnings and "mixer.rf_ref_dbm" in warnings
    # the data-sheet isolations stay a floor under the leakage (typical 30 dB LO-IF: the circuit is ideal)
    leak = table.lo_ref_dbm - 30.0 - (table.rf_ref_dbm - table.conversion_loss_db)
    assert table.level_dbc[0, 1] == pytest.approx(leak)


def test_stated_diode_figures_and_balance_silence_those_warnings():
    ev = evaluate(fm(model="diode_circuit", rf_ref_dbm=-20.0, circuit=CIRCUIT))
    warnings = " | ".join(ev.warnings)
    assert "typical medium-barrier" not in warnings and "ideally balanced" not in warnings
    assert "memoryless" in warnings  # a model limit is always said
    assert ev.level_table.rf_ref_dbm == -20.0


def test_the_table_is_solved_once_and_cached():
    plan = fm(model="diode_circuit", lo_drive_dbm=6.5)
    before = cache_info()
    first = evaluate(plan)
    middle = cache_info()
    again = evaluate(plan)
    after = cache_info()
    assert middle["misses"] == before["misses"] + 1
    assert after["misses"] == middle["misses"] and after["hits"] == middle["hits"] + 1
    assert np.array_equal(first.level_table.level_dbc, again.level_table.level_dbc)
    evaluate(plan.with_changes({"mixer.lo_drive_dbm": 6.0}))
    assert cache_info()["misses"] == after["misses"] + 1  # a new drive is a new solve


def test_a_plan_that_passes_at_7_dbm_lo_fails_at_4_dbm():
    # Invented demo (transmitter above).  At +7 dBm the ring's (3,1) output product sits under the -70 dBc
    # requirement; at +4 dBm the dead zone is wider and the signal's share of the switching larger, so the (3,1)
    # rises (by about 6 dB in this circuit) and the plan fails on that same product.
    strong, weak = evaluate(transmitter(7.0)), evaluate(transmitter(4.0))
    assert strong.summary.worst_margin_db > 0 > weak.summary.worst_margin_db
    for ev in (strong, weak):
        worst = ev.worst_by_product.iloc[0]
        assert (worst["rf_harmonic"], worst["lo_harmonic"], worst["label"]) == (3, 1, "spur")
    rise = weak.level_table.level_dbc[3, 1] - strong.level_table.level_dbc[3, 1]
    assert 4.0 < rise < 8.0
