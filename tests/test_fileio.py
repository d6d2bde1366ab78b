"""Atomic writes keep the old file on failure and give readable files."""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import time

import pytest

from mixchart.errors import PlanError
from mixchart.fileio import STALE_TEMP_SECONDS, _create_temp, atomic_write_text


def test_new_file_is_world_readable_and_complete(tmp_path) -> None:
    path = atomic_write_text(tmp_path / "a.json", "{}\n", error=PlanError, field="plan file")
    assert path.read_text(encoding="utf-8") == "{}\n"
    assert stat.S_IMODE(path.stat().st_mode) == 0o644  # not mkstemp's 0600
    assert [p.name for p in tmp_path.iterdir()] == ["a.json"]


def test_replacing_keeps_the_old_mode(tmp_path) -> None:
    path = tmp_path / "b.json"
    path.write_text("old", encoding="utf-8")
    os.chmod(path, 0o600)
    atomic_write_text(path, "new", error=PlanError, field="plan file")
    assert path.read_text(encoding="utf-8") == "new"
    assert stat.S_IMODE(path.stat().st_mode) == 0o600


def test_failure_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch) -> None:
    path = tmp_path / "c.json"
    path.write_text("old", encoding="utf-8")

    def refuse(*_args):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(PlanError, match=r"^plan file: '.*c\.json' cannot be written \(No space left on device\)$"):
        atomic_write_text(path, "new", error=PlanError, field="plan file")
    assert path.read_text(encoding="utf-8") == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["c.json"]


def test_missing_folder_is_a_one_line_error(tmp_path) -> None:
    with pytest.raises(PlanError, match="cannot be written"):
        atomic_write_text(tmp_path / "nope" / "d.json", "x", error=PlanError, field="plan file")


# ------------------------------------------------ stale temporaries of killed writers (issue 7)

_WRITER = """
import os, sys
from pathlib import Path
from mixchart import fileio
from mixchart.errors import PlanError
real = os.fsync
def stall(fd):  # the temporary is written; stop here until killed
    print("ready", flush=True)
    import time
    time.sleep(600)
os.fsync = stall
fileio.atomic_write_text(Path(sys.argv[1]), "x" * 100000, error=PlanError, field="plan file")
"""


def _killed_writer(target) -> int:
    proc = subprocess.Popen([sys.executable, "-c", _WRITER, str(target)], stdout=subprocess.PIPE, text=True)
    try:
        assert proc.stdout.readline().strip() == "ready"
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=60)
        proc.stdout.close()
    return proc.pid


@pytest.mark.timeout(120)
def test_temporaries_of_a_killed_writer_go_on_the_next_write(tmp_path) -> None:
    target = tmp_path / "plan.json"
    pid = _killed_writer(target)
    litter = [p.name for p in tmp_path.iterdir()]
    assert len(litter) == 1 and litter[0].startswith(f".plan.json.{pid}."), litter  # the pid is in the name
    assert (tmp_path / litter[0]).stat().st_size > 0
    pid = _killed_writer(target)  # a second killed writer clears the first one's file, leaves its own
    assert next(p.name for p in tmp_path.iterdir()).startswith(f".plan.json.{pid}.")
    unrelated = [".plan.json.notes.tmp", "plan.json.bak", ".other.json.12345.0123456789abcdef.tmp"]
    for name in unrelated:
        (tmp_path / name).write_text("keep", encoding="utf-8")
    atomic_write_text(target, "new", error=PlanError, field="plan file")
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["plan.json", *unrelated])
    assert target.read_text(encoding="utf-8") == "new"


def test_stale_by_age_or_dead_pid_but_not_a_live_writers_fresh_file(tmp_path) -> None:
    target = tmp_path / "r.html"
    live = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(600)"])
    try:
        fresh_live = tmp_path / f".r.html.{live.pid}.{'a' * 16}.tmp"
        old_live = tmp_path / f".r.html.{live.pid}.{'b' * 16}.tmp"
        legacy_old = tmp_path / ".r.html.k3j_9x2q.tmp"  # tempfile.mkstemp's name (earlier releases)
        legacy_fresh = tmp_path / ".r.html.zz99aa11.tmp"
        for path in (fresh_live, old_live, legacy_old, legacy_fresh):
            path.write_text("part", encoding="utf-8")
        past = time.time() - 2 * STALE_TEMP_SECONDS
        for path in (old_live, legacy_old):
            os.utime(path, (past, past))
        atomic_write_text(target, "x", error=PlanError, field="report")
        assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["r.html", fresh_live.name, legacy_fresh.name])
    finally:
        live.kill()
        live.wait(timeout=60)


def test_our_own_temporary_name_has_the_pid(tmp_path) -> None:
    fd, name = _create_temp(tmp_path / "a.json")
    os.close(fd)
    assert os.path.basename(name).split(".")[3] == str(os.getpid())
    assert stat.S_IMODE(os.stat(name).st_mode) == 0o600
