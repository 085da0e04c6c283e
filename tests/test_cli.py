"""The command line end to end: demo, exit codes, JSON report, bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

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
    assert kinds == {"crossing-angle", "spacing-ratio", "parallel-length", "capacitance-budget", "noise-budget",
                     "reference-gap", "guard-grounding"}
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
    # scenario (8): SPI_SCK on IN1 crosses the 2 mm wide void (x 11..13) in the GND plane at 90 degrees,
    # so 13 - 11 = 2 mm of its centreline lies over no GND copper, spot at the void's middle (12, 10)
    (gap,) = [f for f in report["findings"] if f["kind"] == "reference-gap" and f["aggressor"] == "SPI_SCK"
              and f["layers"] == ["IN1", "GND"]]
    assert gap["victim"] == "GND" and gap["value"] == pytest.approx(2.0) and gap["at"] == pytest.approx([12, 10])


def test_demo_text_output(capsys):
    """The text report says what the JSON report says: every finding's id,
    the summary counts per rule, the verdict with the failing count."""
    _, json_out, _ = run(capsys, "demo", "--format", "json")
    report = json.loads(json_out)
    code, out, err = run(capsys, "demo")
    assert code == 1
    flat = " ".join(out.split())
    for f in report["findings"]:
        assert f["id"] in out, f["id"]
    s = report["summary"]
    per_rule = ", ".join(f"{k} {v}" for k, v in s["findings_by_rule"].items())
    assert f"{s['pairs_examined']} pairs examined" in flat
    assert f"findings: {s['findings']} ({per_rule})" in flat
    assert f"verdict: fail ({s['failing']} failing" in flat
    assert "Estimates for design review, not a field-solver sign-off" in flat


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
    for kind in ("crossing-angle", "spacing-ratio", "parallel-length", "capacitance-budget", "noise-budget",
                 "reference-gap"):
        assert kind in out
    assert run(capsys, "kinds", "nope")[0] == 2


def test_console_script_runs(tmp_path):
    """The installed entry point, in a real process (no traceback, exit code kept)."""
    proc = subprocess.run([sys.executable, "-m", "checker", "demo", "--format", "json"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 1, proc.stderr
    assert json.loads(proc.stdout)["summary"]["verdict"] == "fail"


def test_progress_reports_every_step():
    from checker.readers import load_board
    from checker.ruleset import default_ruleset
    from checker.runner import check_board

    calls = []
    board = load_board(demo_board_path())
    check_board(board, default_ruleset(), progress=lambda what, done, total: calls.append((what, done, total)))
    # demo: 3 layers with pieces of nets other than GND (the GND plane holds only regions), so
    # 3 broadside layer pairs (TOP/IN1, TOP/BOT, IN1/BOT: the copper between decides what
    # shields), 3 edge layers, 1 ground/noise step, 7 rules = 14 steps
    assert [c[1] for c in calls] == list(range(14))
    assert {c[2] for c in calls} == {14}
    assert calls[0][0] == "broadside coupling on TOP/IN1" and calls[-1][0].startswith("rule ")


def _demo_data():
    return json.loads(demo_board_path().read_text(encoding="utf-8"))


def _bad_boards():
    """(name, mutate, expected place in the message) for each class of bad board input."""
    def unknown_layer(d):
        d["tracks"][0]["layer"] = "L9"

    def unknown_net(d):
        d["tracks"][0]["net"] = "NOPE"

    def zero_width(d):
        d["tracks"][2]["width"] = 0

    def self_intersecting(d):
        d["regions"][0]["outline"] = [[0, 0], [4, 4], [4, 0], [0, 4]]

    def empty(d):
        d["tracks"], d["arcs"], d["regions"] = [], [], []

    return [("unknown-layer", unknown_layer, "tracks[0].layer"), ("unknown-net", unknown_net, "tracks[0].net"),
            ("zero-width", zero_width, "tracks[2].width"), ("self-intersecting", self_intersecting, "regions[0]"),
            ("empty", empty, "bad.json")]


@pytest.mark.parametrize("name, mutate, place", _bad_boards(), ids=[b[0] for b in _bad_boards()])
def test_bad_board_classes_exit_2(tmp_path, capsys, name, mutate, place):
    data = _demo_data()
    mutate(data)
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(data))
    before = path.read_bytes()
    out_file = tmp_path / "out.json"
    code, out, err = run(capsys, "check", str(path), "--format", "json", "--out", str(out_file))
    assert code == 2, err
    assert place in err and "bad.json" in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert not out_file.exists() and path.read_bytes() == before


def test_nan_coordinate_exit_2(tmp_path, capsys):
    data = _demo_data()
    data["tracks"][0]["points"][0] = ["@NAN@", 1.0]
    path = tmp_path / "nan.json"
    path.write_text(json.dumps(data).replace('"@NAN@"', "NaN"))
    code, _, err = run(capsys, "check", str(path))
    assert code == 2 and "nan.json: tracks[0].points[0][0]" in err


@pytest.mark.parametrize("content, place", [
    ("version: 1\nrules: [\n", "line"),
    ("version: 1\nrules:\n  - {name: x, kind: spacing-ratio, min_ratio: 3, colour: red}\n", "rules[0].colour"),
    ("version: 1\nrules:\n  - {name: x, kind: crossing-angle, max_length: 2 cm}\n", "rules[0].max_length"),
])
def test_bad_rule_file_exits_2(tmp_path, capsys, content, place):
    path = tmp_path / "bad.yaml"
    path.write_text(content)
    code, _, err = run(capsys, "demo", "--rules", str(path))
    assert code == 2 and "bad.yaml" in err and place in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_deliverables_are_written(tmp_path, capsys):
    """--svg, --svg-dir, --html and --junit each write a well-formed file naming every finding."""
    import xml.etree.ElementTree as ET

    out = {k: tmp_path / f"demo.{k}" for k in ("json", "svg", "html", "xml")}
    code, _, err = run(capsys, "demo", "--format", "json", "--out", str(out["json"]), "--svg", str(out["svg"]),
                       "--svg-dir", str(tmp_path / "groups"), "--html", str(out["html"]), "--junit", str(out["xml"]))
    assert code == 1, err
    ids = [f["id"] for f in json.loads(out["json"].read_text())["findings"]]
    svg_root = ET.fromstring(out["svg"].read_text())
    groups = {el.get("id") for el in svg_root.iter() if el.get("id")}
    assert {f"f-{i}" for i in ids} <= groups
    # IN1-GND: the reference-gap finding of SPI_SCK on IN1 over the void in the GND plane
    assert sorted(p.name for p in (tmp_path / "groups").iterdir()) == ["IN1-GND.svg", "IN1.svg", "TOP-IN1.svg",
                                                                        "TOP.svg"]
    page = out["html"].read_text()
    assert all(f'data-finding-id="{i}"' in page for i in ids)
    suites = ET.fromstring(out["xml"].read_text())
    failures = sum(len(case.findall("failure")) for case in suites.iter("testcase"))
    assert failures == 7  # one failing test case per rule of the default set: every rule fires on the demo


def test_deliverable_may_not_overwrite_an_input(tmp_path, capsys):
    board = tmp_path / "b.json"
    board.write_bytes(demo_board_path().read_bytes())
    code, _, err = run(capsys, "check", str(board), "--html", str(board))
    assert code == 2 and board.read_bytes() == demo_board_path().read_bytes()


def test_batch_subcommand_is_wired(tmp_path, capsys):
    folder = tmp_path / "boards"
    folder.mkdir()
    (folder / "demo.json").write_bytes(demo_board_path().read_bytes())
    code, out, err = run(capsys, "batch", str(folder), "--out-dir", str(tmp_path / "reports"), "--jobs", "1",
                         "--summary-json", str(tmp_path / "summary.json"))
    assert code == 1, err
    summary = json.loads((tmp_path / "summary.json").read_text())
    report = json.loads((tmp_path / "reports" / "demo.json").read_text())
    assert summary["boards"][0]["findings"] == len(report["findings"]) > 0
    assert (tmp_path / "reports" / "demo.json").exists()


def test_two_outputs_on_one_path_are_refused_before_any_work(capsys, tmp_path):
    # --out x.json --svg x.json: the second write would silently replace the first
    target = tmp_path / "x.json"
    board = Path(__file__).resolve().parents[1] / "fixtures" / "two_layer_parallel.json"
    code = main(["check", str(board), "--format", "json", "--out", str(target),
                 "--svg", str(target)])
    err = capsys.readouterr().err
    assert code == 2 and "--out and --svg name the same file" in err and not target.exists()


def test_control_characters_in_names_never_reach_the_terminal_or_the_page_raw(capsys, tmp_path):
    # A net name carrying ESC sequences (set the window title, clear the
    # screen) and BEL: ECMA-48 makes ESC (0x1b) start a control sequence and
    # BEL (0x07) end an OSC string; shown as \x1b / \x07 text instead.
    board = json.loads((Path(__file__).resolve().parents[1] / "fixtures" / "two_layer_parallel.json").read_text())
    hostile = "CLK_A\x1b]0;pwned\x07\x1b[2J"
    board["nets"] = [dict(n, name=hostile) if n["name"] == "CLK_A" else n for n in board["nets"]]
    for key in ("tracks", "arcs", "regions", "vias"):
        for item in board.get(key, []):
            if item.get("net") == "CLK_A":
                item["net"] = hostile
    path = tmp_path / "hostile.json"
    path.write_text(json.dumps(board))
    html_path = tmp_path / "r.html"
    code = main(["check", str(path), "--html", str(html_path)])
    out, err = capsys.readouterr()
    assert code == 1
    assert "\x1b" not in out + err and "\x07" not in out + err
    assert "CLK_A\\x1b]0;pwned\\x07\\x1b[2J" in out
    page = html_path.read_text()
    assert "\x1b" not in page and "\x07" not in page and "CLK_A\\x1b]0;pwned" in page


def test_rules_option_takes_a_shipped_rule_set_by_name(tmp_path, capsys):
    # `--rules default` (the shipped set, as the shipped rule file's header says) is the run without --rules
    out_named, out_default = tmp_path / "named.json", tmp_path / "default.json"
    assert main(["demo", "--rules", "default", "--format", "json", "--out", str(out_named)]) == 1
    assert main(["demo", "--format", "json", "--out", str(out_default)]) == 1
    named, default = json.loads(out_named.read_text()), json.loads(out_default.read_text())
    assert named["findings"] == default["findings"] and named["ruleset"]["sha256"] == default["ruleset"]["sha256"]
    assert main(["demo", "--rules", "no-such-set"]) == 2
    err = capsys.readouterr().err
    assert "no-such-set: no such file, and no shipped rule set of that name (shipped: default" in err


def test_a_lone_fabrication_file_is_named_in_the_error(tmp_path, capsys, monkeypatch):
    # given as one file in the current folder, the package is that file, not "."
    monkeypatch.chdir(tmp_path)
    (tmp_path / "g.gbr").write_bytes(b"garbage\x00\x01 not gerber")
    assert main(["check", "g.gbr"]) == 2
    line = capsys.readouterr().err.strip()
    assert line.startswith("couplint: error: g.gbr: "), line


@pytest.mark.parametrize("width", [80, 100])
def test_a_narrow_terminal_gets_rule_codes_and_a_legend_not_broken_names(width):
    import io

    from rich.console import Console

    from checker.readers import load_board
    from checker.report import terminal
    from checker.review import build_review
    from checker.ruleset import default_ruleset
    from checker.runner import check_board

    result = check_board(load_board(demo_board_path()), default_ruleset())
    result.review = build_review(result.findings, None, None)
    buffer = io.StringIO()
    terminal.render(result, Console(file=buffer, width=width, color_system=None))
    text = buffer.getvalue()
    rules = list(dict.fromkeys(f.rule for f in result.findings))
    assert text.count("\nrules: ") == 1
    table, rest = text.split("\nrules: ")
    legend = " ".join(rest.split("\n  1. [")[0].split())  # wrapped at spaces over lines as needed
    assert legend == ", ".join(f"R{i} {r}" for i, r in enumerate(rules, 1))
    assert max(len(ln) for ln in table.splitlines()) <= width
    for rule in rules:  # no rule name, whole or in pieces, inside the table
        assert rule[:8] not in table
