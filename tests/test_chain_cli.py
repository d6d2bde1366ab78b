"""The command line with chain plans (layout version 2): sweep, check, schema, migrate.

Exit-status rules as for version 1 (mixchart.cli docstring): 0 success; 1 with --fail-on-spur
when a margin is negative; 2 on bad input, one line on stderr.
"""

from __future__ import annotations

import io
import json
from pathlib import Path

import jsonschema
import pandas as pd
import pytest

from mixchart.cli import CHAIN_EXAMPLES, EXAMPLES, example_path, main
from mixchart.models import load_any, migrate_v1
from mixchart.models.chain import ChainPlan, chain_json_schema
from mixchart.plan import load_plan

SCANNER = "scanner_double_conversion"


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_sweep_text_of_a_chain_names_the_stages_the_nodes_and_the_limiting_path(capsys):
    code, out, err = run(capsys, "sweep", "--example", SCANNER, "--top", "5")
    assert code == 0 and err == ""
    plan = load_any(example_path(SCANNER))
    assert out.splitlines()[0] == plan.name
    assert "frequency plan (the wanted signal at every node):" in out
    for name in ("preselector", "LNA", "mixer 1", "first-IF filter", "mixer 2", "second-IF filter"):
        assert name in out
    assert "limited by" in out and "paths per channel explored" in out
    assert "local rules and licensed practice" in out


def test_sweep_json_of_a_chain_is_strict_json_with_warning_records(capsys):
    code, out, _ = run(capsys, "sweep", "--example", SCANNER, "--format", "json")
    assert code == 0
    doc = json.loads(out)
    assert set(doc) == {"plan", "summary", "warnings", "nodes", "paths"}
    assert doc["summary"]["paths_explored"] >= doc["summary"]["paths_pruned"] > 0
    assert all(set(w) == {"code", "field", "value", "text"} and w["text"].startswith(w["field"])
               for w in doc["warnings"])
    assert [n["after"] for n in doc["nodes"]][:3] == ["chain input", "preselector", "LNA"]


def test_sweep_csv_of_one_channel_lists_its_products_and_responses(capsys):
    code, out, _ = run(capsys, "sweep", "--example", SCANNER, "--format", "csv", "--channel", "300 MHz")
    assert code == 0
    frame = pd.read_csv(io.StringIO(out))
    assert set(frame["kind"]) >= {"product", "response"}
    assert (frame["channel_hz"] == 300e6).all()
    assert frame["margin_db"].is_monotonic_increasing


def test_fail_on_spur_with_a_chain(capsys):
    result = main(["sweep", "--example", SCANNER, "--fail-on-spur", "--format", "csv"])
    capsys.readouterr()
    from mixchart.chains import analyse_chain

    worst = analyse_chain(load_any(example_path(SCANNER))).summary.worst_margin_db
    assert result == (1 if worst < 0 else 0)


def test_check_builds_every_stage(capsys):
    code, out, _ = run(capsys, "check", "--example", SCANNER)
    assert code == 0 and "6 stages (preselector -> LNA -> mixer 1" in out


def test_schema_of_both_layouts_validates_the_examples(capsys):
    code, out, _ = run(capsys, "schema")
    schema_2 = json.loads(out)
    assert code == 0 and schema_2["$id"] == "mixchart-plan-v2" and schema_2 == chain_json_schema()
    jsonschema.Draft202012Validator.check_schema(schema_2)
    _, out, _ = run(capsys, "schema", "--layout", "1")
    schema_1 = json.loads(out)
    assert schema_1["$id"] == "mixchart-plan-v1"
    for name in CHAIN_EXAMPLES:
        jsonschema.validate(json.loads(example_path(name).read_text()), schema_2)
    for name in EXAMPLES:
        data = json.loads(example_path(name).read_text())
        jsonschema.validate(data, schema_1)
        jsonschema.validate(migrate_v1(load_plan(example_path(name))).to_dict(), schema_2)


@pytest.mark.parametrize("name", sorted(EXAMPLES))
def test_migrate_writes_a_version_2_plan_that_reads_back_to_the_same_plan(capsys, tmp_path, name):
    out_path = tmp_path / "sub" / "new.json"
    out_path.parent.mkdir()
    code, out, err = run(capsys, "migrate", str(example_path(name)), "-o", str(out_path))
    assert code == 0 and err == "" and str(out_path) in out
    chain = load_any(out_path)
    assert isinstance(chain, ChainPlan) and chain.schema_version == 2
    assert chain == migrate_v1(load_plan(example_path(name)))
    # the sweep of the migrated file is the sweep of the original, line for line
    _, before, _ = run(capsys, "sweep", str(example_path(name)), "--format", "csv")
    _, after, _ = run(capsys, "sweep", str(out_path), "--format", "csv")
    assert before == after
    assert [p.name for p in tmp_path.rglob("*")] == ["sub", "new.json"]  # no temporary file left behind


def test_migrate_refuses_a_version_2_plan_and_its_own_input(capsys, tmp_path):
    v2 = tmp_path / "v2.json"
    main(["migrate", str(example_path("fm_receiver")), "-o", str(v2)])
    capsys.readouterr()
    code, _, err = run(capsys, "migrate", str(v2), "-o", str(tmp_path / "again.json"))
    assert code == 2 and "layout version 2 already" in err and len(err.strip().splitlines()) == 1
    v1 = tmp_path / "v1.json"
    v1.write_text(example_path("fm_receiver").read_text())
    code, _, err = run(capsys, "migrate", str(v1), "-o", str(v1))
    assert code == 2 and "is the input file" in err
    assert v1.read_text() == example_path("fm_receiver").read_text()  # untouched


def test_every_chain_example_loads_and_is_in_the_package():
    for name, rel in CHAIN_EXAMPLES.items():
        path = example_path(name)
        assert path.exists() and path.relative_to(Path(__file__).parents[1] / "mixchart" / "examples") == Path(rel)
        assert isinstance(load_any(path), ChainPlan)


def test_evaluate_any_sends_a_chain_of_several_mixers_to_the_chain_engine():
    from mixchart.chains import ChainResult, evaluate_any

    assert isinstance(evaluate_any(load_any(example_path(SCANNER))), ChainResult)
