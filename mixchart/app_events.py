"""Widget and chart events to the state: the event half of :class:`mixchart.app.PlannerApp`.

:class:`EventsMixin` holds the handlers the app wires to its widgets, to the chart's
taps and to the band drags; each hands a change to the :class:`~mixchart.state.PlanState`
and shows its message beside the control.  It uses the attributes
:meth:`PlannerApp.__init__ <mixchart.app.PlannerApp>` sets and the refresh half
(:class:`mixchart.app_refresh.RefreshMixin`).
"""

from __future__ import annotations

import html
from collections.abc import Callable
from typing import Any

from .app_controls import _TEXT_FIELDS, FilterControls, _filter_spec_from_controls
from .errors import MixchartError
from .units import format_frequency, parse_frequency

__all__ = ["EventsMixin"]


class EventsMixin:
    """The event handlers of :class:`mixchart.app.PlannerApp` (widgets, chart taps, band drags, files)."""

    def _wire(self) -> None:
        c = self.controls
        for key, (path, _label) in _TEXT_FIELDS.items():
            c.__dict__[key].observe(self._text_handler(key, path), names="value")
        c.interferer.observe(self._interferer_handler, names="value")
        simple = {
            "name": "name",
            "notes": "notes",
            "direction": "direction",
            "side": "lo.side",
            "max_order": "max_order",
            "topology": "mixer.topology",
            "table_path": "mixer.table",
        }
        for key, path in simple.items():
            c.__dict__[key].observe(self._value_handler(path, "plan" if key != "topology" else "mixer"), names="value")
        for key, path, digits in (
            ("sig_level", "signal.level_dbm", 1),
            ("requirement", "requirement.min_rejection_db", 1),
            ("balance", "mixer.balance_db", 1),
            ("lo_drive", "mixer.lo_drive_dbm", 2),
        ):
            c.__dict__[key].observe(self._float_handler(path, digits), names="value")
        for name, fc in (("rf", c.rf_filter), ("if", c.if_filter)):
            for widget in (fc.kind, fc.order, fc.centre, fc.bandwidth, fc.q, fc.ripple, fc.stop):
                widget.observe(self._filter_handler(name, fc), names="value")
            fc.spec_json.observe(self._filter_json_handler(name, fc), names="value")
        c.rf_ref.observe(self._optional_float_handler("mixer.rf_ref_dbm", "mixer"), names="value")
        c.lo_mode.observe(self._lo_mode_handler, names="value")
        c.channel.observe(self._on_channel, names="value")
        c.normalised.observe(lambda ch: self._view(normalised=bool(ch["new"])), names="value")
        c.show_clear.observe(lambda ch: self._view(show_clear=bool(ch["new"])), names="value")
        c.orders_shown.observe(lambda ch: self._view(max_order_shown=int(ch["new"])), names="value")
        c.undo.on_click(lambda _b: self._history_result(self.state.undo()))
        c.redo.on_click(lambda _b: self._history_result(self.state.redo()))
        c.keep_ref.on_click(lambda _b: self.state.keep_reference(c.ref_name.value))
        c.clear_ref.on_click(lambda _b: self.state.clear_reference())
        c.ref_pick.observe(self._on_ref_pick, names="value")
        c.save.on_click(lambda _b: self.save(c.save_path.value))
        c.load.on_click(lambda _b: self._load_file(c.load_path.value.strip()))
        c.snapshot.on_click(lambda _b: self.snapshot())
        c.upload.observe(self._on_upload, names="value")
        for name in ("out_output_band", "out_input_band", "rf_band"):
            self.chart.sources[name].on_change("data", self._drag_handler(name))

    def _text_handler(self, key: str, path: str) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            text = str(change["new"]).strip()
            if text == "" and key in ("rf_step", "lo_step", "lo_fixed"):
                value: Any = None
            else:
                try:
                    value = parse_frequency(text, _TEXT_FIELDS[key][1])
                except MixchartError as exc:
                    self.controls.errors[key].value = self._error(str(exc))
                    return
            error = self.state.try_update({path: value})
            self.controls.errors[key].value = self._error(error or "")
            if error is None:
                self.controls.errors["plan"].value = ""

        return handler

    def _value_handler(self, path: str, error_key: str) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            error = self.state.try_update({path: change["new"]})
            self.controls.errors[error_key].value = self._error(error or "")

        return handler

    def _lo_mode_handler(self, change: dict) -> None:
        """Switch the LO mode both ways: "fixed" takes the current channel's LO as its value,
        "tracking" drops the fixed value and keeps the injection side last used."""
        if self._syncing:
            return
        if change["new"] == "fixed":
            lo_hz = float(self.state.evaluation.lo_hz[self.state.channel_index])
            changes = {"lo.mode": "fixed", "lo.fixed_hz": lo_hz}
        else:
            changes = {"lo.mode": "tracking", "lo.fixed_hz": None}
        error = self.state.try_update(changes)
        self.controls.errors["plan"].value = self._error(error or "")
        if error:
            with self._sync():
                self.controls.lo_mode.value = self.state.plan.lo.mode

    def _interferer_handler(self, change: dict) -> None:
        self._optional_float_handler("signal.interferer_level_dbm", "plan")(change)

    def _optional_float_handler(self, path: str, box: str) -> Callable[[dict], None]:
        """A text field holding a level in dBm, or blank for the model's default (None)."""
        def handler(change: dict) -> None:
            if self._syncing:
                return
            text = str(change["new"]).strip()
            try:
                value = None if text == "" else round(float(text), 2)
            except ValueError:
                self.controls.errors[box].value = self._error(
                    f"{path}: {text!r} is invalid; give a level in dBm, or leave it blank"
                )
                return
            error = self.state.try_update({path: value})
            self.controls.errors[box].value = self._error(error or "")

        return handler

    def _float_handler(self, path: str, digits: int) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            value = round(float(change["new"]), digits)  # sliders drift: 1.9999999999999998
            key = "mixer" if path.startswith("mixer") else "plan"
            error = self.state.try_update({path: value})
            self.controls.errors[key].value = self._error(error or "")

        return handler

    def _filter_defaults(self, name: str, fc: FilterControls) -> None:
        """Fill the empty fields a newly chosen filter kind needs with values derived from the plan.

        The IF filter sits on the IF passband, 1.2 times as wide; a receiver's preselector tracks
        the channel (10 % of the top channel wide); a transmitter's output filter sits on the RF
        band, 1.2 times as wide.  Fields the user filled keep their values.
        """
        plan = self.state.plan
        rf_low = plan.rf.start_hz - plan.signal.bandwidth_hz / 2
        rf_high = plan.rf.stop_hz + plan.signal.bandwidth_hz / 2
        if name == "if":
            centre, width = format_frequency(plan.if_.center_hz), 1.2 * plan.if_.bandwidth_hz
        elif plan.direction == "down":
            centre, width = "track", 0.1 * plan.rf.stop_hz
        else:
            centre, width = format_frequency(0.5 * (rf_low + rf_high)), 1.2 * (rf_high - rf_low)
        with self._sync():
            if not fc.centre.value.strip():
                fc.centre.value = centre
            if not fc.bandwidth.value.strip():
                fc.bandwidth.value = format_frequency(width)

    def _filter_handler(self, name: str, fc: FilterControls) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            if change.get("owner") is fc.kind and change["new"] not in ("none", "custom"):
                self._filter_defaults(name, fc)
            spec = _filter_spec_from_controls(fc, tracking_allowed=(name == "rf"))
            if spec == "custom":
                return
            self._apply_filter(name, fc, spec)

        return handler

    def _filter_json_handler(self, name: str, fc: FilterControls) -> Callable[[dict], None]:
        def handler(change: dict) -> None:
            if self._syncing:
                return
            import json

            text = str(change["new"]).strip()
            if not text or text == "null":
                self._apply_filter(name, fc, None)
                return
            try:
                spec = json.loads(text)
            except json.JSONDecodeError as exc:
                fc.error.value = self._error(f"filters.{name}: malformed JSON ({exc.msg} at column {exc.colno})")
                return
            self._apply_filter(name, fc, spec)

        return handler

    def _apply_filter(self, name: str, fc: FilterControls, spec: dict[str, Any] | None) -> None:
        error = self.state.try_update({f"filters.{name}": spec})
        fc.error.value = self._error(error or "")

    def _on_channel(self, change: dict) -> None:
        if self._syncing:
            return
        index = int(change["new"])
        channels = self.state.evaluation.channels_hz
        index = min(max(index, 0), channels.size - 1)
        self.state.set_view(channel_hz=float(channels[index]))

    def _view(self, **changes: Any) -> None:
        if not self._syncing:
            self.state.set_view(**changes)

    def _on_tap(self, event: Any) -> None:
        if event.x is None:
            return
        f_hz = float(event.x) * self._scale("tuning")
        index = self.state.evaluation.nearest_channel(f_hz)
        self.state.set_view(channel_hz=float(self.state.evaluation.channels_hz[index]))

    def _scale(self, plane: str) -> float:
        return self._last_meta["scale"] if plane == "tuning" else self._last_meta["out_scale"]

    def _drag_handler(self, name: str) -> Callable[[str, Any, Any], None]:
        def handler(_attr: str, _old: Any, new: dict[str, Any]) -> None:
            if self._syncing:
                return  # our own push into the source
            self.chart.last.pop(name, None)  # the browser changed it: our copy is stale
            keys = ("y0", "y1") if name == "out_output_band" else ("x0", "x1")
            try:
                low, high = float(new[keys[0]][-1]), float(new[keys[1]][-1])
            except (KeyError, IndexError, TypeError, ValueError):
                return
            scale = self._last_meta["source_scales"][name]  # Hz per unit of this band's own axis
            down = self.state.plan.direction == "down"
            if name == "rf_band":
                band = "rf"
            elif name == "out_output_band":
                band = "if" if down else "rf"
            else:
                band = "rf" if down else "if"
            error = self.state.apply_band_drag(band, low * scale, high * scale)
            self.controls.errors["plan"].value = self._error(error or "")
            if error is not None:
                self._refresh_chart()  # put the band back where the plan has it

        return handler

    def _on_upload(self, change: dict) -> None:
        value = change["new"]
        if not value:
            return
        item = value[0] if isinstance(value, (list, tuple)) else next(iter(value.values()))
        content = item["content"]
        data = bytes(content) if not isinstance(content, bytes) else content
        name = str(item.get("name", "plan.json"))
        self._file_result(self.state.load_text(data, name), f"opened {name}; saves go to {self.state.save_dir}")

    def _history_result(self, error: str | None) -> None:
        self.controls.errors["plan"].value = self._error(error or "")

    def _load_file(self, path: str) -> None:
        error = self.state.load_path(path)
        self._file_result(error, f"loaded {self.state.save_dir / self.state.file_name}")

    def _file_result(self, error: str | None, done: str) -> None:
        if error is None:
            with self._sync():
                self.controls.save_path.value = self.state.file_name  # the file-name field follows the plan
        self.controls.file_msg.value = self._error(error) if error else html.escape(done)

    def _on_ref_pick(self, change: dict) -> None:
        if not self._syncing and change["new"] in self.state.references:
            self.state.select_reference(change["new"])
