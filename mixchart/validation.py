"""Turn pydantic validation errors into one-line errors of the mixchart family.

Pydantic reports a list of structured errors (``type``, ``loc``, ``input``,
``ctx``).  This module reads only that structure, never pydantic's English
wording, so a pydantic release that rewords its messages changes nothing here:

- an error raised by one of our own validators is a
  :class:`~mixchart.errors.MixchartError` carried in ``ctx["error"]``; its
  message already names its field (relative to the model that raised it), so
  the location of that model is put in front;
- a built-in constraint (``gt``, ``le``, ``max_length``, a literal, a type) is
  described from its ``type`` and ``ctx``;
- only an error type this module does not know falls back to pydantic's own
  text, which is still one line.
"""

from __future__ import annotations

import difflib
import functools
from typing import Any

from pydantic import ValidationError

from .errors import MixchartError, one_line

__all__ = ["field_path", "from_validation_error"]

# Constraint types and how to say what is allowed; the values come from ``ctx``.
_BOUNDS = {
    "greater_than": "must be > {gt}",
    "greater_than_equal": "must be >= {ge}",
    "less_than": "must be < {lt}",
    "less_than_equal": "must be <= {le}",
    "string_too_long": "must be at most {max_length} characters",
    "string_too_short": "must be at least {min_length} characters",
    "too_long": "must have at most {max_length} items",
    "too_short": "must have at least {min_length} items",
    "literal_error": "must be {expected}",
}
_TYPES = {
    "int_type": "must be a whole number",
    "int_parsing": "must be a whole number",
    "int_from_float": "must be a whole number",
    "float_type": "must be a number",
    "float_parsing": "must be a number",
    "finite_number": "must be a finite number",
    "bool_type": "must be true or false",
    "bool_parsing": "must be true or false",
    "string_type": "must be text",
    "dict_type": "must be a JSON object",
    "model_type": "must be a JSON object",
    "model_attributes_type": "must be a JSON object",
    "list_type": "must be a JSON array",
    "tuple_type": "must be a JSON array",
}


def field_path(loc: tuple[Any, ...], data: Any) -> str:
    """Dotted field name of a pydantic error location, without discriminated-union tags.

    A tagged union (a filter's ``kind``) adds a level naming the chosen kind
    (``filters.rf.tuned.q_loaded``); it is not a key of the JSON, so it is
    dropped (``filters.rf.q_loaded``).  Keys holding control or line-separator
    characters are escaped, so the name stays on one line.

    Parameters
    ----------
    loc : tuple
        The error's ``loc``.
    data : object
        The data that was validated (to tell union tags from keys).

    Returns
    -------
    str
        For example ``"filters.rf.q_loaded"``; ``""`` for the top level.
    """
    parts: list[str] = []
    node = data
    arrived = True  # just stepped into ``node``: a union tag, if any, comes first
    tagged = False  # the tag of this node was dropped already (a node has at most one)
    for part in loc:
        if (isinstance(node, dict) and not tagged and node.get("kind") == part
                and (arrived or part not in node)):
            arrived, tagged = False, True
            continue  # the union tag (a chain stage's tag may equal one of its keys: 'filter')
        arrived, tagged = True, False
        parts.append(one_line(str(part)))
        if isinstance(node, dict):
            node = node.get(part)
        elif isinstance(node, (list, tuple)) and isinstance(part, int) and -len(node) <= part < len(node):
            node = node[part]
        else:
            node = None
    return ".".join(parts)


def _shown(value: Any) -> str:
    if isinstance(value, dict):
        return "{...}"
    if isinstance(value, (list, tuple)):
        return "[...]" if value else "[]"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _number(value: Any) -> Any:
    """A bound as a person writes it: ``0`` rather than ``0.0``."""
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return int(value)
    return value


def _allowed(error: dict[str, Any]) -> str:
    kind = error["type"]
    ctx = {key: _number(value) for key, value in (error.get("ctx") or {}).items()}
    if kind in _BOUNDS:
        try:
            return _BOUNDS[kind].format(**ctx)
        except (KeyError, IndexError):
            pass
    if kind in _TYPES:
        return _TYPES[kind]
    return str(error.get("msg", kind))


@functools.lru_cache(maxsize=1)
def _known_keys() -> tuple[str, ...]:
    """Every key a plan may hold, at any depth, in either layout (from the plans' own JSON Schemas)."""
    from .models.chain import chain_json_schema  # at call time: the models import this module
    from .plan import plan_json_schema

    keys: set[str] = set()

    def walk(node: Any) -> None:
        if isinstance(node, dict):
            for name, value in node.items():
                if name == "properties" and isinstance(value, dict):
                    keys.update(value)
                walk(value)
        elif isinstance(node, list):
            for value in node:
                walk(value)

    walk(plan_json_schema())
    walk(chain_json_schema())
    return tuple(sorted(keys))


def _nearest_key(key: str) -> str | None:
    """The valid key nearest a misspelt one ('centre_hz' -> 'center_hz'), if one is close."""
    found = difflib.get_close_matches(key, _known_keys(), n=1, cutoff=0.75)
    return found[0] if found else None


def from_validation_error(
    exc: ValidationError, data: Any, cls: type[MixchartError], *, root: str, prefix: str = ""
) -> MixchartError:
    """One line naming the first problem's field and value.

    Parameters
    ----------
    exc : pydantic.ValidationError
        What pydantic raised.
    data : object
        The data that was validated.
    cls : type of MixchartError
        The error to build (e.g. :class:`~mixchart.errors.PlanError`).
    root : str
        What to call the whole document when the problem is at its top level
        (``"plan"``, ``"filter"``).
    prefix : str
        Dotted location of ``data`` inside a larger document, e.g. ``"filters.rf."``.

    Returns
    -------
    MixchartError
        The error, ready to raise; a count of further problems follows the first.
    """
    errors = exc.errors(include_url=False)
    first = errors[0]
    loc = prefix + field_path(first["loc"], data)
    loc = loc.rstrip(".")
    more = f" (and {len(errors) - 1} more problem{'s' if len(errors) > 2 else ''})" if len(errors) > 1 else ""
    raised = (first.get("ctx") or {}).get("error")
    if isinstance(raised, MixchartError):
        # our own validator: its message names its field relative to the model that raised it
        text = f"{loc}.{raised}" if loc else str(raised)
    elif first["type"] == "missing":
        text = f"{loc or root}: missing; this field is required"
    elif first["type"] == "extra_forbidden":
        key = str(first["loc"][-1]) if first["loc"] else ""
        guess = _nearest_key(key)
        hint = f"did you mean {guess}?" if guess else "remove it or check its spelling"
        text = f"{loc or root}: unknown key (value {_shown(first.get('input'))}); {hint}"
    elif first["type"] == "union_tag_invalid":
        ctx = first.get("ctx") or {}
        key = str(ctx.get("discriminator", "kind")).strip("'")
        field = f"{loc}.{key}" if loc else key
        text = one_line(f"{field}: {_shown(ctx.get('tag'))} is invalid; must be one of {ctx.get('expected_tags', '?')}")
    elif first["type"] == "union_tag_not_found":
        key = str((first.get("ctx") or {}).get("discriminator", "kind")).strip("'")
        text = f"{loc}.{key}: missing; it names the kind" if loc else f"{key}: missing; it names the kind"
    elif isinstance(raised, Exception):
        text = f"{loc or root}: {_shown(first.get('input'))} is invalid; {raised}"
    else:
        text = f"{loc or root}: {_shown(first.get('input'))} is invalid; {_allowed(first)}"
    return cls(one_line(text + more))
