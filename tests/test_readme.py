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


def _use_commands() -> list[str]:
    text = README.read_text(encoding="utf-8")
    use = text[text.index("## Use"):]
    (block,) = [body for lang, body in re.findall(r"^```(\w*)\n(.*?)^```$", use, flags=re.S | re.M)[:1]]
    return [re.sub(r"\s+#.*$", "", ln).strip() for ln in block.splitlines() if ln.startswith("couplint ")]


def test_install_and_test_lines_are_what_ci_runs():
    # one copy-paste line installs and runs the demo; CI (.ci/run) runs its install commands and the test line
    text = README.read_text(encoding="utf-8")
    install = text[text.index("## Install"):text.index("## Demo")]
    (line,) = [body for lang, body in re.findall(r"^```(\w*)\n(.*?)^```$", install, flags=re.S | re.M)]
    assert line.count("\n") == 1 and line.rstrip().endswith("&& couplint demo")
    ci = (README.parent / ".ci" / "run").read_text(encoding="utf-8")
    for command in line.strip().split(" && ")[:-1]:
        assert command in ci, command
    tests = text[text.index("## Tests"):]
    (test_line,) = [body for lang, body in re.findall(r"^```(\w*)\n(.*?)^```$", tests, flags=re.S | re.M)[:1]]
    assert test_line.strip() == "pytest" and "\npytest" in ci


def test_every_command_of_the_use_section_runs(tmp_path, monkeypatch, capsys):
    """Each `couplint ...` line of the README's Use section, run as written in a folder holding
    stand-ins for the files it names (the demo board as board.json, fixture packages), with the
    environment of a CI runner: no user name set. Exit 0 or 1 (pass or findings), never 2 or 3."""
    import shlex
    import shutil
    import zipfile

    from checker.cli import demo_board_path, main

    root = README.parent
    for var in ("USER", "LOGNAME", "USERNAME", "COUPLINT_AUTHOR"):
        monkeypatch.delenv(var, raising=False)
    monkeypatch.setenv("COLUMNS", "160")
    monkeypatch.chdir(tmp_path)
    shutil.copytree(root / "fixtures" / "fab" / "six_layer", "fab-rev-c")
    with zipfile.ZipFile("fab-rev-c.zip", "w") as z:  # a package without a job file
        for f in sorted((root / "fixtures" / "fab" / "wild-ten-layer").iterdir()):
            z.write(f, f.name)
    shutil.copy(root / "fixtures" / "fab" / "wild-ten-layer-stackup.yaml", "stackup.yaml")
    shutil.copy(root / "fixtures" / "ipc2581" / "six_layer.xml", "board-rev-c.xml")
    shutil.copy(demo_board_path(), "board.json")  # its finding 5812f4f0d134 is the one the README waives
    (tmp_path / "team.yaml").write_text(blocks("yaml")[0], encoding="utf-8")
    Path("revisions").mkdir()
    shutil.copy(demo_board_path(), "revisions/rev-a.json")
    shutil.copytree(root / "fixtures" / "fab" / "six_layer", "revisions/rev-b")
    commands = _use_commands()
    assert len(commands) >= 12
    for command in commands:
        argv = shlex.split(command)
        code = main(argv[1:])
        err = capsys.readouterr().err
        assert code in (0, 1), f"{command}: exit {code}: {err.strip()[-300:]}"
    assert Path("report.json").is_file() and Path("signoff.html").is_file() and Path("overlay.svg").is_file()
    assert Path("signoff.pdf").read_bytes().startswith(b"%PDF-")
    assert "5812f4f0d134" in Path("waivers.yaml").read_text(encoding="utf-8")
    assert Path("couplint-rules.yaml").is_file() and Path("reports").is_dir()
