"""The mixer's spec, data only: topology, level model, isolations, and the diode circuit's figures.

The plan's ``mixer`` block (:class:`MixerSpec`) and its ``circuit`` block (:class:`CircuitSpec`,
with :class:`BalunSpec` and :class:`DiodeMismatch`), with the typical data-sheet figures a spec
falls back on.  What the figures become, the level table, is :mod:`mixchart.mixer_model` (the
switching rules) and :mod:`mixchart.ring_model` (the circuit solve); both re-export these names.
"""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from ..errors import PlanError
from ..levels import Topology
from ..ring_solver import DIODE_COUNT, TYPICAL_DIODE

__all__ = ["MixerSpec", "CircuitSpec", "BalunSpec", "DiodeMismatch", "TYPICAL_ISOLATION_DB",
           "DEFAULT_LO_HARMONIC2_DBC", "RF_REF_BELOW_LO_DB"]

#: Typical data-sheet port isolations by topology, dB: (LO-RF, LO-IF, RF-IF).  Common practice,
#: from memory of diode-mixer data sheets (a double-balanced ring 30-40 / 25-35 / 20-30 dB; a
#: single-balanced mixer 20 / 15 / 15 dB; a single diode little beyond its diplexer).  The
#: single-ended RF-IF figure is the ideal 0/1 switch's own feedthrough: conversion loss 9.94 dB
#: less the +3.92 dBc of the (1,0) term, 20·log10(2) = 6.02 dB (derived by hand).
TYPICAL_ISOLATION_DB: dict[str, tuple[float, float, float]] = {
    "double_balanced": (35.0, 30.0, 25.0),
    "single_balanced": (20.0, 15.0, 15.0),
    "single_ended": (10.0, 10.0, 20.0 * math.log10(2.0)),
}
#: Second harmonic of the LO at the mixer's LO port when not stated, dBc: an unfiltered
#: synthesiser or buffer output, -15 to -25 dBc.  Common practice, no source.
DEFAULT_LO_HARMONIC2_DBC = -20.0
#: The built-in RF-harmonic rule is stated at this far below the LO drive, dB, when the plan
#: gives no ``rf_ref_dbm`` (a table taken at -3 dBm RF with a +7 dBm LO).  Common practice, no source.
RF_REF_BELOW_LO_DB = 10.0

class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)


class BalunSpec(_Strict):
    """A balun's imbalance (0 and 0: ideal)."""

    amplitude_imbalance_db: float = Field(0.0, ge=-6.0, le=6.0, allow_inf_nan=False, description="Half-winding "
                                          "1 over half-winding 2, dB (a turns imbalance: acts on drive and load).")
    phase_imbalance_deg: float = Field(0.0, ge=-45.0, le=45.0, allow_inf_nan=False, description="Phase error "
                                       "between the halves' EMFs, degrees (acts on a driven balun only).")


class DiodeMismatch(_Strict):
    """One diode's departure from the circuit's diode figures, as ratios (1: matched)."""

    is_ratio: float = Field(1.0, gt=0.0, le=100.0, allow_inf_nan=False, description="Saturation current ratio.")
    ideality_ratio: float = Field(1.0, gt=0.0, le=10.0, allow_inf_nan=False, description="Ideality ratio "
                                  "(the diode's ideality must stay >= 1).")
    rs_ratio: float = Field(1.0, ge=0.0, le=100.0, allow_inf_nan=False, description="Series resistance ratio.")


class CircuitSpec(_Strict):
    """The mixer's circuit: diode figures, per-diode mismatch, balun imbalance, port terminations.

    Diode figures left out take typical medium-barrier silicon Schottky values (from memory:
    :data:`mixchart.ring_solver.TYPICAL_DIODE`), and the result says so.  Bounds are physical
    sense, common practice, no source.
    """

    is_a: float | None = Field(None, gt=0.0, le=1.0, allow_inf_nan=False, description="Diode saturation "
                               "current, A; null: 5e-9 A (typical, assumed).")
    ideality: float | None = Field(None, ge=1.0, le=10.0, allow_inf_nan=False, description="Diode ideality "
                                   "factor (>= 1); null: 1.08 (typical, assumed).")
    rs_ohm: float | None = Field(None, ge=0.0, le=1e6, allow_inf_nan=False, description="Diode series "
                                 "resistance, ohm; null: 6 ohm (typical, assumed).")
    mismatch: tuple[DiodeMismatch, ...] | None = Field(None, strict=False, max_length=4, description="One entry "
                                                       "per diode (4 for double_balanced, 2 for single_balanced, "
                                                       "1 for single_ended), D1 a->b, D2 b->c, D3 c->d, D4 d->a; "
                                                       "null: matched diodes.")
    lo_balun: BalunSpec = Field(default_factory=BalunSpec, description="LO balun imbalance (default ideal).")
    rf_balun: BalunSpec = Field(default_factory=BalunSpec, description="RF balun imbalance (default ideal).")
    lo_port_ohm: float = Field(50.0, ge=0.1, le=1e6, allow_inf_nan=False, description="LO port termination, ohm.")
    rf_port_ohm: float = Field(50.0, ge=0.1, le=1e6, allow_inf_nan=False, description="RF port termination, ohm.")
    if_port_ohm: float = Field(50.0, ge=0.1, le=1e6, allow_inf_nan=False, description="IF port termination, ohm.")
    temperature_k: float = Field(300.0, ge=1.0, le=1000.0, allow_inf_nan=False, description="Junction "
                                 "temperature, K.")

    def check_for(self, topology: str) -> None:
        """Raise :class:`~mixchart.errors.PlanError` naming the field if the mismatch does not fit the topology."""
        if self.mismatch is None:
            return
        want = DIODE_COUNT[topology]
        if len(self.mismatch) != want:
            words = topology.replace("_", "-")
            raise PlanError(f"circuit.mismatch: {len(self.mismatch)} entries is invalid; a {words} circuit has "
                            f"{want} diode(s)")
        base = TYPICAL_DIODE.ideality if self.ideality is None else self.ideality
        for k, entry in enumerate(self.mismatch):
            if base * entry.ideality_ratio < 1.0:
                raise PlanError(f"circuit.mismatch.{k}.ideality_ratio: {entry.ideality_ratio!r} is invalid; it gives "
                                 f"diode D{k + 1} an ideality of {base * entry.ideality_ratio:.4g}, below 1")

    @property
    def balanced(self) -> bool:
        """True when no mismatch or imbalance is given: an ideally balanced circuit."""
        ideal = BalunSpec()
        matched = self.mismatch is None or all(m == DiodeMismatch() for m in self.mismatch)
        return matched and self.lo_balun == ideal and self.rf_balun == ideal



class MixerSpec(BaseModel):
    """The mixer of a plan: topology, where its spur levels come from, and its data-sheet figures.

    Defaults are common practice (see the module constants): a "+7 dBm LO" diode
    double-balanced mixer, 30 dB of real balance (20-40 dB is typical), a 20 dB drop per
    extra RF harmonic order at ``rf_ref_dbm``, the topology's typical isolations, and an LO
    second harmonic of -20 dBc.  A figure left out takes its default and the result says so.
    Field ranges are physical bounds, common practice, no source: drives -200 to +60 dBm,
    balance and isolation 0 to 300 dB, RF harmonic step 0 to 100 dB per order, conversion
    loss -100 to +100 dB; a table path at most 4096 characters (PATH_MAX).
    """

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)

    topology: Topology = Field("double_balanced", description="Sets which products balance suppresses (and, for "
                               "the circuit model, the circuit: a diode ring, a diode pair, one diode).")
    model: Literal["switching", "diode_circuit"] = Field("switching", description="Where the levels come from: "
                                                        "'switching', the built-in switching rules (balance_db, "
                                                        "rf_harmonic_step_db), or 'diode_circuit', a solve of the "
                                                        "mixer's diode circuit (mixer.circuit) at lo_drive_dbm.")
    circuit: CircuitSpec | None = Field(None, description="The diode circuit, when model is 'diode_circuit' (null: "
                                        "typical diodes, ideal baluns, 50 ohm ports).")
    table: Literal["builtin"] | str = Field("builtin", max_length=4096, description="'builtin' (theory) or a path to a "
                                            "measured CSV table, relative to the plan file's folder.")
    rf_ref_dbm: float | None = Field(None, ge=-200.0, le=60.0, allow_inf_nan=False, description="RF drive (signal "
                                     "input) at which the built-in RF-harmonic rule is stated, dBm; null: "
                                     "10 dB below the LO drive (a physical anchor, never the plan's signal "
                                     "level). A CSV table states its own.")
    lo_drive_dbm: float = Field(7.0, ge=-200.0, le=60.0, allow_inf_nan=False, description="LO drive at the LO port, "
                                "dBm: the built-in table's reference; compared with a CSV table's lo_ref_dbm.")
    balance_db: float = Field(30.0, ge=0.0, le=300.0, allow_inf_nan=False, description="How far real balance "
                              "suppresses products that ideal balance cancels, dB (a 1 % switching-duty error "
                              "leaves 30 dB).")
    conversion_loss_db: float | None = Field(None, ge=-100.0, le=100.0, allow_inf_nan=False, description="Conversion "
                                             "loss, dB (negative = gain); null: ideal switching value for the "
                                             "topology.")
    rf_harmonic_step_db: float = Field(20.0, ge=0.0, le=100.0, allow_inf_nan=False, description="Built-in model: "
                                       "drop per extra RF harmonic order at rf_ref_dbm, dB.")
    lo_rf_isolation_db: float | None = Field(None, ge=0.0, le=300.0, allow_inf_nan=False, description="LO-to-RF "
                                             "port isolation, dB (a transmitter's LO leakage); null: the "
                                             "topology's typical data-sheet value.")
    lo_if_isolation_db: float | None = Field(None, ge=0.0, le=300.0, allow_inf_nan=False, description="LO-to-IF "
                                             "port isolation, dB (a receiver's LO leakage); null: typical.")
    rf_if_isolation_db: float | None = Field(None, ge=0.0, le=300.0, allow_inf_nan=False, description="RF-to-IF "
                                             "port isolation, dB (feedthrough of the signal input); null: typical.")
    lo_harmonic2_dbc: float | None = Field(None, ge=-300.0, le=0.0, allow_inf_nan=False, description="LO second "
                                           "harmonic at the LO port, dBc, before filters.lo; it moves the "
                                           "switching instants and sets a floor under the even-n residuals; "
                                           "null: -20 dBc.")
    unbalanced_lo_isolation_db: float | None = Field(None, ge=0.0, le=300.0, allow_inf_nan=False, description="Older "
                                                     "plans: LO isolation before balance, dB; read as the LO "
                                                     "leakage isolation (plus balance_db for a double-balanced "
                                                     "mixer) when the port isolation is not given.")

    @field_validator("table")
    @classmethod
    def _check_table(cls, value: str) -> str:
        if value != "builtin" and (value != value.strip() or not value.lower().endswith(".csv") or "\0" in value):
            raise ValueError("give 'builtin' or a path ending in .csv")
        return value

    @model_validator(mode="after")
    def _check_circuit(self) -> MixerSpec:
        if self.circuit is not None and self.model != "diode_circuit":
            raise PlanError("circuit: only used when model is 'diode_circuit'; remove it or set model 'diode_circuit'")
        if self.circuit is not None:
            self.circuit.check_for(self.topology)
        return self

    def rf_ref(self) -> float:
        """The built-in rule's reference RF drive, dBm: ``rf_ref_dbm``, else LO drive less 10 dB."""
        return self.lo_drive_dbm - RF_REF_BELOW_LO_DB if self.rf_ref_dbm is None else self.rf_ref_dbm

    def leakage_isolation_db(self, direction: str) -> float:
        """Isolation from the LO port to the output port, dB: LO-IF for a receiver, LO-RF for a transmitter."""
        given = self.lo_if_isolation_db if direction == "down" else self.lo_rf_isolation_db
        if given is not None:
            return given
        if self.unbalanced_lo_isolation_db is not None:  # an older plan's figure, as it was applied
            return self.unbalanced_lo_isolation_db + (self.balance_db if self.topology == "double_balanced" else 0.0)
        return TYPICAL_ISOLATION_DB[self.topology][1 if direction == "down" else 0]

    def feedthrough_isolation_db(self) -> float:
        """Isolation from the signal input to the output, dB (RF-IF, either direction)."""
        given = self.rf_if_isolation_db
        return TYPICAL_ISOLATION_DB[self.topology][2] if given is None else given
