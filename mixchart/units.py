"""Frequency parsing and formatting, used only at the edges.

Inside mixchart every frequency is a float64 in hertz.  Text such as
``"10.7 MHz"``, ``"2.4GHz"`` or ``"455 kHz"`` is turned into hertz here, and
hertz are turned back into engineering text here, for widgets, the command
line, JSON and chart axes.  There is one closed set of unit names with one
table of multipliers.
"""

from __future__ import annotations

import math
import re
from decimal import Decimal, DecimalException, InvalidOperation
from typing import Annotated

from pydantic import BeforeValidator, WithJsonSchema

from .errors import UnitError, field_error

__all__ = [
    "FREQUENCY_UNITS",
    "FrequencyHz",
    "parse_frequency",
    "format_frequency",
    "engineering_scale",
]

#: Unit name -> multiplier to hertz.  Matching is case-insensitive, with two guards
#: against the milli/mega slip: ``m``/``M`` are never accepted alone, and exactly ``"mHz"``
#: (SI millihertz, lower-case m, upper-case H) is refused with a hint to write ``"MHz"``.
#: Other spellings of mhz (``"mhz"``, ``"Mhz"``, ``"MHZ"``...) are read as megahertz:
#: nobody plans a mixer in millihertz.
FREQUENCY_UNITS: dict[str, int] = {
    "hz": 1,
    "khz": 10**3,
    "mhz": 10**6,
    "ghz": 10**9,
    "thz": 10**12,
}

#: The SI symbol for millihertz (BIPM SI Brochure, 9th ed., Table 7: prefix m = 10^-3).
_MILLIHERTZ = "mHz"


def _millihertz_error(field: str, value: object) -> UnitError:
    return field_error(UnitError, field, value, "'mHz' is millihertz in SI; write 'MHz' for megahertz")


#: Longest frequency text read, characters; longer text is refused before any pattern runs.
MAX_FREQUENCY_TEXT = 64
#: Physical range of a frequency (a centre, an edge, a band limit, a fixed LO), Hz.
#: Common practice, no source: nothing below 1 Hz or above 1 THz is planned with a mixer chart.
MIN_FREQUENCY_HZ = 1.0
MAX_FREQUENCY_HZ = 1e12
#: Smallest bandwidth or step (raster, synthesiser grid), Hz.  Common practice, no source: a
#: 1 mHz grid is finer than any synthesiser step or signal bandwidth in use.
MIN_SPAN_HZ = 1e-3

# The mantissa is ``digits [. digits]`` or ``. digits``: each digit can be taken by one part
# only, so a failed match costs linear time (the old ``\d+\.?\d*`` split a digit run every
# way and was quadratic: "1" * 16000 + "!" took 14 s).
_TEXT = re.compile(r"\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)(?:\s*([A-Za-z]+))?\s*")


def parse_frequency(
    value: object,
    field: str = "frequency",
    *,
    allow_zero: bool = False,
    minimum_hz: float | None = None,
    maximum_hz: float | None = None,
) -> float:
    """Parse a frequency given as a number of hertz or as text with a unit.

    Parameters
    ----------
    value : float, int or str
        A finite number in Hz, or text such as ``"10.7 MHz"``, ``"2.4GHz"``,
        ``"455 kHz"`` or ``"1e6"`` (Hz when no unit is given).
        Unit names are matched without regard to case (``"mhz"``, ``"MHZ"``
        and ``"Mhz"`` all mean megahertz: lower-case-only ``"mhz"`` is read
        as MHz since nobody plans in millihertz), except that exactly
        ``"mHz"``, the SI symbol for millihertz, is refused with a hint to
        write ``"MHz"``.
    field : str
        Name of the field being parsed, repeated in any error message.
    allow_zero : bool
        Accept 0 Hz (e.g. for a lower filter edge); negative is never accepted.
    minimum_hz, maximum_hz : float, optional
        Physical range of the field, Hz (0 Hz stays allowed with ``allow_zero``).
        Text longer than :data:`MAX_FREQUENCY_TEXT` characters is always refused.

    Returns
    -------
    float
        The frequency in Hz (float64).  Text is converted through
        :class:`decimal.Decimal`, so ``"10.7 MHz"`` is exactly ``10700000.0``.

    Raises
    ------
    UnitError
        If the value is not a number or a recognised ``number unit`` text, is
        longer than :data:`MAX_FREQUENCY_TEXT` characters, is not finite, is
        negative, is outside ``minimum_hz`` to ``maximum_hz``, or is zero when zero is not allowed, or if
        the unit is exactly ``"mHz"`` (millihertz).

    Examples
    --------
    >>> parse_frequency("10.7 MHz")
    10700000.0
    >>> parse_frequency(455e3)
    455000.0
    """
    if isinstance(value, bool):
        raise field_error(UnitError, field, value, "give a frequency in Hz or text like '10.7 MHz'")
    if isinstance(value, (int, float)):
        try:
            hz = float(value)
        except OverflowError:  # an int beyond float range, e.g. a 400-digit JSON number
            raise field_error(UnitError, field, value, "must be a finite frequency") from None
    elif isinstance(value, str):
        if len(value) > MAX_FREQUENCY_TEXT:
            allowed = f"frequency text must be at most {MAX_FREQUENCY_TEXT} characters"
            raise field_error(UnitError, field, value, allowed)
        match = _TEXT.fullmatch(value)
        if not match:
            raise field_error(UnitError, field, value, "give a frequency in Hz or text like '10.7 MHz'")
        number, unit = match.groups(default="")
        if unit == _MILLIHERTZ:
            raise _millihertz_error(field, value)
        unit_key = unit.lower() if unit else "hz"
        if unit_key not in FREQUENCY_UNITS:
            raise field_error(
                UnitError, field, value, f"unit must be one of Hz, kHz, MHz, GHz, THz (got {unit!r})"
            )
        try:
            hz = float(Decimal(number) * FREQUENCY_UNITS[unit_key])
        except InvalidOperation:  # pragma: no cover - the regex already guards this
            raise field_error(UnitError, field, value, "not a number") from None
        except DecimalException:  # exponent beyond Decimal's range, e.g. "1e999999999 MHz"
            raise field_error(UnitError, field, value, "must be a finite frequency") from None
    else:
        raise field_error(UnitError, field, value, "give a frequency in Hz or text like '10.7 MHz'")
    if not math.isfinite(hz):
        raise field_error(UnitError, field, value, "must be a finite frequency")
    if hz < 0 or (hz == 0 and not allow_zero):
        limit = "must be >= 0 Hz" if allow_zero else "must be > 0 Hz"
        raise field_error(UnitError, field, value, limit)
    if hz != 0 and minimum_hz is not None and hz < minimum_hz:
        raise field_error(UnitError, field, value, f"must be >= {format_frequency(minimum_hz)}")
    if maximum_hz is not None and hz > maximum_hz:
        raise field_error(UnitError, field, value, f"must be <= {format_frequency(maximum_hz)}")
    return hz


_SCALES: tuple[tuple[float, str], ...] = ((1e12, "THz"), (1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"), (1.0, "Hz"))


def engineering_scale(f_hz: float) -> tuple[float, str]:
    """Pick the engineering unit that shows ``f_hz`` with 1 to 3 integer digits.

    Parameters
    ----------
    f_hz : float
        A representative frequency in Hz (e.g. the largest on an axis).

    Returns
    -------
    (float, str)
        Multiplier in Hz per unit and the unit's name, e.g. ``(1e6, "MHz")``.
    """
    magnitude = abs(float(f_hz))
    for scale, name in _SCALES:
        if magnitude >= scale:
            return scale, name
    return 1.0, "Hz"


def format_frequency(f_hz: float, digits: int = 6, unit: str | None = None) -> str:
    """Format a frequency in engineering units.

    Parameters
    ----------
    f_hz : float
        Frequency in Hz.
    digits : int
        Significant digits to keep; trailing zeros are dropped.
    unit : str, optional
        Force a unit from :data:`FREQUENCY_UNITS` (any case, except that
        exactly ``"mHz"``, millihertz, is refused as in :func:`parse_frequency`);
        by default the unit is chosen with :func:`engineering_scale`.

    Returns
    -------
    str
        Text such as ``"10.7 MHz"`` that :func:`parse_frequency` reads back.

    Examples
    --------
    >>> format_frequency(10.7e6)
    '10.7 MHz'
    """
    if unit is None:
        scale, name = engineering_scale(f_hz)
    else:
        if unit == _MILLIHERTZ:
            raise _millihertz_error("unit", unit)
        key = unit.lower()
        if key not in FREQUENCY_UNITS:
            raise field_error(UnitError, "unit", unit, "must be one of Hz, kHz, MHz, GHz, THz")
        scale = float(FREQUENCY_UNITS[key])
        name = {"hz": "Hz", "khz": "kHz", "mhz": "MHz", "ghz": "GHz", "thz": "THz"}[key]
    if not math.isfinite(f_hz):
        return f"{f_hz} Hz"
    text = f"{f_hz / scale:.{digits}g}"
    if "e" in text:  # very small against the chosen unit; fall back to plain Hz
        text, name = f"{f_hz:.{digits}g}", "Hz"
    return f"{text} {name}"


#: JSON Schema pattern for frequency text: the units :func:`parse_frequency` accepts (any case,
#: but not exactly "mHz", millihertz).
FREQUENCY_TEXT_PATTERN = r"^\s*[+]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?\s*([kKMgGtT]?[hH][zZ]|m(h[zZ]|HZ))?\s*$"


def _validator(minimum_hz: float):
    def validate(value: object) -> float:
        try:
            return parse_frequency(value, "value", minimum_hz=minimum_hz, maximum_hz=MAX_FREQUENCY_HZ)
        except UnitError as exc:
            # pydantic adds the field path and the input; keep only what is allowed.
            raise ValueError(str(exc).split("; ", 1)[-1]) from None

    return validate


def _schema(minimum_hz: float) -> dict:
    return {
        "anyOf": [
            {"type": "number", "minimum": minimum_hz, "maximum": MAX_FREQUENCY_HZ},
            {"type": "string", "pattern": FREQUENCY_TEXT_PATTERN, "maxLength": MAX_FREQUENCY_TEXT},
        ],
        "description": (
            f"Frequency in Hz ({format_frequency(minimum_hz)} to {format_frequency(MAX_FREQUENCY_HZ)}), "
            "or text with a unit such as '10.7 MHz'."
        ),
    }


#: A pydantic field type: a frequency in Hz from :data:`MIN_FREQUENCY_HZ` to
#: :data:`MAX_FREQUENCY_HZ`, accepting text.
FrequencyHz = Annotated[float, BeforeValidator(_validator(MIN_FREQUENCY_HZ)), WithJsonSchema(_schema(MIN_FREQUENCY_HZ))]
#: A bandwidth or a step in Hz, from :data:`MIN_SPAN_HZ` to :data:`MAX_FREQUENCY_HZ`, accepting text.
SpanHz = Annotated[float, BeforeValidator(_validator(MIN_SPAN_HZ)), WithJsonSchema(_schema(MIN_SPAN_HZ))]
