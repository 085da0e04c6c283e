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


def _demo_block() -> str:
    text = README.read_text(encoding="utf-8")
    demo = text[text.index("## Demo"):text.index("## Tests")]
    fenced = re.findall(r"^```(\w*)\n(.*?)^```$", demo, flags=re.S | re.M)  # (language, body), in order
    (block,) = [body for lang, body in fenced if not lang]
    return block


def test_readme_demo_output_is_what_the_demo_prints(capsys, monkeypatch):
    # the README's abridged demo output must be cut from today's output: every table row it shows is a row
    # of the real table, and every finding text it shows (wrapped differently) is in the real text
    from checker.cli import main

    monkeypatch.setenv("COLUMNS", "160")
    assert main(["demo"]) == 1
    out = capsys.readouterr().out
    real_rows = {ln.rstrip() for ln in out.splitlines() if ln.startswith(("│", "┃", "┏", "┡", "└"))}
    block = _demo_block()
    shown_rows = [ln.rstrip() for ln in block.splitlines() if ln.startswith(("│", "┃", "┏", "┡", "└"))]
    assert len(shown_rows) >= 8
    for row in shown_rows:
        assert row in real_rows, f"README row not in today's demo output: {row}"
    flat_out = " ".join(out.split())
    after_table = block.split("\n", block.count("\n"))  # lines
    tail = "\n".join(ln for ln in after_table if not ln.startswith(("│", "┃", "┏", "┡", "└")))
    entries = [e for e in re.split(r"\n(?=\s*\d+\. \[)", "\n" + tail) if e.strip()]
    texts = [re.sub(r"^\d+\. ", "", " ".join(e.split())) for e in entries]
    assert len(texts) >= 2 and all(t.startswith("[") for t in texts)
    for t in texts:  # the finding line and its path, however the README wraps them
        assert t in flat_out, f"README finding text not in today's demo output: {t[:80]}"
