"""The README's examples are real: its board JSON loads and its rule file validates."""

from __future__ import annotations

import json
import re
from pathlib import Path

from checker.readers.board_json import read_board_dict
from checker.ruleset import load_ruleset

README = Path(__file__).resolve().parents[1] / "README.md"


def blocks(lang: str) -> list[str]:
    return re.findall(rf"```{lang}\n(.*?)```", README.read_text(encoding="utf-8"), flags=re.S)


def test_readme_board_example_loads():
    (example,) = blocks("json")
    board = read_board_dict(json.loads(example), "README.md")
    assert [layer.name for layer in board.stackup.layers] == ["TOP", "IN1", "GND"]
    assert board.nets[1].partner == "SENSE_N"


def test_readme_rule_example_validates(tmp_path):
    (example,) = blocks("yaml")
    path = tmp_path / "team.yaml"
    path.write_text(example)
    ruleset = load_ruleset(path)
    names = [r.name for r in ruleset.rules]
    assert "clock-over-sensor" in names and "same-layer-spacing" not in names
