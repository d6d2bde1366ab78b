"""Keyboard shortcuts of the planner: Ctrl+Z undoes a plan change, Ctrl+Shift+Z (or Ctrl+Y) redoes it.

ipywidgets has no key events, so the keys are caught in the page by a small
CustomJS run when the chart's Bokeh document is ready.  It listens on the page
and, for a key it knows, writes a command into a tiny ColumnDataSource; the
edit reaches Python as any browser edit does, and :func:`attach_keys` calls the
app back.  A key typed into a text field is left to the field (its own undo),
and where a page shows several planners only the one last clicked or focused
answers.  Cmd stands for Ctrl on a Mac.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

__all__ = ["attach_keys", "KEY_JS"]

#: The page-side listener; ``src`` is the command source, ``root`` the chart's layout model.
KEY_JS = """
const key = '__mixchart_keys_' + root.id;
if (window[key]) { return; }  // one listener per chart, however often the document is made ready
window[key] = true;
const appOf = (el) => {
  while (el) {
    const hit = el.closest ? el.closest('.mixchart-app') : null;
    if (hit) { return hit; }
    const host = el.getRootNode ? el.getRootNode().host : null;
    el = host || null;
  }
  return null;
};
const myApp = () => {
  for (const view of Bokeh.index.all_views ? Bokeh.index.all_views() : Object.values(Bokeh.index)) {
    if (view.model && view.model.id === root.id) { return appOf(view.el); }
  }
  return null;
};
document.addEventListener('pointerdown', (e) => { window.__mixchart_active = appOf(e.target); }, true);
document.addEventListener('focusin', (e) => { window.__mixchart_active = appOf(e.target); }, true);
let count = 0;
document.addEventListener('keydown', (e) => {
  if (!(e.ctrlKey || e.metaKey) || e.altKey) { return; }
  const k = e.key.toLowerCase();
  const command = (k === 'z' && !e.shiftKey) ? 'undo' : ((k === 'z' && e.shiftKey) || k === 'y') ? 'redo' : null;
  if (command === null) { return; }
  const t = e.target;
  if (t && (t.isContentEditable || ['INPUT', 'TEXTAREA', 'SELECT'].includes(t.tagName))) { return; }
  const mine = myApp();
  const apps = document.querySelectorAll('.mixchart-app');
  if (apps.length > 1 && window.__mixchart_active !== mine) { return; }
  e.preventDefault();
  count += 1;
  src.data = {command: [command], n: [count]};
});
"""


def attach_keys(layout: Any, on_command: Callable[[str], None]) -> Any:
    """Give the chart's layout the undo/redo keys; call it before the layout is shown.

    Parameters
    ----------
    layout : bokeh.models.LayoutDOM
        The chart's root (it gets a Bokeh document here if it has none).
    on_command : callable
        Called with ``"undo"`` or ``"redo"`` for each key press.

    Returns
    -------
    bokeh.models.ColumnDataSource
        The command source (named ``"key_commands"``).
    """
    from bokeh.document import Document
    from bokeh.events import DocumentReady
    from bokeh.models import ColumnDataSource, CustomJS

    src = ColumnDataSource(data={"command": [], "n": []}, name="key_commands")
    layout.tags = [*layout.tags, src]  # keep the source in the document
    doc = layout.document
    if doc is None:
        doc = Document()
        doc.add_root(layout)
    doc.js_on_event(DocumentReady, CustomJS(args={"src": src, "root": layout}, code=KEY_JS))

    seen: set[int] = set()

    def handler(_attr: str, _old: Any, new: dict[str, Any]) -> None:
        commands, counts = list(new.get("command", [])), list(new.get("n", []))
        if not commands or commands[-1] not in ("undo", "redo") or not counts:
            return
        n = int(counts[-1])
        if n in seen:
            return  # the same key press delivered twice
        seen.add(n)
        on_command(str(commands[-1]))

    src.on_change("data", handler)
    return src
