"""Hostile and degenerate input: every class found by the hostile-input
sweep gives exit 2 and one bounded line naming the file and the place,
never an internal error (exit 3).

The bounds checked are the project's own sanity bounds (checker/bounds.py)
and caps; the values a user would meet are from the input formats
(JSON numbers beyond the IEEE-754 double range, RFC 8259 section 6, which
permits implementations to limit range; YAML nesting).
"""

from __future__ import annotations

import json
import shutil
import time
from pathlib import Path

import pytest

from checker.cli import demo_board_path, main
from checker.errors import BoardError, InputError, SolveError, bounded

ROOT = Path(__file__).resolve().parents[1]
RULES = ROOT / "rules" / "default.yaml"
SIX = ROOT / "fixtures" / "fab" / "six_layer"


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def one_error_line(err: str) -> str:
    lines = err.strip().splitlines()
    assert len(lines) == 1, err[:2000]
    assert lines[0].startswith("couplint: error: "), lines[0][:300]
    assert "internal error" not in lines[0]
    return lines[0]


# --------------------------------------------------------------------------- numbers beyond the float range


@pytest.mark.parametrize("key, old, new", [
    ("settings.parallel_angle", "parallel_angle: 10 deg", "parallel_angle: 1" + "0" * 400),
    ("rules[1].min_ratio", "min_ratio: 3 ", "min_ratio: 1" + "0" * 400 + " "),
])
def test_rule_file_integer_beyond_float_range(tmp_path, capsys, key, old, new) -> None:
    text = RULES.read_text(encoding="utf-8")
    assert old in text
    rules = tmp_path / "r.yaml"
    rules.write_text(text.replace(old, new), encoding="utf-8")
    code, _, err = run(capsys, "demo", "--rules", rules)
    line = one_error_line(err)
    assert code == 2
    assert f"r.yaml: {key}: " in line and "far too large" in line
    assert len(line) < 300  # the 401-digit value is shortened, not echoed whole


@pytest.mark.parametrize("where", [("tracks", 0, "width"), ("stackup", 1, "er"), ("tracks", 0, "points", 0, 0)])
def test_json_board_integer_beyond_float_range(tmp_path, capsys, where) -> None:
    data = json.loads(demo_board_path().read_text(encoding="utf-8"))
    target = data
    for k in where[:-1]:
        target = target[k]
    target[where[-1]] = 10 ** 400
    board = tmp_path / "b.json"
    board.write_text(json.dumps(data), encoding="utf-8")
    code, _, err = run(capsys, "check", board)
    line = one_error_line(err)
    assert code == 2 and "number far too large" in line


# --------------------------------------------------------------------------- nesting bombs


@pytest.mark.parametrize("door, text", [
    ("rules", "version: 1\nsettings: " + "[" * 1200 + "]" * 1200 + "\n"),
    ("waivers", "version: 1\nwaivers: " + "[" * 1200 + "]" * 1200 + "\n"),
    ("stackup", "stackup: " + "[" * 5000 + "]" * 5000 + "\n"),
    ("rules-mapping", "version: 1\nsettings: " + "{a: " * 1200 + "1" + "}" * 1200 + "\n"),
])
def test_yaml_nested_far_too_deep_is_refused_fast(tmp_path, capsys, door, text) -> None:
    path = tmp_path / "deep.yaml"
    path.write_text(text, encoding="utf-8")
    if door.startswith("rules"):
        argv = ["demo", "--rules", path]
    elif door == "waivers":
        argv = ["demo", "--waivers", path]
    else:
        argv = ["check", SIX, "--stackup", path]
    start = time.perf_counter()
    code, _, err = run(capsys, *argv)
    seconds = time.perf_counter() - start
    line = one_error_line(err)
    assert code == 2
    assert "deep.yaml: line " in line and "nested more than 32 levels deep" in line
    assert seconds < 10  # was ~15 s for the stackup and a RecursionError for the others


def test_json_nested_thousands_deep_gives_a_short_message(tmp_path, capsys) -> None:
    data = json.loads(demo_board_path().read_text(encoding="utf-8"))
    data["description"] = "@@"
    path = tmp_path / "b.json"
    path.write_text(json.dumps(data).replace('"@@"', "[" * 5000 + "]" * 5000), encoding="utf-8")
    code, _, err = run(capsys, "check", path)
    line = one_error_line(err)
    assert code == 2 and len(line) < 400


# --------------------------------------------------------------------------- physical sanity bounds


def test_sub_micron_dielectric_in_a_json_board(tmp_path, capsys) -> None:
    data = json.loads(demo_board_path().read_text(encoding="utf-8"))
    data["stackup"][1]["thickness"] = 1e-16
    path = tmp_path / "b.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    code, _, err = run(capsys, "check", path)
    line = one_error_line(err)
    assert code == 2
    assert "b.json: stackup[1].thickness: " in line and "below the sanity bound (1 um to 25 mm)" in line


def test_sub_micron_dielectric_in_a_job_file(tmp_path, capsys) -> None:
    package = tmp_path / "pkg"
    shutil.copytree(SIX, package)
    job = package / "six-layer-fab.gbrjob"
    text = job.read_text(encoding="utf-8")
    assert '"Thickness": 0.21,' in text
    job.write_text(text.replace('"Thickness": 0.21,', '"Thickness": 1e-16,', 1), encoding="utf-8")
    code, _, err = run(capsys, "check", package)
    line = one_error_line(err)
    assert code == 2
    assert "six-layer-fab.gbrjob: stackup: dielectric 'prepreg-1'" in line and "below the sanity bound" in line


def test_nanometre_aperture_in_a_gerber(tmp_path, capsys) -> None:
    package = tmp_path / "pkg"
    shutil.copytree(SIX, package)
    gerber = package / "six-layer-fab-L1.gbr"
    text = gerber.read_text(encoding="utf-8")
    assert "%ADD10C,0.15*%" in text
    gerber.write_text(text.replace("%ADD10C,0.15*%", "%ADD10C,0.0000001*%"), encoding="utf-8")
    code, _, err = run(capsys, "check", package)
    line = one_error_line(err)
    assert code == 2
    assert "six-layer-fab-L1.gbr: line " in line and "trace width" in line and "below the sanity bound" in line


def test_the_solver_refuses_a_degenerate_section_as_a_couplint_error(monkeypatch) -> None:
    """The bounds keep degenerate sections out; should one get through, the
    runner turns the solver's refusal into one BoardError naming the board."""
    from checker import runner
    from checker.readers import load_board
    from checker.ruleset import default_ruleset

    def refuse(*args, **kwargs):
        raise SolveError("signal conductor 0 touches net 1")

    monkeypatch.setattr(runner, "analyse", refuse)
    board = load_board(demo_board_path())
    with pytest.raises(BoardError, match=r"demo_board\.json: a cross-section of this board cannot be solved"):
        runner.check_board(board, default_ruleset())


# --------------------------------------------------------------------------- bounded messages


def test_a_100_kb_value_is_not_echoed_whole(tmp_path, capsys) -> None:
    text = RULES.read_text(encoding="utf-8").replace("parallel_angle: 10 deg", "parallel_angle: " + "x" * 100_000)
    rules = tmp_path / "r.yaml"
    rules.write_text(text, encoding="utf-8")
    code, _, err = run(capsys, "demo", "--rules", rules)
    line = one_error_line(err)
    assert code == 2 and "settings.parallel_angle" in line and len(line) < 300


def test_bounded_keeps_head_and_tail_and_caps_lines() -> None:
    long = "file-" + "z" * 10_000 + ".gbr"
    error = InputError(long, "a" * 5000, "b" * 50_000)
    text = str(error)
    assert text.startswith("file-z") and ".gbr: aaa" in text and len(text) < 1000
    many = bounded("\n".join(str(i) for i in range(1000)))
    assert many.count("\n") == 79 and many.endswith("(921 more lines)")
