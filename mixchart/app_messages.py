"""Messages on the planner's screen name a field by the label the user sees.

The engine's errors name a field by its JSON path (``rf.stop_hz: 108 MHz is
below start_hz 120 MHz``), which is right for a plan file and the command line.
On screen the same message leads with the field's label and keeps the path in
brackets: ``RF stop (rf.stop_hz): 108 MHz is below start_hz 120 MHz``.
"""

from __future__ import annotations

from typing import Any

__all__ = ["screen_labels", "on_screen"]

# plan path -> the Controls attribute whose description is its on-screen label
_WIDGETS = {
    "rf.start_hz": "rf_start", "rf.stop_hz": "rf_stop", "rf.step_hz": "rf_step",
    "if.center_hz": "if_center", "if.bandwidth_hz": "if_bandwidth", "signal.bandwidth_hz": "sig_bandwidth",
    "lo.fixed_hz": "lo_fixed", "lo.step_hz": "lo_step", "lo.side": "side", "lo.mode": "lo_mode",
    "direction": "direction", "name": "name", "notes": "notes", "max_order": "max_order",
    "signal.level_dbm": "sig_level", "signal.interferer_level_dbm": "interferer",
    "requirement.min_rejection_db": "requirement",
    "mixer.topology": "topology", "mixer.balance_db": "balance", "mixer.table": "table_path",
    "mixer.rf_ref_dbm": "rf_ref", "mixer.lo_drive_dbm": "lo_drive",
}
# a filter's plan key -> the FilterControls attribute that edits it
_FILTER_WIDGETS = {
    "f_center_hz": "centre", "tracks_channel": "centre", "bandwidth_hz": "bandwidth", "order": "order",
    "stages": "order", "q_loaded": "q", "ripple_db": "ripple", "stop_atten_db": "stop", "kind": "kind",
}


def screen_labels(controls: Any) -> dict[str, str]:
    """Every plan path the controls edit, with its on-screen label.

    Parameters
    ----------
    controls : mixchart.app.Controls
        The app's widgets (their ``description`` is what the user reads).

    Returns
    -------
    dict of str to str
        e.g. ``{"rf.stop_hz": "RF stop", "filters.if.bandwidth_hz": "IF filter bandwidth"}``.
    """
    labels = {path: getattr(controls, key).description for path, key in _WIDGETS.items()}
    for name, fc in (("rf", controls.rf_filter), ("if", controls.if_filter)):
        head = fc.kind.description
        labels[f"filters.{name}"] = head
        for key, attr in _FILTER_WIDGETS.items():
            sub = getattr(fc, attr).description
            labels[f"filters.{name}.{key}"] = head if attr == "kind" else f"{head} {sub}"
    return labels


def on_screen(message: str, labels: dict[str, str]) -> str:
    """``message`` led by the on-screen label of the field it names (unchanged if it names none).

    The longest known path that leads the message wins, so ``filters.if.order: ...`` reads
    ``IF filter order (filters.if.order): ...`` and an unknown key under a filter still
    names the filter.
    """
    head, sep, rest = message.partition(": ")
    if not sep or " " in head:
        return message
    path = head
    while path and path not in labels:
        path = path.rpartition(".")[0]
    if not path:
        return message
    return f"{labels[path]} ({head}){sep}{rest}"
