"""The planner in JupyterLab across page loads, and the page Voila serves.

JupyterLab runs on 127.0.0.1 with a temporary root, settings and workspaces,
and no token.  One notebook cell, ``planner("plan.json")``, is run from the
Run menu as a user would.  The chart must draw on the first run, again after
the page is reloaded while the kernel keeps running, and in a second tab on
the same kernel: each new page needs BokehJS of its own, which the planner's
output carries (mixchart/notebook_js.py).  A page that already has BokehJS
keeps it.

Notebook 7 is not installed for the tests: its JupyterLab extension is then
loaded by every Voila page too, where it fails and logs a console error.  It
was checked by hand with the same steps (notebook 7.6.5: the chart drew in a
Notebook 7 tab on the kernel JupyterLab had started).

Voila, serving the folder that ``mixchart serve`` writes (mixchart/serve.py),
must request nothing off the machine (its stock template asks a CDN for
Font Awesome) and title the tab with the plan's name.
"""

from __future__ import annotations

import importlib.util
import json
import os
import re
import shutil
import subprocess
import sys
import time
import urllib.request
from pathlib import Path
from types import SimpleNamespace

import helpers as bh
import pytest
from conftest import _free_port, _stop_server, _unavailable
from playwright.sync_api import Error as PlaywrightError

from mixchart.serve import voila_env, write_served_folder

pytestmark = [pytest.mark.browser, pytest.mark.slow]

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "mixchart" / "examples" / "fm_receiver.json"
VIEWPORT = {"width": 1600, "height": 1250}
NOTEBOOK = "planner_lab.ipynb"
CELL = 'from mixchart.app import planner\nplanner("plan.json")'
FIGURES = ("tuning_plane", "output_plane")
#: Outputs that show a Python error in JupyterLab.
ERROR_OUTPUTS = '[data-mime-type="application/vnd.jupyter.stderr"], [data-mime-type="application/vnd.jupyter.error"]'


# --------------------------------------------------------------------------- JupyterLab server

#: User settings of the test server: start the notebook's kernel without asking (JupyterLab 4.6
#: asks which kernel on first open otherwise).
SETTINGS = {"@jupyterlab/notebook-extension/tracker": {"autoStartDefaultKernel": True}}


def _lab_command(root: Path, port: int, state: Path) -> list[str]:
    return [
        sys.executable, "-m", "jupyterlab",
        "--no-browser", "--allow-root",
        "--ServerApp.ip=127.0.0.1", f"--ServerApp.port={port}", "--ServerApp.port_retries=0",
        "--IdentityProvider.token=", f"--ServerApp.root_dir={root}",
        f"--LabApp.workspaces_dir={state / 'workspaces'}", f"--LabApp.user_settings_dir={state / 'settings'}",
        "--LabApp.news_url=None",  # no announcements feed
        "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate",
        # window.jupyterapp, read by the tests only to wait for the notebook's kernel
        "--LabApp.expose_app_in_browser=True",
    ]


def _wait_for_status(url: str, proc: subprocess.Popen, log: Path, timeout_s: float = 120.0) -> None:
    deadline = time.monotonic() + timeout_s
    while True:
        if proc.poll() is not None:
            raise RuntimeError(f"jupyterlab exited with {proc.returncode}; log:\n{log.read_text()[-4000:]}")
        try:
            with urllib.request.urlopen(url + "api/status", timeout=2) as response:
                if response.status == 200:
                    return
        except OSError:
            pass
        if time.monotonic() > deadline:
            raise TimeoutError(f"jupyterlab did not answer within {timeout_s} s; log:\n{log.read_text()[-4000:]}")
        time.sleep(0.25)


@pytest.fixture(scope="module")
def lab(tmp_path_factory, artifacts_dir):
    """A JupyterLab server on a folder holding the planner notebook and a copy of the FM example."""
    if importlib.util.find_spec("jupyterlab") is None:
        _unavailable("jupyterlab is not installed (pip install -c constraints.txt -e '.[test]')")
    root = tmp_path_factory.mktemp("lab-root")
    state = tmp_path_factory.mktemp("lab-state")
    shutil.copy(EXAMPLE, root / "plan.json")
    notebook = {
        "cells": [{"cell_type": "code", "execution_count": None, "id": "planner", "metadata": {}, "outputs": [],
                   "source": CELL}],
        "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"},
                     "language_info": {"name": "python"}},
        "nbformat": 4, "nbformat_minor": 5,
    }
    (root / NOTEBOOK).write_text(json.dumps(notebook), encoding="utf-8")
    for plugin, values in SETTINGS.items():
        path = state / "settings" / f"{plugin}.jupyterlab-settings"
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(values), encoding="utf-8")
    port = _free_port()
    log = state / "lab.log"
    env = {
        **os.environ,
        "JUPYTER_CONFIG_DIR": str(state / "config"),  # no user configuration leaks in
        "JUPYTER_RUNTIME_DIR": str(state / "runtime"),
        "JUPYTER_PLATFORM_DIRS": "1",
        "PYDEVD_DISABLE_FILE_VALIDATION": "1",
        "PYTHONUNBUFFERED": "1",
    }
    with open(log, "wb") as out:
        proc = subprocess.Popen(_lab_command(root, port, state), cwd=root, env=env, stdin=subprocess.DEVNULL,
                                stdout=out, stderr=subprocess.STDOUT, start_new_session=True)
    server = SimpleNamespace(proc=proc, url=f"http://127.0.0.1:{port}/", root=root, log=log, shots=artifacts_dir)
    try:
        _wait_for_status(server.url, proc, log)
        yield server
    finally:
        _stop_server(server)  # the process group, then any kernel left behind


# --------------------------------------------------------------------------- page helpers


def _wait_until(fn, what: str, timeout_s: float = 60.0, interval_s: float = 0.1):
    """helpers.wait_until, with JupyterLab's longer default wait."""
    return bh.wait_until(fn, what, timeout_s, interval_s)


_KERNEL = """() => {
  const app = window.jupyterapp;
  const context = app && app.shell.currentWidget && app.shell.currentWidget.sessionContext;
  const kernel = context && context.isReady && context.session && context.session.kernel;
  return kernel && kernel.connectionStatus === "connected" && kernel.status === "idle" ? kernel.id : null;
}"""


def _wait_for_kernel(page) -> str:
    """Wait until the page's notebook is connected to an idle kernel; its id.

    Running a cell before that makes JupyterLab start a kernel of its own, which
    replaces the running one (a reload would then not keep the kernel).
    """
    return page.wait_for_function(_KERNEL, timeout=120_000, polling=200).json_value()


def _open_notebook(page, url: str) -> str:
    """Load a JupyterLab page on the notebook; the id of its kernel."""
    page.goto(url, wait_until="domcontentloaded", timeout=120_000)
    page.locator(".jp-Notebook .jp-Cell").first.wait_for(timeout=120_000)
    return _wait_for_kernel(page)


def _run_all_cells(page) -> None:
    """Run -> Run All Cells, from the menu bar."""
    page.locator(".lm-MenuBar-item").filter(has_text=re.compile(r"^\s*Run\s*$")).click()
    page.locator(".lm-Menu-item:not(.lm-mod-disabled)").filter(
        has_text=re.compile(r"^\s*Run All Cells")).first.click()


def _documents(page) -> int:
    return page.evaluate("() => (window.Bokeh && Bokeh.documents) ? Bokeh.documents.length : 0")


def _run_and_wait_for_chart(page, step: str, *, documents_before: int = 0, timeout_s: float = 120.0) -> float:
    """Run the notebook and wait until a new chart has drawn; seconds taken.

    Fails at once when the page logs that a widget view could not be made.
    """
    t0 = time.perf_counter()
    seen = len(_view_errors(page))
    _run_all_cells(page)
    try:
        _wait_until(lambda: _view_errors(page)[seen:] or _documents(page) > documents_before,
                    "a new Bokeh document", timeout_s)
        assert _view_errors(page)[seen:] == []
        bh.wait_for_bokeh_idle(page, min_roots=1, timeout_ms=timeout_s * 1000)
        page.locator(".mixchart-app .mixchart-worst-table td").first.wait_for(timeout=60_000)
    except (AssertionError, TimeoutError, PlaywrightError) as exc:
        shot = bh.screenshot(page, Path(__file__).parent / "artifacts" / "jupyterlab-no-chart.png")
        raise AssertionError(f"{step}: no chart ({exc}); console errors {page.console_errors}; "
                             f"blocked {page.blocked_requests}; outputs {_outputs(page)}; screenshot {shot}") from exc
    return time.perf_counter() - t0


def _outputs(page) -> list[str]:
    """Mime type and start of the text of each output on the page (for failure messages)."""
    return page.evaluate("() => [...document.querySelectorAll('.jp-OutputArea-output')]"
                         ".map((el) => `${el.dataset.mimeType}: ${el.innerText.slice(0, 300)}`)")


def _assert_chart(page) -> None:
    names = bh.figure_names(page)
    for name in FIGURES:
        assert name in names, names
    for source in ("tuning_strips", "out_lines"):
        cols = bh.source_data(page, source)
        assert cols and all(len(col) > 0 for col in cols.values()), (source, cols)
    assert page.locator(ERROR_OUTPUTS).count() == 0, page.locator(ERROR_OUTPUTS).all_inner_texts()
    # the layout fits the output area it is given (item 11): no plane runs past its right edge
    bh.wait_for_bokeh_idle(page)
    edges = page.evaluate("""() => {
        const area = document.querySelector('.mixchart-app').closest('.jp-OutputArea-output');
        const right = area.getBoundingClientRect().right;
        return [right, ...['tuning_plane', 'output_plane', 'margin_plot'].map(
            (n) => window.__mxt.plot(n).el.getBoundingClientRect().right)]; }""")
    assert all(edge <= edges[0] + 1 for edge in edges[1:]), edges


#: What the widget manager logs when a view cannot be made (without BokehJS, jupyter_bokeh's cannot).
VIEW_ERRORS = ("Failed to create view", "Could not create a view", "reading 'require'")


def _view_errors(page) -> list[str]:
    return [e for e in page.console_errors if any(v in e for v in VIEW_ERRORS)]


def _open_tab(page, title: str) -> None:
    tab = page.locator(".mixchart-app .lm-TabBar-tab").filter(has_text=re.compile(rf"^\s*{title}\s*$"))
    tab.click()
    page.locator(".mixchart-app .lm-TabBar-tab.lm-mod-current").filter(has_text=title).wait_for()


def _margins(page) -> list[float]:
    """Column "margin dB" of the worst-case table, worst first."""
    return page.evaluate(
        """() => [...document.querySelectorAll('.mixchart-app .mixchart-worst-table table tr')]
                 .filter((tr) => tr.querySelector('td'))
                 .map((tr) => parseFloat(tr.querySelectorAll('td')[5].innerText))"""
    )


def _status(page) -> str:
    return page.locator(".mixchart-app .mixchart-status").inner_text().strip()


# --------------------------------------------------------------------------- JupyterLab


def _shot(page, path: Path) -> None:
    """Screenshot with the chart in view (JupyterLab scrolls the notebook, not the page)."""
    bh.figure_names(page)  # installs the page-side helpers
    page.evaluate("() => window.__mxt.plot('tuning_plane').el.scrollIntoView({block: 'center'})")
    bh.screenshot(page, path, full_page=False)


def test_the_chart_draws_in_jupyterlab_again_after_a_reload_and_in_a_second_tab(lab, browser_page_factory):
    t_start = time.perf_counter()
    page = browser_page_factory(default_timeout_ms=60_000)
    page.set_viewport_size(VIEWPORT)

    # 1. First run (?reset: no workspace restored from an earlier run).
    kernel = _open_notebook(page, f"{lab.url}lab/tree/{NOTEBOOK}?reset")
    t_first = _run_and_wait_for_chart(page, "first run")
    _assert_chart(page)
    import bokeh

    assert page.evaluate("() => Bokeh.version") == bokeh.__version__  # the inline copy, of the Python package
    _shot(page, lab.shots / "jupyterlab-first-run.png")

    # The app works here, not just draws: one press of the requirement slider lowers every
    # margin by 1 dB (derived by hand: margin = rejection - requirement, and the rejection
    # does not depend on the requirement) and the status line follows.
    _open_tab(page, "Plan")
    margins0, status0 = _margins(page), _status(page)
    assert margins0, "the worst-case table is empty"
    bh.press_slider_key(page, ".mixchart-requirement", "ArrowRight")
    _wait_until(lambda: (m := _margins(page)) and len(m) == len(margins0)
                and all(abs(a - (b - 1.0)) < 0.11 for a, b in zip(m, margins0, strict=True)),
                "every margin 1 dB lower")
    _wait_until(lambda: _status(page) != status0, "a new status line")

    # 2. Run again on the same page: the page already has BokehJS and keeps it (the script's
    # guard); a second load would replace window.Bokeh and drop this mark.
    page.evaluate("() => { window.Bokeh.__mixchart_mark = 1; }")
    _run_and_wait_for_chart(page, "second run, same page", documents_before=_documents(page))
    _assert_chart(page)
    assert page.evaluate("() => window.Bokeh.__mixchart_mark") == 1

    # 3. Reload: a new page on the same, still running, kernel.
    page.reload(wait_until="domcontentloaded")
    page.locator(".jp-Notebook .jp-Cell").first.wait_for(timeout=120_000)
    assert _wait_for_kernel(page) == kernel  # the same kernel, still running
    t_reload = _run_and_wait_for_chart(page, "run after a reload", documents_before=_documents(page))
    _assert_chart(page)
    _shot(page, lab.shots / "jupyterlab-after-reload.png")

    # 4. A second tab (a workspace of its own, as JupyterLab gives a second tab) on the same kernel.
    tab = browser_page_factory(default_timeout_ms=60_000)
    tab.set_viewport_size(VIEWPORT)
    assert _open_notebook(tab, f"{lab.url}lab/workspaces/second-tab/tree/{NOTEBOOK}?reset") == kernel
    t_tab = _run_and_wait_for_chart(tab, "run in a second tab", documents_before=_documents(tab))
    _assert_chart(tab)
    _shot(tab, lab.shots / "jupyterlab-second-tab.png")

    for where, p in (("first tab", page), ("second tab", tab)):
        assert _view_errors(p) == [], where
        assert p.blocked_requests == [], where  # nothing left 127.0.0.1
        assert bh.unexpected_console_errors(p) == [], where
    print(f"\nJupyterLab: first run {t_first:.1f} s, after reload {t_reload:.1f} s, second tab {t_tab:.1f} s; "
          f"whole test {time.perf_counter() - t_start:.1f} s")


# --------------------------------------------------------------------------- Voila, as mixchart serve runs it


@pytest.fixture(scope="module")
def served(tmp_path_factory, voila_server, browser_page_factory, artifacts_dir):
    """The folder ``mixchart serve`` writes, served by Voila, loaded in the browser."""
    from mixchart.plan import load_plan

    folder = tmp_path_factory.mktemp("served")
    plan_path = folder / "plan.json"
    shutil.copy(EXAMPLE, plan_path)
    name = load_plan(plan_path).name
    notebook = write_served_folder(folder, name)
    server = voila_server(notebook, env=voila_env(folder), plan=plan_path)
    page = browser_page_factory()
    page.set_viewport_size(VIEWPORT)
    try:
        bh.open_voila(page, server.url)
        page.locator(".mixchart-app .mixchart-worst-table td").first.wait_for()
    except Exception as exc:
        raise AssertionError(f"the served page never became idle: {exc}\nvoila log:\n{server.log_text()}") from exc
    return SimpleNamespace(page=page, server=server, name=name, shots=artifacts_dir)


def test_the_served_page_requests_nothing_off_the_machine_and_keeps_its_icons(served):
    page = served.page
    assert page.blocked_requests == []
    assert bh.unexpected_console_errors(page) == []
    _assert_chart(page)
    # The button icons come from the Font Awesome that Voila's own bundle carries and serves.
    icon = page.locator(".mixchart-app .mixchart-keep-ref i.fa").first  # the thumb-tack of "Keep as reference"
    icon.wait_for()
    glyph = icon.evaluate("(el) => { const s = getComputedStyle(el, '::before'); return"
                          " {font: s.fontFamily, content: s.content, width: el.getBoundingClientRect().width}; }")
    assert "Font Awesome" in glyph["font"] and glyph["content"] not in ("", "none", "normal"), glyph
    assert glyph["width"] > 4, glyph
    assert page.evaluate("() => document.fonts.check('900 14px \"Font Awesome 5 Free\"')"), "icon font not loaded"
    bh.screenshot(page, served.shots / "voila-served.png")


def test_the_served_page_is_titled_with_the_plan_name_and_follows_a_rename(served):
    page = served.page
    assert page.title() == served.name
    _open_tab(page, "File")
    field = page.locator(".mixchart-name input")
    renamed = "bench plan <b>2</b> & co"
    try:
        field.fill(renamed)
        field.press("Enter")
        _wait_until(lambda: page.title() == renamed, f"the title {renamed!r}", timeout_s=30)
    finally:
        field.fill(served.name)
        field.press("Enter")
    _wait_until(lambda: page.title() == served.name, "the original title back", timeout_s=30)
