"""Plans side by side: what an edit bought, product by product.

:func:`compare_frame` lines up the worst case of every product and response
of an edited plan against a reference plan, with the change of margin;
:func:`plan_differences` lists the plan fields that differ; :func:`headline`
puts the answer to "what did that change buy us?" in one line.  Pure pandas:
the app and the report render these.

Rows are matched by what an engineer calls the same product: a named locus
(image, half-IF, LO leakage, feedthrough, sum product, unwanted sideband) by
its name, since its (m, n, ±) moves when the injection side flips; any other
product or response by its kind, harmonics and sign.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np
import pandas as pd

from .analysis import Evaluation
from .plan import Plan, dumps_plan
from .units import format_frequency

__all__ = ["COMPARE_COLUMNS", "compare_frame", "plan_differences", "headline", "GENERIC_LABELS"]

#: Labels that name a class of products rather than one locus: matched by (kind, m, n, sign).
GENERIC_LABELS = frozenset({"spur", "LO harmonic"})

#: Columns of :func:`compare_frame`.
COMPARE_COLUMNS = (
    "kind", "label", "rf_harmonic", "lo_harmonic", "sign",
    "margin_db", "ref_margin_db", "delta_margin_db",
    "channel_hz", "ref_channel_hz", "level_dbc", "ref_level_dbc",
    "ref_label", "ref_rf_harmonic", "ref_lo_harmonic", "ref_sign",
)

_KEEP = ("kind", "label", "rf_harmonic", "lo_harmonic", "sign", "margin_db", "channel_hz", "level_dbc")


def _keyed(frame: pd.DataFrame) -> pd.DataFrame:
    out = frame.loc[:, list(_KEEP)].copy()
    generic = out["label"].isin(GENERIC_LABELS).to_numpy()
    key = np.where(
        generic,
        out["kind"] + "|" + out["label"] + "|" + out["rf_harmonic"].astype(str) + "," + out["lo_harmonic"].astype(str)
        + "," + out["sign"].astype(str),
        out["kind"] + "|" + out["label"],
    )
    out["key"] = key
    return out


def compare_frame(edited: Evaluation, reference: Evaluation) -> pd.DataFrame:
    """The worst case of each product and response in two plans, with the change of margin.

    Parameters
    ----------
    edited, reference : Evaluation
        The plan being edited and the one it is compared with.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`COMPARE_COLUMNS`: the edited plan's row (``margin_db``,
        ``channel_hz`` where it is worst, ``level_dbc``), the reference's
        (``ref_...``) and ``delta_margin_db`` = edited − reference, dB (positive:
        the edit gained margin).  A product found in one plan only (e.g. a
        higher order) has NaN on the other side and in the delta.  Sorted by
        the lower of the two margins, the worst first, so what limits either
        plan leads.
    """
    a = _keyed(edited.to_frame())
    b = _keyed(reference.to_frame()).rename(columns={c: "ref_" + c for c in _KEEP})
    merged = a.merge(b, on="key", how="outer", sort=False)
    # one side's identity fills the other's where that side lacks the row
    for col in ("kind", "label", "rf_harmonic", "lo_harmonic", "sign"):
        merged[col] = merged[col].where(merged[col].notna(), merged["ref_" + col])
    for col in ("rf_harmonic", "lo_harmonic", "sign"):
        merged[col] = merged[col].astype(np.int64)
        merged["ref_" + col] = merged["ref_" + col].astype("Int64")  # missing where the reference lacks the row
    merged["delta_margin_db"] = merged["margin_db"] - merged["ref_margin_db"]
    lower = np.fmin(merged["margin_db"].to_numpy(float), merged["ref_margin_db"].to_numpy(float))
    merged = merged.assign(_lower=lower).sort_values(["_lower", "kind", "label"], kind="stable")
    return merged.loc[:, list(COMPARE_COLUMNS)].reset_index(drop=True)


def _flat(value: Any, prefix: str = "") -> dict[str, Any]:
    if isinstance(value, dict):
        out: dict[str, Any] = {}
        for key, item in value.items():
            out.update(_flat(item, f"{prefix}{key}."))
        return out
    return {prefix[:-1]: value}


def _show(key: str, value: Any) -> str:
    if value is None:
        return "(not set)"
    if key.endswith("_hz") and isinstance(value, int | float) and math.isfinite(value):
        return format_frequency(float(value))
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, list | dict):
        return json.dumps(value, separators=(",", ":"))[:60]
    return str(value)


def plan_differences(edited: Plan, reference: Plan) -> list[tuple[str, str, str]]:
    """The plan fields that differ, as ``(json path, reference value, edited value)`` texts.

    Frequencies are shown with their unit; the plan's name and notes are left out.
    """
    a = _flat(json.loads(dumps_plan(edited)))
    b = _flat(json.loads(dumps_plan(reference)))
    out = []
    for key in sorted(set(a) | set(b)):
        if key in ("name", "notes", "schema_version"):
            continue
        if a.get(key) != b.get(key):
            out.append((key, _show(key, b.get(key)), _show(key, a.get(key))))
    return out


def headline(edited: Evaluation, reference: Evaluation, ref_name: str) -> str:
    """One line: the worst margin and failing channels of both plans, and the change.

    Examples
    --------
    ``against "IF 10.7 MHz": worst margin −2.3 → +4.1 dB (Δ +6.4 dB); failing channels 201 → 0 of 201``
    """
    s, r = edited.summary, reference.summary
    delta = s.worst_margin_db - r.worst_margin_db
    return (
        f"against \u201c{ref_name}\u201d: worst margin {_db(r.worst_margin_db)} \u2192 {_db(s.worst_margin_db)} dB "
        f"(\u0394 {_db(delta)} dB); failing channels {r.n_failing_channels} of {r.n_channels} "
        f"\u2192 {s.n_failing_channels} of {s.n_channels}; limited by {r.worst_label} \u2192 {s.worst_label}"
    )


def _db(value: float) -> str:
    return "\u2014" if not math.isfinite(value) else f"{value:+.1f}".replace("-", "\u2212")
