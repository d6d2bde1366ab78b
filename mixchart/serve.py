"""``mixchart serve``: the planning notebook served by Voila on 127.0.0.1.

The served notebook is two lines: it reads the plan file named by the
``MIXCHART_PLAN`` environment variable (or uses the built-in example) and
shows :func:`mixchart.app.planner`.  The same notebook is kept in the
repository as ``notebooks/planner.ipynb``; a test keeps the two identical.

Voila's own page template asks a CDN for two Font Awesome stylesheets, which
fail offline.  Its page bundle already carries Font Awesome 5 and the v4 icon
names (the widgets' button icons), with the fonts served by Voila itself, so
the served folder holds a page template that is Voila's ``lab`` template
without those two links (:func:`write_served_folder`); Voila finds it through
``JUPYTER_PATH`` (:func:`voila_env`) and a ``voila.json`` beside the notebook.
The same ``voila.json`` keeps Notebook 7's JupyterLab extension out of the
page, where it fails to load.  The served notebook's title, which Voila puts
in the page's ``<title>``, is the plan's name.
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

from .errors import MixchartError

__all__ = ["PLANNER_SOURCE", "planner_notebook", "write_served_folder", "voila_env", "serve"]

#: The code cell of the planning notebook.
PLANNER_SOURCE = (
    "import os\n"
    "from mixchart.app import planner\n"
    "\n"
    "# The plan file comes from `mixchart serve PLAN` (or set MIXCHART_PLAN); none = built-in example.\n"
    'planner(os.environ.get("MIXCHART_PLAN") or None)'
)


def planner_notebook() -> dict[str, Any]:
    """The planning notebook as an nbformat-4 JSON document (a dict)."""
    return {
        "cells": [
            {
                "cell_type": "code",
                "execution_count": None,
                "id": "planner",
                "metadata": {},
                "outputs": [],
                "source": PLANNER_SOURCE,
            },
        ],
        "metadata": {
            "kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"},
            "language_info": {"name": "python"},
        },
        "nbformat": 4,
        "nbformat_minor": 5,
    }


#: Name of the page template written by :func:`write_served_folder`.
TEMPLATE = "mixchart"

#: JupyterLab extensions that Voila would load into the page and that fail there: Notebook 7's
#: (its "open in Notebook" parts need JupyterLab's document registry, which Voila's page lacks,
#: and it logs an error), where Notebook 7 is installed beside Voila.
DENIED_EXTENSIONS = ("@jupyter-notebook/lab-extension",)

#: The stylesheet links of Voila 0.5's ``lab`` template that reach for a CDN.
_CDN_LINKS = (
    '<link rel="stylesheet" href="https://cdn.jsdelivr.net/npm/@fortawesome/fontawesome-free@^5/css/all.min.css"'
    ' type="text/css" />',
    '<link rel="stylesheet" href="https://cdn.jsdelivr.net/npm/@fortawesome/fontawesome-free@^5/css/v4-shims.min.css"'
    ' type="text/css" />',
)


def _template_index() -> str:
    drop = "".join(f" | replace('{link}', '')" for link in _CDN_LINKS)  # the links hold no single quote
    return (
        "{%- extends 'lab/index.html.j2' -%}\n"
        "{#- Voila's lab page without the Font Awesome stylesheets it asks a CDN for: its own bundle\n"
        "    carries Font Awesome 5 and the v4 names, and Voila serves the fonts. -#}\n"
        "{%- block notebook_css -%}\n"
        f"{{{{ super(){drop} }}}}\n"
        "{%- endblock notebook_css -%}\n"
    )


def write_served_folder(folder: str | os.PathLike[str], title: str) -> Path:
    """Write the served notebook, its Voila configuration and the page template into ``folder``.

    Parameters
    ----------
    folder : path-like
        An existing folder; Voila runs with it as its working directory (it
        reads ``voila.json`` from there) and with :func:`voila_env`.
    title : str
        The page title (the plan's name).

    Returns
    -------
    Path
        The notebook, ``folder/planner.ipynb``.
    """
    folder = Path(folder)
    notebook_json = planner_notebook()
    notebook_json["metadata"]["title"] = title
    notebook = folder / "planner.ipynb"
    notebook.write_text(json.dumps(notebook_json, indent=1), encoding="utf-8")
    config = {"VoilaConfiguration": {"template": TEMPLATE, "extension_denylist": list(DENIED_EXTENSIONS)}}
    (folder / "voila.json").write_text(json.dumps(config), encoding="utf-8")
    write_template(folder)
    return notebook


def write_template(folder: str | os.PathLike[str]) -> list[str]:
    """Write only the page template into ``folder/jupyter``; return the Voila options that use it.

    For serving a notebook that lives elsewhere (the tests' Voila fixture): run Voila with these
    options and with :func:`voila_env` of ``folder``.
    """
    template = Path(folder) / "jupyter" / "voila" / "templates" / TEMPLATE
    template.mkdir(parents=True, exist_ok=True)
    (template / "conf.json").write_text(json.dumps({"base_template": "lab"}), encoding="utf-8")
    (template / "index.html.j2").write_text(_template_index(), encoding="utf-8")
    denied = json.dumps(list(DENIED_EXTENSIONS))
    return [f"--template={TEMPLATE}", f"--VoilaConfiguration.extension_denylist={denied}"]


def voila_env(folder: str | os.PathLike[str]) -> dict[str, str]:
    """Environment entries under which Voila finds the template of :func:`write_served_folder`."""
    others = [p for p in os.environ.get("JUPYTER_PATH", "").split(os.pathsep) if p]
    paths = [str(Path(folder).resolve() / "jupyter"), *others]
    return {"JUPYTER_PATH": os.pathsep.join(paths)}


def _plan_title(plan_path: str | os.PathLike[str] | None) -> str:
    from .notebook_js import UNTITLED
    from .plan import load_plan
    from .state import example_plan

    plan = example_plan()[0] if plan_path is None else load_plan(plan_path)
    return plan.name.strip() or UNTITLED


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def _wait_for_port(port: int, process: subprocess.Popen, timeout_s: float = 60.0) -> bool:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if process.poll() is not None:
            return False
        with socket.socket() as sock:
            sock.settimeout(0.5)
            if sock.connect_ex(("127.0.0.1", port)) == 0:
                return True
        time.sleep(0.2)
    return False


def voila_command(notebook: Path, port: int) -> list[str]:
    """The Voila command line for a notebook on 127.0.0.1:port."""
    return [
        sys.executable,
        "-m",
        "voila",
        str(notebook),
        "--no-browser",
        f"--port={port}",
        "--Voila.ip=127.0.0.1",
        "--show_tracebacks=False",
    ]


def serve(plan_path: str | os.PathLike[str] | None, *, port: int = 0) -> int:
    """Serve the planner with Voila until interrupted.

    Parameters
    ----------
    plan_path : path-like or None
        Plan file to open (None: the built-in example).
    port : int
        TCP port on 127.0.0.1; 0 picks a free one.  The address is printed
        for the user to open.

    Returns
    -------
    int
        Exit status: 0 after Ctrl-C, 2 if Voila is missing or fails to start.
    """
    if importlib.util.find_spec("voila") is None:
        raise MixchartError("serve: Voila is not installed; install it with: pip install 'mixchart[app]'")
    port = port or _free_port()
    title = _plan_title(plan_path)
    folder = Path(tempfile.mkdtemp(prefix="mixchart-serve-"))
    notebook = write_served_folder(folder, title)
    env = {**os.environ, **voila_env(folder)}
    env["MIXCHART_CWD"] = os.getcwd()  # saves without a plan file land where the user started us
    if plan_path is not None:
        env["MIXCHART_PLAN"] = str(Path(plan_path).resolve())
    process = subprocess.Popen(voila_command(notebook, port), env=env, cwd=folder, start_new_session=True)

    def _stop(_signum: int, _frame: Any) -> None:
        raise KeyboardInterrupt  # run the clean-up below on SIGTERM too

    previous = signal.signal(signal.SIGTERM, _stop)
    try:
        if not _wait_for_port(port, process):
            print("mixchart: error: Voila did not start", file=sys.stderr)
            return 2
        print(f"mixchart planner: http://127.0.0.1:{port}/  (Ctrl-C stops it)", flush=True)
        process.wait()
        return 0
    except KeyboardInterrupt:
        return 0
    finally:
        signal.signal(signal.SIGTERM, previous)
        if process.poll() is None:
            os.killpg(process.pid, signal.SIGTERM)
            try:
                process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                os.killpg(process.pid, signal.SIGKILL)
        shutil.rmtree(folder, ignore_errors=True)
