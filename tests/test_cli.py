"""The command line (mixchart.cli), run in-process with capsys, plus one real subprocess.

Exit-status rules (mixchart.cli docstring): 0 success; 1 with --fail-on-spur when a
margin is negative; 2 on bad input, with a one-line message on stderr and no traceback.
"""

from __future__ import annotations

import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import jsonschema
import pandas as pd
import pytest

from mixchart.analysis import FRAME_COLUMNS
from mixchart.cli import main

REPO = Path(__file__).resolve().parents[1]

#: An invented receiver that meets its (modest) requirement: a brick-wall low-pass preselector
#: at 115 MHz stops every image (100-110 MHz channels + 21.4 MHz = 121.4 MHz and up), and the
#: tightest remaining response, the (3,1) at -40 dBc (13.3 dB input-referred rejection), clears
#: 9 dB (see test_analysis).
PASSING_PLAN = {
    "name": "passing receiver",
    "direction": "down",
    "rf": {"start_hz": "100 MHz", "stop_hz": "110 MHz", "step_hz": "1 MHz"},
    "signal": {"bandwidth_hz": "100 kHz", "level_dbm": -30},
    "lo": {"mode": "tracking", "side": "high"},
    "if": {"center_hz": "10.7 MHz", "bandwidth_hz": "200 kHz"},
    "max_order": 7,
    "mixer": {"rf_ref_dbm": -30},
    "filters": {"rf": {"kind": "brickwall", "response": "lowpass", "f_edge_hz": "115 MHz", "stop_atten_db": 100}},
    "requirement": {"min_rejection_db": 9},
}


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def write(tmp_path: Path, data, name="plan.json") -> Path:
    path = tmp_path / name
    path.write_text(data if isinstance(data, str) else json.dumps(data), encoding="utf-8")
    return path


@pytest.mark.parametrize("example", ["fm_receiver", "uplink_transmitter"])
def test_sweep_text(capsys, example):
    code, out, err = run(capsys, "sweep", "--example", example)
    assert code == 0 and err == ""
    lines = out.splitlines()
    assert lines[2].startswith(("PASS: worst margin", "FAIL: worst margin"))
    assert any(line.startswith("kind ") for line in lines), "table header"
    assert "emission limits are set by local rules" in out


@pytest.mark.parametrize("example", ["fm_receiver", "uplink_transmitter"])
def test_sweep_json(capsys, example):
    code, out, _ = run(capsys, "sweep", "--example", example, "--format", "json")
    assert code == 0
    payload = json.loads(out)
    assert {"plan", "summary", "warnings", "worst_by_product", "hits"} <= set(payload)
    assert set(payload["worst_by_product"][0]) == set(FRAME_COLUMNS)
    assert 0.0 <= payload["summary"]["spur_free_fraction"] <= 1.0


@pytest.mark.parametrize("example", ["fm_receiver", "uplink_transmitter"])
def test_sweep_csv(capsys, example):
    code, out, _ = run(capsys, "sweep", "--example", example, "--format", "csv")
    assert code == 0
    frame = pd.read_csv(io.StringIO(out))
    assert list(frame.columns) == list(FRAME_COLUMNS) and len(frame) > 0


def test_sweep_one_channel(capsys):
    # 98.14 MHz is nearest the 98.1 MHz channel of the 100 kHz raster (derived by hand)
    code, out, _ = run(capsys, "sweep", "--channel", "98.14 MHz", "--format", "csv")
    assert code == 0
    frame = pd.read_csv(io.StringIO(out))
    assert (frame["channel_hz"] == 98.1e6).all()
    # order 7: 7 x 8 = 56 products and 7^2 = 49 responses (derived by hand)
    assert (frame["kind"] == "product").sum() == 56 and (frame["kind"] == "response").sum() == 49
    assert (frame["label"] == "wanted").sum() == 2


def test_sweep_hits_rows_json(capsys):
    code, out, _ = run(capsys, "sweep", "--rows", "hits", "--format", "json")
    assert code == 0
    payload = json.loads(out)
    assert payload["rows"] and all(row["margin_db"] < 0 for row in payload["rows"])


def test_check(capsys, tmp_path):
    code, out, err = run(capsys, "check", str(write(tmp_path, PASSING_PLAN)))
    assert code == 0 and err == ""
    # 100..110 MHz in 1 MHz steps: 11 channels (derived by hand)
    assert out == "ok: 'passing receiver': 11 channel(s), order 7, direction down\n"


@pytest.mark.parametrize("example", ["fm_receiver", "uplink_transmitter"])
def test_check_examples(capsys, example):
    code, out, err = run(capsys, "check", "--example", example)
    assert code == 0 and err == "" and out.startswith("ok: ")


def test_schema(capsys):
    code, out, _ = run(capsys, "schema")
    assert code == 0
    jsonschema.Draft202012Validator.check_schema(json.loads(out))


BAD_PLAN_FILES = [
    (lambda tmp: str(write(tmp, '{"rf": ')), "plan file: malformed JSON at line 1 column 8"),
    (lambda tmp: str(tmp / "missing.json"), "cannot be read (No such file or directory)"),
    (lambda tmp: str(write(tmp, {**PASSING_PLAN, "max_order": 99})), "max_order: 99 is invalid"),
    (lambda tmp: str(write(tmp, {**PASSING_PLAN, "rf": {"start_hz": "1 Hz", "stop_hz": "1 GHz", "step_hz": "1 Hz"}})),
     "rf: 1000000000 channels"),
    (lambda tmp: str(write(tmp, {**PASSING_PLAN, "colour": "red"})), "colour: unknown key"),
    (lambda tmp: str(tmp), "cannot be read"),
]


def assert_one_line_error(code, out, err, needle):
    assert code == 2
    assert err.startswith("mixchart: error: ") and err.endswith("\n") and err.count("\n") == 1
    assert needle in err
    assert "Traceback" not in err and out == ""


@pytest.mark.parametrize(("make_path", "needle"), BAD_PLAN_FILES)
@pytest.mark.parametrize("command", ["sweep", "check"])
def test_bad_plan_file_exits_2_with_one_line(capsys, tmp_path, make_path, needle, command):
    assert_one_line_error(*run(capsys, command, make_path(tmp_path)), needle)


def test_non_utf8_plan_file(capsys, tmp_path):
    path = tmp_path / "plan.json"
    path.write_bytes(b'{"name": "\xff"}')
    assert_one_line_error(*run(capsys, "check", str(path)), "plan file: not UTF-8 text")


@pytest.mark.parametrize(
    ("text", "needle"),
    [
        ("98.1 MHzz", "--channel: '98.1 MHzz' is invalid; unit must be one of"),
        ("-5 MHz", "--channel: '-5 MHz' is invalid; must be > 0 Hz"),
        ("ninety", "--channel: 'ninety' is invalid; give a frequency"),
    ],
)
def test_bad_channel_text_exits_2_with_one_line(capsys, text, needle):
    assert_one_line_error(*run(capsys, "sweep", "--channel", text), needle)


def test_fail_on_spur(capsys, tmp_path):
    # without the preselector every image is at 0 dBc: margin -9 dB against the 9 dB requirement
    failing_plan = write(tmp_path, {k: v for k, v in PASSING_PLAN.items() if k != "filters"}, "failing.json")
    failing, out, _ = run(capsys, "sweep", str(failing_plan), "--fail-on-spur")
    assert failing == 1
    assert out.splitlines()[2].startswith("FAIL: worst margin -9.0 dB (image (1,1) at 100 MHz)")
    plain, _, _ = run(capsys, "sweep", str(failing_plan))
    assert plain == 0, "without --fail-on-spur a failing plan still exits 0"
    passing, out, _ = run(capsys, "sweep", str(write(tmp_path, PASSING_PLAN)), "--fail-on-spur")
    assert passing == 0
    # the worst is now the (3,1) response: -40 dBc in the built-in table (2 RF orders of 20 dB,
    # n = 1), input-referred rejection 40/3 = 13.3 dB, margin 13.3 - 9 = +4.3 dB (derived by hand)
    assert out.splitlines()[2].startswith("PASS: worst margin +4.3 dB (spur (3,1)")


def test_python_m_mixchart_runs(tmp_path):
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    done = subprocess.run(
        [sys.executable, "-m", "mixchart", "sweep", "--format", "json", "--example", "uplink_transmitter"],
        cwd=REPO, env=env, capture_output=True, text=True, timeout=120,
    )
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["plan"] == "2.3 GHz link transmitter, 140 MHz IF"
    bad = subprocess.run(
        [sys.executable, "-m", "mixchart", "check", str(tmp_path / "nope.json")],
        cwd=REPO, env=env, capture_output=True, text=True, timeout=120,
    )
    assert bad.returncode == 2 and "Traceback" not in bad.stderr and bad.stderr.count("\n") == 1


# ---------------------------------------------------------------- the command line says what it judged
def test_text_header_states_the_requirement_and_the_plans_key_numbers(capsys):
    code, out, _ = run(capsys, "sweep", "--top", "1")
    assert code == 0
    header = out.splitlines()[1]
    assert header.startswith("judged against: response rejection >= 70 dB; output spur <= -70 dBc | ")
    assert "201 channel(s) 88 MHz to 108 MHz" in header and "high-side tracking LO" in header
    assert "IF 10.7 MHz (230 kHz wide)" in header and "order 7" in header
    assert "extra RF" in out and "need RF" not in out  # one column name everywhere


def test_a_plan_without_a_requirement_says_which_default_it_used(capsys, tmp_path):
    data = {k: v for k, v in PASSING_PLAN.items() if k != "requirement"}
    code, out, _ = run(capsys, "sweep", str(write(tmp_path, data)), "--top", "1")
    assert code == 0 and "(no requirement in the plan: the default min_rejection_db 60 dB)" in out


def test_channel_outside_the_tuning_range_is_refused_and_a_channel_has_its_own_verdict(capsys):
    code, out, err = run(capsys, "sweep", "--channel", "500 MHz")
    assert code == 2 and out == ""
    assert err.strip() == ("mixchart: error: --channel: '500 MHz' is invalid; the tuning range is 88 MHz to 108 MHz")
    code, out, _ = run(capsys, "sweep", "--channel", "98.1 MHz", "--top", "1")
    assert code == 0 and re.search(r"^channel 98\.1 MHz: (PASS|FAIL), worst margin [+-]\d+\.\d dB; whole plan: ",
                                   out.splitlines()[2])


@pytest.mark.parametrize(("where", "typo", "suggestion"), [
    ("if", "centre_hz", "center_hz"), ("mixer", "lo_if_isolaton_db", "lo_if_isolation_db"),
])
def test_a_misspelt_key_suggests_the_nearest_valid_one(capsys, tmp_path, where, typo, suggestion):
    data = json.loads(json.dumps(PASSING_PLAN))
    data[where][typo] = data[where].get("center_hz", 30) if where == "if" else 30
    code, _, err = run(capsys, "check", str(write(tmp_path, data)))
    assert code == 2 and f"{where}.{typo}: unknown key" in err and f"did you mean {suggestion}?" in err
