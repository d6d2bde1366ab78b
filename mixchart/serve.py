"""``mixchart serve``: the planning notebook served by Voila on 127.0.0.1.

The served notebook is two lines: it reads the plan file named by the
``MIXCHART_PLAN`` environment variable (or uses the built-in example) and
shows :func:`mixchart.app.planner`.  The same notebook is kept in the
repository as ``notebooks/planner.ipynb``; a test keeps the two identical.
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

__all__ = ["PLANNER_SOURCE", "planner_notebook", "serve"]

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
    folder = Path(tempfile.mkdtemp(prefix="mixchart-serve-"))
    notebook = folder / "planner.ipynb"
    notebook.write_text(json.dumps(planner_notebook(), indent=1), encoding="utf-8")
    env = dict(os.environ)
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
