"""One helper for the tests that start ``mixchart serve``: from the checkout and from a wheel."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import time
import urllib.request


def free_port() -> int:
    """A TCP port on 127.0.0.1 that nothing listens on now."""
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def port_open(port: int) -> bool:
    with socket.socket() as sock:
        sock.settimeout(0.3)
        return sock.connect_ex(("127.0.0.1", port)) == 0


def serve_fetch_and_stop(command: list[str], port: int, **popen) -> tuple[str, str, int]:
    """Start ``command`` (a ``mixchart serve --port PORT``), wait for the address it prints,
    fetch the page, then stop it with SIGTERM as a user's Ctrl-C would.

    Returns the printed output, the page and the exit status; the port is closed on return
    (asserted), so Voila stopped with it.  The process group is killed if it does not stop.
    """
    proc = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                            start_new_session=True, **popen)
    try:
        lines = []
        deadline = time.monotonic() + 90
        while time.monotonic() < deadline:
            line = proc.stdout.readline()
            if not line:
                break
            lines.append(line)
            if "mixchart planner: http://127.0.0.1:" in line:
                break
        printed = "".join(lines)
        assert f"http://127.0.0.1:{port}/" in printed, printed
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=60) as response:
            page = response.read().decode("utf-8", "replace")
        assert response.status == 200, response.status
    finally:
        proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(timeout=30)
        finally:
            if proc.poll() is None:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=10)
            proc.stdout.close()
    deadline = time.monotonic() + 15
    while port_open(port) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert not port_open(port), "Voila must stop with mixchart serve"
    return printed, page, proc.returncode
