"""Fixtures for real-browser tests: a Voila server and Debian Chromium via Playwright.

The browser tests drive the real stack (kernel -> ipywidgets comm ->
jupyter_bokeh -> BokehJS canvas) in headless Debian Chromium.  Nothing is
downloaded: Playwright's own browser download (``playwright install``) fails on
our machines, so we point Playwright's Python package at ``/usr/bin/chromium``
and abort every request that does not go to this machine.

Under ``CI=true`` a missing browser or a missing ``playwright`` package is a
hard failure, never a silent skip.  Outside CI those tests skip with a reason.

Fixtures
--------
chromium_path (session)
    Path of the Debian Chromium binary.
voila_server (session)
    Factory ``voila_server(notebook_path, env=None, *, plan=None,
    timeout_s=120.0) -> VoilaServer``.  One server per (notebook, env) for the
    whole session; all are stopped (whole process group, plus kernels) at the
    end.
browser (session)
    A Playwright ``Browser`` running Debian Chromium.
browser_page_factory (session)
    Factory ``browser_page_factory() -> Page`` for pages that a module-scoped
    fixture keeps loaded across several tests (a Voila page load costs ~10 s).
browser_page (function)
    A fresh page for one test.
artifacts_dir (session)
    ``tests/browser/artifacts/`` (git-ignored): where tests save screenshots
    for people to look at.

Every page made here has two extra list attributes: ``page.console_errors``
(console messages of type "error" and uncaught page errors, as strings) and
``page.blocked_requests`` (URLs aborted because they were not local).
"""

from __future__ import annotations

import dataclasses
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path
from urllib.parse import urlsplit

import pytest

CHROMIUM = Path("/usr/bin/chromium")

#: Flags measured to work for Debian chromium headless as root on our machines.
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-dev-shm-usage",
    # Belt and braces beside the request router: no DNS for any other host,
    # so nothing (not even a websocket) can leave the machine.
    "--host-resolver-rules=MAP * ~NOTFOUND , EXCLUDE localhost , EXCLUDE 127.0.0.1",
]

LOCAL_HOSTS = frozenset({"localhost", "127.0.0.1", "::1", "[::1]"})

#: Environment variable through which the app notebook receives a plan file.
PLAN_ENV = "MIXCHART_PLAN"

VIEWPORT = {"width": 1280, "height": 1000}


def in_ci() -> bool:
    """True when the CI environment variable says we run under CI."""
    return os.environ.get("CI", "").strip().lower() in {"1", "true", "yes", "on"}


def _unavailable(reason: str) -> None:
    """Fail under CI, skip elsewhere: a browser test must never skip silently in CI."""
    if in_ci():
        pytest.fail(f"CI=true but {reason}; .ci/run must install it", pytrace=False)
    pytest.skip(reason)


# --------------------------------------------------------------------------
# Browser
# --------------------------------------------------------------------------


@pytest.fixture(scope="session")
def chromium_path() -> Path:
    """Path of Debian Chromium (``apt-get install chromium``)."""
    if not CHROMIUM.exists():
        _unavailable(f"{CHROMIUM} is missing (apt-get install -y chromium)")
    return CHROMIUM


@pytest.fixture(scope="session")
def _playwright():
    try:
        from playwright.sync_api import sync_playwright
    except ImportError as exc:  # pragma: no cover - depends on the machine
        _unavailable(f"the playwright package cannot be imported ({exc})")
    pw = sync_playwright().start()
    try:
        yield pw
    finally:
        pw.stop()


@pytest.fixture(scope="session")
def browser(_playwright, chromium_path, tmp_path_factory):
    """Debian Chromium, headless, launched once per session."""
    browser = _playwright.chromium.launch(
        executable_path=str(chromium_path),
        headless=True,
        args=CHROMIUM_ARGS,
        # Playwright gives each launch a fresh temporary profile; keep its
        # downloads and artefacts inside pytest's tmp dir too.
        downloads_path=str(tmp_path_factory.mktemp("chromium-downloads")),
        timeout=60_000,
    )
    try:
        yield browser
    finally:
        browser.close()


def _is_local(url: str) -> bool:
    parts = urlsplit(url)
    if parts.scheme in {"data", "blob", "about"}:
        return True
    return (parts.hostname or "") in LOCAL_HOSTS


def _new_page(browser, default_timeout_ms: float = 30_000):
    context = browser.new_context(viewport=VIEWPORT, device_scale_factor=1)
    page = context.new_page()
    page.console_errors = []
    page.blocked_requests = []

    def only_local(route):
        url = route.request.url
        if _is_local(url):
            route.continue_()
        else:
            page.blocked_requests.append(url)
            route.abort()

    context.route("**/*", only_local)

    def on_console(msg):
        if msg.type == "error":
            loc = msg.location or {}
            where = f" ({loc.get('url', '')}:{loc.get('lineNumber', '')})" if loc.get("url") else ""
            page.console_errors.append(f"{msg.text}{where}")

    page.on("console", on_console)
    page.on("pageerror", lambda exc: page.console_errors.append(f"pageerror: {exc}"))
    page.set_default_timeout(default_timeout_ms)
    return page


@pytest.fixture(scope="session")
def browser_page_factory(browser):
    """Factory of pages (own context each) closed at session end.

    Use it from module-scoped fixtures that load a Voila page once and share it.
    """
    pages = []

    def make(default_timeout_ms: float = 30_000):
        page = _new_page(browser, default_timeout_ms)
        pages.append(page)
        return page

    yield make
    for page in pages:
        try:
            page.context.close()
        except Exception:
            pass


@pytest.fixture
def browser_page(browser):
    """A fresh Playwright page for one test (own context, local requests only)."""
    page = _new_page(browser)
    try:
        yield page
    finally:
        page.context.close()


@pytest.fixture(scope="session")
def artifacts_dir() -> Path:
    """``tests/browser/artifacts/``, created; screenshots go here (git-ignored)."""
    path = Path(__file__).parent / "artifacts"
    path.mkdir(exist_ok=True)
    return path


# --------------------------------------------------------------------------
# Voila
# --------------------------------------------------------------------------


@dataclasses.dataclass
class VoilaServer:
    """A running ``voila`` process serving one notebook.

    Attributes
    ----------
    url : str
        Base URL (``http://127.0.0.1:PORT/``); it renders the notebook.
    port : int
        TCP port on 127.0.0.1.
    notebook : Path
        The notebook served.
    log_path : Path
        File receiving voila's stdout and stderr (kernel tracebacks land here).
    proc : subprocess.Popen
        The server process (leader of its own process group).
    """

    url: str
    port: int
    notebook: Path
    log_path: Path
    proc: subprocess.Popen

    def log_text(self, tail_chars: int = 6000) -> str:
        """Last ``tail_chars`` characters of the server log."""
        try:
            return self.log_path.read_text(errors="replace")[-tail_chars:]
        except OSError:
            return ""


def _free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _port_open(port: int) -> bool:
    try:
        with socket.create_connection(("127.0.0.1", port), timeout=0.5):
            return True
    except OSError:
        return False


def _descendants(pid: int) -> list[int]:
    """PIDs of all descendants of ``pid`` (Linux /proc), deepest last."""
    children: dict[int, list[int]] = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
        except OSError:
            continue
        # Field 4 (ppid) follows the ")" that closes the command name.
        ppid = int(stat.rsplit(")", 1)[1].split()[1])
        children.setdefault(ppid, []).append(int(entry.name))
    out, todo = [], [pid]
    while todo:
        for child in children.get(todo.pop(), []):
            out.append(child)
            todo.append(child)
    return out


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    # A zombie still answers kill(0); treat it as gone.
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def _stop_server(server: VoilaServer, grace_s: float = 10.0) -> None:
    """SIGTERM voila's process group, then SIGKILL it and any leftover kernel.

    jupyter_client starts kernels in sessions of their own, so they are not in
    voila's process group: remember them first and kill them by PID if voila's
    own shutdown did not.
    """
    proc = server.proc
    if proc.poll() is not None:
        return
    kernels = _descendants(proc.pid)
    try:
        os.killpg(proc.pid, signal.SIGTERM)
    except ProcessLookupError:
        pass
    try:
        proc.wait(timeout=grace_s)
    except subprocess.TimeoutExpired:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        proc.wait(timeout=grace_s)
    deadline = time.monotonic() + 3.0
    while any(_alive(k) for k in kernels) and time.monotonic() < deadline:
        time.sleep(0.1)
    for pid in kernels:
        if _alive(pid):
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass


@pytest.fixture(scope="session")
def voila_server(tmp_path_factory):
    """Factory that serves a notebook with Voila on 127.0.0.1 and a free port.

    ``voila_server(notebook_path, env=None, *, plan=None, timeout_s=120.0)``
    returns a :class:`VoilaServer`.  ``env`` entries are added to this
    process's environment (the kernel inherits the server's environment);
    ``plan`` is a shortcut for ``env={"MIXCHART_PLAN": str(plan)}``.  Calling it
    twice with the same notebook and env returns the same running server.
    Readiness is a TCP connect to the port (``/api/kernelspecs`` never answers
    usefully under Voila).  All servers stop at the end of the session.
    """
    servers: dict[tuple, VoilaServer] = {}
    runtime_dir = tmp_path_factory.mktemp("jupyter-runtime")

    def start(notebook_path, env=None, *, plan=None, timeout_s: float = 120.0) -> VoilaServer:
        notebook = Path(notebook_path).resolve()
        if not notebook.is_file():
            raise FileNotFoundError(f"notebook_path={str(notebook)!r} does not exist")
        extra = {k: str(v) for k, v in (env or {}).items()}
        if plan is not None:
            extra[PLAN_ENV] = str(Path(plan).resolve())
        key = (str(notebook), tuple(sorted(extra.items())))
        if key in servers and servers[key].proc.poll() is None:
            return servers[key]

        port = _free_port()
        log_path = Path(tmp_path_factory.mktemp("voila-log")) / f"voila-{port}.log"
        # the page template `mixchart serve` uses: nothing fetched from a CDN, Notebook 7's extension kept out
        from mixchart.serve import voila_env, write_template

        template_dir = Path(tmp_path_factory.mktemp("voila-template"))
        template_opts = write_template(template_dir)
        full_env = {
            **os.environ,
            **voila_env(template_dir),
            "JUPYTER_PLATFORM_DIRS": "1",
            "JUPYTER_RUNTIME_DIR": str(runtime_dir),
            # debugpy inside ipykernel warns about frozen modules otherwise.
            "PYDEVD_DISABLE_FILE_VALIDATION": "1",
            "PYTHONUNBUFFERED": "1",
            **extra,
        }
        cmd = [
            sys.executable,
            "-m",
            "voila",
            str(notebook),
            "--no-browser",
            f"--port={port}",
            "--Voila.ip=127.0.0.1",
            "--show_tracebacks=True",
            *template_opts,
        ]
        log = open(log_path, "wb")
        try:
            proc = subprocess.Popen(
                cmd,
                cwd=notebook.parent,
                env=full_env,
                stdin=subprocess.DEVNULL,
                stdout=log,
                stderr=subprocess.STDOUT,
                start_new_session=True,
            )
        finally:
            log.close()
        server = VoilaServer(
            url=f"http://127.0.0.1:{port}/", port=port, notebook=notebook, log_path=log_path, proc=proc
        )
        servers[key] = server
        _RUNNING.append(server)
        deadline = time.monotonic() + timeout_s
        while not _port_open(port):
            if proc.poll() is not None:
                raise RuntimeError(
                    f"voila exited with code {proc.returncode} before listening on port {port}; "
                    f"log {log_path}:\n{server.log_text()}"
                )
            if time.monotonic() > deadline:
                _stop_server(server)
                raise TimeoutError(
                    f"voila did not listen on port {port} within {timeout_s} s; "
                    f"log {log_path}:\n{server.log_text()}"
                )
            time.sleep(0.1)
        return server

    yield start
    for server in servers.values():
        _stop_server(server)
        if server in _RUNNING:
            _RUNNING.remove(server)


_RUNNING: list[VoilaServer] = []


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    """On a failed browser test, keep a screenshot and show the Voila logs' tails.

    A failure on a loaded CI machine is otherwise hard to read after the fact:
    the screenshot goes to ``tests/browser/artifacts/<test>-failure.png`` and the
    last lines of each running server's log are added to the report.
    """
    outcome = yield
    report = outcome.get_result()
    if report.when != "call" or not report.failed:
        return
    pages = []
    for value in item.funcargs.values():
        page = getattr(value, "page", value)
        if hasattr(page, "screenshot") and hasattr(page, "mouse"):
            pages.append(page)
    folder = Path(__file__).resolve().parent / "artifacts"
    folder.mkdir(exist_ok=True)
    for i, page in enumerate(pages):
        try:
            page.screenshot(path=str(folder / f"{item.name}-failure{i or ''}.png"), full_page=True)
        except Exception as exc:
            report.sections.append(("failure screenshot", f"could not take it: {exc}"))
    for server in _RUNNING:
        tail = "\n".join(server.log_text().splitlines()[-40:])
        report.sections.append((f"voila log tail ({server.notebook.name}, port {server.port})", tail))
