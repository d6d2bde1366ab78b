"""Spur-level tables: how strong each mixing product is, relative to the wanted output.

A mixing product is f = |m·f_RF ± n·f_LO|: ``m`` is the RF harmonic (for an up-converter, the
harmonic of the signal at the mixer's signal input, i.e. the IF), ``n`` the LO harmonic.  A
:class:`LevelTable` holds ``level_dbc[m, n]`` in dBc relative to the wanted (1, 1) output at a
stated reference RF and LO drive (dBm at the mixer ports).  Tables come from the built-in model
(:func:`builtin_table`) or a measured CSV file (:func:`read_table_csv`) whose blank cells fall
back to the built-in model; :func:`build_table` picks from a :class:`MixerSpec`.

Vanished products ((0, 0), and products cancelled by an ideal balance) sit at the finite floor
:data:`FLOOR_DBC` = -300 dBc, never -inf, so that differences, power sums and JSON output stay
finite and warning-free.  This module never imports a plotting or widget library.
"""

from __future__ import annotations

import csv
import math
import re
from collections.abc import Collection
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike
from pydantic import BaseModel, ConfigDict, Field, field_validator

from .errors import LevelTableError, field_error
from .fileio import read_regular_file

__all__ = [
    "Topology", "TOPOLOGIES", "FLOOR_DBC", "MAX_HARMONIC", "RF_EXTRAPOLATION_LIMIT_DB", "CSV_MAX_LEVEL_DBC",
    "LO_DRIVE_TOLERANCE_DB", "IDEAL_BALANCED_CONVERSION_LOSS_DB", "IDEAL_SINGLE_ENDED_CONVERSION_LOSS_DB",
    "MixerSpec", "LevelTable", "default_conversion_loss_db", "builtin_table", "read_table_csv", "build_table",
]

Topology = Literal["single_ended", "single_balanced", "double_balanced"]
TOPOLOGIES: tuple[str, ...] = ("single_ended", "single_balanced", "double_balanced")

#: Level of a product that vanishes, dBc.  Finite on purpose (see the module docstring).
FLOOR_DBC = -300.0
#: Largest harmonic index a table may hold (plans stop at order 25).
MAX_HARMONIC = 64
#: RF drive further than this from the reference is reported, dB.  Common practice, no source.
RF_EXTRAPOLATION_LIMIT_DB = 10.0
#: LO drive further than this from the table's is reported, dB.  Common practice, no source.
LO_DRIVE_TOLERANCE_DB = 0.5
#: RF drive offsets from the reference are clipped to +/- this, dB, so that a drive of -inf dBm
#: (no signal, e.g. behind an ideal filter) still gives finite levels and warning-free arithmetic.
_DRIVE_CLIP_DB = 1000.0
#: Ideal switching mixer, +/-1 switching wave: 20·log10(pi/2) = 3.92 dB.
IDEAL_BALANCED_CONVERSION_LOSS_DB = 20.0 * math.log10(math.pi / 2.0)
#: Ideal switching mixer, 0/1 switching wave: 20·log10(pi) = 9.94 dB (derived by hand).
IDEAL_SINGLE_ENDED_CONVERSION_LOSS_DB = 20.0 * math.log10(math.pi)
#: Switching part of RF feedthrough (m, 0) relative to (m, 1), 0/1 switch s(t) = d + sum c_n cos(n w t):
#: (m, 0) takes the whole DC term d = 1/2, (m, 1) one sideband's half c_1/2 = 1/pi of the fundamental,
#: so 20·log10(pi/2) = +3.92 dB (derived by hand; checked against a simulated mixer in the tests).
_SWITCH_FEEDTHROUGH_DB = 20.0 * math.log10(math.pi / 2.0)
#: Highest level a CSV table entry may state, dBc: a single-ended RF feedthrough is about +4 dBc and LO
#: leakage at a low RF reference can be well above 0 dBc; anything higher is taken as a sign slip
#: (suppression written as a positive number).  Common practice, no source.
CSV_MAX_LEVEL_DBC = 30.0


class MixerSpec(BaseModel):
    """The mixer of a plan: topology and where its spur levels come from.

    Defaults are common practice, no source: a "+7 dBm LO" diode double-balanced mixer, its
    table stated at 0 dBm RF drive, 30 dB of real balance (20-40 dB is typical), 20 dB drop per
    extra RF harmonic order at the reference drive, 20 dB LO-to-output isolation before balance.
    Field ranges are physical bounds, common practice, no source: drives -200 to +60 dBm (as the
    plan's signal levels), balance and isolation 0 to 300 dB, RF harmonic step 0 to 100 dB per
    order, conversion loss -100 to +100 dB; a table path at most 4096 characters (PATH_MAX).
    """

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)

    topology: Topology = Field("double_balanced", description="Sets which products balance suppresses.")
    table: Literal["builtin"] | str = Field("builtin", max_length=4096, description="'builtin' (theory) or a path to a "
                                            "measured CSV table, relative to the plan file's folder.")
    rf_ref_dbm: float = Field(0.0, ge=-200.0, le=60.0, allow_inf_nan=False, description="RF drive (signal input) "
                              "at which the built-in table is stated, dBm. A CSV table states its own.")
    lo_drive_dbm: float = Field(7.0, ge=-200.0, le=60.0, allow_inf_nan=False, description="LO drive at the LO port, "
                                "dBm: the built-in table's reference; compared with a CSV table's lo_ref_dbm.")
    balance_db: float = Field(30.0, ge=0.0, le=300.0, allow_inf_nan=False, description="How far real balance "
                              "suppresses products that ideal balance cancels, dB.")
    conversion_loss_db: float | None = Field(None, ge=-100.0, le=100.0, allow_inf_nan=False, description="Conversion "
                                             "loss, dB (negative = gain); null: ideal switching value for the "
                                             "topology.")
    rf_harmonic_step_db: float = Field(20.0, ge=0.0, le=100.0, allow_inf_nan=False, description="Built-in model: "
                                       "drop per extra RF harmonic order at the reference drive, dB.")
    unbalanced_lo_isolation_db: float = Field(20.0, ge=0.0, le=300.0, allow_inf_nan=False, description="Built-in "
                                              "model: LO-port-to-output isolation before balance, dB.")

    @field_validator("table")
    @classmethod
    def _check_table(cls, value: str) -> str:
        if value != "builtin" and (value != value.strip() or not value.lower().endswith(".csv") or "\0" in value):
            raise ValueError("give 'builtin' or a path ending in .csv")
        return value


def default_conversion_loss_db(topology: str) -> float:
    """Conversion loss of the ideal switching mixer of a topology, dB.

    Balanced topologies switch the signal with a +/-1 square wave (fundamental 4/pi), so the
    difference-frequency output has 2/pi of the input amplitude: 20·log10(pi/2) = 3.92 dB.  A
    single-ended 0/1 switch (fundamental 2/pi) gives 20·log10(pi) = 9.94 dB (voltage ratio, equal
    port impedances, no image recovery).

    Parameters
    ----------
    topology : {"single_ended", "single_balanced", "double_balanced"}
        Mixer topology.

    Returns
    -------
    float
        Conversion loss, dB.

    References
    ----------
    3.92 dB for the ideal double-balanced switching mixer: from memory, S. A. Maas, *Microwave
    Mixers*.  The single-ended value: derived by hand from the Fourier series of a 0/1 wave.
    """
    _check_topology(topology)
    if topology == "single_ended":
        return IDEAL_SINGLE_ENDED_CONVERSION_LOSS_DB
    return IDEAL_BALANCED_CONVERSION_LOSS_DB


@dataclass(frozen=True, eq=False)
class LevelTable:
    """Spur levels ``level_dbc[m, n]`` relative to the wanted (1, 1) output.

    Parameters
    ----------
    level_dbc : numpy.ndarray
        Square float array ``(H + 1, H + 1)``: level of product (m, n) at the reference drives,
        dBc; ``[1, 1] == 0``; vanished entries and (0, 0) at :data:`FLOOR_DBC`.  Kept read-only.
    measured : numpy.ndarray
        Bool, same shape: True where the entry was measured, False where it is built-in.
    rf_ref_dbm, lo_ref_dbm : float
        Reference RF drive (signal input) and LO drive (LO port), dBm.
    conversion_loss_db : float
        Conversion loss of the wanted product, dB (negative = gain).
    topology, description : str
        Mixer topology the table describes; one line saying where the table came from.
    """

    level_dbc: np.ndarray = field(repr=False)
    measured: np.ndarray = field(repr=False)
    rf_ref_dbm: float
    lo_ref_dbm: float
    conversion_loss_db: float
    topology: str
    description: str
    _slope: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        level = np.array(self.level_dbc, dtype=float)
        measured = np.array(self.measured, dtype=bool)
        if level.ndim != 2 or level.shape[0] != level.shape[1] or not 2 <= level.shape[0] <= MAX_HARMONIC + 1:
            raise field_error(LevelTableError, "level_dbc.shape", level.shape,
                              f"a square (H+1, H+1) array with 1 <= H <= {MAX_HARMONIC}")
        if measured.shape != level.shape:
            raise field_error(LevelTableError, "measured.shape", measured.shape, f"{level.shape} like level_dbc")
        level[0, 0], measured[0, 0] = FLOOR_DBC, False  # never a product, whatever was passed
        bad = ~np.isfinite(level) | (level < FLOOR_DBC)
        if bad.any():
            m, n = np.argwhere(bad)[0]
            raise field_error(LevelTableError, f"level_dbc[{m}, {n}]", float(level[m, n]),
                              f"finite, >= {FLOOR_DBC:g} dBc")
        if level[1, 1] != 0.0:
            raise field_error(LevelTableError, "level_dbc[1, 1]", float(level[1, 1]), "0 dBc (the wanted output)")
        _check_topology(self.topology)
        for name in ("rf_ref_dbm", "lo_ref_dbm", "conversion_loss_db"):
            object.__setattr__(self, name, float(_drive(getattr(self, name), name, scalar=True)))
        # dB per dB of RF drive: m - 1, and 0 for vanished entries so they stay at the floor.
        h = np.arange(level.shape[0], dtype=float)
        slope = np.where(level <= FLOOR_DBC, 0.0, np.broadcast_to((h - 1.0)[:, None], level.shape))
        for name, arr in (("level_dbc", level), ("measured", measured), ("_slope", slope)):
            arr.flags.writeable = False
            object.__setattr__(self, name, arr)

    @property
    def max_harmonic(self) -> int:
        """Highest harmonic index H stored, for m and for n."""
        return self.level_dbc.shape[0] - 1

    def level_dbc_at(self, m: ArrayLike, n: ArrayLike, rf_drive_dbm: ArrayLike) -> np.ndarray:
        """Level of products (m, n) at an RF drive, dBc relative to the wanted output.

        Returns ``level_dbc[m, n] + (m - 1)·(rf_drive_dbm - rf_ref_dbm)``: the m-th RF harmonic
        grows m dB per dB of drive and the wanted output 1 dB per dB, so relative to the wanted
        output product (m, n) moves (m - 1) dB per dB (LO leakage, m = 0, falls 1 dB per dB).
        Results never go below :data:`FLOOR_DBC`, where vanished entries stay.

        Parameters
        ----------
        m, n : array_like of int
            RF and LO harmonics, 0 <= m, n <= :attr:`max_harmonic`; broadcast together.
        rf_drive_dbm : float or array_like
            RF drive at the mixer's signal input, dBm; broadcast with m and n.  -inf (no signal)
            is allowed: offsets from the reference are clipped to +/-1000 dB.

        Returns
        -------
        numpy.ndarray
            Levels, dBc (float64), of the broadcast shape (a numpy float for scalar input).

        Raises
        ------
        LevelTableError
            If m or n is not integer or out of range, or a drive is NaN.

        References
        ----------
        Power-series nonlinearity, standard intermodulation result: order m grows as amplitude**m.
        """
        m = _harmonic_array(m, "m", self.max_harmonic)
        n = _harmonic_array(n, "n", self.max_harmonic)
        delta_db = np.clip(_drive(rf_drive_dbm) - self.rf_ref_dbm, -_DRIVE_CLIP_DB, _DRIVE_CLIP_DB)
        flat = m * (self.max_harmonic + 1) + n  # one flat gather per array is ~2x faster than [m, n]
        level = self.level_dbc.ravel().take(flat) + self._slope.ravel().take(flat) * delta_db
        return np.maximum(level, FLOOR_DBC, out=level) if isinstance(level, np.ndarray) else max(level, FLOOR_DBC)

    def drive_warnings(self, rf_drive_dbm: ArrayLike, lo_drive_dbm: float) -> list[str]:
        """Say when the drives in use make the table's levels less trustworthy.

        Parameters
        ----------
        rf_drive_dbm : float or array_like
            RF drive(s) at the mixer's signal input, dBm.
        lo_drive_dbm : float
            LO drive at the mixer's LO port, dBm.

        Returns
        -------
        list of str
            One line per concern, empty when none: RF drive more than
            :data:`RF_EXTRAPOLATION_LIMIT_DB` from the reference, LO drive more than
            :data:`LO_DRIVE_TOLERANCE_DB` from the table's.
        """
        out: list[str] = []
        drive = _drive(rf_drive_dbm).ravel()
        drive = drive[np.isfinite(drive)]  # -inf: no signal, nothing to extrapolate
        lo_drive = float(_drive(lo_drive_dbm, "lo_drive_dbm", scalar=True))
        if drive.size:
            worst = float(drive[np.argmax(np.abs(drive - self.rf_ref_dbm))])
            if abs(worst - self.rf_ref_dbm) > RF_EXTRAPOLATION_LIMIT_DB:
                out.append(f"RF drive {worst:g} dBm is {abs(worst - self.rf_ref_dbm):.1f} dB from the level "
                           f"table's reference {self.rf_ref_dbm:g} dBm; levels are extrapolated at (m-1) "
                           "dB per dB")
        if abs(lo_drive - self.lo_ref_dbm) > LO_DRIVE_TOLERANCE_DB:
            out.append(f"LO drive {lo_drive:g} dBm differs from the level table's {self.lo_ref_dbm:g} dBm; "
                       "levels are not scaled for LO drive")
        return out

    def fallback_note(self, max_order: int) -> str | None:
        """One line naming the built-in entries (m + n <= ``max_order``) of a partly measured table.

        Parameters
        ----------
        max_order : int
            Highest order m + n analysed.

        Returns
        -------
        str or None
            E.g. "entries (0,2), (2,2) came from the built-in model"; None if the table is
            wholly built-in or no entry up to ``max_order`` is built-in.
        """
        h = np.arange(self.max_harmonic + 1)
        order = h[:, None] + h[None, :]
        entries = np.argwhere(~self.measured & (order > 0) & (order <= max_order)) if self.measured.any() else []
        if not len(entries):
            return None
        more = f" and {len(entries) - 20} more" if len(entries) > 20 else ""
        return f"entries {', '.join(f'({m},{n})' for m, n in entries[:20])}{more} came from the built-in model"

    def to_frame(self):
        """Levels for display, dBc.

        Returns
        -------
        pandas.DataFrame
            Index m (RF harmonic), columns n (LO harmonic); vanished entries and (0, 0) as NaN.
        """
        import pandas as pd

        values = np.where(self.level_dbc <= FLOOR_DBC, np.nan, self.level_dbc)
        h = range(self.max_harmonic + 1)
        return pd.DataFrame(values, index=pd.Index(h, name="m"), columns=pd.Index(h, name="n"))


# ---------------------------------------------------------------------------- built-in model
def builtin_table(topology: str, max_order: int, *, balance_db: float = 30.0, rf_harmonic_step_db: float = 20.0,
                  unbalanced_lo_isolation_db: float = 20.0, conversion_loss_db: float | None = None,
                  rf_ref_dbm: float = 0.0, lo_ref_dbm: float = 7.0) -> LevelTable:
    """Spur levels of a switching mixer from published theory plus stated rules of thumb.

    The mixer is a memoryless RF-path nonlinearity p(x) followed by an LO-driven switch s(t):
    y = p(x)·s(t).  Product (m, n) is the m-th RF harmonic times the n-th switching harmonic, so
    its level relative to (1, 1), in dB, is an RF part plus a switching part:

    1. Switching part, relative to n = 1, for a switch s(t) = d + sum of c_n·cos(n·w_LO·t):
       each product (m, n >= 1) is one sideband and takes c_n/2, so n >= 1 gives
       -20·log10(n).  Exact for odd n: the Fourier series of a square wave has only odd
       harmonics, amplitude proportional to 1/n ((1, 3) at -9.54 dBc).  For even n the 1/n
       envelope is the *unbalanced* level: a 0/1 switching wave of duty d has harmonics
       proportional to |sin(n·pi·d)|/n, at worst 1/n (derived by hand).  n = 0, RF feedthrough
       (m, 0): the product takes the whole DC term d, not half, so for a 0/1 switch at 50 %
       duty d/(c_1/2) = (1/2)/(1/pi) = pi/2: +3.92 dB above (m, 1), for every m (derived by
       hand; the single-ended (1, 0) is +3.92 dBc).
    2. RF part, m >= 1: -(m - 1)·``rf_harmonic_step_db`` at the reference drive.  A diode mixer
       has no closed form; this is a rule of thumb, 20 dB per order by default (common
       practice, no source).
    3. LO leakage (0, n): the LO ``unbalanced_lo_isolation_db`` below its drive (20 dB default,
       common practice, no source) times the switching part, relative to the wanted output
       ``rf_ref_dbm - conversion_loss_db``.  (0, 0) is never a product.
    4. Balance: double-balanced ideally cancels products with m even or n even (so also RF
       feedthrough (m, 0) and LO leakage (0, n)); single-balanced, taken as the signal path
       switched by a +/-1 LO wave (no DC term), cancels n even (so also (m, 0)) but not m even;
       single-ended cancels nothing.  From memory (e.g. S. A. Maas, *Microwave Mixers*: a double-balanced
       mixer passes only products with m and n both odd).  Real balance leaves a cancelled
       product at its unbalanced level minus ``balance_db`` (20-40 dB common practice, no
       source); ``balance_db=inf`` gives the ideal table, cancelled products at :data:`FLOOR_DBC`.
       E.g. double-balanced (1, 0) at 30 dB balance: 3.92 - 30 = -26.08 dBc.

    All levels are dBc (dB relative to the wanted (1, 1) output amplitude) at the reference
    drives; conversion loss and drives as below.

    Parameters
    ----------
    topology : {"single_ended", "single_balanced", "double_balanced"}
        Mixer topology.
    max_order : int
        Highest order m + n needed; the table holds 0 <= m, n <= max_order.
    balance_db, rf_harmonic_step_db, unbalanced_lo_isolation_db : float
        Real balance suppression (``math.inf``: ideal balance), drop per extra RF harmonic order
        at the reference drive, and LO-port-to-output isolation before balance; dB, all >= 0.
    conversion_loss_db : float, optional
        Conversion loss, dB; default :func:`default_conversion_loss_db`.
    rf_ref_dbm, lo_ref_dbm : float
        Reference RF drive (signal input) and LO drive (LO port) of the table, dBm.

    Returns
    -------
    LevelTable
        With ``measured`` all False.

    Raises
    ------
    LevelTableError
        If an argument is out of range.

    Examples
    --------
    >>> round(float(builtin_table("double_balanced", 5, balance_db=math.inf).level_dbc[1, 3]), 2)
    -9.54
    >>> round(float(builtin_table("single_ended", 5).level_dbc[1, 0]), 2)
    3.92
    """
    _check_topology(topology)
    whole = isinstance(max_order, (int, np.integer)) and not isinstance(max_order, bool)
    if not whole or not 0 < max_order <= MAX_HARMONIC:
        raise field_error(LevelTableError, "max_order", max_order, f"an integer from 1 to {MAX_HARMONIC}")
    if not balance_db >= 0.0:  # also rejects NaN
        raise field_error(LevelTableError, "balance_db", balance_db, ">= 0 dB (inf for ideal balance)")
    for name, value in (("rf_harmonic_step_db", rf_harmonic_step_db),
                        ("unbalanced_lo_isolation_db", unbalanced_lo_isolation_db)):
        if not (math.isfinite(value) and value >= 0.0):
            raise field_error(LevelTableError, name, value, "finite and >= 0 dB")
    _drive(rf_ref_dbm, "rf_ref_dbm", scalar=True)
    _drive(lo_ref_dbm, "lo_ref_dbm", scalar=True)
    if conversion_loss_db is None:
        conversion_loss_db = default_conversion_loss_db(topology)
    elif not math.isfinite(conversion_loss_db):
        raise field_error(LevelTableError, "conversion_loss_db", conversion_loss_db, "finite dB or None")

    h = np.arange(int(max_order) + 1)
    m, n = h[:, None], h[None, :]
    switch_db = np.where(n >= 1, -20.0 * np.log10(np.maximum(n, 1)), _SWITCH_FEEDTHROUGH_DB)  # rule 1
    unbalanced = -(m - 1.0) * rf_harmonic_step_db + switch_db
    wanted_dbm = rf_ref_dbm - conversion_loss_db
    unbalanced[0, :] = lo_ref_dbm - unbalanced_lo_isolation_db + switch_db[0, :] - wanted_dbm
    level = np.maximum(np.where(_cancelled(topology, m, n), unbalanced - balance_db, unbalanced), FLOOR_DBC)
    level[1, 1] = 0.0
    balance_text = "ideal balance" if math.isinf(balance_db) else f"balance {balance_db:g} dB"
    description = (f"built-in {topology.replace('_', '-')} switching-mixer model ({balance_text}, "
                   f"{rf_harmonic_step_db:g} dB per RF harmonic order) at RF {rf_ref_dbm:g} dBm, "
                   f"LO {lo_ref_dbm:g} dBm")
    return LevelTable(level, np.zeros(level.shape, dtype=bool), rf_ref_dbm, lo_ref_dbm, conversion_loss_db,
                      topology, description)


def _cancelled(topology: str, m: np.ndarray, n: np.ndarray) -> np.ndarray:
    """Products that an ideal balance of ``topology`` cancels (:func:`builtin_table`, rule 4)."""
    even_m, even_n = np.broadcast_arrays(m % 2 == 0, n % 2 == 0)
    if topology == "double_balanced":
        return even_m | even_n
    return even_n if topology == "single_balanced" else np.zeros(even_n.shape, dtype=bool)


# ---------------------------------------------------------------------------- CSV tables
# Linear patterns (each character can be taken by one part only; the old mantissa \d+\.?\d* and
# the setting's (.*?)\s* were quadratic on long near-misses).  Matched with fullmatch.
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d{1,3})?")
_INDEX = re.compile(r"[+-]?\d{1,6}")
_SETTING = re.compile(r"#[ \t]*([A-Za-z_]\w*)[ \t]*=(.*)")  # the value is stripped after the match
#: Longest cell or setting value read, characters; longer ones are refused before any pattern.
_MAX_CELL_CHARS = 200
_SETTINGS = ("rf_ref_dbm", "lo_ref_dbm", "description")
_CORNER = "m\\n"
_MAX_CSV_BYTES = 1_000_000


def read_table_csv(path: str | Path, *, fallback: LevelTable) -> LevelTable:
    """Read a measured level table; blank cells fall back to the built-in model.

    Plain CSV, parsed, never evaluated.  Layout::

        # rf_ref_dbm = -10
        # lo_ref_dbm = 7
        # description = bench measurement, unit 3
        m\\n,0,1,2,3
        0,,-35,,-50
        1,-30,0,-40,-12
        2,-60,-55,-62

    Leading ``#`` lines hold ``key = value`` settings (``rf_ref_dbm`` and ``lo_ref_dbm``
    required, dBm at the mixer ports; ``description`` optional) or free-text notes.  The header
    row is ``m\\n`` then the LO harmonics n; each row starts with its RF harmonic m.  Entries are
    dBc relative to the wanted output: (1, 1) is 0 or blank, others in [:data:`FLOOR_DBC`,
    :data:`CSV_MAX_LEVEL_DBC`] (-300 to +30 dBc; a single-ended RF feedthrough is about +4 dBc),
    (0, 0) blank.  Blank and missing trailing cells take the fallback's value moved to this
    table's RF reference by the (m - 1) dB/dB rule; ``measured`` records which entries were
    measured.  Entries beyond the fallback's harmonic range are validated but not kept.

    Parameters
    ----------
    path : str or pathlib.Path
        CSV file, UTF-8.
    fallback : LevelTable
        Supplies blank entries, the table size and the conversion loss.

    Returns
    -------
    LevelTable

    Raises
    ------
    LevelTableError
        One line naming the file, line, row m / column n and the bad value: unreadable file; bad
        setting or header; non-integer, negative or duplicate index; non-numeric cell; (1, 1) not
        0 dBc; entry above :data:`CSV_MAX_LEVEL_DBC` or below the floor; a value at (0, 0).
    """
    path = Path(path)
    name = path.name
    # a regular file only (never a FIFO or a device), at most _MAX_CSV_BYTES
    raw = read_regular_file(path, _MAX_CSV_BYTES, error=LevelTableError, field="table")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise LevelTableError(f"table: {str(path)!r} is invalid (not UTF-8 at byte {exc.start}); "
                              "a readable UTF-8 CSV file") from None

    settings: dict[str, str] = {}
    header: list[int] | None = None
    rows: set[int] = set()
    size = fallback.max_harmonic + 1
    values = np.zeros((size, size))
    measured = np.zeros((size, size), dtype=bool)
    ignored = 0
    for lineno, line in enumerate(text.splitlines(), start=1):
        where = f"{name} line {lineno}"
        if not line.strip():
            continue
        if line.lstrip().startswith("#"):
            if header is not None:
                raise field_error(LevelTableError, where, line.strip(), "comments only before the header row")
            found = _SETTING.fullmatch(line.strip())
            if found is None:
                continue  # a free-text note
            key, value = found.group(1), found.group(2).strip()
            if key not in _SETTINGS or key in settings:
                raise field_error(LevelTableError, f"{where} setting", key,
                                  f"each of {', '.join(_SETTINGS)} once")
            if len(value) > _MAX_CELL_CHARS:
                raise field_error(LevelTableError, f"{where} setting {key}", value,
                                  f"at most {_MAX_CELL_CHARS} characters")
            settings[key] = value
            continue
        try:
            cells = [c.strip() for c in next(csv.reader([line]))]
        except csv.Error as exc:
            raise field_error(LevelTableError, where, line.strip(), f"a CSV row ({exc})") from None
        while len(cells) > 1 and not cells[-1]:
            cells.pop()  # spreadsheets pad rows with empty trailing cells
        if header is None:
            if cells[0].lower() != _CORNER or len(cells) < 2:
                # Nothing of the line is repeated: until its header is found the file may be any
                # file at all (e.g. a system file named by a hostile plan), not a table.
                raise LevelTableError(f"{where} header: this line is invalid; a header row {_CORNER} then "
                                      f"the LO harmonics n, e.g. {_CORNER},0,1,2 (is this a level table?)")
            header = []
            for col, cell in enumerate(cells[1:], start=2):
                header.append(_parse_index(cell, f"{where} header cell {col} (LO harmonic n)", header))
            continue
        m = _parse_index(cells[0], f"{where} row index (RF harmonic m)", rows)
        rows.add(m)
        if len(cells) - 1 > len(header):
            raise field_error(LevelTableError, f"{where} (m={m})", f"{len(cells) - 1} cells",
                              f"at most {len(header)}, one per header column")
        for n, cell in zip(header, cells[1:], strict=False):  # a short row leaves its last cells blank
            if cell:
                level = _parse_level(cell, f"{where} (m={m}, n={n})", m, n)
                if m < size and n < size:
                    values[m, n], measured[m, n] = level, True
                else:
                    ignored += 1

    for key in ("rf_ref_dbm", "lo_ref_dbm"):
        if key not in settings:
            raise field_error(LevelTableError, f"{name} setting {key}", None,
                              f"required: a line '# {key} = <dBm>'")
    rf_ref, lo_ref = (_parse_number(settings[k], f"{name} setting {k}", "a finite number of dBm")
                      for k in ("rf_ref_dbm", "lo_ref_dbm"))
    if header is None or not rows:
        raise field_error(LevelTableError, name, "no header row" if header is None else "no data rows",
                          f"a header row starting {_CORNER} and at least one row of levels")

    h = np.arange(size)
    level = np.where(measured, values, fallback.level_dbc_at(h[:, None], h[None, :], rf_ref))
    notes = (f"{name}: {int(measured.sum())} measured entries at RF {rf_ref:g} dBm, LO {lo_ref:g} dBm",
             settings.get("description"), ignored and f"{ignored} entries beyond harmonic {size - 1} not kept",
             (~measured).any() and f"the rest from the {fallback.description}, moved to RF {rf_ref:g} dBm")
    return LevelTable(level, measured, rf_ref, lo_ref, fallback.conversion_loss_db, fallback.topology,
                      "; ".join(note for note in notes if note))


def build_table(spec: MixerSpec, max_order: int, *, base_dir: str | Path | None = None) -> LevelTable:
    """The level table a plan's mixer spec asks for.

    Parameters
    ----------
    spec : MixerSpec
        The mixer spec.
    max_order : int
        Highest order m + n needed.
    base_dir : str or pathlib.Path, optional
        Folder for a relative ``spec.table`` path (the plan file's); default: current directory.

    Returns
    -------
    LevelTable
        The built-in table at ``spec.rf_ref_dbm`` and ``spec.lo_drive_dbm``; or the CSV table at
        its own stated drives, with built-in fallback (stated at the spec's drives, moved to the
        CSV's RF reference).  :meth:`LevelTable.drive_warnings` then compares the LO drive.

    Raises
    ------
    LevelTableError
        If the CSV table is unreadable or invalid.
    """
    fallback = builtin_table(
        spec.topology, max_order, balance_db=spec.balance_db, rf_harmonic_step_db=spec.rf_harmonic_step_db,
        unbalanced_lo_isolation_db=spec.unbalanced_lo_isolation_db, conversion_loss_db=spec.conversion_loss_db,
        rf_ref_dbm=spec.rf_ref_dbm, lo_ref_dbm=spec.lo_drive_dbm)
    if spec.table == "builtin":
        return fallback
    # An absolute spec.table wins over base_dir under pathlib's "/".
    return read_table_csv(Path(base_dir if base_dir is not None else ".") / spec.table, fallback=fallback)


# ---------------------------------------------------------------------------- helpers
def _check_topology(topology: object) -> None:
    if topology not in TOPOLOGIES:
        raise field_error(LevelTableError, "topology", topology, f"one of {', '.join(TOPOLOGIES)}")


def _harmonic_array(value: object, name: str, max_harmonic: int) -> np.ndarray:
    arr = np.asarray(value)
    if arr.dtype.kind not in "iu":
        raise field_error(LevelTableError, name, f"dtype {arr.dtype}", "integer harmonic indices")
    if arr.dtype != np.int64:
        arr = arr.astype(np.int64)  # unsigned m - 1 would wrap around
    if arr.size:
        lo, hi = int(arr.min()), int(arr.max())
        if lo < 0 or hi > max_harmonic:
            raise field_error(LevelTableError, name, lo if lo < 0 else hi, f"0 to {max_harmonic} (table range)")
    return arr


def _drive(value: object, name: str = "rf_drive_dbm", *, scalar: bool = False) -> np.ndarray:
    """Drive(s) as a float array; NaN refused; ``scalar`` demands one finite number."""
    try:
        drive = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise field_error(LevelTableError, name, value, "a number") from None
    if (np.isnan(drive).any() or (scalar and (drive.ndim or not np.isfinite(drive)))):
        raise field_error(LevelTableError, name, value, "one finite number" if scalar else "finite or -inf dBm")
    return drive


def _parse_index(cell: str, where: str, seen: Collection[int]) -> int:
    if not _INDEX.fullmatch(cell) or int(cell) < 0:
        raise field_error(LevelTableError, where, cell, "a whole number >= 0 (harmonics are not negative)")
    if int(cell) in seen:
        raise field_error(LevelTableError, where, cell, "each harmonic once (this one is repeated)")
    return int(cell)


def _parse_number(cell: str, where: str, allowed: str) -> float:
    if len(cell) > _MAX_CELL_CHARS or not _NUMBER.fullmatch(cell) or not math.isfinite(float(cell)):
        raise field_error(LevelTableError, where, cell, allowed)
    return float(cell)


def _parse_level(cell: str, where: str, m: int, n: int) -> float:
    level = _parse_number(cell, where, "a number of dBc, e.g. -45.5, or blank for the built-in model")
    if (m, n) == (0, 0):
        raise field_error(LevelTableError, where, cell, "blank: (0, 0) is not a product")
    if (m, n) == (1, 1) and level != 0.0:
        raise field_error(LevelTableError, where, cell, "0 dBc: levels are relative to the wanted (1, 1) output")
    if level > CSV_MAX_LEVEL_DBC:
        raise field_error(LevelTableError, where, cell,
                          f"<= {CSV_MAX_LEVEL_DBC:g} dBc (write suppression as a negative level)")
    if level < FLOOR_DBC:
        raise field_error(LevelTableError, where, cell, f">= {FLOOR_DBC:g} dBc")
    return level
