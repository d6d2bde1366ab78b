"""Spur-level tables: how strong each mixing product is, relative to the wanted output.

A mixing product is f = |m·f_RF ± n·f_LO|: ``m`` is the RF harmonic (for an up-converter, the
harmonic of the signal at the mixer's signal input, i.e. the IF), ``n`` the LO harmonic.  A
:class:`LevelTable` holds ``level_dbc[m, n]`` in dBc relative to the wanted (1, 1) output at a
stated reference RF and LO drive (dBm at the mixer ports).  Tables come from the built-in model
(:func:`mixchart.mixer_model.builtin_table`) or a measured CSV file (:func:`read_table_csv`)
whose blank cells fall back to the built-in model; :func:`mixchart.mixer_model.build_table`
picks from a plan's :class:`~mixchart.mixer_model.MixerSpec`.

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

from .errors import LevelTableError, field_error
from .fileio import read_regular_file

__all__ = [
    "Topology", "TOPOLOGIES", "FLOOR_DBC", "MAX_HARMONIC", "RF_EXTRAPOLATION_LIMIT_DB", "CSV_MAX_LEVEL_DBC",
    "LO_DRIVE_TOLERANCE_DB", "IDEAL_BALANCED_CONVERSION_LOSS_DB", "IDEAL_SINGLE_ENDED_CONVERSION_LOSS_DB",
    "LevelTable", "default_conversion_loss_db", "read_table_csv", "check_topology",
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
#: Highest level a CSV table entry may state, dBc: a single-ended RF feedthrough is about +4 dBc and LO
#: leakage at a low RF reference can be well above 0 dBc; anything higher is taken as a sign slip
#: (suppression written as a positive number).  Common practice, no source.
CSV_MAX_LEVEL_DBC = 30.0


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
    check_topology(topology)
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
        check_topology(self.topology)
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

    def level_dbc_at(self, m: ArrayLike, n: ArrayLike, rf_drive_dbm: ArrayLike, *, floored: bool = True) -> np.ndarray:
        """Level of products (m, n) at an RF drive, dBc relative to the wanted output.

        Returns ``level_dbc[m, n] + (m - 1)·(rf_drive_dbm - rf_ref_dbm)``: the m-th RF harmonic
        grows m dB per dB of drive and the wanted output 1 dB per dB, so relative to the wanted
        output product (m, n) moves (m - 1) dB per dB (LO leakage, m = 0, falls 1 dB per dB).
        Vanished entries stay at :data:`FLOOR_DBC`; with ``floored`` no result goes below it.

        Parameters
        ----------
        m, n : array_like of int
            RF and LO harmonics, 0 <= m, n <= :attr:`max_harmonic`; broadcast together.
        rf_drive_dbm : float or array_like
            RF drive at the mixer's signal input, dBm; broadcast with m and n.  -inf (no signal)
            is allowed: offsets from the reference are clipped to +/-1000 dB.
        floored : bool
            Limit the results to :data:`FLOOR_DBC` (a display floor).  The analysis takes the
            unfloored level and floors only its final level, once, after the filters: a floor
            applied to an intermediate term would decide margins it has no physics for.

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
        if not floored:
            return level
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
            :data:`RF_EXTRAPOLATION_LIMIT_DB` above the reference, LO drive more than
            :data:`LO_DRIVE_TOLERANCE_DB` from the table's.  Drives below the reference are
            not named: there the (m - 1) dB/dB small-signal slope is the power-series result
            itself, while above it compression and higher terms make the slope optimistic.
        """
        out: list[str] = []
        drive = _drive(rf_drive_dbm).ravel()
        drive = drive[np.isfinite(drive)]  # -inf: no signal, nothing to extrapolate
        lo_drive = float(_drive(lo_drive_dbm, "lo_drive_dbm", scalar=True))
        if drive.size:
            worst = float(drive.max())
            if worst - self.rf_ref_dbm > RF_EXTRAPOLATION_LIMIT_DB:
                out.append(f"RF drive {worst:g} dBm is {worst - self.rf_ref_dbm:.1f} dB above the level "
                           f"table's reference {self.rf_ref_dbm:g} dBm; levels are extrapolated at (m-1) "
                           "dB per dB, which compression makes optimistic")
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


# ---------------------------------------------------------------------------- helpers
def check_topology(topology: object) -> None:
    """Refuse a topology that is not one of :data:`TOPOLOGIES` (LevelTableError naming the field)."""
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
