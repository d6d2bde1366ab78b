"""The plan's diode-circuit mixer model: its fields, the cached solve, and the level table it gives.

A plan says ``"mixer": {"model": "diode_circuit", "circuit": {...}}`` to have its level table
estimated from the mixer's circuit (:mod:`mixchart.ring_solver`, :mod:`mixchart.ring_table`)
instead of the built-in switching rules.  The topology picks the circuit (a four-diode ring,
a two-diode pair, one diode); the LO drive is ``mixer.lo_drive_dbm`` and the LO's second
harmonic ``mixer.lo_harmonic2_dbc`` (less the LO filter's rejection of it); the signal drive is
``mixer.rf_ref_dbm`` when given, else the plan's strongest input level (the signal, or a
receiver's interferer), so that the table is solved where the plan is used rather than
stretched to it by the (m - 1) rule, which the circuit itself departs from at strong drive.

What the circuit leaves out is not left out of the table: a quasi-static circuit has no
parasitic coupling, so the LO leakage (0, n odd) and the feedthrough (1, 0) are never taken
lower than the data-sheet isolations (stated, or the topology's typical ones) give, and the
result's warnings say what was assumed.  Solves are cached by their parameters, so evaluating
the same plan again does not solve again.  Never imports a plotting or widget library.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from typing import Any

import numpy as np

from .levels import FLOOR_DBC, LevelTable
from .models.mixer import BalunSpec, CircuitSpec, DiodeMismatch
from .ring_solver import DIODE_COUNT, TYPICAL_DIODE, Balun, Circuit, Diode
from .ring_table import RingResult, solve_ring

__all__ = ["BalunSpec", "DiodeMismatch", "CircuitSpec", "circuit_from_spec", "circuit_level_table",
           "circuit_rf_drive_dbm", "circuit_warnings", "solve_cached", "CACHE_SIZE", "cache_info"]

#: Solves kept (each holds a table and a few numbers, not the record).
CACHE_SIZE = 32
_CACHE: OrderedDict[tuple, RingResult] = OrderedDict()
_STATS = {"hits": 0, "misses": 0}


def circuit_from_spec(spec: CircuitSpec | None, topology: str) -> Circuit:
    """The solver's :class:`~mixchart.ring_solver.Circuit` for a plan's circuit fields.

    Parameters
    ----------
    spec : CircuitSpec or None
        The plan's ``mixer.circuit`` (None: every default).
    topology : str
        The plan's ``mixer.topology``.

    Returns
    -------
    Circuit
    """
    spec = CircuitSpec() if spec is None else spec
    base = Diode(is_a=TYPICAL_DIODE.is_a if spec.is_a is None else spec.is_a,
                 ideality=TYPICAL_DIODE.ideality if spec.ideality is None else spec.ideality,
                 rs_ohm=TYPICAL_DIODE.rs_ohm if spec.rs_ohm is None else spec.rs_ohm)
    count = DIODE_COUNT[topology]
    mismatch = spec.mismatch or (DiodeMismatch(),) * count
    diodes = tuple(Diode(base.is_a * m.is_ratio, base.ideality * m.ideality_ratio, base.rs_ohm * m.rs_ratio)
                   for m in mismatch)
    return Circuit(topology=topology, diodes=diodes,
                   lo_balun=Balun(spec.lo_balun.amplitude_imbalance_db, spec.lo_balun.phase_imbalance_deg),
                   rf_balun=Balun(spec.rf_balun.amplitude_imbalance_db, spec.rf_balun.phase_imbalance_deg),
                   lo_port_ohm=spec.lo_port_ohm, rf_port_ohm=spec.rf_port_ohm, if_port_ohm=spec.if_port_ohm,
                   temperature_k=spec.temperature_k)


def solve_cached(circuit: Circuit, *, lo_drive_dbm: float, rf_drive_dbm: float, max_order: int, direction: str,
                 lo_harmonic2_dbc: float | None, where: str = "mixer.") -> RingResult:
    """:func:`~mixchart.ring_table.solve_ring`, remembered by its parameters (the last :data:`CACHE_SIZE`)."""
    key = (circuit, float(lo_drive_dbm), float(rf_drive_dbm), int(max_order), direction,
           None if lo_harmonic2_dbc is None else float(lo_harmonic2_dbc))
    hit = _CACHE.get(key)
    if hit is not None:
        _CACHE.move_to_end(key)
        _STATS["hits"] += 1
        return hit
    _STATS["misses"] += 1
    result = solve_ring(circuit, lo_drive_dbm=lo_drive_dbm, rf_drive_dbm=rf_drive_dbm, max_order=max_order,
                        direction=direction, lo_harmonic2_dbc=lo_harmonic2_dbc, where=where)
    _CACHE[key] = result
    while len(_CACHE) > CACHE_SIZE:
        _CACHE.popitem(last=False)
    return result


def cache_info() -> dict[str, int]:
    """Hits, misses and size of the solve cache (for tests and the benchmark)."""
    return {**_STATS, "size": len(_CACHE)}


def circuit_level_table(spec: Any, max_order: int, *, direction: str, lo_harmonic2_dbc: float | None,
                        rf_drive_dbm: float) -> LevelTable:
    """The level table of a plan's mixer from its circuit.

    Parameters
    ----------
    spec : MixerSpec
        The plan's mixer (``model == "diode_circuit"``).
    max_order : int
        Highest order m + n; the table holds 0 <= m, n <= max_order.
    direction : {"down", "up"}
        The plan's direction: which port takes the signal and which is the output.
    lo_harmonic2_dbc : float or None
        The LO's second harmonic at the mixer, dBc (None: a pure sine).
    rf_drive_dbm : float
        Signal drive the circuit is solved at, dBm: the table's reference.

    Returns
    -------
    LevelTable
        Levels at ``rf_drive_dbm`` and ``spec.lo_drive_dbm``, the circuit's conversion loss
        (or the stated one), ``measured`` all False.

    Raises
    ------
    CircuitError
        If the circuit cannot be solved (see :func:`~mixchart.ring_table.solve_ring`).
    """
    circuit = circuit_from_spec(spec.circuit, spec.topology)
    ring = solve_cached(circuit, lo_drive_dbm=spec.lo_drive_dbm, rf_drive_dbm=rf_drive_dbm, max_order=max_order,
                        direction=direction, lo_harmonic2_dbc=lo_harmonic2_dbc)
    cl = ring.conversion_loss_db if spec.conversion_loss_db is None else spec.conversion_loss_db
    level = np.array(ring.level_dbc, dtype=float)
    # LO leakage (0, n odd) and feedthrough (1, 0) never below the data-sheet isolations, stated as the
    # built-in model states them (mixer_model.builtin_table rules 4 and 5) at this reference and loss
    n = np.arange(max_order + 1)
    leak = spec.lo_drive_dbm - spec.leakage_isolation_db(direction) - (rf_drive_dbm - cl)
    odd = n % 2 == 1
    level[0, odd] = np.maximum(level[0, odd], leak - 20.0 * np.log10(n[odd]))
    level[1, 0] = max(level[1, 0], cl - spec.feedthrough_isolation_db())
    level = np.maximum(level, FLOOR_DBC)
    level[0, 0], level[1, 1] = FLOOR_DBC, 0.0
    words = {"double_balanced": "double-balanced ring", "single_balanced": "single-balanced diode pair",
             "single_ended": "single diode"}[spec.topology]
    d = circuit.diodes[0]
    description = (
        f"diode circuit model: {words} (Is {d.is_a:.3g} A, n {d.ideality:.3g}, Rs {d.rs_ohm:.3g} ohm"
        f"{', mismatched' if spec.circuit is not None and spec.circuit.mismatch else ''}; ports "
        f"{circuit.lo_port_ohm:g}/{circuit.rf_port_ohm:g}/{circuit.if_port_ohm:g} ohm LO/RF/IF) solved at RF "
        f"{rf_drive_dbm:g} dBm, LO {spec.lo_drive_dbm:g} dBm"
        f"{'' if lo_harmonic2_dbc is None else f', LO H2 {lo_harmonic2_dbc:g} dBc'}: conversion loss "
        f"{ring.conversion_loss_db:.2f} dB, circuit isolation LO-IF {ring.lo_if_isolation_db:.1f} dB, LO-RF "
        f"{ring.lo_rf_isolation_db:.1f} dB, RF-IF {ring.rf_if_isolation_db:.1f} dB (leakage and feedthrough never "
        f"below the data-sheet isolations); floor {ring.floor_dbc:.0f} dBc, {ring.n_samples} samples, "
        f"converged to {ring.convergence_db:.2g} dB"
    )
    return LevelTable(level, np.zeros(level.shape, dtype=bool), rf_drive_dbm, spec.lo_drive_dbm, cl, spec.topology,
                      description)


def circuit_rf_drive_dbm(spec: Any, signal_dbm: float | None) -> float:
    """The signal drive a circuit is solved at: ``rf_ref_dbm``, else the plan's strongest input, else LO - 10 dB."""
    if spec.rf_ref_dbm is not None:
        return float(spec.rf_ref_dbm)
    if signal_dbm is not None and math.isfinite(signal_dbm):
        return float(signal_dbm)
    return float(spec.rf_ref())


def circuit_warnings(spec: Any) -> list[str]:
    """What the circuit model assumed, one line each, led by the plan field (empty for the switching model)."""
    if getattr(spec, "model", "switching") != "diode_circuit":
        return []
    c = spec.circuit or CircuitSpec()
    out = []
    missing = [f"{name} ({value})" for name, given, value in (
        ("is_a", c.is_a, f"{TYPICAL_DIODE.is_a:g} A"), ("ideality", c.ideality, f"{TYPICAL_DIODE.ideality:g}"),
        ("rs_ohm", c.rs_ohm, f"{TYPICAL_DIODE.rs_ohm:g} ohm")) if given is None]
    if missing:
        out.append(f"mixer.circuit: {', '.join(missing)} not given, so typical medium-barrier silicon Schottky "
                   "values are assumed (from memory, not a measured diode); state them from the diode's data sheet")
    if c.balanced and spec.topology != "single_ended":
        out.append("mixer.circuit: no diode mismatch or balun imbalance given, so the circuit is ideally balanced: "
                   "the products balance cancels sit at the solve's floor or at the LO second harmonic's level, "
                   "which no real mixer reaches; state circuit.mismatch and the baluns' imbalance")
    out.append("mixer.model: the diode circuit is memoryless (no junction capacitance, balun or package "
               "parasitics): its levels hold well below the diodes' cutoff frequency")
    if spec.rf_ref_dbm is None:
        out.append("mixer.rf_ref_dbm: not given, so the circuit is solved at the plan's strongest input level and "
                   "other drives follow the (m-1) dB-per-dB rule, which the circuit departs from at strong drive")
    return out
