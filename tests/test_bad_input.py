"""Hostile and extreme input (issue 7, "Bad input"): each class of defect the fuzzing found.

Every case ends as a one-line :class:`~mixchart.errors.MixchartError` naming the field and
repeating the value, or as a valid result with finite margins.  No test asserts a duration:
hangs are caught by a generous ``pytest.mark.timeout`` (pytest-timeout) or a subprocess timeout.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import re
import stat

import numpy as np
import pytest

from mixchart.analysis import evaluate
from mixchart.cli import example_path
from mixchart.errors import AnalysisError, FilterError, LevelTableError, MixchartError, PlanError, UnitError
from mixchart.fileio import read_regular_file
from mixchart.filters import build_filter
from mixchart.levels import read_table_csv
from mixchart.mixer_model import MixerSpec, builtin_table
from mixchart.plan import load_plan, loads_plan, plan_json_schema
from mixchart.units import _TEXT, MAX_FREQUENCY_TEXT, parse_frequency

FM = {
    "name": "bad-input test plan (invented)",
    "direction": "down",
    "rf": {"start_hz": "88 MHz", "stop_hz": "108 MHz", "step_hz": "1 MHz"},
    "signal": {"bandwidth_hz": "200 kHz", "level_dbm": -30},
    "lo": {"mode": "tracking", "side": "high"},
    "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "230 kHz"},
    "max_order": 5,
    "requirement": {"min_rejection_db": 60},
}


def plan_with(path: str, value: object, base: dict | None = None) -> str:
    data = json.loads(json.dumps(base or FM))
    node = data
    keys = path.split(".")
    for key in keys[:-1]:
        node = node.setdefault(key, {})
    node[keys[-1]] = value
    return json.dumps(data)


def one_line_error(excinfo) -> str:
    message = str(excinfo.value)
    assert len(message.splitlines()) == 1, message
    assert isinstance(excinfo.value, MixchartError)
    return message


# ---------------------------------------------------------------------- regex backtracking


@pytest.mark.timeout(60)
@pytest.mark.parametrize(
    "text",
    ["1" * 16_000 + "!", "1" + " " * 16_000 + "!", "1." + "2" * 16_000 + "e+", " " * 16_000 + "1 x!"],
    ids=["digits", "blanks", "fraction", "leading-blanks"],
)
def test_frequency_pattern_is_linear_on_long_near_misses(text):
    # The old mantissa \d+\.?\d* split a digit run every way: "1" * 16000 + "!" took 14 s.
    # Derived by hand: each character of the new pattern can be taken by one part only.
    for _ in range(20):
        assert _TEXT.fullmatch(text) is None


@pytest.mark.timeout(60)
def test_frequency_text_is_capped_before_any_pattern():
    with pytest.raises(UnitError) as info:
        parse_frequency("1" * 4_000_000 + " MHz", "rf.start_hz")
    message = one_line_error(info)
    assert message.startswith("rf.start_hz: '111") and f"at most {MAX_FREQUENCY_TEXT} characters" in message


@pytest.mark.timeout(60)
def test_a_4_mb_frequency_field_in_a_plan_is_refused():
    with pytest.raises(PlanError) as info:
        loads_plan(plan_with("rf.start_hz", "1" * 4_000_000 + "!"))
    assert one_line_error(info).startswith("rf.start_hz: '111")


@pytest.mark.parametrize(
    ("text", "hz"), [("1.", 1.0), ("1.5e3 kHz", 1.5e6), (".5 GHz", 5e8), ("7 hz", 7.0), ("+3", 3.0)]
)
def test_the_linear_pattern_reads_what_the_old_one_read(text, hz):
    assert parse_frequency(text) == hz  # derived by hand from the SI prefixes


def test_schema_caps_frequency_text_and_states_the_range():
    schema = plan_json_schema()
    start = schema["$defs"]["RfBand"]["properties"]["start_hz"]["anyOf"]
    number, text = start
    assert number["minimum"] == 1.0 and number["maximum"] == 1e12
    assert text["maxLength"] == MAX_FREQUENCY_TEXT
    step = schema["$defs"]["RfBand"]["properties"]["step_hz"]["anyOf"][0]["anyOf"][0]
    assert step["minimum"] == 1e-3


# ---------------------------------------------------------------------- physical ranges


@pytest.mark.parametrize(
    ("path", "value", "needle"),
    [
        ("rf.start_hz", "2 THz", "rf.start_hz: '2 THz' is invalid; must be <= 1 THz"),
        ("rf.start_hz", 0.5, "rf.start_hz: 0.5 is invalid; must be >= 1 Hz"),
        ("rf.step_hz", 1e-310, "rf.step_hz: 1e-310 is invalid; must be >= 0.001 Hz"),
        ("lo.step_hz", 5e-324, "lo.step_hz: 5e-324 is invalid; must be >= 0.001 Hz"),
        ("signal.bandwidth_hz", 5e-324, "signal.bandwidth_hz: 5e-324 is invalid; must be >= 0.001 Hz"),
        ("if.center_hz", 2**64, "if.center_hz: 18446744073709551616 is invalid; must be <= 1 THz"),
        ("mixer.rf_ref_dbm", 1e300, "mixer.rf_ref_dbm: 1e+300 is invalid; must be <= 60"),
        ("mixer.balance_db", 2**64, "mixer.balance_db: 18446744073709551616 is invalid; must be <= 300"),
        ("name", "x" * 201, "name: 'xxx"),
    ],
)
def test_fields_have_a_physical_range(path, value, needle):
    with pytest.raises(PlanError) as info:
        loads_plan(plan_with(path, value))
    assert one_line_error(info).startswith(needle)


CHEBYSHEV_IF = {"kind": "chebyshev1", "response": "bandpass", "order": 3,
                "f_center_hz": "10.7 MHz", "bandwidth_hz": "280 kHz", "ripple_db": 0.5}


@pytest.mark.parametrize(
    ("key", "value", "needle"),
    [
        # each of these ended in OverflowError or a math domain error (exit 1, a "violation")
        ("ripple_db", 1e300, "filters.if.ripple_db: 1e+300 is invalid; must be <= 10"),
        ("ripple_db", 2**64, "filters.if.ripple_db: 18446744073709551616 is invalid; must be <= 10"),
        ("ripple_db", 5e-324, "filters.if.ripple_db: 5e-324 is invalid; must be >= 0.001"),
        ("bandwidth_hz", 5e-324, "filters.if.bandwidth_hz: 5e-324 is invalid; must be >= 0.001 Hz"),
    ],
)
def test_filter_numbers_have_a_physical_range(key, value, needle):
    spec = {**CHEBYSHEV_IF, key: value}
    with pytest.raises(PlanError) as info:
        loads_plan(plan_with("filters", {"if": spec}))
    assert one_line_error(info).startswith(needle)


def test_q_and_stop_attenuation_have_a_physical_range():
    tuned = {"kind": "tuned", "q_loaded": 1e7, "tracks_channel": True}
    with pytest.raises(PlanError) as info:
        loads_plan(plan_with("filters", {"rf": tuned}))
    assert one_line_error(info).startswith("filters.rf.q_loaded: 10000000.0 is invalid; must be <= 1000000")
    wall = {"kind": "brickwall", "response": "lowpass", "f_edge_hz": "20 MHz", "stop_atten_db": 301}
    with pytest.raises(PlanError) as info:
        loads_plan(plan_with("filters", {"if": wall}))
    assert one_line_error(info).startswith("filters.if.stop_atten_db: 301 is invalid; must be <= 300")


def test_extremes_inside_the_ranges_give_finite_margins():
    # the narrowest band filter and the finest LO grid allowed, at the top of the ripple range
    spec = {**CHEBYSHEV_IF, "bandwidth_hz": 1e-3, "ripple_db": 10}
    plan = loads_plan(plan_with("filters", {"if": spec}, {**FM, "lo": {"step_hz": 1e-3}}))
    result = evaluate(plan)
    assert all(math.isfinite(v) or v == math.inf for v in result.worst_margin_db)
    assert math.isfinite(result.summary.worst_margin_db)
    assert re.match(r"(PASS|FAIL): worst margin [+-]\d", result.summary.line())


# ---------------------------------------------------------------------- hostile file paths


TOUCHSTONE = "# Hz S MA R 50\n1e6 0.5 0 1 0 1 0 0.5 0\n2e6 0.5 0 0.9 0 0.9 0 0.5 0\n"  # invented data


def _fifo(tmp_path, name):
    path = tmp_path / name
    os.mkfifo(path)
    return path


@pytest.mark.timeout(60)
def test_a_fifo_is_refused_without_blocking(tmp_path):
    fifo = _fifo(tmp_path, "table.csv")  # nobody ever writes to it: open() without O_NONBLOCK hangs
    with pytest.raises(LevelTableError) as info:
        read_table_csv(fifo, fallback=builtin_table(MixerSpec(), 5))
    assert one_line_error(info) == f"table: {str(fifo)!r} is invalid; cannot be read (not a regular file)"
    s2p = _fifo(tmp_path, "f.s2p")
    with pytest.raises(FilterError) as info:
        build_filter({"kind": "touchstone", "path": str(s2p)})
    assert "cannot be read (not a regular file)" in one_line_error(info)
    with pytest.raises(PlanError) as info:
        load_plan(_fifo(tmp_path, "plan.json"))
    assert "not a regular file" in one_line_error(info)


@pytest.mark.timeout(60)
def test_a_symlink_to_dev_zero_is_refused(tmp_path):
    link = tmp_path / "zero.csv"
    link.symlink_to("/dev/zero")  # st_size 0 and endless: once grew to 1.9 GB, then MemoryError
    with pytest.raises(LevelTableError) as info:
        read_table_csv(link, fallback=builtin_table(MixerSpec(), 5))
    assert one_line_error(info).endswith("cannot be read (not a regular file)")
    s2p = tmp_path / "zero.s2p"
    s2p.symlink_to("/dev/zero")
    with pytest.raises(FilterError) as info:
        build_filter({"kind": "touchstone", "path": str(s2p)})
    assert one_line_error(info).endswith("cannot be read (not a regular file)")


@pytest.mark.timeout(60)
def test_a_large_sparse_touchstone_file_is_refused_before_reading(tmp_path):
    path = tmp_path / "huge.s2p"
    with open(path, "wb") as handle:
        handle.truncate(2 * 1024**3)  # 2 GB, sparse: costs no disk
    with pytest.raises(FilterError) as info:
        build_filter({"kind": "touchstone", "path": str(path)})
    assert "larger than 20000000 bytes" in one_line_error(info)


def test_the_read_cap_holds_even_when_the_size_lies(tmp_path, monkeypatch):
    path = tmp_path / "grows.csv"
    path.write_bytes(b"x" * 101)
    real_fstat = os.fstat

    def small_fstat(fd):  # a /proc-like file: reports 0 bytes, holds more
        result = real_fstat(fd)
        return os.stat_result((result.st_mode, *result[1:6], 0, *result[7:]))

    monkeypatch.setattr(os, "fstat", small_fstat)
    with pytest.raises(LevelTableError) as info:
        read_regular_file(path, 100, error=LevelTableError, field="table")
    assert one_line_error(info).endswith("larger than 100 bytes; at most 100")
    assert read_regular_file(path, 101, error=LevelTableError, field="table") == b"x" * 101


def test_a_file_that_is_not_a_table_is_never_quoted(tmp_path):
    secret = "root:x:0:0:root:/root:/bin/bash"  # the first line of a password file
    other = tmp_path / "passwd"
    other.write_text(secret + "\ndaemon:x:1:1::/:/bin/false\n", encoding="utf-8")
    link = tmp_path / "levels.csv"
    link.symlink_to(other)
    with pytest.raises(LevelTableError) as info:
        read_table_csv(link, fallback=builtin_table(MixerSpec(), 5))
    message = one_line_error(info)
    assert "root" not in message and "is this a level table?" in message
    s2p = tmp_path / "passwd.s2p"
    s2p.symlink_to(other)
    with pytest.raises(FilterError) as info:
        build_filter({"kind": "touchstone", "path": str(s2p)})
    assert "root" not in one_line_error(info).replace(str(tmp_path), "")


def test_scikit_rf_reads_our_bytes_not_the_path(tmp_path, monkeypatch):
    import skrf

    path = tmp_path / "f.s2p"
    path.write_text(TOUCHSTONE, encoding="utf-8")
    seen = []
    real = skrf.Network.__init__

    def spy(self, file=None, *args, **kwargs):
        seen.append(file)
        real(self, file, *args, **kwargs)

    monkeypatch.setattr(skrf.Network, "__init__", spy)
    filt = build_filter({"kind": "touchstone", "path": str(path)})
    assert len(seen) == 1 and not isinstance(seen[0], (str, os.PathLike))
    # |S21| = 1 at 1 MHz and 0.9 at 2 MHz: 0 dB and -20 log10(0.9) = 0.915 dB (derived by hand)
    assert filt.atten_db(1e6) == pytest.approx(0.0, abs=1e-12)
    assert filt.atten_db(2e6) == pytest.approx(-20 * math.log10(0.9))


def test_a_directory_or_missing_path_is_one_line(tmp_path):
    for target in (tmp_path, tmp_path / "missing.csv"):
        with pytest.raises(LevelTableError) as info:
            read_regular_file(target, 1000, error=LevelTableError, field="table")
        assert one_line_error(info).startswith(f"table: {str(target)!r} is invalid; cannot be read")
    assert stat.S_ISDIR(os.stat(tmp_path).st_mode)


@pytest.mark.timeout(60)
def test_csv_setting_pattern_is_linear():
    from mixchart.levels import _NUMBER, _SETTING

    line = "# description = a" + " " * 20_000 + "b"  # (.*?)\s* was quadratic here
    for _ in range(20):
        assert _SETTING.fullmatch(line).group(2).strip().startswith("a")
        assert _NUMBER.fullmatch("1" * 20_000 + "!") is None


# ---------------------------------------------------------------------- NaN is never a margin


def _nan_above(filt, f_hz: float):
    """Make ``filt`` give NaN loss above ``f_hz`` (a stand-in for any term that loses its number)."""
    real = filt.atten_db

    def atten_db(f, *args, **kwargs):
        out = np.asarray(real(f, *args, **kwargs), dtype=float)
        return np.where(np.asarray(f) > f_hz, np.nan, out)

    real_least = filt.least_atten_db

    def least_atten_db(low, high, *args, **kwargs):
        out = np.asarray(real_least(low, high, *args, **kwargs), dtype=float)
        return np.where(np.asarray(high) > f_hz, np.nan, out)

    object.__setattr__(filt, "atten_db", atten_db)
    object.__setattr__(filt, "least_atten_db", least_atten_db)


def test_a_nan_margin_is_an_error_naming_the_term_never_a_pass(monkeypatch):
    import mixchart.context as context

    plan = load_plan(example_path("fm_receiver"))
    build = context.build_filter

    def nan_filter(spec, **kwargs):
        filt = build(spec, **kwargs)
        if kwargs.get("field_prefix") == "filters.rf.":
            _nan_above(filt, 150e6)  # the FM preselector has no number above 150 MHz
        return filt

    monkeypatch.setattr(context, "build_filter", nan_filter)
    with pytest.raises(AnalysisError) as info:
        evaluate(plan)
    message = one_line_error(info)
    assert message.startswith("filters.rf: the filter's loss at ") and "is not a number (NaN)" in message
    f_bad = parse_frequency(message.split(" at ", 1)[1].split(" is not", 1)[0])
    assert f_bad > 150e6  # where the NaN was put


def test_a_nan_level_is_caught_as_a_margin_too(monkeypatch):
    # the last guard: any NaN in a block's margins, whatever term produced it
    import mixchart.analysis.sweep as sweep

    real = sweep._evaluate_block

    def poisoned(ctx, rows):
        block = real(ctx, rows)
        block.margin_db[0, 3] = np.nan
        return block

    monkeypatch.setattr(sweep, "_evaluate_block", poisoned)  # where evaluate() looks it up
    with pytest.raises(AnalysisError) as info:
        evaluate(load_plan(example_path("fm_receiver")))
    message = one_line_error(info)
    assert "at channel 88 MHz (channel index 0) has no number (NaN)" in message


def test_fail_on_spur_never_exits_0_on_a_nan_worst_margin(monkeypatch, capsys):
    # If a NaN ever reached the summary, "--fail-on-spur" must not read it as a pass
    # (NaN < 0 is False: the old test exited 0).
    import mixchart.analysis as analysis
    import mixchart.cli as cli

    real = analysis.evaluate

    def nan_summary(plan, **kwargs):
        result = real(plan, **kwargs)
        object.__setattr__(result, "summary", dataclasses.replace(result.summary, worst_margin_db=math.nan))
        return result

    monkeypatch.setattr(analysis, "evaluate", nan_summary)
    status = cli.main(["sweep", "--example", "fm_receiver", "--fail-on-spur"])
    assert "FAIL: worst margin" in capsys.readouterr().out  # NaN >= 0 is False: never PASS
    assert status == 1
