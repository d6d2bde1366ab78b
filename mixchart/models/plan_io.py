"""Plan files: strict JSON text in and out, atomic saves, and the JSON Schema (layout version 1).

Plan files are untrusted input.  They are parsed with :mod:`json` only (never evaluated or
unpickled); NaN, infinities and duplicate keys are refused, files are read with a size cap from
regular files only, and every problem is a one-line :class:`~mixchart.errors.PlanError` naming
the field.  Saving is atomic and a save/load round trip is exact.  The names here are also
:mod:`mixchart.plan`'s (and :mod:`mixchart.models.plan`'s).
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from ..errors import PlanError, one_line
from ..fileio import atomic_write_text, read_regular_file
from .plan import SCHEMA_VERSION, Plan, plan_from_dict

__all__ = ["MAX_PLAN_BYTES", "parse_plan_json", "loads_plan", "read_plan_bytes", "load_plan", "dumps_plan",
           "save_plan", "plan_json_schema"]

#: Largest plan file read, in bytes.
MAX_PLAN_BYTES = 5_000_000


def _reject_constant(name: str) -> float:
    raise PlanError(f"plan: {name} is invalid; JSON numbers must be finite")


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in pairs:
        if key in out:
            raise PlanError(f"{one_line(key)}: duplicate key; each key may appear once")
        out[key] = value
    return out


def parse_plan_json(text: str | bytes) -> Any:
    """Parse plan JSON text into plain data, refusing what a plan file may not hold.

    Parameters
    ----------
    text : str or bytes
        The JSON document (UTF-8 if bytes).

    Returns
    -------
    object
        The parsed document (a dict for any plan).

    Raises
    ------
    PlanError
        Malformed JSON, NaN/Infinity, duplicate keys, too large or too deeply nested.
    """
    if isinstance(text, bytes):
        try:
            text = text.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise PlanError(f"plan file: not UTF-8 text ({exc.reason} at byte {exc.start})") from None
    if len(text) > MAX_PLAN_BYTES:
        raise PlanError(f"plan file: {len(text)} characters is too large; at most {MAX_PLAN_BYTES}")
    try:
        return json.loads(text, parse_constant=_reject_constant, object_pairs_hook=_no_duplicates)
    except json.JSONDecodeError as exc:
        raise PlanError(f"plan file: malformed JSON at line {exc.lineno} column {exc.colno}: {exc.msg}") from None
    except PlanError:
        raise
    except ValueError as exc:  # e.g. an integer literal longer than Python's 4300-digit limit
        raise PlanError(f"plan file: unreadable JSON number ({str(exc).split(':')[0]})") from None
    except RecursionError:
        raise PlanError("plan file: JSON nested too deeply") from None


def loads_plan(text: str | bytes) -> Plan:
    """Parse plan JSON text.

    Parameters
    ----------
    text : str or bytes
        The JSON document.

    Returns
    -------
    Plan

    Raises
    ------
    PlanError
        Malformed JSON, NaN/Infinity, duplicate keys, or an invalid plan.
    """
    return plan_from_dict(parse_plan_json(text))


def read_plan_bytes(path: str | os.PathLike[str]) -> bytes:
    """The bytes of a plan file: a regular file of at most :data:`MAX_PLAN_BYTES`, or a one-line PlanError."""
    path = Path(path)
    try:
        size = path.stat().st_size
        if size > MAX_PLAN_BYTES:
            raise PlanError(f"plan file: {str(path)!r} is {size} bytes; at most {MAX_PLAN_BYTES}")
    except OSError as exc:
        raise PlanError(f"plan file: {str(path)!r} cannot be read ({exc.strerror or exc})") from None
    # a regular file only (never a FIFO or a device), read with the same cap
    return read_regular_file(path, MAX_PLAN_BYTES, error=PlanError, field="plan file")


def load_plan(path: str | os.PathLike[str]) -> Plan:
    """Read and validate a plan file.

    Parameters
    ----------
    path : path-like
        A JSON plan file.  Relative paths inside it (filter and level-table
        files) are resolved by :func:`~mixchart.analysis.evaluate` against the
        ``base_dir`` it is given (the CLI and the app pass this file's folder).

    Returns
    -------
    Plan

    Raises
    ------
    PlanError
        The file cannot be read, or is not a valid plan.
    """
    return loads_plan(read_plan_bytes(path))


def dumps_plan(plan: Plan) -> str:
    """Serialise a plan to JSON text (floats in Hz, written with ``repr`` so they round-trip exactly)."""
    return json.dumps(plan.to_dict(), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def save_plan(plan: Plan, path: str | os.PathLike[str]) -> Path:
    """Write a plan to ``path`` atomically.

    The JSON goes to a temporary file in the same folder, is flushed to disk,
    then renamed over ``path``, so a crash never leaves a half-written plan.

    Parameters
    ----------
    plan : Plan
        The plan to save.
    path : path-like
        Destination file.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    PlanError
        If the file cannot be written.
    """
    return atomic_write_text(path, dumps_plan(plan), error=PlanError, field="plan file")


def plan_json_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of the plan file, generated from the model.

    Returns
    -------
    dict
        The schema document.
    """
    schema = Plan.model_json_schema(by_alias=True, mode="validation")
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": f"mixchart-plan-v{SCHEMA_VERSION}",
        **schema,
    }
