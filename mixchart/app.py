"""The planning app: ipywidgets controls around the chart, in Jupyter or Voila.

Three parts, kept apart so the logic is testable without a browser:

:class:`~mixchart.state.PlanState` (in :mod:`mixchart.state`)
    The state: the plan being edited, an optional reference plan, the view
    options and the current evaluation.  It validates every change (a bad
    change leaves the last valid plan in place and returns the message), and
    tells its listeners what changed.  No widgets.
:func:`build_controls` (in :mod:`mixchart.app_controls`)
    A pure function from a plan to the widgets (a :class:`Controls` bundle).
:class:`PlannerApp`
    The wiring: widget events go to the state (:mod:`mixchart.app_events`); state
    changes go to the chart sources, the table, the status line and the widgets
    (:mod:`mixchart.app_refresh`, with the HTML of :mod:`mixchart.app_html`).
    Dragging the bands in the chart edits the plan on mouse release.

``planner(plan)`` in a notebook cell shows the app.
"""

from __future__ import annotations

import html
import os
from pathlib import Path
from typing import Any

from .app_compare import ReferencePanel
from .app_controls import Controls, FilterControls, build_controls  # noqa: F401 (FilterControls re-exported)
from .app_events import EventsMixin
from .app_html import _APP_CSS, _download_html, _download_link, _error_html
from .app_keys import attach_keys
from .app_messages import on_screen, screen_labels
from .app_mixer import circuit_controls, level_table_map, make_circuit_handler
from .app_refresh import RefreshMixin
from .chart import ChartHandle, build_chart, chart_data
from .errors import MixchartError
from .plan import Plan, load_plan
from .state import PlanState, example_plan
from .widget import BatchedBokehModel

__all__ = ["PlanState", "Controls", "build_controls", "PlannerApp", "planner", "example_plan"]


class PlannerApp(EventsMixin, RefreshMixin):
    """Widgets and chart wired to a :class:`PlanState`.

    Parameters
    ----------
    state : PlanState
        The state to show and edit.
    chart_width : int
        Width of each chart plane, screen pixels.

    Attributes
    ----------
    widget : ipywidgets.VBox
        What to display.
    chart : ChartHandle
        The chart of the current plan.
    """

    def __init__(self, state: PlanState, *, chart_width: int = 600) -> None:
        import ipywidgets as w

        self.state = state
        self._syncing = False
        self.chart: ChartHandle = build_chart(chart_data(state.evaluation, state.view), width=chart_width,
                                              height=430, fit_width=True)
        self.controls = build_controls(state.plan, state.evaluation.channels_hz.size)
        self.controls.save_path.value = state.file_name  # the file-name field follows the opened plan
        # the circuit model's fields and the level table's heat map, in the Mixer tab (mixchart.app_mixer)
        self.circuit = circuit_controls(state.plan)
        circuit_handler = make_circuit_handler(state, self.circuit)
        for name in ("model", "is_a", "ideality", "rs_ohm", "mismatch_pct", "lo_amp_db", "lo_phase_deg"):
            getattr(self.circuit, name).observe(circuit_handler, names="value")
        self.level_map = level_table_map(state.evaluation.level_table, state.plan.max_order)
        self.level_map_widget = BatchedBokehModel(self.level_map.figure)
        mixer_tab = self.controls.panel.children[0].children[2]
        mixer_tab.children = (*mixer_tab.children, self.circuit.box, self.level_map_widget)
        from bokeh.events import Tap

        # before the widget is made: the browser learns which UI events to send from its first render
        self.chart.tuning.on_event(Tap, self._on_tap)
        self.chart.margin.on_event(Tap, self._on_tap)  # the margin plot shares the tuning plane's RF axis
        self.key_commands = attach_keys(self.chart.layout, self._on_key)
        self.bokeh = BatchedBokehModel(self.chart.layout)
        # the chart takes the width beside the controls, down to two half-width planes; narrower, it
        # wraps under the controls and takes the whole width there
        self.bokeh.layout.flex = "1 1 0%"
        self.bokeh.layout.min_width = f"{chart_width + 60}px"
        self.bokeh.layout.width = "auto"
        self.status = w.HTML(value="")
        self.status.add_class("mixchart-status")
        self.warnings = w.HTML(value="", layout=w.Layout(max_height="104px", overflow="auto"))
        self.warnings.add_class("mixchart-warnings")
        self.table = w.HTML(value="")
        self.table.add_class("mixchart-worst-table")
        self.channel_table = w.HTML(value="", layout=w.Layout(max_height="360px", overflow="auto"))
        self.channel_table.add_class("mixchart-channel-table")
        self.compare = w.HTML(value="")
        self.compare.add_class("mixchart-compare")
        self.reference_panel = ReferencePanel(self.chart, width=chart_width, height=470)
        self.reference_box = w.VBox([])
        title = w.HTML(
            "<div style='font-size:20px;font-weight:bold'>mixchart frequency planner</div>"
            "<div style='font-size:12px;color:#555'>Levels are model estimates. Emission limits are set by local "
            "rules and licensed practice; check the plan against them.</div>"
        )
        # the verdict and the warnings stay in view while the page scrolls (a sticky banner)
        self.banner = w.VBox([self.status, self.warnings], layout=w.Layout(overflow="visible"))
        self.banner.add_class("mixchart-banner")
        style = w.HTML(_APP_CSS, layout=w.Layout(height="0px", overflow="hidden", margin="0"))
        self.widget = w.VBox(
            [
                style,
                title,
                self.banner,
                # wraps the chart below the controls on narrow screens instead of cutting it off
                w.HBox([self.controls.panel, self.bokeh], layout=w.Layout(flex_flow="row wrap")),
                self.compare,
                self.reference_box,
                self.table,
                self.channel_table,
            ]
        )
        self.widget.layout.overflow = "visible"  # so the banner sticks to the page's scrolling, not the box's
        self.widget.add_class("mixchart-app")
        self._wire()
        for box in self.controls.errors.values():
            box.observe(lambda _change: self._mark_stale(), names="value")
        state.observe(self._on_state)
        self._refresh_all()

    def _on_key(self, command: str) -> None:
        """Ctrl+Z / Ctrl+Shift+Z from the page: as the Undo and Redo buttons."""
        self._history_result(self.state.undo() if command == "undo" else self.state.redo())

    def _error(self, text: str) -> str:
        """A message as HTML, led by the on-screen label of the field it names."""
        return _error_html(on_screen(text, screen_labels(self.controls)) if text else "")

    # ------------------------------------------------------------ actions
    def save(self, path: str | None = None) -> Path | None:
        """Save the plan atomically next to the opened plan (or in the working directory) and offer it
        as a download; a relative ``path`` is taken in that folder, an absolute one as given."""
        try:
            written = self.state.save(path or self.controls.save_path.value.strip() or None)
        except (MixchartError, OSError) as exc:
            self.controls.file_msg.value = self._error(f"save: {exc}")
            return None
        self.controls.file_msg.value = (
            f"saved <code class='mixchart-saved-path'>{html.escape(str(written))}</code><br>"
            + _download_html(self.state.plan, written.name)
        )
        return written

    def snapshot(self, path: str | None = None) -> Path | None:
        """Write a standalone HTML snapshot beside where the plan is saved, and offer it as a download."""
        from .report import write_report

        name = Path(path or self.controls.save_path.value.strip() or self.state.file_name)
        target = self.state.resolve(name if name.suffix.lower() == ".html" else name.with_suffix(".html"))
        ref = self.state.reference
        try:
            written = write_report(
                self.state.plan, target, base_dir=self.state.base_dir, evaluation=self.state.evaluation,
                view=self.state.view, reference=ref,
            )
            data = written.read_bytes()
        except (MixchartError, OSError) as exc:
            self.controls.file_msg.value = self._error(f"snapshot: {exc}")
            return None
        self.controls.file_msg.value = (
            f"wrote <code class='mixchart-saved-path'>{html.escape(str(written))}</code><br>"
            + _download_link(data, written.name, "text/html")
        )
        return written


# =================================================================== entry


def planner(plan: Plan | str | os.PathLike[str] | None = None, *, chart_width: int = 600) -> Any:
    """Show the planning app in a notebook: ``planner("my_plan.json")``.

    Parameters
    ----------
    plan : Plan, path-like or None
        A plan, a plan file, or None for the built-in receiver example.
    chart_width : int
        Width of each chart plane, pixels.

    Returns
    -------
    ipywidgets.VBox
        The app widget (displayed when it is the cell's last expression); the
        :class:`PlannerApp` is available as its ``.app`` attribute.  Each display
        of it puts BokehJS, inline, in an output just before the app (the page
        loads it once; see :mod:`mixchart.notebook_js`); a Voila page's title
        follows the plan's name.
    """
    if plan is not None and not isinstance(plan, Plan):
        from .models import load_any
        from .models.chain import ChainPlan

        path = Path(plan).resolve()
        loaded_any = plan if isinstance(plan, ChainPlan) else load_any(path)
        if isinstance(loaded_any, ChainPlan):  # a chain file stays a chain (and is saved as one)
            from .app_chain import chain_planner

            folder = None if isinstance(plan, ChainPlan) else path.parent
            return chain_planner(loaded_any, folder, chart_width=chart_width,
                                 file_path=None if isinstance(plan, ChainPlan) else path)
    if plan is None:
        loaded, folder = example_plan()
        state = PlanState(loaded, folder, file_name="fm_receiver.json")  # saved to the working directory
    elif isinstance(plan, Plan):
        state = PlanState(plan, None)
    else:
        path = Path(plan).resolve()
        state = PlanState(load_plan(path), path.parent, save_dir=path.parent, file_name=path.name)
    from .notebook_js import show_with_bokehjs, title_follows_plan

    app = PlannerApp(state, chart_width=chart_width)
    title_follows_plan(app)  # the tab title of a Voila page
    app.widget.app = app
    # Each display of the app brings BokehJS to the page in an output of its own, just before the app.
    return show_with_bokehjs(app.widget)
