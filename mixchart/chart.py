"""The planning chart: a tuning plane and an output plane, in Bokeh.

Layout follows Bokeh's own app pattern: data, plot, (widgets and callbacks in
:mod:`mixchart.app`), layout.  :func:`chart_data` is a pure function from an
:class:`~mixchart.analysis.Evaluation` to plain column dicts, one per named
``ColumnDataSource``; :func:`build_chart` builds the figures once around those
sources; :func:`update_chart` only assigns ``source.data`` (and axis labels and
ranges when the plotted window really changes).  :func:`chart_data` and
:class:`ViewOptions` live in :mod:`mixchart.chart_data` (its layers' helpers in
:mod:`mixchart.chart_layers`) and are imported from here as before; this module
builds and updates the Bokeh figures.

Tuning plane
    RF frequency across, LO frequency up.  Every (m, n) product that lands in
    the IF passband is a strip; the plan (the LO for each channel) is drawn on
    top, so a crossing of the plan with a strip is a spur hit.  The current
    channel is marked, with its spurious responses (receiver) or output
    products (transmitter) along its LO line.
Output plane
    Input frequency across, output frequency up, for the current channel's LO;
    every product is a line ``|m·x ± n·f_LO|``.  The output passband is a
    horizontal band, the input band a vertical band; lines crossing their
    intersection are in-band products.  The output axis centres on the output
    passband and what lands near it (:func:`mixchart.chart_axes.output_axis_window`).
    It can be normalised (divided by LO).

Each axis has its own engineering unit, chosen from its own window and named in its
label (:mod:`mixchart.chart_axes`); ``meta["scales"]`` holds the Hz per display unit
of each, and ``meta["source_scales"]`` that of each draggable band's source.

Colour follows level against the requirement, one colour for one meaning
(:mod:`mixchart.chart_style`): vermillion violates, orange is within
:data:`CLOSE_DB` of it, grey is clear; the wanted conversion is blue.  Filter
responses shade the axes green, strongest in the passband, fading through the skirts
to nothing where the filter alone meets the requirement.  Strips are hatched and lines
opaque, drawn worst on top, so nothing blends into a colour the legend lacks.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .chart_bands import band_box, set_band
from .chart_data import ChartData, ViewOptions, chart_data
from .chart_layers import _NAMED_RESPONSES, _named_responses, _skirt  # noqa: F401 (imported from here by the tests)
from .chart_style import (
    CATEGORIES,
    CLOSE_DB,
    DRAW_ORDER,
    HATCH_SCALE,
    PALETTE,
    STRIP_HATCH,
    STRIP_LINE_WIDTH,
    legend_html,
)

__all__ = [
    "CLOSE_DB",
    "CATEGORIES",
    "PALETTE",
    "ViewOptions",
    "ChartData",
    "ChartHandle",
    "chart_data",
    "build_chart",
    "update_chart",
    "legend_html",
]

#: Room left of each plot's frame, px: wide enough for the y axis's tick labels and title, so the
#: frames keep their place (and the margin plot lines up with the tuning plane above it) when
#: the labels change.
_LEFT_BORDER_PX = 78


@dataclass
class ChartHandle:
    """The built chart: its layout, figures and named sources.

    Attributes
    ----------
    layout : bokeh.models.LayoutDOM
        What to show.
    tuning, output : bokeh.plotting.figure
        The two planes (named ``"tuning_plane"`` and ``"output_plane"``).
    margin : bokeh.plotting.figure
        Worst margin against channel (``"margin_plot"``), sharing the tuning plane's RF axis.
    sources : dict of str to ColumnDataSource
        Every source by name; updates assign ``.data``.
    bands : dict of str to BoxAnnotation
        The draggable bands by their source's name (``rf_band``, ``out_output_band``,
        ``out_input_band``); see :mod:`mixchart.chart_bands`.
    windows : dict
        The windows last applied to the ranges.
    legend : bokeh.models.Div
        The legend (``"chart_legend"``); its text follows the plan's direction.
    margin_hover : bokeh.models.HoverTool
        The margin plot's hover (its channel reads in the RF axis's unit).
    """

    layout: Any
    tuning: Any
    output: Any
    sources: dict[str, Any]
    bands: dict[str, Any]
    windows: dict[str, tuple[float, ...]] = field(default_factory=dict)
    last: dict[str, dict[str, Any]] = field(default_factory=dict)
    margin: Any = None  # the margin-against-channel plot
    legend: Any = None
    margin_hover: Any = None


_HOVER_POINTS = [
    ("product", "(@m,@n) @label"),
    ("kind", "@kind"),
    ("frequency", "@freq"),
    ("level", "@level_text"),
    ("rejection (input-referred)", "@rejection_text"),
    ("judged against", "@requirement"),
    ("filter loss set by", "@loss_limit"),
    ("margin", "@margin_text"),
]

#: A hover's filter: a row's tooltip is shown only if none of the renderers drawn above it (``above``)
#: is under the pointer too, so one tooltip shows at a time, the topmost thing's.
_ONLY_IF_NOTHING_ABOVE = """
const vars = cb_data.vars;
const plot_view = vars.glyph_view.parent.parent;
const geometry = {type: "point", sx: vars.sx, sy: vars.sy};
for (const renderer of above) {
  const view = plot_view.views.find_one(renderer);
  if (view == null || !renderer.visible) continue;
  const hit = view.hit_test(geometry);
  if (hit != null && !hit.is_empty()) return false;
}
return true;
"""


def _hover(renderer: Any, tooltips: list, above: list) -> Any:
    """One renderer's hover: the topmost row under the pointer only (rows are in draw order), and
    nothing while a renderer in ``above`` (drawn over it) is under the pointer too."""
    from bokeh.models import CustomJS, HoverTool

    filters = {"$index": CustomJS(args={"above": above}, code=_ONLY_IF_NOTHING_ABOVE)} if above else {}
    return HoverTool(renderers=[renderer], tooltips=tooltips, sort_by=[("$index", "descending")], limit=1,
                     filters=filters, description=f"Hover: {renderer.name}")


def _margin_tooltips(unit: str) -> list:
    return [("channel", f"@x{{0.000[000]}} {unit}"), ("worst", "@label"), ("margin", "@margin{+0.0} dB")]


def build_chart(data: ChartData, *, width: int = 640, height: int = 480, prefix: str = "",
                editable: bool = True, fit_width: bool = False) -> ChartHandle:
    """Build the figures once, around named sources filled from ``data``.

    Parameters
    ----------
    data : ChartData
        From :func:`chart_data`.
    width, height : int
        Size of each plane, screen pixels.
    prefix : str
        Put before every figure's and source's Bokeh ``name`` (e.g. ``"reference_"`` for a
        second chart on the same page, so that each name finds one model).
    editable : bool
        Whether the bands can be dragged by their handles (:mod:`mixchart.chart_bands`); False
        for a static snapshot, where nothing would recompute.
    fit_width : bool
        Stretch the planes, the margin plot and the legend to the width the page gives the chart
        (each plane then at least ``width / 2`` wide); else each plane is ``width`` wide.

    Returns
    -------
    ChartHandle
    """
    from bokeh.layouts import column, row
    from bokeh.models import CDSView, ColumnDataSource, Div, GroupFilter, Range1d, Span
    from bokeh.plotting import figure

    src = {name: ColumnDataSource(data=dict(cols), name=prefix + name) for name, cols in data.sources.items()}
    meta = data.meta
    tw, ow = meta["tuning_window"], meta["output_window"]
    ink, green = PALETTE["plan"], PALETTE["filter"]
    shade = {"fill_color": green, "fill_alpha": "alpha", "line_alpha": 0}
    # fitted: every part stretches across what the page gives; the planes share it half and half
    size = {"sizing_mode": "stretch_width", "min_width": width // 2} if fit_width else {}

    def make(name: str, title: str, win: tuple[float, ...]) -> Any:
        fig = figure(
            name=name,
            title=title,
            width=width,
            height=height,
            **size,
            x_range=Range1d(win[0], win[1]),
            y_range=Range1d(win[2], win[3]),
            min_border_left=_LEFT_BORDER_PX,
            tools="pan,wheel_zoom,box_zoom,reset,save",
            active_drag="pan",  # a drag on the plot pans; the bands move only by their handles
            active_scroll=None,  # the wheel scrolls the page until the user picks wheel-zoom
            toolbar_location="right",  # leaves the title the full width
            background_fill_color=PALETTE["background"],
            border_fill_color=PALETTE["background"],
            output_backend="canvas",
        )
        fig.title.text_font_size = "12pt"  # a half-width plane still shows the whole title
        for axis in (fig.xaxis, fig.yaxis):
            axis.axis_label_text_font_size = "13pt"
            axis.major_label_text_font_size = "11pt"
            axis.axis_label_text_font_style = "normal"
        fig.grid.grid_line_color = PALETTE["grid"]
        return fig

    tuning = make(prefix + "tuning_plane", meta["tuning_title"], tw)
    tuning.xaxis.axis_label = meta["tuning_x_label"]
    tuning.yaxis.axis_label = meta["tuning_y_label"]
    # shading first, then the band, the strips, the plan, marks and points on top
    tuning.vstrip(x0="x0", x1="x1", source=src["tuning_skirt"], name="tuning_shading", **shade)
    tuning.patches(xs="xs", ys="ys", source=src["tuning_track"], name="tracking_shading", **shade)
    # one renderer per category, in draw order (the worse on top), each showing its rows of the one
    # source: a hatch given per row makes BokehJS draw a pattern tile for every strip at every
    # update (31 at order 15, some 10 ms a plan change); a hatch per renderer draws four
    strips = [
        tuning.patches(
            xs="xs", ys="ys", source=src["tuning_strips"], view=CDSView(filter=GroupFilter(
                column_name="category", group=cat)), fill_alpha=0, hatch_pattern=STRIP_HATCH[cat][0],
            hatch_color=CATEGORIES[cat][1], hatch_alpha=1.0, hatch_scale=HATCH_SCALE,
            hatch_weight=STRIP_HATCH[cat][1], line_color=CATEGORIES[cat][1], line_width=STRIP_LINE_WIDTH[cat],
            name=f"strips_{cat}",
        )
        for cat in DRAW_ORDER
    ]
    tuning.line(x="x", y="y", source=src["tuning_plan"], line_color=ink, line_width=2.5, name="plan_line")
    marks = tuning.segment(
        x0="x0", y0="y0", x1="x1", y1="y1", source=src["tuning_marks"], line_color="color", line_width=4,
        line_cap="butt", name="channel_marks",
    )
    pts_t = tuning.scatter(
        x="x", y="y", source=src["tuning_points"], size=9, fill_color="color", line_color=ink,
        line_width=0.5, marker="diamond", name="lo_points",
    )
    tuning.scatter(
        x="x", y="y", source=src["tuning_now"], size=16, marker="circle_cross", fill_alpha=0,
        line_color=ink, line_width=2.5, name="current_channel",
    )
    tuning.add_tools(
        _hover(pts_t, _HOVER_POINTS, []),
        _hover(marks, [("channel", "@channel"), ("worst", "@label"), ("margin", "@margin{+0.0} dB")], [pts_t]),
        *(_hover(r, [("product", "@label"), ("table level", "@level{0.0} dBc"),
                     ("worst margin after the filters", "@margin{+0.0} dB")], [*strips[k + 1:], pts_t, marks])
          for k, r in enumerate(strips)),
    )
    bands = {"rf_band": band_box(tuning, src["rf_band"], vertical=True, editable=editable,
                                 name=prefix + "rf_band_box", line_color=ink)}

    output = make(prefix + "output_plane", meta["output_title"], ow)
    output.xaxis.axis_label = meta["output_x_label"]
    output.yaxis.axis_label = meta["output_y_label"]
    output.vstrip(x0="x0", x1="x1", source=src["out_input_skirt"], name="input_skirt", **shade)
    output.hstrip(y0="y0", y1="y1", source=src["out_output_skirt"], name="output_skirt", **shade)
    bands["out_output_band"] = band_box(output, src["out_output_band"], vertical=False, editable=editable,
                                        name=prefix + "output_band_box", line_color=ink)
    bands["out_input_band"] = band_box(output, src["out_input_band"], vertical=True, editable=editable,
                                       name=prefix + "input_band_box", line_color=ink)
    segs = output.segment(
        x0="x0", y0="y0", x1="x1", y1="y1", source=src["out_lines"], line_color="color",
        line_width="width", name="product_lines",
    )
    pts = output.scatter(
        x="x", y="y", source=src["out_points"], size="size", fill_color="color", line_color=ink,
        line_width=0.6, name="product_points",
    )
    off = output.scatter(
        x="x", y="y", source=src["out_offchart"], marker="triangle", angle="angle", size=13,
        fill_color="color", line_color=ink, line_width=0.6, name="offchart_marks",
    )
    output.text(
        x="x", y="y", text="text", source=src["out_offchart"], text_font_size="10px", text_color=ink,
        x_offset="dx", y_offset="dy", text_align="align", text_baseline="baseline", name="offchart_text",
        background_fill_color=PALETTE["background"], background_fill_alpha=1.0, padding=1,
    )  # on white: legible over the bands and lines
    output.add_tools(
        _hover(pts, _HOVER_POINTS, []),
        _hover(off, [("off the chart", "@text")], [pts]),
        _hover(segs, [("product", "@label"), ("table level", "@level{0.0} dBc"),
                      ("worst margin here, after the filters", "@margin{+0.0} dB")], [pts, off]),
    )

    # worst margin against channel, on the tuning plane's RF axis (zooming one zooms both); a click picks
    margin_fig = figure(
        name=prefix + "margin_plot", title="Worst margin against channel (click to pick a channel)", width=2 * width,
        height=190, x_range=tuning.x_range, y_range=Range1d(*meta["margin_y_window"]),
        min_border_left=_LEFT_BORDER_PX, tools="pan,box_zoom,reset,save", toolbar_location="right",
        background_fill_color=PALETTE["background"], border_fill_color=PALETTE["background"],
        output_backend="canvas",
        active_drag=None,  # a click is a tap that picks a channel, not the start of a pan
        **({"sizing_mode": "stretch_width", "min_width": width} if fit_width else {}),
    )
    margin_fig.xaxis.axis_label = meta["tuning_x_label"]
    margin_fig.yaxis.axis_label = "worst margin (dB)"
    margin_fig.grid.grid_line_color = PALETTE["grid"]
    margin_fig.add_layout(Span(location=0.0, dimension="width", line_color=CATEGORIES["violates"][1],
                               line_width=2, line_dash="dashed"))
    margin_fig.add_layout(Span(location=CLOSE_DB, dimension="width", line_color=CATEGORIES["close"][1],
                               line_width=1, line_dash="dotted"))
    margin_fig.line(x="x", y="y", source=src["margin_channels"], line_color=ink, line_width=1)
    m_pts = margin_fig.scatter(x="x", y="y", source=src["margin_channels"], size=5, fill_color="color",
                               line_color="color", name="margin_points")
    margin_fig.scatter(x="x", y="y", source=src["margin_now"], size=13, marker="circle_cross", fill_alpha=0,
                       line_color=ink, line_width=2, name="margin_now_mark")
    margin_hover = _hover(m_pts, _margin_tooltips(meta["units"]["tuning_x"]), [])
    margin_fig.add_tools(margin_hover)
    legend = Div(text=legend_html(meta["direction"]), name=prefix + "chart_legend", width=2 * width,
                 styles={"font-size": "13px"},  # as wide as the planes: its entries wrap there
                 **({"sizing_mode": "stretch_width"} if fit_width else {}))
    stretch = {"sizing_mode": "stretch_width"} if fit_width else {}
    # the planes first, so they sit at the top of the screen; the legend under them, then the margin plot
    layout = column(row(tuning, output, **stretch), legend, margin_fig, name="mixchart_chart", **stretch)
    handle = ChartHandle(
        layout=layout, tuning=tuning, output=output, sources=src, bands=bands,
        margin=margin_fig, legend=legend, margin_hover=margin_hover,
    )
    handle.windows = {"tuning": tuple(tw), "output": tuple(ow), "margin_y": tuple(meta["margin_y_window"])}
    handle.last = dict(data.sources)
    return handle


def update_chart(handle: ChartHandle, data: ChartData, *, reset_ranges: bool = False) -> None:
    """Push new data into the built chart.

    Only ``source.data`` is assigned; titles, axis labels, the legend and the margin plot's
    hover are assigned when their text changes, and ranges when the plotted window changes
    (so a user's zoom survives a channel change) or when ``reset_ranges``.

    Parameters
    ----------
    handle : ChartHandle
        From :func:`build_chart`.
    data : ChartData
        From :func:`chart_data`.
    reset_ranges : bool
        Re-apply the windows even if unchanged.
    """
    for name, cols in data.sources.items():
        if _same(handle.last.get(name), cols):
            continue  # no event, no message
        handle.sources[name].data = dict(cols)
        handle.last[name] = cols
    for name, box in handle.bands.items():  # after a drag the box may sit off the snapped value
        set_band(box, data.sources[name], vertical=name != "out_output_band")
    meta = data.meta
    _set(handle.tuning.title, "text", meta["tuning_title"])
    _set(handle.output.title, "text", meta["output_title"])
    _set(handle.tuning.xaxis[0], "axis_label", meta["tuning_x_label"])
    _set(handle.tuning.yaxis[0], "axis_label", meta["tuning_y_label"])
    _set(handle.output.xaxis[0], "axis_label", meta["output_x_label"])
    _set(handle.output.yaxis[0], "axis_label", meta["output_y_label"])
    if handle.margin is not None:
        _set(handle.margin.xaxis[0], "axis_label", meta["tuning_x_label"])
    if handle.legend is not None:
        _set(handle.legend, "text", legend_html(meta["direction"]))
    if handle.margin_hover is not None:
        _set(handle.margin_hover, "tooltips", _margin_tooltips(meta["units"]["tuning_x"]))
    if handle.margin is not None:
        win = tuple(meta["margin_y_window"])
        if reset_ranges or win != handle.windows.get("margin_y"):
            handle.margin.y_range.start, handle.margin.y_range.end = win
            handle.windows["margin_y"] = win
    for key, fig in (("tuning", handle.tuning), ("output", handle.output)):
        win = tuple(meta[f"{key}_window"])
        if reset_ranges or not _close(win, handle.windows.get(key)):
            fig.x_range.start, fig.x_range.end = win[0], win[1]
            fig.y_range.start, fig.y_range.end = win[2], win[3]
            handle.windows[key] = win


def _same(old: dict[str, Any] | None, new: dict[str, Any]) -> bool:
    """True when two column dicts hold equal data (so re-sending can be skipped)."""
    if old is None or old.keys() != new.keys():
        return False
    for key, a in old.items():
        b = new[key]
        if isinstance(a, np.ndarray) and isinstance(b, np.ndarray):
            if a.shape != b.shape or not np.array_equal(a, b, equal_nan=a.dtype.kind == "f"):
                return False
        elif isinstance(a, list) and isinstance(b, list) and len(a) == len(b):
            if a and isinstance(a[0], np.ndarray):
                if not all(np.array_equal(x, y) for x, y in zip(a, b, strict=True)):
                    return False
            elif a != b:
                return False
        else:
            return False
    return True


def _set(model: Any, attr: str, value: Any) -> None:
    if getattr(model, attr) != value:
        setattr(model, attr, value)


def _close(a: tuple[float, ...] | None, b: tuple[float, ...] | None) -> bool:
    if a is None or b is None:
        return False
    span = max(abs(a[1] - a[0]), abs(a[3] - a[2]), 1e-30)
    return all(abs(x - y) <= 1e-6 * span for x, y in zip(a, b, strict=True))
