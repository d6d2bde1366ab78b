"""`mixchart serve` starts Voila on 127.0.0.1, serves the planner, and cleans up after itself."""

from __future__ import annotations

import os
import re
import subprocess
import sys

import pytest

from serving import free_port, serve_fetch_and_stop  # tests/serving.py

pytest.importorskip("voila")


@pytest.mark.slow
def test_serve_prints_the_address_serves_the_page_and_stops_cleanly() -> None:
    port = free_port()
    printed, page, _ = serve_fetch_and_stop([sys.executable, "-m", "mixchart", "serve", "--port", str(port)], port)
    address = re.search(r"http://127\.0\.0\.1:(\d+)/", printed)
    assert address and int(address.group(1)) == port, printed
    assert "voila" in page.lower()


def test_serve_refuses_a_bad_plan_before_starting(tmp_path) -> None:
    bad = tmp_path / "bad.json"
    bad.write_text('{"direction": "sideways"}', encoding="utf-8")
    result = subprocess.run(
        [sys.executable, "-m", "mixchart", "serve", str(bad), "--port", str(free_port())],
        capture_output=True, text=True, timeout=60, env={**os.environ},
    )
    assert result.returncode == 2
    assert "direction" in result.stderr and "Traceback" not in result.stderr
