"""Tests for mixchart.levels: spur-level tables, drive scaling and balance suppression.

Every expected value is computed from an outside source named beside the check: the Fourier
series of a square wave (evaluated numerically with numpy's FFT), a numerical simulation of an
ideal switching mixer or of a power-series nonlinearity, an independent CSV parser
(``pandas.read_csv``), or a rule marked "from memory" / "common practice, no source".
"""

from __future__ import annotations

import math
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import sim_mixer  # tests/sim_mixer.py (pytest puts tests/ on sys.path)
from hypothesis import given, settings
from hypothesis import strategies as st
from pydantic import ValidationError

from mixchart.errors import LevelTableError
from mixchart.levels import (
    FLOOR_DBC,
    LO_DRIVE_TOLERANCE_DB,
    RF_EXTRAPOLATION_LIMIT_DB,
    TOPOLOGIES,
    LevelTable,
    read_table_csv,
)
from mixchart.mixer_model import MixerSpec, build_table, builtin_table

DATA = Path(__file__).parent / "data"
PARTIAL_CSV = DATA / "levels_dbc_rf-10dbm_lo7dbm_partial_madeup.csv"


# ---------------------------------------------------------------------------- numerical helpers
def _amplitudes(x: np.ndarray) -> np.ndarray:
    """One-sided amplitude spectrum of a real, coherently sampled signal (bin k = k periods)."""
    spectrum = np.abs(np.fft.rfft(x)) * 2.0 / len(x)
    spectrum[0] /= 2.0
    return spectrum


def _switch(n_samples: int, periods: int, *, duty: float = 0.5, bipolar: bool = True) -> np.ndarray:
    """Sampled LO switching wave: +/-1 (bipolar) or 0/1, ``duty`` = fraction of the period 'on'.

    Samples sit at half-sample offsets so that no sample falls on an edge.
    """
    phase = ((np.arange(n_samples) + 0.5) * periods / n_samples) % 1.0
    on = phase < duty
    return np.where(on, 1.0, -1.0) if bipolar else on.astype(float)


def _tone(n_samples: int, periods: int, amplitude: float = 1.0) -> np.ndarray:
    return amplitude * np.cos(2 * np.pi * periods * np.arange(n_samples) / n_samples)


def _db(ratio: float) -> float:
    return 20.0 * math.log10(ratio)


def builtin(topology: str = "double_balanced", max_order: int = 5, **fields) -> LevelTable:
    """The built-in table of a mixer spec with these fields (``balance_db=inf``: ideal, no LO H2)."""
    if fields.get("balance_db") == math.inf:
        fields.update(balance_db=300.0, lo_harmonic2_dbc=-300.0)
    return builtin_table(MixerSpec(topology=topology, **fields), max_order)


def _write_csv(path: Path, level_dbc: np.ndarray, blank: np.ndarray, rf_ref_dbm: float, lo_ref_dbm: float):
    """Write a level table in the documented CSV layout (test-side writer, independent of the reader)."""
    size = level_dbc.shape[0]
    lines = [f"# rf_ref_dbm = {rf_ref_dbm!r}", f"# lo_ref_dbm = {lo_ref_dbm!r}",
             "m\\n," + ",".join(map(str, range(size)))]
    for m in range(size):
        cells = ["" if blank[m, n] or (m, n) == (0, 0) else repr(float(level_dbc[m, n])) for n in range(size)]
        lines.append(",".join([str(m), *cells]))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


# ---------------------------------------------------------------------------- drive scaling
@pytest.mark.parametrize(("m", "n", "slope"), [
    # Derived by hand from the rule: relative to the wanted output, (m, n) moves (m - 1) dB/dB.
    (2, 1, 1.0), (3, 1, 2.0), (1, 3, 0.0), (1, 5, 0.0), (5, 3, 4.0), (1, 0, 0.0), (0, 1, -1.0),
])
def test_level_moves_m_minus_one_db_per_db(m, n, slope):
    table = builtin("single_ended", 8)
    for delta_db in (-20.0, -3.0, 7.5):
        moved = table.level_dbc_at(m, n, table.rf_ref_dbm + delta_db) - table.level_dbc_at(m, n, table.rf_ref_dbm)
        assert moved == pytest.approx(slope * delta_db, abs=1e-12)


def test_two_tone_power_series_products_move_one_and_two_db_per_db():
    # Source: power-series nonlinearity, standard intermodulation result: with
    # y = a1 x + a2 x^2 + a3 x^3 and two tones, the 2nd-order product f1 + f2 rises 2 dB/dB and
    # the 3rd-order 2 f1 - f2 3 dB/dB, i.e. 1 and 2 dB/dB relative to the fundamental.
    # Simulated here with numpy FFT (small a3 so that compression of the fundamental is < 0.001 dB).
    n_samples, k1, k2 = 2**14, 101, 117
    relative_db = {}
    for amplitude in (0.01, 0.01 * 10 ** (10 / 20)):
        x = _tone(n_samples, k1, amplitude) + _tone(n_samples, k2, amplitude)
        spectrum = _amplitudes(x + 0.2 * x**2 + 0.02 * x**3)
        fundamental = spectrum[k1]
        relative_db[amplitude] = (_db(spectrum[k1 + k2] / fundamental), _db(spectrum[2 * k1 - k2] / fundamental))
    (second_lo, third_lo), (second_hi, third_hi) = relative_db.values()
    assert (second_hi - second_lo) / 10 == pytest.approx(1.0, abs=1e-3)
    assert (third_hi - third_lo) / 10 == pytest.approx(2.0, abs=1e-3)
    table = builtin("single_balanced", 4)
    for m, simulated in ((2, second_hi - second_lo), (3, third_hi - third_lo)):
        moved = table.level_dbc_at(m, 1, 10.0) - table.level_dbc_at(m, 1, 0.0)
        assert moved == pytest.approx(simulated, abs=1e-2)


def test_mixer_simulation_rf_harmonic_products_move_m_minus_one_db_per_db():
    # Source: numerical simulation of y = p(x) * s(t), +/-1 switch, p(x) = x + 0.3 x^2 + 0.03 x^3
    # (power-series nonlinearity, standard result: the m-th harmonic grows m dB per dB of input).
    n_samples, k_rf, k_lo = 2**16, 37, 256
    spectra = []
    for amplitude in (0.01, 0.1):  # 20 dB apart
        x = _tone(n_samples, k_rf, amplitude)
        spectra.append(_amplitudes((x + 0.3 * x**2 + 0.03 * x**3) * _switch(n_samples, k_lo)))
    table = builtin("single_balanced", 5)
    for m, n in ((2, 1), (3, 1), (1, 3), (2, 3)):
        bin_, wanted = abs(n * k_lo - m * k_rf), k_lo - k_rf
        simulated = _db(spectra[1][bin_] / spectra[1][wanted]) - _db(spectra[0][bin_] / spectra[0][wanted])
        moved = table.level_dbc_at(m, n, 20.0) - table.level_dbc_at(m, n, 0.0)
        assert moved == pytest.approx(simulated, abs=1e-2)


def test_level_dbc_at_is_vectorised_and_vanished_entries_stay_at_floor():
    table = builtin("double_balanced", 7, balance_db=math.inf)
    rng = np.random.default_rng(1)
    m, n = rng.integers(0, 8, 200_000), rng.integers(0, 8, 200_000).astype(np.uint8)
    drive = rng.uniform(-60, 20, 200_000)
    levels = table.level_dbc_at(m, n, drive)
    assert levels.shape == (200_000,) and levels.dtype == np.float64
    vanished = table.level_dbc[m, n] <= FLOOR_DBC
    assert vanished.any() and np.all(levels[vanished] == FLOOR_DBC)
    # Derived by hand from the rule, element by element for a sample.
    for i in range(0, 200_000, 20_011):
        if not vanished[i]:
            expected = table.level_dbc[m[i], n[i]] + (m[i] - 1) * (drive[i] - table.rf_ref_dbm)
            assert levels[i] == pytest.approx(max(expected, FLOOR_DBC), abs=1e-9)
    # Broadcasting: a column of m against a row of n, one drive.
    assert table.level_dbc_at(np.arange(8)[:, None], np.arange(8)[None, :], 0.0).shape == (8, 8)


@pytest.mark.parametrize(("m", "n", "drive", "field"), [
    (-1, 1, 0.0, "m"),          # negative indices must not wrap around
    (1, 8, 0.0, "n"),
    (1.0, 1, 0.0, "m"),         # float harmonics are refused
    (1, 1, float("nan"), "rf_drive_dbm"),
    (1, 1, np.array([0.0, np.nan]), "rf_drive_dbm"),
])
def test_level_dbc_at_rejects_bad_arguments(m, n, drive, field):
    table = builtin("double_balanced", 7)
    with pytest.raises(LevelTableError, match=rf"^{field}: .* is invalid"):
        table.level_dbc_at(np.asarray(m), n, drive)


def test_no_signal_drive_gives_finite_levels_without_warnings():
    # A drive of -inf dBm (e.g. behind an ideal filter) must not produce NaN (0 * inf) or warnings
    # (the module runs under -W error here); derived by hand from the (m - 1) dB/dB rule:
    # m >= 2 products fall to the floor, (1, n) products do not move.
    table = builtin("single_ended", 4)
    levels = table.level_dbc_at(np.array([2, 3, 1, 1, 0]), np.array([1, 1, 1, 3, 1]), -np.inf)
    assert np.all(np.isfinite(levels))
    assert levels[0] == levels[1] == FLOOR_DBC
    assert levels[2] == 0.0 and levels[3] == table.level_dbc[1, 3]
    assert levels[4] > 0.0  # LO leakage relative to an absent wanted output: far above it
    assert table.drive_warnings(np.array([-np.inf, -3.0]), 7.0) == []
    assert table.level_dbc_at(4, 1, -250.0) == FLOOR_DBC  # below the floor is the floor


@pytest.mark.parametrize(("rf_dbm", "lo_dbm", "count", "words"), [
    # Thresholds 10 dB (RF) and 0.5 dB (LO) are common practice, no source.
    (-5.0, 7.0, 0, []),
    (-10.0, 7.4, 0, []),
    (-30.0, 7.0, 0, []),  # below the reference: the small-signal slope is the power series itself
    (10.5, 7.0, 1, ["10.5 dBm", "10.5 dB above", "extrapolated"]),
    (np.array([-3.0, 12.0, -8.0]), 7.0, 1, ["12 dBm"]),
    (0.0, 10.0, 1, ["LO drive 10 dBm", "7 dBm"]),
    (13.0, 4.0, 2, ["13 dBm", "LO drive 4 dBm"]),
])
def test_drive_warnings(rf_dbm, lo_dbm, count, words):
    table = builtin("double_balanced", 5, rf_ref_dbm=0.0, lo_drive_dbm=7.0)
    assert RF_EXTRAPOLATION_LIMIT_DB == 10.0 and LO_DRIVE_TOLERANCE_DB == 0.5
    warnings = table.drive_warnings(rf_dbm, lo_dbm)
    assert len(warnings) == count
    for word in words:
        assert any(word in w for w in warnings), (word, warnings)
    assert all("\n" not in w for w in warnings)


# ---------------------------------------------------------------------------- CSV tables
def test_partial_csv_reads_measured_cells_exactly_and_falls_back_for_blanks():
    # Source for the measured cells: pandas.read_csv, an independent parser of the same file.
    reference = pd.read_csv(PARTIAL_CSV, comment="#", index_col=0)
    fallback = builtin("double_balanced", 5, rf_ref_dbm=0.0)
    table = read_table_csv(PARTIAL_CSV, fallback=fallback)
    assert (table.rf_ref_dbm, table.lo_ref_dbm) == (-10.0, 7.0)  # as stated in the file header
    for m in range(6):
        for n in range(6):
            value = reference.iloc[m, n] if m in reference.index and n < reference.shape[1] else np.nan
            if (m, n) == (0, 0):
                continue
            if np.isnan(value):
                # Fallback: the built-in value moved to the table's -10 dBm reference by the
                # (m - 1) dB/dB rule (derived by hand: 10 dB below 0 dBm -> -(m - 1)*10 dB).
                assert not table.measured[m, n]
                expected = fallback.level_dbc[m, n]
                if expected > FLOOR_DBC:
                    expected -= (m - 1) * 10.0
                assert table.level_dbc[m, n] == pytest.approx(expected, abs=1e-12), (m, n)
            else:
                assert table.measured[m, n] and table.level_dbc[m, n] == value, (m, n)
    # The note lists exactly the blank cells of order <= 5 (blanks found by pandas, row order).
    blanks = [(m, n) for m in range(6) for n in range(6)
              if 0 < m + n <= 5 and not table.measured[m, n] and np.isnan(reference.iloc[m, n])]
    assert len(blanks) >= 3
    listed = ", ".join(f"({m},{n})" for m, n in blanks)
    assert table.fallback_note(5) == f"entries {listed} came from the built-in model"
    assert "made-up partial" in table.description and "built-in" in table.description
    assert builtin("double_balanced", 5).fallback_note(5) is None


@settings(max_examples=40, deadline=None)
@given(
    levels=st.lists(st.floats(min_value=-299.0, max_value=30.0, allow_nan=False), min_size=36, max_size=36),
    blanks=st.lists(st.booleans(), min_size=36, max_size=36),
    rf_ref=st.floats(min_value=-50, max_value=20, allow_nan=False),
)
def test_csv_round_trip_is_exact(levels, blanks, rf_ref):
    level = np.array(levels).reshape(6, 6)
    level[1, 1] = 0.0
    blank = np.array(blanks).reshape(6, 6)
    fallback = builtin("single_balanced", 5, rf_ref_dbm=rf_ref)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "t.csv"
        _write_csv(path, level, blank, rf_ref, 7.0)
        table = read_table_csv(path, fallback=fallback)
    measured = ~blank
    measured[0, 0] = False
    np.testing.assert_array_equal(table.measured, measured)
    np.testing.assert_array_equal(table.level_dbc[measured], level[measured])
    np.testing.assert_array_equal(table.level_dbc[~measured], fallback.level_dbc[~measured])  # same reference


def _csv(body: str) -> str:
    return "# rf_ref_dbm = -10\n# lo_ref_dbm = 7\nm\\n,0,1,2\n" + body


@pytest.mark.parametrize(("text", "fragments"), [
    (_csv("0,,-30,-40\n1,-20,0,abc\n"), ["t.csv line 5 (m=1, n=2)", "'abc'"]),
    (_csv("1,-20,0,nan\n"), ["(m=1, n=2)", "'nan'"]),
    (_csv("1,-20,0,-1e999\n"), ["(m=1, n=2)", "'-1e999'"]),
    (_csv("1,-20,0,__import__('os')\n"), ["(m=1, n=2)", "__import__"]),  # never evaluated
    (_csv("1,-20,0,-3+4\n"), ["(m=1, n=2)", "'-3+4'"]),
    (_csv("1,-20,0,-30\n2,-50\n1,-21\n"), ["line 6 row index (RF harmonic m)", "'1'", "once"]),
    (_csv("1.5,-20,0,-30\n"), ["line 4 row index", "'1.5'"]),
    (_csv("-1,-20,0,-30\n"), ["line 4 row index", "'-1'"]),
    (_csv("x,-20,0,-30\n"), ["row index", "'x'"]),
    ("# rf_ref_dbm = -10\n# lo_ref_dbm = 7\nm\\n,0,1,1\n1,-2,0,-3\n", ["header cell 4 (LO harmonic n)", "'1'"]),
    ("# rf_ref_dbm = -10\n# lo_ref_dbm = 7\nm\\n,0,one\n", ["header cell 3", "'one'"]),
    ("# rf_ref_dbm = -10\n# lo_ref_dbm = 7\nm\\n,0,-2\n", ["header cell 3", "'-2'"]),
    # the line itself is not repeated: a file that is not a table may be anything (issue 7)
    ("# rf_ref_dbm = -10\n# lo_ref_dbm = 7\nm,0,1\n1,-3,0\n", ["line 3 header", "is this a level table?"]),
    ("# lo_ref_dbm = 7\nm\\n,0,1\n1,-3,0\n", ["setting rf_ref_dbm", "None"]),
    ("# rf_ref_dbm = -10\nm\\n,0,1\n1,-3,0\n", ["setting lo_ref_dbm"]),
    ("# rf_ref_dbm = minus ten\n# lo_ref_dbm = 7\nm\\n,0,1\n1,-3,0\n", ["setting rf_ref_dbm", "'minus ten'"]),
    ("# rf_ref_dBm = -10\n# lo_ref_dbm = 7\nm\\n,0,1\n1,-3,0\n", ["line 1 setting", "'rf_ref_dBm'"]),
    ("# lo_ref_dbm = 7\n# lo_ref_dbm = 8\n# rf_ref_dbm = 0\nm\\n,0,1\n", ["line 2 setting", "'lo_ref_dbm'"]),
    (_csv("1,-20,-1,-30\n"), ["(m=1, n=1)", "'-1'", "0 dBc"]),
    (_csv("2,-20,31,-30\n"), ["(m=2, n=1)", "'31'", "<= 30 dBc"]),  # +30 dBc: common practice, no source
    (_csv("2,-20,-400,-30\n"), ["(m=2, n=1)", "'-400'"]),
    (_csv("0,-3,-20,-30\n"), ["(m=0, n=0)", "'-3'", "not a product"]),
    (_csv("1,-20,0,-30,-40\n"), ["line 4 (m=1)", "'4 cells'"]),
    (_csv(""), ["no data rows"]),
    ("# rf_ref_dbm = -10\n# lo_ref_dbm = 7\n", ["no header row"]),
    (_csv("1,-20,0,-30\n# late note\n"), ["line 5", "'# late note'", "before the header"]),
])
def test_malformed_csv_raises_one_line_error_naming_the_place_and_value(tmp_path, text, fragments):
    path = tmp_path / "t.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(LevelTableError) as info:
        read_table_csv(path, fallback=builtin("double_balanced", 3))
    message = str(info.value)
    assert "\n" not in message and "is invalid" in message
    for fragment in fragments:
        assert fragment in message, (fragment, message)


def test_csv_accepts_entries_above_0_dbc_up_to_30(tmp_path):
    # A single-ended RF feedthrough is about +4 dBc (+3.92 dBc simulated, tests/sim_mixer.py), so a
    # measured table must accept it; the +30 dBc ceiling is common practice, no source.
    out = sim_mixer.simulate(switch="unipolar")
    path = tmp_path / "t.csv"
    path.write_text("# rf_ref_dbm = 0\n# lo_ref_dbm = 7\nm\\n,0,1,3\n0,,30,\n1,+4,0,-9.5\n", encoding="utf-8")
    table = read_table_csv(path, fallback=builtin("single_ended", 3))
    assert table.level_dbc[1, 0] == 4.0 and table.measured[1, 0]
    assert table.level_dbc[1, 0] == pytest.approx(out.dbc(1, 0), abs=0.1)
    assert table.level_dbc[0, 1] == 30.0 and table.level_dbc[1, 1] == 0.0
    for text, fragment in (("1,+4,4,-9.5", "0 dBc"), ("1,30.5,0,-9.5", "<= 30 dBc")):  # (1, 1) stays 0
        path.write_text(f"# rf_ref_dbm = 0\n# lo_ref_dbm = 7\nm\\n,0,1,3\n{text}\n", encoding="utf-8")
        with pytest.raises(LevelTableError, match=fragment):
            read_table_csv(path, fallback=builtin("single_ended", 3))


def test_csv_unreadable_files(tmp_path):
    fallback = builtin("double_balanced", 3)
    with pytest.raises(LevelTableError, match=r"^table: .*missing\.csv.* is invalid"):
        read_table_csv(tmp_path / "missing.csv", fallback=fallback)
    binary = tmp_path / "binary.csv"
    binary.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(LevelTableError, match="UTF-8"):
        read_table_csv(binary, fallback=fallback)


def test_csv_tolerates_notes_padding_short_rows_and_out_of_range_entries(tmp_path):
    path = tmp_path / "t.csv"
    path.write_text(
        "\ufeff# bench notes: T = 25 C, unit 3\n# rf_ref_dbm = 0\n# lo_ref_dbm = 7\n\n"
        "m\\n,0,1,2,9,,\n1,-20,0,,-70,,\n3,-50,-40\n9,,-95\n", encoding="utf-8")
    fallback = builtin("double_balanced", 4, rf_ref_dbm=0.0)
    table = read_table_csv(path, fallback=fallback)
    assert table.max_harmonic == 4 and "2 entries beyond harmonic 4 not kept" in table.description
    assert table.level_dbc[1, 0] == -20.0 and table.level_dbc[3, 1] == -40.0 and table.measured[3, 0]
    assert not table.measured[3, 2] and table.level_dbc[3, 2] == fallback.level_dbc[3, 2]  # same 0 dBm ref


# ---------------------------------------------------------------------------- spec and build_table
def test_mixer_spec_defaults_json_and_strictness():
    spec = MixerSpec()
    assert (spec.topology, spec.table, spec.rf_ref_dbm, spec.lo_drive_dbm, spec.balance_db) == (
        "double_balanced", "builtin", None, 7.0, 30.0)  # documented defaults, common practice, no source
    assert spec.rf_ref() == 7.0 - 10.0  # the built-in rule's physical anchor: 10 dB under the LO drive
    assert MixerSpec.model_validate_json(spec.model_dump_json()) == spec
    for bad in ({"balance_db": -1}, {"extra_key": 1}, {"topology": "ring"}, {"table": "Builtin"},
                {"table": "levels.txt"}, {"lo_drive_dbm": "7"}, {"rf_ref_dbm": True},
                {"conversion_loss_db": float("nan")}):
        with pytest.raises(ValidationError):
            MixerSpec.model_validate(bad)
    with pytest.raises(ValidationError):
        spec.balance_db = 3.0  # frozen


def test_build_table_builtin_and_relative_csv(tmp_path):
    spec = MixerSpec(topology="single_balanced", balance_db=25.0, conversion_loss_db=6.0)
    table = build_table(spec, 5)
    expected = builtin("single_balanced", 5, balance_db=25.0, conversion_loss_db=6.0)
    np.testing.assert_array_equal(table.level_dbc, expected.level_dbc)
    assert table.conversion_loss_db == 6.0 and not table.measured.any()
    (tmp_path / "tables").mkdir()
    (tmp_path / "tables" / "x.csv").write_text(PARTIAL_CSV.read_text(encoding="utf-8"), encoding="utf-8")
    from_csv = build_table(MixerSpec(table="tables/x.csv", lo_drive_dbm=10.0), 5, base_dir=tmp_path)
    reference = pd.read_csv(PARTIAL_CSV, comment="#", index_col=0)  # independent parser
    assert from_csv.measured.sum() == reference.notna().to_numpy().sum() and from_csv.rf_ref_dbm == -10.0
    assert any("LO drive 10 dBm" in w for w in from_csv.drive_warnings(-10.0, 10.0))
    with pytest.raises(LevelTableError, match=r"x\.csv"):
        build_table(MixerSpec(table="tables/x.csv"), 5, base_dir=tmp_path / "elsewhere")
    absolute = MixerSpec(table=str(tmp_path / "tables" / "x.csv"))  # an absolute path ignores base_dir
    assert build_table(absolute, 5, base_dir=tmp_path / "elsewhere").measured.any()


@pytest.mark.parametrize("max_order", [0, True, 2.0, 65])
def test_builtin_table_rejects_a_bad_order(max_order):
    with pytest.raises(LevelTableError, match=r"^max_order: .* is invalid"):
        builtin_table(MixerSpec(), max_order)


def test_level_table_validates_and_is_read_only():
    good = builtin("double_balanced", 3)
    with pytest.raises(LevelTableError, match=r"level_dbc\[1, 1\]"):
        LevelTable(good.level_dbc - 1.0, good.measured, 0.0, 7.0, 3.9, "double_balanced", "x")
    with pytest.raises(LevelTableError, match=r"level_dbc\.shape"):
        LevelTable(np.zeros((3, 4)), np.zeros((3, 4), bool), 0.0, 7.0, 3.9, "double_balanced", "x")
    bad = good.level_dbc.copy()
    bad[2, 3] = np.nan
    with pytest.raises(LevelTableError, match=r"level_dbc\[2, 3\]"):
        LevelTable(bad, good.measured, 0.0, 7.0, 3.9, "double_balanced", "x")
    with pytest.raises(ValueError, match="read-only"):
        good.level_dbc[2, 1] = 0.0
    frame = good.to_frame()
    assert frame.shape == (4, 4) and frame.index.name == "m" and frame.columns.name == "n"
    assert np.isnan(frame.loc[0, 0]) and frame.loc[1, 1] == 0.0


# ---------------------------------------------------------------------------- properties
@settings(max_examples=60, deadline=None)
@given(
    topology=st.sampled_from(TOPOLOGIES),
    m=st.integers(0, 7), n=st.integers(0, 7),
    drive_a=st.floats(-80, 30), drive_b=st.floats(-80, 30),
)
def test_level_is_linear_in_drive_with_slope_m_minus_one(topology, m, n, drive_a, drive_b):
    # Rule (power-series nonlinearity, standard intermodulation result): slope m - 1 dB/dB,
    # down to the floor, where vanished products stay.
    table = builtin(topology, 7)
    slope = 0.0 if table.level_dbc[m, n] <= FLOOR_DBC else m - 1.0
    a, b = table.level_dbc_at(m, n, drive_a), table.level_dbc_at(m, n, drive_b)
    assert a == pytest.approx(max(table.level_dbc[m, n] + slope * (drive_a - table.rf_ref_dbm), FLOOR_DBC))
    if a > FLOOR_DBC and b > FLOOR_DBC:
        assert b - a == pytest.approx(slope * (drive_b - drive_a), abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(topology=st.sampled_from(TOPOLOGIES), low=st.floats(0, 60), extra=st.floats(0, 60))
def test_more_balance_never_raises_a_level(topology, low, extra):
    # Follows from the rules (mixer_model.builtin_table): balance only ever takes away (no source needed).
    weak, strong = (builtin(topology, 6, balance_db=b).level_dbc for b in (low, low + extra))
    assert np.all(strong <= weak) and strong[1, 1] == 0.0


def test_levels_module_imports_no_plotting_or_widget_library():
    code = ("import sys, mixchart.levels; "
            "bad = [m for m in sys.modules if m.split('.')[0] in ('bokeh', 'ipywidgets', 'jupyter_bokeh')]; "
            "sys.exit(repr(bad) if bad else 0)")
    root = Path(__file__).parents[1]
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=root, check=False)
    assert result.returncode == 0, result.stderr
