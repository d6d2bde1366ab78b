"""Helpers for driving a Bokeh-in-ipywidgets page (Voila) with Playwright.

All functions take a Playwright sync ``Page``.  Bokeh 3 draws inside shadow
DOM; Playwright CSS selectors pierce it, and the JavaScript here walks
``Bokeh.index`` (the root views) rather than the DOM.  Figures and sources are
found by their Bokeh ``name``, so give every figure and ``ColumnDataSource``
that a test touches a name.

Screen points are CSS pixels in the viewport, as ``page.mouse`` expects.
Data points are in the figure's default x/y ranges.
"""

from __future__ import annotations

import statistics
import time
from pathlib import Path

__all__ = [
    "open_voila",
    "wait_for_bokeh_idle",
    "notebook_errors",
    "figure_names",
    "has_figure",
    "data_to_screen",
    "source_data",
    "wait_for_source_change",
    "drag",
    "slider_handle",
    "slider_value",
    "press_slider_key",
    "screenshot",
    "measure_key_to_repaint",
    "summarize_ms",
    "unexpected_console_errors",
]

# Installed once per page; every helper calls _ensure() first (it is cheap).
_PRELUDE = r"""
() => {
  if (window.__mxt) return true;
  const BROWSER_SET = new Set(["inner_width", "inner_height", "outer_width", "outer_height"]);
  const toPlain = (v) => {
    if (v == null) return v;
    if (ArrayBuffer.isView(v)) return Array.from(v);
    if (Array.isArray(v)) return v.map(toPlain);
    if (v instanceof Map) { const o = {}; for (const [k, x] of v) o[k] = toPlain(x); return o; }
    if (typeof v === "object" && v.array !== undefined && v.shape !== undefined) return toPlain(v.array);
    return v;
  };
  const mxt = {
    ready() { return !!(window.Bokeh && Bokeh.index && Bokeh.documents); },
    roots() { return mxt.ready() ? Bokeh.index.roots : []; },
    idle(minRoots) {
      const roots = mxt.roots();
      return roots.length >= minRoots && roots.every((v) => v.is_idle);
    },
    plots() {
      if (!mxt.ready()) return [];
      return [...Bokeh.index.query((v) => v.frame != null && v.canvas_view != null && v.model != null)];
    },
    plot(name) {
      const found = mxt.plots().filter((v) => v.model.name === name);
      if (found.length === 0) {
        const names = mxt.plots().map((v) => v.model.name);
        throw new Error(`no figure named ${JSON.stringify(name)}; figures: ${JSON.stringify(names)}`);
      }
      return found[found.length - 1];
    },
    model(name) {
      // Newest document first: a re-rendered widget leaves its old document behind.
      for (const doc of [...Bokeh.documents].reverse()) {
        if (doc.roots().length === 0) continue;
        for (const m of doc.all_models) if (m.name === name) return m;
      }
      throw new Error(`no model named ${JSON.stringify(name)} in any Bokeh document`);
    },
    data(name) {
      const m = mxt.model(name);
      if (m.data === undefined) throw new Error(`model ${JSON.stringify(name)} has no .data`);
      return toPlain(m.data);
    },
    toScreen(name, points) {
      const pv = mxt.plot(name);
      const { x_scale, y_scale } = pv.frame;
      const r = pv.canvas_view.el.getBoundingClientRect();
      return points.map(([x, y]) => [r.left + x_scale.compute(x), r.top + y_scale.compute(y)]);
    },
    // ---- key -> repaint measurement -------------------------------------
    rec: null,
    hooked: new WeakSet(),
    hookPlot(names) {
      const views = (Array.isArray(names) ? names : [names]).map((name) => mxt.plot(name));
      mxt.targets = new Set(views);  // only these figures' repaints end a measurement
      for (const pv of views) {
        if (mxt.hooked.has(pv)) continue;
        mxt.hooked.add(pv);
        pv.repainted.connect(() => {
          const r = mxt.rec;
          if (r && r.t_last_change != null && mxt.targets.has(pv)) {
            r.t_last_paint = performance.now(); r.n_paints++;
          }
        });
      }
      const pv = views[0];
      const doc = pv.model.document;
      if (!mxt.hooked.has(doc)) {  // one listener per document, however many of its figures are hooked
        mxt.hooked.add(doc);
        doc.on_change((ev) => {
          const r = mxt.rec;
          // BokehJS itself sets some properties while it lays out and paints (a DataRange1d's ends,
          // as on the margin plot's y axis, and a plot's inner/outer size): those are not changes
          // from the kernel, and no repaint of this figure follows them.
          if (ev.model != null && (ev.model.type === "DataRange1d" || BROWSER_SET.has(ev.attr))) return;
          if (r && r.t_key != null) {
            const t = performance.now();
            if (r.t_first_change == null) r.t_first_change = t;
            r.t_last_change = t; r.n_changes++;
          }
        });
      }
      if (!mxt.keyHooked) {
        mxt.keyHooked = true;
        window.addEventListener("keydown", () => {
          const r = mxt.rec;
          if (r && r.t_key == null) r.t_key = performance.now();
        }, true);
      }
    },
    arm() {
      mxt.rec = { t_key: null, t_first_change: null, t_last_change: null, t_last_paint: null,
                  n_changes: 0, n_paints: 0 };
    },
    settled(settleMs) {
      const r = mxt.rec;
      return r != null && r.t_last_paint != null && r.t_last_paint >= r.t_last_change
        && performance.now() - Math.max(r.t_last_paint, r.t_last_change) >= settleMs;
    },
  };
  window.__mxt = mxt;
  return true;
}
"""


def _ensure(page) -> None:
    page.evaluate(_PRELUDE)


_STDERR = '[data-mime-type="application/vnd.jupyter.stderr"]'
_ERROR_WORDS = ("Error", "Exception", "Traceback")


def notebook_errors(page) -> list[str]:
    """Texts of the stderr/error outputs that Voila shows (tracebacks, warnings)."""
    return page.locator(_STDERR).all_inner_texts()


def wait_for_bokeh_idle(page, *, min_roots: int = 1, timeout_ms: float = 60_000) -> None:
    """Wait until BokehJS has at least ``min_roots`` root views and all are idle.

    Fails early, with the traceback, if the notebook shows an error output
    instead (Voila stops executing at the first failing cell).  ``is_idle``
    turns true once a view has finished its first paint and stays true; to
    wait for a repaint after a data change use :func:`wait_for_source_change`
    or :func:`measure_key_to_repaint`.
    """
    deadline = time.monotonic() + timeout_ms / 1000
    grace_until = None
    check = (
        f"([minRoots, sel]) => {{ ({_PRELUDE.strip()})();"
        " if (window.__mxt.idle(minRoots)) return 'idle';"
        " return document.querySelector(sel) ? 'stderr' : null; }"
    )
    while True:
        remaining_ms = max(1.0, (deadline - time.monotonic()) * 1000)
        state = page.wait_for_function(check, arg=[min_roots, _STDERR], timeout=remaining_ms, polling=100)
        if state.json_value() == "idle":
            return
        errors = [e for e in notebook_errors(page) if any(w in e for w in _ERROR_WORDS)]
        if errors:
            # A plot may still follow a harmless message; give it 2 s, then fail.
            grace_until = grace_until or time.monotonic() + 2.0
            if time.monotonic() > grace_until:
                raise RuntimeError("the notebook failed before Bokeh was idle:\n" + "\n---\n".join(errors))
        if time.monotonic() > deadline:
            raise TimeoutError(
                f"Bokeh not idle within {timeout_ms} ms; stderr outputs: {notebook_errors(page)}"
            )
        time.sleep(0.1)


def open_voila(page, url: str, *, min_roots: int = 1, timeout_ms: float = 120_000) -> float:
    """Load a Voila page and wait until its Bokeh plots have painted.

    Raises
    ------
    RuntimeError
        The notebook showed a traceback instead (its text is in the message).
    TimeoutError
        Bokeh was not idle within ``timeout_ms``.

    Returns
    -------
    float
        Seconds from navigation to Bokeh idle (4-11 s on 2 cores).
    """
    t0 = time.perf_counter()
    page.goto(url, wait_until="domcontentloaded", timeout=timeout_ms)
    remaining_ms = max(1.0, timeout_ms - (time.perf_counter() - t0) * 1000)
    wait_for_bokeh_idle(page, min_roots=min_roots, timeout_ms=remaining_ms)
    return time.perf_counter() - t0


def figure_names(page) -> list[str]:
    """Names of all plot views on the page (unnamed ones appear as None)."""
    _ensure(page)
    return page.evaluate("() => window.__mxt.plots().map((v) => v.model.name)")


def has_figure(page, name: str) -> bool:
    """True if a figure whose Bokeh ``name`` is ``name`` has a view on the page."""
    return name in figure_names(page)


def data_to_screen(page, figure_name: str, points, *, scroll: bool = True) -> list[tuple[float, float]]:
    """Convert data coordinates of a named figure to viewport points.

    Parameters
    ----------
    figure_name : str
        Bokeh ``name`` of the figure.
    points : sequence of (x, y)
        Data coordinates in the figure's default ranges.
    scroll : bool
        Scroll the figure into the middle of the viewport first, so the points
        are clickable.

    Returns
    -------
    list of (float, float)
        CSS-pixel viewport coordinates, usable with ``page.mouse``.
    """
    _ensure(page)
    if scroll:
        page.evaluate(
            "(name) => window.__mxt.plot(name).el.scrollIntoView({block: 'center', inline: 'center'})",
            figure_name,
        )
    pts = [[float(x), float(y)] for x, y in points]
    return [tuple(p) for p in page.evaluate("([n, p]) => window.__mxt.toScreen(n, p)", [figure_name, pts])]


def source_data(page, source_name: str) -> dict[str, list]:
    """Columns of the ``ColumnDataSource`` named ``source_name``, as seen by BokehJS.

    Typed arrays and ndarrays come back as plain lists.
    """
    _ensure(page)
    return page.evaluate("(name) => window.__mxt.data(name)", source_name)


def wait_for_source_change(page, source_name: str, before: dict, *, timeout_ms: float = 30_000) -> dict:
    """Poll until the source's data differs from ``before``; return the new data."""
    deadline = time.monotonic() + timeout_ms / 1000
    while True:
        now = source_data(page, source_name)
        if now != before:
            return now
        if time.monotonic() > deadline:
            raise TimeoutError(f"source {source_name!r} still equals {before!r} after {timeout_ms} ms")
        time.sleep(0.05)


def drag(page, figure_name: str, start, end, *, steps: int = 12) -> None:
    """Drag with the left mouse button from data point ``start`` to ``end``.

    What happens is the figure's: a drag that starts on a band's handle moves or resizes the band
    (see :func:`band_handle`; the band's source changes once, on release), any other drag pans.
    """
    (x0, y0), (x1, y1) = data_to_screen(page, figure_name, [start, end])
    page.mouse.move(x0, y0)
    page.mouse.down()
    page.mouse.move(x1, y1, steps=steps)
    page.mouse.up()


def band_handle(page, figure_name: str, box_name: str, which: str = "move") -> tuple[float, float]:
    """Data coordinates of a band's handle: ``"move"`` (its middle square), ``"low"`` or ``"high"`` (the
    squares on its lower and upper edges).  The band is the editable ``BoxAnnotation`` named
    ``box_name`` (mixchart.chart_bands); its handles sit in the middle of the plot across the band.
    """
    _ensure(page)
    box = page.evaluate(
        """([fig, name]) => { const f = window.__mxt.model(fig); const b = window.__mxt.model(name);
             const num = (v) => (typeof v === "number" ? v : null);  // an unset edge is the frame's (a node)
             return [num(b.left), num(b.right), num(b.bottom), num(b.top), f.x_range.start, f.x_range.end,
                     f.y_range.start, f.y_range.end]; }""",
        [figure_name, box_name],
    )
    left, right, bottom, top, x0, x1, y0, y1 = box
    vertical = left is not None and right is not None
    if vertical:
        y = 0.5 * (y0 + y1)
        return {"move": (0.5 * (left + right), y), "low": (min(left, right), y), "high": (max(left, right), y)}[which]
    x = 0.5 * (x0 + x1)
    return {"move": (x, 0.5 * (bottom + top)), "low": (x, min(bottom, top)), "high": (x, max(bottom, top))}[which]


def slider_handle(page, slider_selector: str):
    """Locator of the keyboard-focusable handle of an ipywidgets 8 slider.

    ``slider_selector`` selects the slider widget, e.g. ``.mx-freq`` after
    ``slider.add_class("mx-freq")`` in Python.
    """
    return page.locator(f"{slider_selector} .noUi-handle").first


def slider_value(page, slider_selector: str) -> str:
    """Text of the slider's readout (what the user sees)."""
    loc = page.locator(f"{slider_selector} .widget-readout").first
    return loc.inner_text().strip()


def press_slider_key(page, slider_selector: str, key: str = "ArrowRight", times: int = 1) -> None:
    """Focus the slider's handle and press ``key`` ``times`` times.

    ArrowRight/ArrowUp step up, ArrowLeft/ArrowDown step down, PageUp/PageDown
    take big steps, Home/End jump to the limits (noUiSlider's keyboard map).
    """
    slider_handle(page, slider_selector).focus()
    for _ in range(times):
        page.keyboard.press(key)


def screenshot(page, path, *, full_page: bool = True) -> Path:
    """Save a PNG screenshot to ``path`` (parents created) and return the path."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(path), full_page=full_page)
    return path


def measure_key_to_repaint(
    page,
    slider_selector: str,
    n: int,
    *,
    figure_name: str | tuple[str, ...],
    key: str = "ArrowRight",
    settle_ms: float = 150.0,
    timeout_ms: float = 30_000,
    details: bool = False,
    focus_selector: str | None = None,
):
    """Time slider key press -> Bokeh repaint, ``n`` times.

    For each press: the time of the ``keydown`` (window, capture phase) is
    taken in the page; every Bokeh document change after it (the kernel's
    reply arriving through the widget comm) and every ``repainted`` signal of
    the figure after the last change are recorded.  The press counts as done
    once a repaint has followed the last change and nothing happened for
    ``settle_ms`` (so a reply split over several messages is timed to its last
    repaint).  All times use the page's ``performance.now()`` clock.

    Parameters
    ----------
    slider_selector : str
        CSS selector of the ipywidgets slider (see :func:`slider_handle`).
    n : int
        Number of presses.
    figure_name : str or tuple of str
        Bokeh ``name`` of the figure (or figures) whose last repaint ends the measurement.
    key : str
        Key to press.
    settle_ms : float
        Quiet time, in ms, after the last repaint that ends one press.
    timeout_ms : float
        Per-press timeout in ms.
    details : bool
        Return dicts with the split instead of plain numbers.
    focus_selector : str, optional
        Click this element instead of focusing the slider (``slider_selector`` is then
        ignored), e.g. to time Ctrl+Z on the page.

    Returns
    -------
    list of float, or list of dict
        Milliseconds from key press to the end of the last repaint.  With
        ``details=True`` each item is ``{"key_to_paint_ms", "key_to_change_ms",
        "change_to_paint_ms", "n_changes", "n_paints"}`` where
        ``key_to_change_ms`` covers Python plus comm transfer and
        ``change_to_paint_ms`` covers BokehJS updating and drawing.
    """
    _ensure(page)
    names = [figure_name] if isinstance(figure_name, str) else list(figure_name)
    page.evaluate("(names) => window.__mxt.hookPlot(names)", names)
    if focus_selector is None:
        slider_handle(page, slider_selector).focus()
    else:
        page.locator(focus_selector).first.click()
    out = []
    for i in range(n):
        page.evaluate("() => window.__mxt.arm()")
        page.keyboard.press(key)
        try:
            page.wait_for_function(
                "(s) => window.__mxt.settled(s)", arg=settle_ms, timeout=timeout_ms, polling=10
            )
        except Exception as exc:
            rec = page.evaluate("() => window.__mxt.rec")
            raise TimeoutError(
                f"press {i + 1}/{n} of {key!r} never led to a repaint of {figure_name!r}: {rec}"
            ) from exc
        rec = page.evaluate("() => window.__mxt.rec")
        item = {
            "key_to_paint_ms": rec["t_last_paint"] - rec["t_key"],
            "key_to_change_ms": rec["t_first_change"] - rec["t_key"],
            "change_to_paint_ms": rec["t_last_paint"] - rec["t_first_change"],
            "n_changes": rec["n_changes"],
            "n_paints": rec["n_paints"],
        }
        out.append(item if details else item["key_to_paint_ms"])
    page.evaluate("() => { window.__mxt.rec = null; }")
    return out


def open_planner(page, server) -> float:
    """Open the planner that Voila ``server`` serves in ``page`` and wait for its worst-case table;
    return the load time in s (an AssertionError with Voila's log if the page never gets there)."""
    try:
        t_load = open_voila(page, server.url)
        page.locator(".mixchart-app .mixchart-worst-table td").first.wait_for()
    except Exception as exc:
        raise AssertionError(f"the planner page never became idle: {exc}\nvoila log:\n{server.log_text()}") from exc
    print(f"\nplanner page idle after {t_load:.1f} s")
    return t_load


def wait_until(fn, what: str, timeout_s: float = 45.0, interval_s: float = 0.05):
    """Poll ``fn()`` until it returns something truthy; return that (TimeoutError naming ``what``)."""
    deadline = time.monotonic() + timeout_s
    while True:
        value = fn()
        if value:
            return value
        if time.monotonic() > deadline:
            raise TimeoutError(f"{what} not seen within {timeout_s} s")
        time.sleep(interval_s)


def summarize_ms(samples) -> dict[str, float]:
    """Median, min and max of a list of milliseconds (for printing)."""
    return {"median": statistics.median(samples), "min": min(samples), "max": max(samples), "n": len(samples)}


# Console errors that are expected and harmless on a Voila page with no
# internet: Voila asks a CDN for an icon font, which we abort.
HARMLESS_CONSOLE = ("Failed to load resource: net::ERR_FAILED",)


def unexpected_console_errors(page, allow=()) -> list[str]:
    """Console errors of ``page`` minus those from requests we blocked.

    An error counts as harmless if it is a ``Failed to load resource`` for a URL
    in ``page.blocked_requests``, or contains any substring in ``allow``.
    """
    blocked = set(getattr(page, "blocked_requests", ()))
    out = []
    for err in page.console_errors:
        if any(a in err for a in allow):
            continue
        if err.startswith(HARMLESS_CONSOLE) and any(url in err for url in blocked):
            continue
        out.append(err)
    return out
