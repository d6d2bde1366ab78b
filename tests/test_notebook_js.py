"""What the planner's output carries besides its widgets, and the page ``mixchart serve`` serves.

* Every display of the planner carries BokehJS, once, inline, guarded so that
  a page that has it keeps it (tests/browser/test_jupyterlab.py checks the
  pages: first run, reload, second tab).
* The chart's Bokeh document holds the plan's name, which a Voila page shows as
  its title and follows.
* The served folder's page template is Voila's ``lab`` page without the two
  stylesheets it asks a CDN for.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

import bokeh

from mixchart import notebook_js
from mixchart.app import planner
from mixchart.notebook_js import BOKEHJS_COMPONENTS, JS_MIME, UNTITLED, bokehjs_bundle
from mixchart.plan import load_plan
from mixchart.serve import planner_notebook, voila_env, write_served_folder

EXAMPLE = Path(__file__).resolve().parents[1] / "mixchart" / "examples" / "fm_receiver.json"
WIDGET_MIME = "application/vnd.jupyter.widget-view+json"
#: A line Bokeh's inline loader writes after each BokehJS file it carries.
END_OF = "/* END {}.min.js */"


def _bokehjs_copies(text: str) -> int:
    return text.count(END_OF.format("bokeh"))


# --------------------------------------------------------------------------- the BokehJS bundle


def test_the_bundle_is_one_guarded_script_with_the_components_the_planner_draws() -> None:
    bundle = bokehjs_bundle()
    assert list(bundle) == [JS_MIME]  # one mime type: output_notebook sends the same script twice
    script = bundle[JS_MIME]
    assert _bokehjs_copies(script) == 1
    assert END_OF.format("bokeh-widgets") in script  # the chart's Div is a Bokeh widget
    for absent in ("bokeh-tables", "bokeh-gl", "bokeh-mathjax"):
        assert END_OF.format(absent) not in script, absent
    # the guard: skipped on a page that already has this version and its widgets
    assert script.startswith(
        f'if (!(typeof window.Bokeh !== "undefined" && window.Bokeh.version === "{bokeh.__version__}"'
        " && window.Bokeh.Widgets !== undefined)) {\n"
    )
    assert script.rstrip().endswith("}")
    assert "<script src=" not in script and "cdn.bokeh.org" not in script  # inline, nothing fetched


def test_the_charts_need_no_bokehjs_component_beyond_those_loaded() -> None:
    from mixchart.report import _bokeh_components  # the report's own list of what layouts need

    app = planner(str(EXAMPLE)).app
    app.state.keep_reference()  # the reference chart is built later, on the page loaded before
    assert app.reference_panel.chart is not None
    needed = _bokeh_components([app.chart.layout, app.reference_panel.chart.layout])
    assert set(needed) <= set(BOKEHJS_COMPONENTS), needed


def test_every_display_of_the_planner_publishes_bokehjs_then_the_widget(monkeypatch) -> None:
    import IPython.display
    from IPython.core.formatters import DisplayFormatter

    published: list[dict] = []
    monkeypatch.setattr(IPython.display, "publish_display_data", lambda data, *a, **k: published.append(data))
    widget = planner(str(EXAMPLE))
    # IPython's own formatter finds the hook, as a cell's last expression or display() would
    assert DisplayFormatter().format(widget) == ({}, {})
    assert DisplayFormatter().format(widget) == ({}, {})
    assert [list(d) for d in published] == [[JS_MIME], ["text/plain", WIDGET_MIME]] * 2
    assert published[0] == bokehjs_bundle()
    assert published[1][WIDGET_MIME]["model_id"] == widget.model_id


# --------------------------------------------------------------------------- the page title


def test_the_chart_document_carries_the_plan_name_and_follows_it() -> None:
    app = planner(str(EXAMPLE)).app
    doc = app.chart.layout.document
    name = load_plan(EXAMPLE).name
    assert doc.title == name
    # the widget's first view is made from its render bundle: it must hold the title and the script
    docs_json = app.bokeh.render_bundle["docs_json"]
    (doc_json,) = docs_json.values()
    assert doc_json["title"] == name
    callbacks = json.dumps(doc_json["callbacks"], default=str)
    assert "document_ready" in callbacks and "dataset.voila" in callbacks
    app.state.try_update({"name": "option B <draft>"})
    assert doc.title == "option B <draft>"  # a page title is text, not HTML: no escaping here
    app.state.try_update({"name": "  "})
    assert doc.title == UNTITLED
    app.state.try_update({"lo.side": "low"})  # another change leaves the name alone
    assert doc.title == UNTITLED


def test_the_widgets_document_gets_what_a_full_serialization_would_give() -> None:
    app = planner(str(EXAMPLE)).app
    (patched,) = app.bokeh.render_bundle["docs_json"].values()
    (fresh,) = app.bokeh._model_to_traits(app.chart.layout)["docs_json"].values()  # what jupyter_bokeh does
    assert patched["title"] == fresh["title"]
    assert patched["callbacks"] == fresh["callbacks"]


def test_a_document_with_callbacks_of_its_own_keeps_them() -> None:
    from bokeh.models import CustomJS

    from mixchart.app import PlannerApp, PlanState, example_plan

    app = PlannerApp(PlanState(*example_plan()))
    app.chart.layout.document.js_on_event("document_ready", CustomJS(code="/* theirs */"))
    app.bokeh.update_from_model(app.chart.layout)
    notebook_js.title_follows_plan(app)
    (doc_json,) = app.bokeh.render_bundle["docs_json"].values()
    callbacks = json.dumps(doc_json["callbacks"], default=str)
    assert "/* theirs */" in callbacks and "dataset.voila" in callbacks


def test_the_title_script_acts_on_voila_pages_only() -> None:
    code = notebook_js._TITLE_JS
    assert code.index("dataset.voila === undefined") < code.index("window.document.title =")


# --------------------------------------------------------------------------- the served folder


def test_the_served_folder_holds_the_notebook_the_config_and_the_template(tmp_path) -> None:
    notebook = write_served_folder(tmp_path, "FM tuner <b>")
    written = json.loads(notebook.read_text(encoding="utf-8"))
    expected = planner_notebook()
    expected["metadata"]["title"] = "FM tuner <b>"  # Voila's <title> (it escapes it)
    assert written == expected
    config = json.loads((tmp_path / "voila.json").read_text())["VoilaConfiguration"]
    assert config == {"template": "mixchart", "extension_denylist": ["@jupyter-notebook/lab-extension"]}
    template = tmp_path / "jupyter" / "voila" / "templates" / "mixchart"
    assert json.loads((template / "conf.json").read_text()) == {"base_template": "lab"}
    assert (template / "index.html.j2").read_text().startswith("{%- extends 'lab/index.html.j2' -%}")
    env = voila_env(tmp_path)
    assert env["JUPYTER_PATH"].split(os.pathsep)[0] == str((tmp_path / "jupyter").resolve())


def test_the_template_drops_the_very_links_of_voilas_lab_page(tmp_path) -> None:
    pytest.importorskip("voila")
    from jupyter_core.paths import jupyter_path

    from mixchart.serve import _CDN_LINKS

    stock = next(Path(p) / "index.html.j2" for p in jupyter_path("voila", "templates", "lab")
                 if (Path(p) / "index.html.j2").is_file())
    text = stock.read_text(encoding="utf-8")
    cdn_lines = [line.strip() for line in text.splitlines() if "https://" in line and "<link" in line]
    assert sorted(cdn_lines) == sorted(_CDN_LINKS)  # a new Voila that moves them fails here first
    index = (Path(write_served_folder(tmp_path, "x")).parent / "jupyter" / "voila" / "templates" / "mixchart"
             / "index.html.j2").read_text(encoding="utf-8")
    for link in _CDN_LINKS:
        assert f"replace('{link}', '')" in index


# --------------------------------------------------------------------------- a saved notebook


@pytest.mark.slow
def test_a_saved_notebook_holds_one_bokehjs_per_display(tmp_path) -> None:
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")

    nb = nbformat.v4.new_notebook()
    nb.cells = [
        nbformat.v4.new_code_cell(f"from mixchart.app import planner\nplanner({str(EXAMPLE)!r})"),
    ]
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nbclient.NotebookClient(nb, timeout=180, kernel_name="python3", store_widget_state=True).execute()
    path = tmp_path / "saved.ipynb"
    nbformat.write(nb, path)
    outputs = nb.cells[0].outputs
    assert [o.output_type for o in outputs] == ["display_data", "display_data"]
    assert list(outputs[0].data) == [JS_MIME] and WIDGET_MIME in outputs[1].data
    text = path.read_text(encoding="utf-8")
    assert _bokehjs_copies(text) == 1  # was 2 (and every component) with output_notebook: 8.5 MB
    size_mb = path.stat().st_size / 1e6
    print(f"\nsaved notebook: {size_mb:.2f} MB")
    assert size_mb < 3.0  # 1.7 MB of BokehJS and the widgets' state
