"""Atomic writes keep the old file on failure and give readable files."""

from __future__ import annotations

import os
import stat

import pytest

from mixchart.errors import PlanError
from mixchart.fileio import atomic_write_text


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
