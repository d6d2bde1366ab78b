"""The mixer of a plan and the built-in level model: switching physics plus data-sheet figures.

:class:`MixerSpec` is the plan's ``mixer`` block; :func:`builtin_table` turns it into a
:class:`~mixchart.levels.LevelTable` and :func:`build_table` picks between that and a measured
CSV table (:func:`mixchart.levels.read_table_csv`, whose blank cells fall back to this model).
Every rule and every default below says where it comes from; the defaults are the realistic
or pessimistic choice, and :func:`assumed_figures` names those a plan left to them so that the
result can say so.  Pure numpy; never imports a plotting or widget library.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

from .errors import LevelTableError, PlanError, field_error
from .levels import (
    FLOOR_DBC,
    MAX_HARMONIC,
    LevelTable,
    Topology,
    check_topology,
    default_conversion_loss_db,
    read_table_csv,
)
from .ring_model import CircuitSpec, circuit_level_table, circuit_rf_drive_dbm

__all__ = ["MixerSpec", "TYPICAL_ISOLATION_DB", "DEFAULT_LO_HARMONIC2_DBC", "RF_REF_BELOW_LO_DB",
           "DUTY_RANGE", "builtin_table", "build_table", "assumed_figures", "single_ended_duty_db"]

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
#: Conduction duty range of a single-ended mixer's diode, fraction of the LO cycle: a diode
#: driven by a sine conducts for less than half a cycle.  Common practice, no source.
DUTY_RANGE = (0.2, 0.5)
#: Samples of the duty range for the worst case (the dB curves are smooth: the grid's error is
#: below 1e-4 dB for n <= 64, checked in the tests against a finer grid).
_DUTY_SAMPLES = 4001


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


def assumed_figures(spec: MixerSpec, direction: str) -> list[str]:
    """The figures of ``spec`` the model took from its defaults, as 'field (value)' texts."""
    out = []
    iso_field = "lo_if_isolation_db" if direction == "down" else "lo_rf_isolation_db"
    if getattr(spec, iso_field) is None and spec.unbalanced_lo_isolation_db is None:
        out.append(f"{iso_field} ({spec.leakage_isolation_db(direction):g} dB)")
    if spec.rf_if_isolation_db is None:
        out.append(f"rf_if_isolation_db ({spec.feedthrough_isolation_db():.3g} dB)")
    if spec.lo_harmonic2_dbc is None:
        out.append(f"lo_harmonic2_dbc ({DEFAULT_LO_HARMONIC2_DBC:g} dBc)")
    return out


def single_ended_duty_db(n: np.ndarray, duty_range: tuple[float, float] = DUTY_RANGE) -> np.ndarray:
    """Worst (highest) level of a single-ended mixer's (1, n) products over a conduction-duty range, dBc.

    A 0/1 switch of duty d is ``d + sum (2/(n·pi))·sin(n·pi·d)·cos(n·w·t)``; a sideband takes half a
    coefficient and the DC term is taken whole, so relative to the wanted (1, 1)::

        (1, n >= 1): |sin(n·pi·d)| / (n·sin(pi·d))        (1, 0): pi·d / sin(pi·d)

    (derived by hand; checked in the tests against a simulated 0/1 mixer).  At d = 0.5 the even
    n vanish and (1, 3) is -9.54 dBc; at d = 0.2, (1, 2) is cos(36°) = -1.84 dBc.

    Parameters
    ----------
    n : array_like of int
        LO harmonics, >= 0.
    duty_range : (float, float)
        Least and greatest conduction duty, 0 < low <= high <= 0.5.

    Returns
    -------
    numpy.ndarray
        The worst level over the range for each n, dBc (FLOOR_DBC where it vanishes throughout).
    """
    shape = np.shape(n)
    n = np.asarray(n, dtype=float).reshape(-1)
    d = np.linspace(duty_range[0], duty_range[1], _DUTY_SAMPLES)[:, None]
    with np.errstate(divide="ignore"):
        ratio = np.where(n == 0, np.pi * d / np.sin(np.pi * d),
                         np.abs(np.sin(np.maximum(n, 1) * np.pi * d)) / (np.maximum(n, 1) * np.sin(np.pi * d)))
        level = 20.0 * np.log10(ratio.max(axis=0))
    return np.maximum(level, FLOOR_DBC).reshape(shape)


def builtin_table(spec: MixerSpec, max_order: int, *, direction: str = "down",
                  lo_h2_rejection_db: float = 0.0) -> LevelTable:
    """Spur levels of a switching mixer from published theory, data-sheet figures and stated rules.

    The mixer is a memoryless RF-path nonlinearity times an LO-driven switch; product (m, n)
    is the m-th RF harmonic times the n-th switching harmonic.  Levels are dBc relative to the
    wanted (1, 1) output at the reference drives ``spec.rf_ref()`` and ``spec.lo_drive_dbm``:

    1. **(1, n), odd n**, balanced: a +/-1 square wave's harmonics fall as 1/n, so
       ``-20·log10(n)`` ((1, 3) at -9.54 dBc; from memory: S. A. Maas, *Microwave Mixers*).
       Single-ended: the worst over conduction duty 0.2-0.5 (:func:`single_ended_duty_db`).
    2. **Even-n residuals** (balanced topologies, every m): a switching-duty or mismatch error
       δ puts every even harmonic of the switch, and its DC term, at ``pi·δ`` of the wanted:
       one level, flat in n (derived by hand from the Fourier series of a square wave of duty
       0.5 + δ; δ = 1 % gives -30 dBc).  ``balance_db`` is that level.  The LO's second
       harmonic ``a`` (dBc) moves the switching instants by ``a/pi`` of a cycle, the same
       effect, so it adds a floor at ``a`` less ``lo_h2_rejection_db`` (the LO filter's least
       rejection of 2·f_LO relative to f_LO); the two add in amplitude (worst phase).
       Single-ended: the worst over duty, as rule 1.
    3. **RF harmonics, m >= 2**: ``-(m - 1)·rf_harmonic_step_db`` at ``rf_ref()``, flat across n
       (diode-ring physics and published tables are roughly flat in n, not 1/n).  The reference
       defaults to 10 dB under the LO drive, a physical anchor; both are common practice, no
       source.  A double-balanced mixer also suppresses even m by ``balance_db``; an even-n
       entry takes the even-n residual instead (never both: the suppressions are not assumed
       to multiply, which is pessimistic).
    4. **Feedthrough (m, 0)**: the signal input reaches the output ``rf_if_isolation_db`` down:
       ``(1, 0) = conversion loss - isolation``, never below the switching residual of rule 2
       (or a single-ended switch's own DC term, +3.92 dBc at 50 % duty), and ``(m, 0)`` adds the
       RF-harmonic part of rule 3.
    5. **LO leakage (0, n)**: the LO reaches the output ``leakage_isolation_db(direction)`` down
       (LO-IF for a receiver, LO-RF for a transmitter), relative to the wanted output
       ``rf_ref() - conversion loss``; odd n fall as 1/n, even n take the residual of rule 2.

    Parameters
    ----------
    spec : MixerSpec
        The mixer.
    max_order : int
        Highest order m + n needed; the table holds 0 <= m, n <= max_order.
    direction : {"down", "up"}
        Which port is the output (IF for "down", RF for "up"): chooses the LO isolation.
    lo_h2_rejection_db : float
        How much more the LO filter rejects 2·f_LO than f_LO at the least, dB (0: no filter).

    Returns
    -------
    LevelTable
        With ``measured`` all False.

    Raises
    ------
    LevelTableError
        If ``max_order`` is out of range.

    Examples
    --------
    >>> t = builtin_table(MixerSpec(balance_db=300, lo_harmonic2_dbc=-300), 5)
    >>> round(float(t.level_dbc[1, 3]), 2), round(float(t.level_dbc[1, 2]), 1)
    (-9.54, -300.0)
    """
    topology = spec.topology
    check_topology(topology)
    whole = isinstance(max_order, (int, np.integer)) and not isinstance(max_order, bool)
    if not whole or not 0 < max_order <= MAX_HARMONIC:
        raise field_error(LevelTableError, "max_order", max_order, f"an integer from 1 to {MAX_HARMONIC}")
    conversion_loss = (default_conversion_loss_db(topology) if spec.conversion_loss_db is None
                       else spec.conversion_loss_db)
    rf_ref, lo_ref = spec.rf_ref(), spec.lo_drive_dbm
    h = np.arange(int(max_order) + 1)
    m, n = np.broadcast_arrays(h[:, None], h[None, :])
    odd_n = -20.0 * np.log10(np.maximum(n, 1))
    h2_dbc = (DEFAULT_LO_HARMONIC2_DBC if spec.lo_harmonic2_dbc is None else spec.lo_harmonic2_dbc) - lo_h2_rejection_db
    residual = _db_sum(-spec.balance_db, h2_dbc)  # rule 2, balanced topologies
    rf_part = -(m - 1.0) * spec.rf_harmonic_step_db  # rule 3
    balanced = topology != "single_ended"
    if balanced:
        switch = np.where(n % 2 == 1, np.where(m == 1, odd_n, 0.0), residual)  # rules 1-3
    else:
        switch = np.where(m == 1, single_ended_duty_db(h)[None, :], 0.0)
    level = rf_part + switch
    if topology == "double_balanced":
        level = np.where((m % 2 == 0) & (n % 2 == 1), level - spec.balance_db, level)
    # rule 4: feedthrough
    inherent = residual if balanced else float(single_ended_duty_db(np.array([0]))[0])
    feed = max(conversion_loss - spec.feedthrough_isolation_db(), inherent)
    level[:, 0] = rf_part[:, 0] + feed
    # rule 5: LO leakage, relative to the wanted output at the reference drive
    leak = lo_ref - spec.leakage_isolation_db(direction) - (rf_ref - conversion_loss)
    level[0, :] = np.where(n[0] % 2 == 1, leak + odd_n[0], leak + (residual if balanced else odd_n[0]))
    level = np.maximum(level, FLOOR_DBC)
    level[0, 0], level[1, 1] = FLOOR_DBC, 0.0
    description = (f"built-in {topology.replace('_', '-')} switching-mixer model (balance {spec.balance_db:g} dB, "
                   f"LO H2 {h2_dbc:g} dBc at the mixer, {spec.rf_harmonic_step_db:g} dB per RF harmonic order; "
                   f"isolation LO-{'IF' if direction == 'down' else 'RF'} {spec.leakage_isolation_db(direction):g} dB, "
                   f"RF-IF {spec.feedthrough_isolation_db():.3g} dB) at RF {rf_ref:g} dBm, LO {lo_ref:g} dBm")
    return LevelTable(level, np.zeros(level.shape, dtype=bool), rf_ref, lo_ref, conversion_loss, topology,
                      description)


def _db_sum(*levels_db: float) -> float:
    """Amplitude sum of levels in dB (coherent, worst phase), FLOOR_DBC when all vanish."""
    total = sum(10.0 ** (x / 20.0) for x in levels_db if x > FLOOR_DBC)
    return max(20.0 * math.log10(total), FLOOR_DBC) if total > 0 else FLOOR_DBC


def build_table(spec: MixerSpec, max_order: int, *, base_dir: str | Path | None = None, direction: str = "down",
                lo_h2_rejection_db: float = 0.0, signal_dbm: float | None = None) -> LevelTable:
    """The level table a plan's mixer spec asks for.

    Parameters
    ----------
    spec : MixerSpec
        The mixer spec.
    max_order : int
        Highest order m + n needed.
    base_dir : str or pathlib.Path, optional
        Folder for a relative ``spec.table`` path (the plan file's); default: current directory.
    direction : {"down", "up"}
        The plan's direction (which port is the output).
    lo_h2_rejection_db : float
        The LO filter's least extra rejection of 2·f_LO over f_LO, dB.
    signal_dbm : float, optional
        The plan's strongest input level, dBm: where the circuit model is solved when
        ``spec.rf_ref_dbm`` is not given (:func:`mixchart.ring_model.circuit_rf_drive_dbm`).

    Returns
    -------
    LevelTable
        The model's table (:func:`builtin_table`, or
        :func:`mixchart.ring_model.circuit_level_table` for ``model == "diode_circuit"``); or the
        CSV table at its own stated drives, its blank cells from the model moved to the CSV's
        RF reference.

    Raises
    ------
    LevelTableError
        If the CSV table is unreadable or invalid.
    CircuitError
        If the circuit model cannot be solved (e.g. an LO drive too low for the diodes to conduct).
    """
    if spec.model == "diode_circuit":
        h2 = (DEFAULT_LO_HARMONIC2_DBC if spec.lo_harmonic2_dbc is None else spec.lo_harmonic2_dbc) - lo_h2_rejection_db
        fallback = circuit_level_table(spec, max_order, direction=direction,
                                       lo_harmonic2_dbc=None if h2 <= FLOOR_DBC else h2,
                                       rf_drive_dbm=circuit_rf_drive_dbm(spec, signal_dbm))
    else:
        fallback = builtin_table(spec, max_order, direction=direction, lo_h2_rejection_db=lo_h2_rejection_db)
    if spec.table == "builtin":
        return fallback
    # An absolute spec.table wins over base_dir under pathlib's "/".
    return read_table_csv(Path(base_dir if base_dir is not None else ".") / spec.table, fallback=fallback)

