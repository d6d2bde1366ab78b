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

import numpy as np

from .errors import LevelTableError, field_error
from .levels import (
    FLOOR_DBC,
    MAX_HARMONIC,
    LevelTable,
    check_topology,
    default_conversion_loss_db,
    read_table_csv,
)
from .models.mixer import DEFAULT_LO_HARMONIC2_DBC, RF_REF_BELOW_LO_DB, TYPICAL_ISOLATION_DB, MixerSpec
from .ring_model import circuit_level_table, circuit_rf_drive_dbm

__all__ = ["MixerSpec", "TYPICAL_ISOLATION_DB", "DEFAULT_LO_HARMONIC2_DBC", "RF_REF_BELOW_LO_DB",
           "DUTY_RANGE", "builtin_table", "build_table", "assumed_figures", "single_ended_duty_db"]

#: Conduction duty range of a single-ended mixer's diode, fraction of the LO cycle: a diode
#: driven by a sine conducts for less than half a cycle.  Common practice, no source.
DUTY_RANGE = (0.2, 0.5)
#: Samples of the duty range for the worst case (the dB curves are smooth: the grid's error is
#: below 1e-4 dB for n <= 64, checked in the tests against a finer grid).
_DUTY_SAMPLES = 4001


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

