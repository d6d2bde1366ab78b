"""What the planner's notebook output carries besides its widgets: BokehJS and the page title.

BokehJS must be on the page before a ``jupyter_bokeh`` widget view is made
(its view calls ``window.Bokeh.require``), and a CDN cannot be assumed
reachable, so it travels inline in the notebook output.  It is part of every
display of the planner (:func:`show_with_bokehjs`), not loaded once per kernel:
a reloaded page, a second tab on the same kernel, or Notebook 7 next to
JupyterLab is a new page that has no BokehJS of its own.  A guard in the
script skips the load on a page that already has this BokehJS version and its
components, so a page that shows the planner twice loads it once.

One copy only: ``bokeh.io.output_notebook`` publishes the same ~4 MB script
twice in one output (as ``application/javascript`` for the classic notebook
and as ``application/vnd.bokehjs_load.v0+json`` for jupyter_bokeh's JupyterLab
renderer), with every BokehJS component; a saved notebook then held 8.5 MB.
Here it is one ``application/javascript`` output with the components the
planner draws (``bokeh`` and ``bokeh-widgets``: 1.7 MB).  JupyterLab,
Notebook 7 and Voila all run ``application/javascript`` outputs of trusted
notebooks (outputs made in the session are trusted).

The page title follows the plan's name when Voila serves the planner
(:func:`title_follows_plan`); JupyterLab and Notebook keep their own tab titles.

Imported only by the app: it needs bokeh and IPython.
"""

from __future__ import annotations

import functools
import json
from typing import Any

__all__ = ["BOKEHJS_COMPONENTS", "bokehjs_bundle", "display_bokehjs", "show_with_bokehjs", "title_follows_plan"]

#: The BokehJS bundles the planner's charts need: figures, tools and the ``Div`` (a Bokeh widget).
#: tests/test_notebook_js.py checks that the charts need no other.
BOKEHJS_COMPONENTS = ("bokeh", "bokeh-widgets")

#: What each component adds to ``window.Bokeh`` once loaded (the guard looks for it).
_COMPONENT_MARK = {"bokeh-widgets": "Widgets", "bokeh-tables": "Tables"}

JS_MIME = "application/javascript"

#: Shown in the tab when the plan has no name.
UNTITLED = "mixchart planner"


@functools.cache
def bokehjs_bundle(components: tuple[str, ...] = BOKEHJS_COMPONENTS) -> dict[str, str]:
    """The display bundle that loads BokehJS inline into a page that lacks it.

    Parameters
    ----------
    components : tuple of str
        BokehJS bundles to load (names as in ``bokeh.resources.INLINE.components``).

    Returns
    -------
    dict
        ``{"application/javascript": script}``.  The script does nothing on a
        page whose ``window.Bokeh`` already is this bokeh version with these
        components; elsewhere it runs Bokeh's own inline loader.
    """
    from bokeh import __version__
    from bokeh.embed.bundle import bundle_for_objs_and_resources
    from bokeh.io.notebook import _loading_js
    from bokeh.resources import INLINE

    resources = INLINE.clone(components=list(components))
    loader = _loading_js(bundle_for_objs_and_resources(None, resources), None, register_mime=False)
    present = [f"window.Bokeh.version === {json.dumps(__version__)}"]
    present += [f"window.Bokeh.{_COMPONENT_MARK[c]} !== undefined" for c in components if c in _COMPONENT_MARK]
    guard = f'if (!(typeof window.Bokeh !== "undefined" && {" && ".join(present)})) {{\n'
    return {JS_MIME: guard + loader + "\n}\n"}


def display_bokehjs() -> None:
    """Publish :func:`bokehjs_bundle` as one display output of the running cell."""
    from IPython.display import publish_display_data

    publish_display_data(bokehjs_bundle())


def show_with_bokehjs(widget: Any) -> Any:
    """Make every display of ``widget`` carry BokehJS, in an output just before the widget.

    ``display(widget)``, or the widget as a cell's last expression, then
    publishes two outputs: :func:`bokehjs_bundle` and the widget's view.  A
    widget put inside another container is not displayed by itself: call
    :func:`display_bokehjs` in that cell instead.

    Parameters
    ----------
    widget : ipywidgets.Widget
        The widget (changed in place: IPython's display looks for an
        ``_ipython_display_`` attribute on the object).

    Returns
    -------
    ipywidgets.Widget
        ``widget``.
    """
    from IPython.display import publish_display_data

    def _ipython_display_() -> None:
        display_bokehjs()
        publish_display_data(widget._repr_mimebundle_())

    widget._ipython_display_ = _ipython_display_
    return widget


# Runs in the page when the chart's Bokeh document has drawn: on a Voila page (its <body>
# carries data-voila) the tab shows the document's title, and follows it when Python renames it.
_TITLE_JS = """
if (window.document.body.dataset.voila === undefined) {
  return;  // JupyterLab and Notebook keep their own tab titles
}
const doc = anchor.document;
const show = () => { window.document.title = doc.title(); };
show();
doc.on_change((event) => { if (typeof event.title === "string") show(); });
"""


def _title(plan: Any) -> str:
    return plan.name.strip() or UNTITLED


def title_follows_plan(app: Any) -> None:
    """Title a Voila page with the plan's name, and retitle it when the plan's name changes.

    The name is the chart's Bokeh document title (synced to the page with
    the chart); a small script, run when the document has drawn, copies it
    to the page title on a Voila page only.

    Parameters
    ----------
    app : mixchart.app.PlannerApp
        The app, not yet displayed.  Its chart widget was made before the title
        and the script existed, and a change made before the widget has a view
        is not seen by that view: the two are written into the widget's
        serialized document too.
    """
    from bokeh.core.serialization import Serializer
    from bokeh.models import CustomJS

    doc = app.chart.layout.document
    doc.title = _title(app.state.plan)
    callback = CustomJS(args={"anchor": app.chart.tuning}, code=_TITLE_JS)
    doc.js_on_event("document_ready", callback)
    bundle = dict(app.bokeh.render_bundle)
    ((doc_id, doc_json),) = bundle["docs_json"].items()
    if "callbacks" in doc_json:  # the document had callbacks of its own: serialize it all again (~200 ms)
        app.bokeh.update_from_model(app.chart.layout)
    else:  # the two additions only (~2 ms); the callback's args refer to models the page has
        known = set(doc.models) - {callback}
        callbacks = Serializer(references=known).encode({"document_ready": [callback]})
        bundle["docs_json"] = {doc_id: {**doc_json, "title": doc.title, "callbacks": callbacks}}
        app.bokeh.render_bundle = bundle

    def retitle(state: Any, what: str) -> None:
        if what == "plan":
            doc.title = _title(state.plan)  # Bokeh sends nothing when the name did not change

    app.state.observe(retitle)
