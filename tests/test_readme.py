"""The README tells the truth: its plan examples load, and the result lines it quotes are today's."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from mixchart.chains import analyse_chain
from mixchart.cli import CHAIN_EXAMPLES, example_path
from mixchart.models import load_any, loads_any

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


def test_every_json_block_in_the_readme_is_a_plan_that_loads():
    blocks = re.findall(r"```json\n(.*?)```", README, flags=re.S)
    assert len(blocks) >= 2
    for block in blocks:
        loads_any(block)


@pytest.mark.parametrize("name", sorted(CHAIN_EXAMPLES))
def test_the_result_line_quoted_for_each_example_chain_is_what_the_engine_says(name):
    file = Path(CHAIN_EXAMPLES[name]).name
    paragraph = next(p for p in README.split("\n\n") if f"(`{file}`)" in p)
    quoted = re.search(r"Result: `([^`]*)`", paragraph).group(1)
    assert quoted == analyse_chain(load_any(example_path(name))).summary.line()
