"""One error family for everything a user can get wrong.

Every error mixchart raises on bad input subclasses :class:`MixchartError`,
which subclasses :class:`ValueError`, so ``except ValueError`` still works for
callers that do not know about mixchart.  Messages are one line, name the field
and repeat the offending value.
"""

from __future__ import annotations

__all__ = [
    "MixchartError",
    "PlanError",
    "UnitError",
    "FilterError",
    "LevelTableError",
    "CircuitError",
    "SweepTooLargeError",
    "AnalysisError",
    "field_error",
    "one_line",
]


class MixchartError(ValueError):
    """Base class of every input error raised by mixchart."""


class UnitError(MixchartError):
    """A frequency or level could not be parsed or is out of range."""


class PlanError(MixchartError):
    """A plan (or plan file) is invalid."""


class FilterError(MixchartError):
    """A filter description or a measured filter response is invalid."""


class LevelTableError(MixchartError):
    """A mixer level table is invalid."""


class CircuitError(MixchartError):
    """A mixer circuit model is invalid, or its solve failed (no conduction, no convergence)."""


class SweepTooLargeError(MixchartError):
    """A requested sweep would need an unreasonable amount of work or memory."""


class AnalysisError(MixchartError):
    """A valid plan gave a value that is not a number (NaN): never reported as a margin."""


def one_line(text: str) -> str:
    """``text`` with every control or line-separator character escaped, so it prints as one line.

    Parameters
    ----------
    text : str
        Any text, e.g. a message holding a key read from an untrusted file.

    Returns
    -------
    str
        The same text, with characters such as ``\\n``, ``\\r`` and ``\\u2028``
        written as their backslash escapes.

    Examples
    --------
    >>> one_line("bad\\nkey")
    'bad\\\\nkey'
    """
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)


def field_error(cls: type[MixchartError], field: str, value: object, allowed: str) -> MixchartError:
    """Build a one-line error naming ``field``, repeating ``value`` and saying what is allowed.

    Parameters
    ----------
    cls : type of MixchartError
        Which error of the family to build.
    field : str
        Dotted name of the offending field, e.g. ``"rf.start"``.
    value : object
        The offending value; it is repeated with ``repr``.
    allowed : str
        What would have been accepted.

    Returns
    -------
    MixchartError
        The error, ready to raise.
    """
    text = repr(value)
    if len(text) > 80:
        text = text[:77] + "..."
    return cls(one_line(f"{field}: {text} is invalid; {allowed}"))
