"""What the chart's colours, line styles and marks mean, and the legend that says so.

One colour, one meaning (colour-blind-safe Okabe-Ito colours where a colour carries a verdict):
:data:`PALETTE` maps each meaning to its colour, and every colour the chart draws comes from it
(a test reads ``chart.py`` and its data modules for stray colour literals).  The margin categories colour lines,
strips, marks, dots and the tables alike; the filter shading is one green on both axes (the
vertical band is the input side, the horizontal band the output side); the plan itself (its
line, the current channel, the draggable bands, every marker's outline and the texts) is
near-black.

Nothing is drawn translucent over another colour, so no blend appears that the legend lacks:
strips are hatched (no fill, hatch and outline at full opacity, in the category's colour) and
drawn in :data:`DRAW_ORDER` (worst on top), lines are opaque in the same order, and the only
translucent layer is the green shading, over white or over itself (darker where two filters
pass).  :func:`legend_html` draws each of these, with the same colours, hatches and shapes.

This module does not import Bokeh.
"""

from __future__ import annotations

import html

import numpy as np

__all__ = [
    "CLOSE_DB",
    "PALETTE",
    "VERDICT_COLOURS",
    "CATEGORIES",
    "DRAW_ORDER",
    "STRIP_HATCH",
    "TINT_MAX_ALPHA",
    "category_of",
    "style_columns",
    "draw_rank",
    "legend_html",
]

#: A spur within this many dB of the requirement is drawn as "close".
CLOSE_DB = 10.0

#: Meaning -> colour, for everything the chart draws.  Injective: no colour means two things.
PALETTE: dict[str, str] = {
    "violates": "#D55E00",  # vermillion: past the requirement
    "close": "#E69F00",  # orange: within CLOSE_DB of it
    "clear": "#8C8C8C",  # neutral grey: clear by CLOSE_DB or more
    "wanted": "#0072B2",  # blue: the wanted conversion, nothing else
    "filter": "#009E73",  # bluish green: where a filter passes (both sides, both planes)
    "plan": "#1A1A1A",  # near-black: the plan line, the current channel, the bands, outlines, texts
    "grid": "#E4E4E4",  # the grid
    "background": "#FFFFFF",  # the plot background
}

#: Text colour of the verdict (the banner's and the report's PASS / FAIL), darker than the plot
#: inks so that it reads as text; blue stays the wanted conversion's alone.
VERDICT_COLOURS: dict[str, str] = {"PASS": "#006B4F", "FAIL": "#B33000"}

#: Category -> (legend text, colour).
CATEGORIES: dict[str, tuple[str, str]] = {
    "violates": ("violates the requirement", PALETTE["violates"]),
    "close": (f"within {CLOSE_DB:g} dB of it", PALETTE["close"]),
    "clear": (f"clear by {CLOSE_DB:g} dB or more", PALETTE["clear"]),
    "wanted": ("wanted conversion", PALETTE["wanted"]),
}

#: Draw order of the categories, bottom first: where two strips or lines cross, the worse is on top.
DRAW_ORDER: tuple[str, ...] = ("clear", "wanted", "close", "violates")

#: Line width of a product line (output plane) and of a strip's outline, px.
LINE_WIDTH = {"violates": 3.0, "close": 2.2, "clear": 1.0, "wanted": 3.0}
STRIP_LINE_WIDTH = {"violates": 2.0, "close": 1.5, "clear": 1.0, "wanted": 1.5}
#: Hatch of a strip: Bokeh pattern, line weight (px); the spacing is :data:`HATCH_SCALE` px.
STRIP_HATCH: dict[str, tuple[str, float]] = {
    "violates": ("x", 1.3),
    "close": ("\\", 1.3),
    "clear": ("/", 0.8),
    "wanted": ("|", 1.3),
}
HATCH_SCALE = 9.0
#: Size of a product or response dot on the output plane, px (the worse, the bigger).
DOT_SIZE = {"violates": 14.0, "close": 10.0, "clear": 7.0, "wanted": 14.0}
#: Strongest alpha of the filter shading (the passband, over white).
TINT_MAX_ALPHA = 0.30


def category_of(margin_db: np.ndarray) -> np.ndarray:
    """Margin category of each margin (dB): "violates" below 0, "close" below :data:`CLOSE_DB`, else "clear".

    NaN (no margin) is "clear".
    """
    margin_db = np.asarray(margin_db, dtype=float)
    return np.where(margin_db < 0, "violates", np.where(margin_db < CLOSE_DB, "close", "clear"))


def draw_rank(categories) -> np.ndarray:
    """Position of each category in :data:`DRAW_ORDER` (0 drawn first, at the bottom)."""
    rank = {c: i for i, c in enumerate(DRAW_ORDER)}
    return np.array([rank[c] for c in categories], dtype=np.int64)


def style_columns(categories) -> dict[str, list]:
    """The per-row style columns of a source whose rows have these categories."""
    cats = list(categories)
    return {
        "category": cats,
        "color": [CATEGORIES[c][1] for c in cats],
        "width": np.array([LINE_WIDTH[c] for c in cats], dtype=float),
    }


# --------------------------------------------------------------------------- legend (HTML + inline SVG)

_HATCH_PATH = {  # the SVG path of one hatch tile of side s, drawn as Bokeh draws the pattern
    "/": "M0,{s} L{s},0",
    "\\": "M0,0 L{s},{s}",
    "x": "M0,{s} L{s},0 M0,0 L{s},{s}",
    "|": "M{h},0 L{h},{s}",
}


def _svg(width: int, height: int, body: str, label: str, attrs: str = "") -> str:
    return (f'<svg{attrs} width="{width}" height="{height}" viewBox="0 0 {width} {height}" role="img" '
            f'aria-label="{html.escape(label)}" style="vertical-align:middle;margin:0 5px 2px 12px">{body}</svg>')


def _line_swatch(colour: str, width: float, label: str, dash: str = "") -> str:
    dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
    return _svg(26, 12, f'<line x1="1" y1="6" x2="25" y2="6" stroke="{colour}" stroke-width="{width:g}"'
                        f'{dash_attr}/>', label)


def _strip_swatch(category: str) -> str:
    colour = CATEGORIES[category][1]
    pattern, weight = STRIP_HATCH[category]
    s = HATCH_SCALE
    path = _HATCH_PATH[pattern].format(s=f"{s:g}", h=f"{s / 2:g}")
    pid = f"mixchart-hatch-{category}"
    body = (f'<defs><pattern id="{pid}" width="{s:g}" height="{s:g}" patternUnits="userSpaceOnUse">'
            f'<path d="{path}" stroke="{colour}" stroke-width="{weight:g}"/></pattern></defs>'
            f'<rect x="1" y="1" width="28" height="14" fill="url(#{pid})" stroke="{colour}" '
            f'stroke-width="{STRIP_LINE_WIDTH[category]:g}"/>')
    return _svg(30, 16, body, f"strip: {CATEGORIES[category][0]}", f' data-hatch="{html.escape(pattern)}"')


def _marker(shape: str, label: str) -> str:
    ink = PALETTE["plan"]
    bodies = {
        "circle_cross": f'<circle cx="9" cy="9" r="7" fill="none" stroke="{ink}" stroke-width="2.2"/>'
                        f'<path d="M9,2 L9,16 M2,9 L16,9" stroke="{ink}" stroke-width="2.2"/>',
        "diamond": f'<path d="M9,3 L15,9 L9,15 L3,9 Z" fill="{PALETTE["background"]}" stroke="{ink}" '
                   f'stroke-width="1"/>',
        "circle": f'<circle cx="9" cy="9" r="5" fill="{PALETTE["background"]}" stroke="{ink}" stroke-width="1"/>',
        "triangle": f'<path d="M9,3 L15,14 L3,14 Z" fill="{PALETTE["background"]}" stroke="{ink}" '
                    f'stroke-width="1"/>',
    }
    return _svg(18, 18, bodies[shape], label)


def _shading_swatch() -> str:
    green, a = PALETTE["filter"], TINT_MAX_ALPHA
    body = (f'<defs><linearGradient id="mixchart-fade"><stop offset="0" stop-color="{green}" stop-opacity="0"/>'
            f'<stop offset=".5" stop-color="{green}" stop-opacity="{a:g}"/>'
            f'<stop offset="1" stop-color="{green}" stop-opacity="0"/></linearGradient></defs>'
            f'<rect x="0" y="4" width="40" height="10" fill="url(#mixchart-fade)"/>'
            f'<rect x="54" y="0" width="12" height="18" fill="{green}" fill-opacity="{a:g}"/>'
            f'<rect x="46" y="4" width="28" height="10" fill="{green}" fill-opacity="{a:g}"/>')
    return _svg(76, 18, body, "filter shading")


_NOWRAP = ' style="white-space:nowrap"'


def legend_html(direction: str | None = None) -> str:
    """The chart legend as HTML: every colour, hatch, line and marker the chart draws, and its meaning.

    Parameters
    ----------
    direction : {"down", "up"} or None
        The plan's direction: a receiver's diamonds are responses, a transmitter's output
        products (None: both said).

    Returns
    -------
    str
        HTML (inline SVG swatches; text escaped).
    """
    e = html.escape
    cats = "".join(
        f'<span class="mixchart-legend-entry" data-meaning="{c}"{_NOWRAP}>'
        f'{_line_swatch(CATEGORIES[c][1], LINE_WIDTH[c], "line: " + CATEGORIES[c][0])}'
        f'{_strip_swatch(c)}{e(CATEGORIES[c][0])}</span>'
        for c in ("violates", "close", "clear", "wanted"))
    diamond = {"down": "a response at the current LO", "up": "an output product at the current LO"}.get(
        direction or "", "a response (receiver) or output product (transmitter) at the current LO")
    marks = [
        ("plan", _line_swatch(PALETTE["plan"], 2.5, "plan line"), "the plan, coloured where a channel is not clear"),
        ("channel", _marker("circle_cross", "current channel"), "the current channel (the output plane's LO)"),
        ("response", _marker("diamond", "diamond"), diamond),
        ("dot", _marker("circle", "dot"), "a product or response of the current channel (the worse, the bigger)"),
        ("offchart", _marker("triangle", "triangle"), "a limiting row off the output plane, pointing to it"),
        ("band", _line_swatch(PALETTE["plan"], 2, "plan band", dash="5,3"), "the RF band and the IF passband"),
    ]
    mark_html = "".join(f'<span class="mixchart-legend-entry" data-meaning="{key}"{_NOWRAP}>{svg}{e(text)}</span>'
                        for key, svg, text in marks)
    shading = (f'<span class="mixchart-legend-entry" data-meaning="filter">{_shading_swatch()}'
               "where a filter passes, fading to nothing where it alone meets the requirement (vertical: input "
               "side, horizontal: output side; darker where both pass)</span>")
    return ('<div class="mixchart-legend" style="line-height:1.9">'
            "<b>Margin after the filters</b> (output-plane lines, tuning-plane hatched strips, the fill of "
            f"every mark and the tables alike; the worse drawn on top):{cats}<br>"
            f"<b>Marks</b> (filled with their margin's colour):{mark_html}<br><b>Shading:</b>{shading}</div>")
