"""`mixchart serve` starts Voila on 127.0.0.1, serves the planner, and cleans up after itself."""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import time
import urllib.request

import pytest

pytest.importorskip("voila")


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return int(sock.getsockname()[1])


def _port_open(port: int) -> bool:
    with socket.socket() as sock:
        sock.settimeout(0.3)
        return sock.connect_ex(("127.0.0.1", port)) == 0


@pytest.mark.slow
def test_serve_prints_the_address_serves_the_page_and_stops_cleanly() -> None:
    port = _free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "mixchart", "serve", "--port", str(port)],
        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, start_new_session=True,
    )
    try:
        deadline = time.monotonic() + 90
        lines = []
        while time.monotonic() < deadline:
            line = proc.stdout.readline()
            if not line:
                break
            lines.append(line)
            if "mixchart planner: http://127.0.0.1:" in line:
                break
        address = re.search(r"http://127\.0\.0\.1:(\d+)/", "".join(lines))
        assert address, "".join(lines)
        assert int(address.group(1)) == port
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=60) as response:
            page = response.read().decode("utf-8", "replace")
        assert response.status == 200 and "voila" in page.lower()
    finally:
        proc.send_signal(signal.SIGTERM)
        proc.wait(timeout=30)
        proc.stdout.close()
    deadline = time.monotonic() + 15
    while _port_open(port) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert not _port_open(port), "Voila must stop with mixchart serve"


def test_serve_refuses_a_bad_plan_before_starting(tmp_path) -> None:
    bad = tmp_path / "bad.json"
    bad.write_text('{"direction": "sideways"}', encoding="utf-8")
    result = subprocess.run(
        [sys.executable, "-m", "mixchart", "serve", str(bad), "--port", str(_free_port())],
        capture_output=True, text=True, timeout=60, env={**os.environ},
    )
    assert result.returncode == 2
    assert "direction" in result.stderr and "Traceback" not in result.stderr
