"""The state to the screen: the refresh half of :class:`mixchart.app.PlannerApp`.

:class:`RefreshMixin` shows a state change in the chart sources, the tables, the banner
and the widgets (without firing their handlers: :meth:`RefreshMixin._sync`), and marks
the charts and the banner stale while an entry is invalid.  It uses the attributes
:meth:`PlannerApp.__init__ <mixchart.app.PlannerApp>` sets.
"""

from __future__ import annotations

import html
from collections.abc import Iterator
from contextlib import contextmanager

from .app_compare import compare_html
from .app_controls import _TEXT_FIELDS, _freq_text, _plan_value, _show_filter
from .app_html import _channel_table_html, _summary_html, _table_html, _warnings_html
from .app_mixer import show_summary, sync_circuit_controls, update_level_map
from .chart import chart_data, update_chart
from .state import PlanState
from .units import format_frequency

__all__ = ["RefreshMixin"]


class RefreshMixin:
    """The refresh methods of :class:`mixchart.app.PlannerApp` (state to chart, tables, banner, widgets)."""

    #: The mark the banner and both chart titles carry while a field holds an invalid entry.
    STALE_MARK = "showing the last valid plan: an entry is invalid"

    def _mark_stale(self) -> None:
        """While any field holds an invalid entry, say on the banner and on the charts that they show
        the last valid plan; clear the mark when every entry is valid again."""
        self._mark_titles_stale()
        self._mark_banner_stale()

    def _stale(self) -> bool:
        return any(box.value for box in self.controls.errors.values())

    def _mark_titles_stale(self) -> None:
        stale, mark = self._stale(), f" — {self.STALE_MARK}"
        for title in (self.chart.tuning.title, self.chart.output.title):
            base = title.text.split(mark)[0]
            text = base + mark if stale else base
            if title.text != text:
                with self.bokeh.batch():
                    title.text = text

    def _mark_banner_stale(self) -> None:
        stale = self._stale()
        status = self.status.value.split("<div class='mixchart-stale'")[0]
        if stale:
            status += (f"<div class='mixchart-stale' style='color:#8A5A00;font-weight:bold'>&#9888; "
                       f"{html.escape(self.STALE_MARK)} (see the message under it)</div>")
        self.status.value = status

    def _on_state(self, state: PlanState, what: str) -> None:
        if what == "plan":
            self._refresh_all()
        elif what == "view":
            self._refresh_chart()
        elif what == "reference":
            self._refresh_reference()

    @contextmanager
    def _sync(self) -> Iterator[None]:
        self._syncing, old = True, self._syncing
        try:
            yield
        finally:
            self._syncing = old

    def _refresh_chart(self) -> None:
        data = chart_data(self.state.evaluation, self.state.view)
        self._last_meta = data.meta
        with self._sync(), self.bokeh.batch():
            update_chart(self.chart, data)
            self._mark_titles_stale()  # the titles were just reset from the data
        if self.state.reference is not None:  # the reference follows the channel (and, by its panel, the zoom)
            self.reference_panel.show(self.state.reference[1], self.state.view, data.meta)
            if self.reference_box.children:
                self.reference_box.children[0].value = self._reference_label()
        ev = self.state.evaluation
        i = data.meta["channel_index"]
        with self._sync():
            self.controls.channel.value = i
        margin = ev.worst_margin_db[i]
        self.channel_table.value = _channel_table_html(ev, i)
        self.controls.channel_text.value = (
            f"<span class='mixchart-channel-text'>channel {html.escape(format_frequency(ev.channels_hz[i]))}, "
            f"LO {html.escape(format_frequency(ev.lo_hz[i]))}, worst margin {margin:+.1f} dB</span>"
        )

    def _refresh_all(self) -> None:
        ev = self.state.evaluation
        # the chart first: its one message leaves before the tables are made, and the page applies it
        # before the HTML updates that follow (which restyle the page and would delay the repaint)
        self._refresh_chart()
        self.status.value = _summary_html("Plan", ev)
        self._mark_banner_stale()  # the banner was just reset from the plan
        self.warnings.value = _warnings_html(ev)
        self.controls.undo.disabled = not self.state.can_undo
        self.controls.redo.disabled = not self.state.can_redo
        self.table.value = _table_html(ev)
        self._sync_widgets()
        with self.level_map_widget.batch():
            update_level_map(self.level_map, ev.level_table, self.state.plan.max_order)
        sync_circuit_controls(self.circuit, self.state.plan)
        show_summary(self.circuit, self.state)
        self._refresh_compare()

    def _refresh_compare(self) -> None:
        self.compare.value = compare_html(self.state.evaluation, self.state.references, self.state.reference_name)

    def _reference_label(self) -> str:
        name, plan = self.state.reference_name or "", self.state.reference[0]
        return (f"<b>Reference \u201c{html.escape(name)}\u201d</b> ({html.escape(plan.name)}): "
                f"{html.escape(self.reference_panel.note())}")

    def _refresh_reference(self) -> None:
        c, state = self.controls, self.state
        with self._sync():
            c.ref_pick.options = list(state.references)
            c.ref_pick.value = state.reference_name
            c.ref_pick.disabled = c.clear_ref.disabled = not state.references
            c.ref_name.value = ""
        ref = state.reference
        if ref is None:
            self.reference_box.children = ()
        else:
            import ipywidgets as w

            self.reference_panel.show(ref[1], state.view, self._last_meta)
            label = w.HTML(f"<b>Reference “{html.escape(state.reference_name or '')}”</b> "
                           f"({html.escape(ref[0].name)}): {html.escape(self.reference_panel.note())}")
            label.add_class("mixchart-reference-label")
            table = w.HTML(_table_html(ref[1], caption="Reference: worst case of each product"),
                           layout=w.Layout(margin="0 0 0 16px"))
            table.add_class("mixchart-reference-table")
            body = w.HBox([self.reference_panel.widget, table], layout=w.Layout(flex_flow="row wrap"))
            self.reference_box.children = (label, body)
        self._refresh_compare()

    def _sync_widgets(self) -> None:
        """Show the current plan in the widgets without firing their handlers."""
        plan, c = self.state.plan, self.controls
        with self._sync():
            c.direction.value = plan.direction
            c.lo_mode.value = plan.lo.mode
            c.side.value = plan.lo.side
            for key, (path, _label) in _TEXT_FIELDS.items():
                c.__dict__[key].value = _freq_text(_plan_value(plan, path))
            c.lo_fixed.disabled = plan.lo.mode != "fixed"
            c.side.disabled = plan.lo.mode != "tracking"
            c.sig_level.value = plan.signal.level_dbm
            c.max_order.value = plan.max_order
            c.requirement.value = plan.requirement.min_rejection_db
            level = plan.signal.interferer_level_dbm
            c.interferer.value = "" if level is None else f"{level:g}"
            c.name.value = plan.name
            c.notes.value = plan.notes
            c.topology.value = plan.mixer.topology
            c.balance.value = plan.mixer.balance_db
            c.table_path.value = plan.mixer.table
            c.rf_ref.value = "" if plan.mixer.rf_ref_dbm is None else f"{plan.mixer.rf_ref_dbm:g}"
            c.lo_drive.value = plan.mixer.lo_drive_dbm
            c.orders_shown.max = plan.max_order
            c.orders_shown.value = min(self.state.view.max_order_shown or plan.max_order, plan.max_order)
            c.channel.max = max(self.state.evaluation.channels_hz.size - 1, 0)
            c.rf_filter.kind.description = "preselector" if plan.direction == "down" else "output filter"
            for fc, spec in ((c.rf_filter, plan.filters.rf), (c.if_filter, plan.filters.if_)):
                _show_filter(fc, spec)
