"""The planner for a chain of stages: the frequency-plan diagram, the end-to-end plane, each mixer's planes.

``planner("chain.json")`` on a plan of several stages shows:

* the verdict and the stage that limits it, and every warning;
* the chain as a row of blocks, each node between them labelled with the wanted signal's
  frequency range, its spectral sense and its level; clicking a mixer shows that stage below;
* the end-to-end plane: chain input frequency across, chain output frequency up; the wanted
  signal (blue), the final passband (green) and every path within 10 dB of its limit at any
  channel, coloured by its worst margin, named on hover;
* the chosen mixer's tuning plane and output plane, as for one conversion (the full
  single-conversion planner on that mixer's view, :func:`mixchart.models.stage_view.stage_plan`):
  dragging its IF band, or any other edit there, re-plans the chain, and a later mixer whose LO
  tracks follows;
* the worst paths, each with its stage and path.

No physics here: the chain analysis is :func:`mixchart.chains.analyse_chain`.
"""

from __future__ import annotations

import html
from pathlib import Path
from typing import Any

import numpy as np

from .chains import analyse_chain
from .chains.setup import set_up
from .chains.stage_view import apply_stage_plan, mixer_indices, stage_plan
from .chart_style import CLOSE_DB, PALETTE, VERDICT_COLOURS
from .errors import MixchartError
from .models.chain import ChainPlan, stage_names
from .units import format_frequency

__all__ = ["ChainPlanner", "end_to_end_figure", "diagram_html", "paths_html"]

_CSS = """<style>
.mc-chain{display:flex;flex-wrap:wrap;align-items:center;gap:2px;font:13px sans-serif}
.mc-node{color:#333;padding:0 4px;text-align:center;font-size:12px;line-height:1.25}
.mc-block{border:1.5px solid #1A1A1A;border-radius:3px;padding:6px 8px;background:#fff;font-weight:600}
.mc-arrow{color:#1A1A1A}
.mc-paths td,.mc-paths th{padding:1px 6px;text-align:left;font:12px sans-serif;white-space:nowrap}
</style>"""


def _span(low: float, high: float) -> str:
    if abs(high - low) <= 1e-9 * max(abs(high), 1.0):
        return format_frequency(low, 6)
    return f"{format_frequency(low, 6)} to {format_frequency(high, 6)}"


def node_label(row) -> str:
    """A node's label: the wanted signal's range, sense and level (HTML, escaped)."""
    sense = {"normal": "normal sense", "inverted": "inverted", "mixed": "sense mixed"}[row.sense]
    lo = "" if row.lo_low_hz != row.lo_low_hz else f"<br>LO {html.escape(_span(row.lo_low_hz, row.lo_high_hz))}"
    return (f'<div class="mc-node">{html.escape(_span(row.f_low_hz, row.f_high_hz))}<br>{sense}, '
            f"{row.level_dbm:.1f} dBm{lo}</div>")


def diagram_html(result) -> list[str]:
    """HTML pieces of the diagram: node, block, node, block, ... (mixer blocks are buttons, made by the app)."""
    nodes = list(result.nodes.itertuples(index=False))
    return [node_label(row) for row in nodes]


def _colour(margin: float) -> str:
    return PALETTE["violates"] if margin < 0 else PALETTE["close"] if margin < CLOSE_DB else PALETTE["clear"]


def paths_html(result, top: int = 20) -> str:
    """The worst paths as an HTML table (every text escaped)."""
    rows = []
    for row in result.paths.head(top).itertuples(index=False):
        rej = f"{row.rejection_db:.1f}" if row.kind == "response" else ""
        rows.append(
            f'<tr><td style="color:{_colour(row.margin_db)};font-weight:600">{row.margin_db:+.1f}</td>'
            f"<td>{html.escape(row.kind)}</td><td>{html.escape(row.stage)}</td>"
            f"<td>{html.escape(format_frequency(row.channel_hz, 7))}</td>"
            f"<td>{html.escape(_span(row.f_low_hz, row.f_high_hz))}</td><td>{row.level_dbc:.1f}</td><td>{rej}</td>"
            f"<td>{html.escape(row.limit)}</td><td>{html.escape(row.path)}</td></tr>")
    head = ("<tr><th>margin dB</th><th>kind</th><th>stage</th><th>channel</th><th>band</th><th>level dBc</th>"
            "<th>rej. dB</th><th>limit</th><th>path</th></tr>")
    return f'<table class="mc-paths">{head}{"".join(rows)}</table>'


def banner_html(result) -> str:
    """The verdict line, with the limiting stage, and the warnings (escaped)."""
    s = result.summary
    verdict = "PASS" if s.worst_margin_db >= 0 else "FAIL"
    warnings = "".join(f"<li>{html.escape(str(w))}</li>" for w in result.warnings)
    return (f'<div style="font:15px sans-serif"><b style="color:{VERDICT_COLOURS[verdict]}">{verdict}</b> '
            f"{html.escape(s.line()[len(verdict) + 1:])}</div>"
            f'<ul style="font:12px sans-serif;margin:2px 0">{warnings}</ul>'
            '<div style="font:11px sans-serif;color:#555">Levels are estimates from the stage models; emission '
            "limits are set by local rules and licensed practice: check against them.</div>")


#: Most paths the end-to-end plane draws at one channel (the worst ones).
MAX_PLANE_PATHS = 80


def end_to_end_data(result, index: int) -> dict[str, dict[str, list]]:
    """Plain columns of the end-to-end plane at channel ``index`` (MHz), from the result alone.

    Input frequency across, output frequency up, at that channel's LOs.  Each path within
    :data:`~mixchart.chart_style.CLOSE_DB` of its limit (the worst :data:`MAX_PLANE_PATHS`) is the
    line ``y = y0 + S·(x - x0)`` through its point (``x_hz``, ``y_hz``) with its slope ``S``
    (``freq_slope``), clipped to the plane: it crosses the final passband at the input that the
    path hears (a response), and the wanted input's band at the output it makes (a product).
    """
    ch = float(result.channels_hz[index])
    out = float(result.channels["f_out_hz"].iloc[index])
    half = 0.5 * float(result.plan.signal.bandwidth_hz)
    frame = result.channel_frame(index)
    near = frame[frame["margin_db"] < CLOSE_DB].head(MAX_PLANE_PATHS)
    band_low, band_high = float(result.pass_low_hz[index]), float(result.pass_high_hz[index])
    width = max(band_high - band_low, 2 * half)
    y_lo, y_hi = band_low - 3 * width, band_high + 3 * width
    xs_all = [ch - half, ch + half] + [float(x) for x in near["x_hz"]]
    x_lo, x_hi = min(xs_all), max(xs_all)
    pad = 0.05 * max(x_hi - x_lo, 20 * width)
    x_lo, x_hi = max(x_lo - pad, 0.0), x_hi + pad
    xs, ys, colours, names, margins = [], [], [], [], []
    for row in near.itertuples(index=False):
        if row.freq_slope == 0:
            if not y_lo <= row.y_hz <= y_hi:
                continue
            seg_x, seg_y = [x_lo, x_hi], [row.y_hz, row.y_hz]
        else:
            seg_y = [y_lo, y_hi]
            seg_x = [row.x_hz + (y - row.y_hz) / row.freq_slope for y in seg_y]
        xs.append([x / 1e6 for x in seg_x])
        ys.append([y / 1e6 for y in seg_y])
        colours.append(_colour(row.margin_db))
        names.append(f"{row.kind}: {row.path}")
        margins.append(float(row.margin_db))
    order = np.argsort(margins)[::-1]  # the worst drawn last, on top
    pick = lambda seq: [seq[i] for i in order]  # noqa: E731
    sense = -1.0 if bool(result.channels["inverted"].iloc[index]) else 1.0
    wanted_x = [ch + (y - out) * sense for y in (y_lo, y_hi)]
    return {
        "wanted": {"x": [x / 1e6 for x in wanted_x], "y": [y_lo / 1e6, y_hi / 1e6]},
        "passband": {"x": [x_lo / 1e6, x_hi / 1e6], "low": [band_low / 1e6] * 2, "high": [band_high / 1e6] * 2},
        "channel": {"left": [(ch - half) / 1e6], "right": [(ch + half) / 1e6], "bottom": [y_lo / 1e6],
                    "top": [y_hi / 1e6]},
        "tracks": {"xs": pick(xs), "ys": pick(ys), "colour": pick(colours), "path": pick(names),
                   "margin_db": pick(margins)},
    }


def end_to_end_figure(result, index: int, *, width: int = 760, height: int = 380):
    """The end-to-end plane (Bokeh): built once; :func:`update_end_to_end` assigns new data."""
    from bokeh.models import ColumnDataSource, HoverTool
    from bokeh.plotting import figure

    data = end_to_end_data(result, index)
    fig = figure(width=width, height=height, title=_plane_title(result, index),
                 x_axis_label="chain input, MHz", y_axis_label="chain output, MHz", tools="pan,box_zoom,reset",
                 sizing_mode="stretch_width", name="end_to_end")
    sources = {name: ColumnDataSource(cols, name=f"e2e_{name}") for name, cols in data.items()}
    fig.varea(x="x", y1="low", y2="high", source=sources["passband"], fill_color=PALETTE["filter"], fill_alpha=0.25,
              legend_label="final passband")
    fig.quad(left="left", right="right", bottom="bottom", top="top", source=sources["channel"],
             fill_color=PALETTE["wanted"], fill_alpha=0.12, line_alpha=0, legend_label="wanted input")
    lines = fig.multi_line(xs="xs", ys="ys", line_color="colour", line_width=2.5, source=sources["tracks"])
    fig.line(x="x", y="y", source=sources["wanted"], line_color=PALETTE["wanted"], line_width=3,
             legend_label="wanted path")
    tips = [("path", "@path"), ("margin", "@margin_db{+0.0} dB")]
    fig.add_tools(HoverTool(renderers=[lines], tooltips=tips, line_policy="interp"))
    fig.legend.location = "top_left"
    fig.legend.label_text_font_size = "11px"
    return fig, sources


def _plane_title(result, index: int) -> str:
    return (f"End to end at channel {format_frequency(float(result.channels_hz[index]))}: input across, output up; "
            f"every path within {CLOSE_DB:g} dB of its limit")


def update_end_to_end(fig, sources, result, index: int) -> None:
    """Assign the plane's columns of a new result or channel (the figure is never rebuilt)."""
    for name, cols in end_to_end_data(result, index).items():
        sources[name].data = cols
    fig.title.text = _plane_title(result, index)


class ChainPlanner:
    """The planner of a chain plan (see the module docstring).

    Parameters
    ----------
    plan : ChainPlan
    base_dir : path-like, optional
        Folder for the plan's relative file paths.
    chart_width : int
        Width of each of the chosen mixer's planes, pixels.
    """

    def __init__(self, plan: ChainPlan, base_dir: str | Path | None = None, *, chart_width: int = 600,
                 file_path: str | Path | None = None) -> None:
        import ipywidgets as w

        from .widget import BatchedBokehModel

        self.plan, self.base_dir, self.chart_width = plan, base_dir, chart_width
        # the chain is saved where it was opened from, else in the working directory
        target = Path(file_path) if file_path is not None else Path.cwd() / "chain.json"
        self.save_path = w.Text(value=str(target), description="save as", layout=w.Layout(width="640px"))
        self.save_button = w.Button(description="Save the chain", icon="save")
        self.save_message = w.HTML()
        self.save_button.on_click(lambda _b: self.save())
        self.result = analyse_chain(plan, base_dir=base_dir)
        self.banner = w.HTML()
        self.message = w.HTML()
        self.diagram = w.HBox(layout=w.Layout(flex_flow="row wrap", align_items="center"))
        n = self.result.channels_hz.size
        self.channel = int(np.argmin(self.result.worst_margin_db)) if n else 0
        self.channel_slider = w.IntSlider(value=self.channel, min=0, max=max(n - 1, 0), description="channel",
                                          continuous_update=False, readout=False)
        self.channel_label = w.Label()
        self.channel_slider.observe(self._on_channel, names="value")
        self.figure, self.sources = end_to_end_figure(self.result, self.channel)
        self.plane = BatchedBokehModel(self.figure)
        self.stage_title = w.HTML()
        self.stage_box = w.VBox()
        self.table = w.HTML()
        self.selected = mixer_indices(plan)[0]
        self.stage_app = None
        self.widget = w.VBox([w.HTML(_CSS), self.banner, self.message,
                              w.HBox([self.save_path, self.save_button]), self.save_message, self.diagram,
                              w.HBox([self.channel_slider, self.channel_label]), self.plane, self.stage_title,
                              self.stage_box, w.HTML("<b>Worst paths</b>"), self.table])
        self.widget.add_class("mixchart-chain")
        self.diagram.add_class("mixchart-chain-diagram")
        self.table.add_class("mixchart-chain-paths")
        self._show()
        self.select(self.selected)

    # -------------------------------------------------------------- screen
    def _show(self) -> None:
        import ipywidgets as w

        self.banner.value = banner_html(self.result)
        names = stage_names(self.plan)
        pieces = diagram_html(self.result)
        children = [w.HTML(pieces[0])]
        for i, spec in enumerate(self.plan.chain):
            children.append(w.HTML('<span class="mc-arrow">&#8594;</span>'))
            if spec.kind == "mixer":
                button = w.Button(description=names[i], tooltip=f"show {names[i]}'s planes",
                                  button_style="info" if i == self.selected else "",
                                  layout=w.Layout(width="auto"))
                button.on_click(lambda _b, i=i: self.select(i))
                children.append(button)
            else:
                children.append(w.HTML(f'<div class="mc-block">{html.escape(names[i])}</div>'))
            children.append(w.HTML('<span class="mc-arrow">&#8594;</span>'))
            children.append(w.HTML(pieces[i + 1]))
        self.diagram.children = children
        self.channel = min(self.channel, self.result.channels_hz.size - 1)
        self.channel_label.value = format_frequency(float(self.result.channels_hz[self.channel]))
        update_end_to_end(self.figure, self.sources, self.result, self.channel)
        self.table.value = paths_html(self.result)

    def _on_channel(self, change: dict) -> None:
        self.channel = int(change["new"])
        self.channel_label.value = format_frequency(float(self.result.channels_hz[self.channel]))
        update_end_to_end(self.figure, self.sources, self.result, self.channel)

    def select(self, index: int) -> None:
        """Show mixer ``index``'s planes (the single-conversion planner on its view)."""
        import ipywidgets as w

        from .app import PlannerApp
        from .state import PlanState

        self.selected = index
        view = stage_plan(set_up(self.plan, self.base_dir), index)
        state = PlanState(view, self.base_dir)
        state.observe(self._stage_changed)
        self.stage_app = PlannerApp(state, chart_width=self.chart_width)
        name = stage_names(self.plan)[index]
        self.stage_title.value = (f"<b>{html.escape(name)}</b> on its own, as one conversion (its verdict below "
                                  "is this stage's alone; the chain's is at the top): drag its IF band to re-plan "
                                  "the chain, and a later mixer whose LO tracks follows")
        # the mixer's own File tab would save its one-conversion view: here the chain is saved above
        tabs = self.stage_app.controls.panel.children[0]
        tabs.children = (*tabs.children[:4], w.HTML("<p>This mixer is a stage of the chain: save the chain with "
                                                    "<b>Save the chain</b> at the top of the page.</p>"))
        tabs.set_title(4, "File")
        self.stage_box.children = (self.stage_app.widget,)
        self._show()

    def save(self) -> Path | None:
        """Save the chain plan (layout version 2) atomically to the path in the field; say where."""
        from .models.loading import save_any

        try:
            path = save_any(self.plan, Path(self.save_path.value).expanduser())
        except MixchartError as exc:
            self.save_message.value = f'<span style="color:{VERDICT_COLOURS["FAIL"]}">{html.escape(str(exc))}</span>'
            return None
        self.save_message.value = f"saved {html.escape(str(path.resolve()))}"
        return path

    def _stage_changed(self, state: Any, what: str) -> None:
        if what != "plan":
            return
        try:
            plan = apply_stage_plan(self.plan, self.selected, state.plan)
            result = analyse_chain(plan, base_dir=self.base_dir)
        except MixchartError as exc:
            self.message.value = (f'<div style="color:{VERDICT_COLOURS["FAIL"]};font:13px sans-serif">'
                                  f"{html.escape(str(exc))} (the chain keeps its last valid plan)</div>")
            return
        self.message.value = ""
        self.plan, self.result = plan, result
        self._show()


def chain_planner(plan: ChainPlan, base_dir: str | Path | None = None, *, chart_width: int = 600,
                  file_path: str | Path | None = None) -> Any:
    """The chain planner's widget, carrying BokehJS with every display (see :func:`mixchart.app.planner`)."""
    from .notebook_js import show_with_bokehjs

    app = ChainPlanner(plan, base_dir, chart_width=chart_width, file_path=file_path)
    app.widget.app = app
    return show_with_bokehjs(app.widget)
