"""The command line end to end: demo, exit codes, JSON report, bad input."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from checker.cli import demo_board_path, main


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_demo_finds_every_rule_kind(capsys):
    code, out, err = run(capsys, "demo", "--format", "json")
    assert code == 1, err
    report = json.loads(out)
    kinds = {f["kind"] for f in report["findings"]}
    assert kinds == {"crossing-angle", "spacing-ratio", "parallel-length", "capacitance-budget", "noise-budget"}
    for f in report["findings"]:
        for key in ("id", "rule", "severity", "aggressor", "victim", "layers", "bbox", "at", "value",
                    "limit", "unit", "message", "length_mm", "area_mm2", "c12_pf", "noise_mv"):
            assert key in f
    # the orthogonal crossing of SW_BUCK over VREF_2V5 is coupled but must not fail the angle rule
    assert not any(f["kind"] == "crossing-angle" and {f["aggressor"], f["victim"]} == {"SW_BUCK", "VREF_2V5"}
                   for f in report["findings"])
    assert any(set(p["nets"]) == {"SW_BUCK", "VREF_2V5"} for p in report["net_pairs"])
    # the declared differential pair is exempt from each other's checks
    assert not any({f["aggressor"], f["victim"]} == {"SENSE_P", "SENSE_N"} for f in report["findings"])
    assert report["summary"]["findings"] == len(report["findings"])


def test_demo_text_output(capsys):
    code, out, err = run(capsys, "demo")
    assert code == 1
    assert "crossing-angle" in out or "findings" in out
    assert "pairs examined" in out
    assert "Estimates" in out


def test_json_report_is_byte_identical(tmp_path, capsys):
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert run(capsys, "demo", "--format", "json", "--out", str(a))[0] == 1
    assert run(capsys, "demo", "--format", "json", "--out", str(b))[0] == 1
    assert a.read_bytes() == b.read_bytes()


def test_clean_board_exits_zero(tmp_path, capsys):
    board = {
        "format": "couplint-board", "version": 1,
        "stackup": [{"copper": "TOP", "role": "signal", "thickness": 0.035},
                    {"dielectric": "core", "thickness": 1.0, "er": 4.5},
                    {"copper": "BOT", "role": "plane", "thickness": 0.035}],
        "nets": [{"name": "CLK_A"}, {"name": "SENSE_A"}],
        "tracks": [{"layer": "TOP", "net": "CLK_A", "width": 0.2, "points": [[0, 0], [10, 0]]},
                   {"layer": "TOP", "net": "SENSE_A", "width": 0.2, "points": [[0, 20], [10, 20]]}],
    }
    path = tmp_path / "clean.json"
    path.write_text(json.dumps(board))
    code, out, err = run(capsys, "check", str(path))
    assert code == 0, out + err
    assert "no findings" in out


def test_fail_on_error_ignores_warnings(tmp_path, capsys):
    rules = tmp_path / "warn.yaml"
    rules.write_text("version: 1\nextends: default\n"
                     "rules:\n  - {name: only-warn, kind: capacitance-budget, severity: warning, max_c12: 0.001 pF}\n"
                     "disable: [" + ", ".join(_default_rule_names()) + "]\n")
    assert run(capsys, "demo", "--rules", str(rules))[0] == 1
    assert run(capsys, "demo", "--rules", str(rules), "--fail-on", "error")[0] == 0


def _default_rule_names():
    from checker.ruleset import default_ruleset

    return [r.name for r in default_ruleset().rules]


@pytest.mark.parametrize("content, where", [
    ("{not json", "line 1"),
    ('{"format": "couplint-board", "version": 1}', "stackup"),
])
def test_bad_board_exits_2_with_one_line(tmp_path, capsys, content, where):
    path = tmp_path / "bad.json"
    path.write_text(content)
    out_file = tmp_path / "report.json"
    code, out, err = run(capsys, "check", str(path), "--format", "json", "--out", str(out_file))
    assert code == 2
    assert "bad.json" in err and where in err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert not out_file.exists()  # nothing half-written
    assert path.read_text() == content  # input never modified


def test_missing_board_and_rules(tmp_path, capsys):
    code, _, err = run(capsys, "check", str(tmp_path / "nope.json"))
    assert code == 2 and "nope.json" in err
    code, _, err = run(capsys, "demo", "--rules", str(tmp_path / "nope.yaml"))
    assert code == 2 and "nope.yaml" in err


def test_out_may_not_overwrite_an_input(tmp_path, capsys):
    board = tmp_path / "demo.json"
    board.write_bytes(demo_board_path().read_bytes())
    before = board.read_bytes()
    code, _, err = run(capsys, "check", str(board), "--out", str(board))
    assert code == 2 and "input" in err
    assert board.read_bytes() == before


def test_usage_error_exits_2(capsys):
    assert run(capsys, "check")[0] == 2
    assert run(capsys, "frobnicate")[0] == 2


def test_kinds_lists_every_rule_kind(capsys):
    code, out, _ = run(capsys, "kinds")
    assert code == 0
    for kind in ("crossing-angle", "spacing-ratio", "parallel-length", "capacitance-budget", "noise-budget"):
        assert kind in out
    assert run(capsys, "kinds", "nope")[0] == 2


def test_console_script_runs(tmp_path):
    """The installed entry point, in a real process (no traceback, exit code kept)."""
    proc = subprocess.run([sys.executable, "-m", "checker", "demo", "--format", "json"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 1, proc.stderr
    assert json.loads(proc.stdout)["summary"]["verdict"] == "fail"
