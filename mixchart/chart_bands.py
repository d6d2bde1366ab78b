"""The chart's draggable bands: the RF band, the input band and the output passband.

Each band is an editable Bokeh ``BoxAnnotation`` with handles, so a drag moves or
resizes it only when it starts on a handle: the square in the band's middle moves
it, the squares on its edges resize it.  A drag anywhere else, inside the band or
not, is the active tool's (a pan).  A vertical band can only move and resize
sideways and a horizontal one only up and down, so a drag in the other direction
never changes it.

The plan hears of a drag once, on release: a small CustomJS watches the box's
pan signal and, at ``pan:end``, writes the new edges into the band's
ColumnDataSource (``{"x0": [...], "x1": [...]}`` or ``y0``/``y1``), which reaches
Python as any browser edit of a source does.  Python sets the box from the
source after each update (:func:`set_band`), so an undo or a snapped value moves
it back.
"""

from __future__ import annotations

from typing import Any

__all__ = ["band_box", "set_band", "BAND_JS"]

#: Runs on each change of the box's edges; connects to its pan signal once and, when a drag ends,
#: writes the edges (low, high) into the band's source.
BAND_JS = """
if (box.__mixchart_linked) { return; }
box.__mixchart_linked = true;
box.pan.connect((args) => {
  const kind = Array.isArray(args) ? args[0] : args;
  if (kind !== 'pan:end') { return; }
  const a = vertical ? box.left : box.bottom;
  const b = vertical ? box.right : box.top;
  if (a == null || b == null || !isFinite(a) || !isFinite(b)) { return; }
  const lo = Math.min(a, b), hi = Math.max(a, b);
  src.data = vertical ? {x0: [lo], x1: [hi]} : {y0: [lo], y1: [hi]};
});
"""


def band_box(fig: Any, source: Any, *, vertical: bool, editable: bool, name: str, line_color: str) -> Any:
    """Add a band to ``fig`` as a box annotation fed from ``source``.

    Parameters
    ----------
    fig : bokeh.plotting.figure
        The plane.
    source : ColumnDataSource
        The band's edges: ``x0``/``x1`` (vertical band) or ``y0``/``y1`` (horizontal band), display units.
    vertical : bool
        A band across x (spanning all y), or across y.
    editable : bool
        Whether a drag on its handles moves or resizes it (False in a static snapshot).
    name : str
        The annotation's Bokeh name.
    line_color : str
        Its dashed outline's colour.

    Returns
    -------
    bokeh.models.BoxAnnotation
    """
    from bokeh.models import BoxAnnotation, CustomJS
    from bokeh.models.annotations.geometry import AreaVisuals, BoxInteractionHandles

    handle_style = {"fill_color": "#FFFFFF", "line_color": line_color, "line_width": 1.5,
                    "hover_fill_color": "#C8CDD3", "hover_line_color": line_color}
    box = BoxAnnotation(
        name=name, editable=editable, use_handles=True,
        movable="x" if vertical else "y", resizable="x" if vertical else "y",
        fill_alpha=0.0, line_color=line_color, line_width=2, line_dash="dashed",
        handles=BoxInteractionHandles(all=AreaVisuals(**handle_style),
                                      move=AreaVisuals(**{**handle_style, "fill_color": line_color})),
    )
    set_band(box, dict(source.data), vertical=vertical)
    fig.add_layout(box)
    if editable:
        link = CustomJS(args={"box": box, "src": source, "vertical": vertical}, code=BAND_JS)
        for edge in ("left", "right") if vertical else ("bottom", "top"):
            box.js_on_change(edge, link)
    return box


def set_band(box: Any, cols: dict[str, Any], *, vertical: bool) -> None:
    """Put the box where the band's columns say (only the edges that differ are assigned)."""
    keys, edges = (("x0", "x1"), ("left", "right")) if vertical else (("y0", "y1"), ("bottom", "top"))
    try:
        values = [float(cols[k][0]) for k in keys]
    except (KeyError, IndexError, TypeError, ValueError):
        return
    for edge, value in zip(edges, values, strict=True):
        if getattr(box, edge) != value:
            setattr(box, edge, value)
