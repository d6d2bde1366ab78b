"""Frequency parsing and formatting (mixchart.units).

Unit multipliers are the SI prefixes: k = 10^3, M = 10^6, G = 10^9, T = 10^12
(BIPM, The International System of Units, 9th edition 2019, Table 7).
"""

from __future__ import annotations

import math
import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from mixchart.errors import MixchartError, PlanError, UnitError
from mixchart.plan import plan_from_dict
from mixchart.units import FREQUENCY_TEXT_PATTERN, engineering_scale, format_frequency, parse_frequency

SI = "SI prefix (BIPM SI Brochure 9th ed., Table 7)"


@pytest.mark.parametrize(
    ("text", "expected_hz", "source"),
    [
        ("10.7 MHz", 10_700_000.0, f"{SI}: 10.7 x 10^6; the standard FM-broadcast IF"),
        ("2.4GHz", 2_400_000_000.0, f"{SI}: 2.4 x 10^9, no space"),
        ("455 kHz", 455_000.0, f"{SI}: 455 x 10^3; the standard AM-broadcast IF"),
        ("455 KHZ", 455_000.0, "case-insensitive unit names (mixchart.units docstring)"),
        ("1e6", 1_000_000.0, "a bare number is Hz (mixchart.units docstring)"),
        ("  88 MHz  ", 88_000_000.0, f"{SI}; surrounding blanks ignored"),
        (".5 GHz", 500_000_000.0, f"{SI}: 0.5 x 10^9"),
        ("1.5e3 kHz", 1_500_000.0, f"{SI}: 1.5e3 x 10^3 = 1.5 x 10^6"),
        ("0.1 THz", 100_000_000_000.0, f"{SI}: 0.1 x 10^12"),
        ("100 Hz", 100.0, "Hz itself"),
        (455e3, 455_000.0, "a number is Hz"),
        (10_700_000, 10_700_000.0, "an int is Hz"),
    ],
)
def test_parse_frequency_accepts_numbers_and_units(text, expected_hz, source):
    assert parse_frequency(text) == expected_hz, source


@pytest.mark.parametrize(
    ("text", "expected_hz", "source"),
    [
        # Text goes through decimal arithmetic; the plain float product float("4.1") * 1e6
        # is 4099999.9999999995 (checked in the Python REPL), so these catch a float shortcut.
        ("4.1 MHz", 4_100_000.0, "derived by hand: 4.1 x 10^6 = 4 100 000 exactly"),
        ("33.3 MHz", 33_300_000.0, "derived by hand: 33.3 x 10^6 = 33 300 000 exactly"),
        ("1.005 kHz", 1_005.0, "derived by hand: 1.005 x 10^3 = 1005 exactly"),
        ("2.345678901 GHz", 2_345_678_901.0, "derived by hand: 2.345678901 x 10^9 = 2 345 678 901 exactly"),
    ],
)
def test_parse_frequency_text_is_exact(text, expected_hz, source):
    assert parse_frequency(text) == expected_hz, source


@pytest.mark.parametrize(
    ("value", "needle", "why"),
    [
        (0, "must be > 0 Hz", "zero frequency"),
        (-5.0, "must be > 0 Hz", "negative frequency"),
        ("-5 kHz", "must be > 0 Hz", "negative text"),
        (math.nan, "must be a finite frequency", "NaN"),
        (math.inf, "must be a finite frequency", "infinity"),
        (-math.inf, "must be a finite frequency", "minus infinity"),
        ("10 m", "unit must be one of", "'m' alone: milli or mega? refused"),
        ("10 MHz MHz", "give a frequency in Hz", "garbage after the unit"),
        ("ten MHz", "give a frequency in Hz", "not a number"),
        ("", "give a frequency in Hz", "empty text"),
        ("nan", "give a frequency in Hz", "NaN as text"),
        ("inf GHz", "give a frequency in Hz", "infinity as text"),
        ("5 xHz", "unit must be one of", "unknown unit"),
        (True, "give a frequency in Hz", "a bool is not a number of Hz"),
        (None, "give a frequency in Hz", "None"),
        ([1e6], "give a frequency in Hz", "a list"),
        (10**400, "must be a finite frequency", "an int beyond float range (regression: was OverflowError)"),
        ("1e999999999 MHz", "must be a finite frequency",
         "exponent beyond Decimal range (regression: was decimal.Overflow)"),
        ("1e-999999999 MHz", "must be > 0 Hz", "underflows to 0 Hz"),
    ],
)
def test_parse_frequency_rejects_with_one_line_naming_field_and_value(value, needle, why):
    with pytest.raises(UnitError) as info:
        parse_frequency(value, "rf.start_hz")
    message = str(info.value)
    assert needle in message, why
    assert message.startswith("rf.start_hz: "), "names the field"
    assert "\n" not in message
    shown = repr(value)
    assert shown[:40] in message, "repeats the offending value"
    assert isinstance(info.value, MixchartError) and isinstance(info.value, ValueError)


def test_parse_frequency_allow_zero():
    # A lower filter edge may be 0 Hz; negative never (mixchart.units docstring).
    assert parse_frequency(0, "edge", allow_zero=True) == 0.0
    with pytest.raises(UnitError, match=r"edge: -1 is invalid; must be >= 0 Hz"):
        parse_frequency(-1, "edge", allow_zero=True)


@pytest.mark.parametrize(
    ("f_hz", "expected", "source"),
    [
        (10.7e6, "10.7 MHz", f"{SI}: 10.7e6 Hz / 10^6"),
        (455e3, "455 kHz", f"{SI}: 455e3 Hz / 10^3"),
        (2.4e9, "2.4 GHz", f"{SI}: 2.4e9 Hz / 10^9"),
        (1.2e12, "1.2 THz", f"{SI}: 1.2e12 Hz / 10^12"),
        (50.0, "50 Hz", "below 1 kHz stays in Hz"),
        (0.0, "0 Hz", "zero in Hz"),
        (999.0, "999 Hz", "three integer digits, no prefix"),
        (1000.0, "1 kHz", f"{SI}: 10^3 Hz"),
        (88.1e6, "88.1 MHz", f"{SI}: 88.1e6 Hz / 10^6"),
    ],
)
def test_format_frequency(f_hz, expected, source):
    assert format_frequency(f_hz) == expected, source


@pytest.mark.parametrize(
    ("f_hz", "unit", "expected", "source"),
    [
        (10.7e6, "kHz", "10700 kHz", f"{SI}: 10.7e6 / 10^3"),
        (455e3, "mhz", "0.455 MHz", f"{SI}: 455e3 / 10^6, unit name in any case"),
    ],
)
def test_format_frequency_forced_unit(f_hz, unit, expected, source):
    assert format_frequency(f_hz, unit=unit) == expected, source


def test_format_frequency_rejects_unknown_unit():
    with pytest.raises(UnitError, match=r"^unit: 'furlong' is invalid; must be one of Hz, kHz, MHz, GHz, THz$"):
        format_frequency(1e6, unit="furlong")


@pytest.mark.parametrize(
    ("f_hz", "expected", "source"),
    [
        (1.0, (1.0, "Hz"), "1 Hz"),
        (999.999, (1.0, "Hz"), "under 10^3"),
        (1e3, (1e3, "kHz"), SI),
        (150e6, (1e6, "MHz"), SI),
        (-2e9, (1e9, "GHz"), "sign ignored when choosing the unit"),
        (5e12, (1e12, "THz"), SI),
    ],
)
def test_engineering_scale(f_hz, expected, source):
    assert engineering_scale(f_hz) == expected, source


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=1e-3, max_value=1e15, allow_nan=False, allow_infinity=False))
def test_format_then_parse_round_trips_to_the_digits_shown(f_hz):
    # format_frequency keeps 6 significant digits, so parsing it back lands within
    # half a unit in the 6th digit (derived by hand: relative error <= 5e-6).
    back = parse_frequency(format_frequency(f_hz))
    assert math.isclose(back, f_hz, rel_tol=5e-6)


@settings(max_examples=200, deadline=None)
@given(st.floats(min_value=1e-3, max_value=1e15, allow_nan=False, allow_infinity=False))
def test_number_passes_through_unchanged(f_hz):
    # a float in Hz is returned as is (mixchart.units docstring: float64 Hz inside)
    assert parse_frequency(f_hz) == f_hz


# ------------------------------------------------------------ millihertz versus megahertz


@pytest.mark.parametrize(
    ("text", "source"),
    [
        ("10 MHz", f"{SI}: M = 10^6, the SI spelling"),
        ("10 mhz", "lower-case-only 'mhz' is read as MHz: nobody plans in millihertz (mixchart.units docstring)"),
        ("10 MHZ", "case-insensitive unit names (mixchart.units docstring)"),
        ("10 Mhz", "case-insensitive unit names (mixchart.units docstring)"),
        ("10 mHZ", "only exactly 'mHz' is millihertz; other spellings are megahertz (mixchart.units docstring)"),
        ("10MHz", f"{SI}; no space"),
    ],
)
def test_megahertz_spellings_are_accepted(text, source):
    assert parse_frequency(text) == 10_000_000.0, source


@pytest.mark.parametrize("text", ["10 mHz", "10mHz", "  0.5 mHz ", "1e3 mHz"])
def test_millihertz_is_refused_with_a_hint(text):
    # "mHz" is the SI symbol for millihertz (BIPM SI Brochure 9th ed., Table 7: m = 10^-3), so
    # reading it as 10^6 would be wrong by a factor of 10^9; it is refused, never guessed.
    with pytest.raises(UnitError) as info:
        parse_frequency(text, "if.center_hz")
    message = str(info.value)
    assert message == f"if.center_hz: {text!r} is invalid; 'mHz' is millihertz in SI; write 'MHz' for megahertz"
    assert "\n" not in message


def test_millihertz_is_refused_in_a_plan_and_as_a_forced_unit():
    data = {"rf": {"start_hz": "100 mHz", "stop_hz": "100 MHz"}, "signal": {"bandwidth_hz": "1 kHz"},
            "if": {"center_hz": "10 MHz", "bandwidth_hz": "1 MHz"}}
    with pytest.raises(PlanError, match=r"^rf\.start_hz: '100 mHz' is invalid; 'mHz' is millihertz in SI; "
                                        r"write 'MHz' for megahertz$"):
        plan_from_dict(data)
    with pytest.raises(UnitError, match=r"^unit: 'mHz' is invalid; 'mHz' is millihertz in SI; write 'MHz'"):
        format_frequency(1e6, unit="mHz")
    assert format_frequency(1e6, unit="MHz") == "1 MHz"


@pytest.mark.parametrize("unit", ["Hz", "hz", "kHz", "KHZ", "MHz", "mhz", "MHZ", "Mhz", "mHZ", "mHz", "GHz", "thz",
                                  "m", "M", "xHz", ""])
def test_json_schema_pattern_accepts_exactly_what_the_parser_accepts(unit):
    # The plan JSON Schema (mixchart.plan.plan_json_schema) uses FREQUENCY_TEXT_PATTERN for text
    # frequencies; a text it accepts must parse, and one it refuses must not.
    text = f"12.5 {unit}"
    try:
        parse_frequency(text)
        parses = True
    except UnitError:
        parses = False
    assert (re.match(FREQUENCY_TEXT_PATTERN, text) is not None) == parses
