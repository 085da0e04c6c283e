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
import re
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


def six_layer_with(tmp_path, file: str, old: str, new: str) -> Path:
    """A copy of the six-layer fixture package with one text replaced in one file."""
    package = tmp_path / "pkg"
    shutil.copytree(SIX, package)
    path = package / file
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return package


def board_with_net_named(tmp_path, name: str) -> Path:
    """The two-layer fixture board with its net CLK_A renamed ``name``, written to a file."""
    board = json.loads((ROOT / "fixtures" / "two_layer_parallel.json").read_text(encoding="utf-8"))
    board["nets"] = [dict(n, name=name) if n["name"] == "CLK_A" else n for n in board["nets"]]
    for key in ("tracks", "arcs", "regions", "vias"):
        for item in board.get(key, []):
            if item.get("net") == "CLK_A":
                item["net"] = name
    path = tmp_path / "renamed.json"
    path.write_text(json.dumps(board), encoding="utf-8")
    return path


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
    package = six_layer_with(tmp_path, "six-layer-fab.gbrjob", '"Thickness": 0.21,', '"Thickness": 1e-16,')
    code, _, err = run(capsys, "check", package)
    line = one_error_line(err)
    assert code == 2
    assert "six-layer-fab.gbrjob: stackup: dielectric 'prepreg-1'" in line and "below the sanity bound" in line


def test_nanometre_aperture_in_a_gerber(tmp_path, capsys) -> None:
    package = six_layer_with(tmp_path, "six-layer-fab-L1.gbr", "%ADD10C,0.15*%", "%ADD10C,0.0000001*%")
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


# --------------------------------------------------------------------------- resource caps (checker/limits.py)

import io  # noqa: E402
import zipfile  # noqa: E402

from checker import limits, progress  # noqa: E402
from checker.errors import FabError  # noqa: E402
from checker.readers.fab.source import Metered, PackageBudget  # noqa: E402


def _gerber(body: str) -> str:
    return "%FSLAX46Y46*%\n%MOMM*%\n%ADD10C,0.1*%\nD10*\n" + body + "M02*\n"


def test_zip_bomb_member_is_refused_before_inflating(tmp_path, capsys) -> None:
    package = tmp_path / "bomb.zip"
    comment = "G04 padding padding padding padding padding padding*\n"
    with zipfile.ZipFile(package, "w", zipfile.ZIP_DEFLATED) as archive:
        for name in ("bomb-F_Cu.gbr", "bomb-B_Cu.gbr"):
            archive.writestr(name, _gerber("X0Y0D02*\nX1000000Y0D01*\n" + comment * 200_000))  # 10.6 MB each
    assert package.stat().st_size < 200_000
    start = time.perf_counter()
    code, _, err = run(capsys, "check", package, "--limit", "file-mb=5")
    line = one_error_line(err)
    assert code == 2 and time.perf_counter() - start < 20
    assert "bomb.zip:bomb-B_Cu.gbr: the file is 11 MB, over the cap of 5 MB per file; raise it with --limit " \
           "file-mb=N" in line
    code, _, err = run(capsys, "check", package, "--limit", "package-mb=15")
    line = one_error_line(err)
    assert code == 2 and "bomb.zip: the files add up to 21 MB (uncompressed), over the cap of 15 MB per " \
                         "package; raise it with --limit package-mb=N" in line


def test_bytes_are_counted_while_read(monkeypatch) -> None:
    """A stream that yields more than it declared (or than the cap) is cut
    off while it is read, per file and per package."""
    monkeypatch.setattr(limits, "MB", 1000)  # caps counted in kB for a small test
    with limits.using(limits.Limits(file_mb=10, package_mb=15)):
        one = Metered(io.BytesIO(b"x" * 20_000), "a.gbr", size=100)
        with pytest.raises(FabError, match=r"^a\.gbr: over the cap of 10 MB read per file"):
            while one.read(4096):
                pass
        budget = PackageBudget("p.zip")
        first = Metered(io.BytesIO(b"x" * 9_000), "p.zip:a", 9_000, budget)
        assert len(first.read()) == 9_000
        second = Metered(io.BytesIO(b"x" * 9_000), "p.zip:b", 9_000, budget)
        with pytest.raises(FabError, match=r"^p\.zip: over the cap of 15 MB read from one package"):
            second.read()


def test_gerber_draws_cap_names_file_line_and_option(capsys) -> None:
    code, _, err = run(capsys, "check", SIX, "--limit", "draws=20")
    line = one_error_line(err)
    assert code == 2
    assert "six-layer-fab-L1.gbr: line 67: the step and repeat opened here makes 12 copies: more objects than " \
           "the caps allow (--limit draws=N and --limit shapes=N raise them" in line
    # plain draws: the cap counted as they are read
    from checker.readers.fab.gerber import read_gerber

    draws = "".join(f"X{i * 100000}Y0D01*\n" for i in range(1, 101))
    with limits.using(limits.Limits(draws=50)):
        with pytest.raises(FabError, match=r"^d\.gbr: line \d+: more than 50 draw and arc points on this layer: "
                                           r"over the cap; raise it with --limit draws=N"):
            read_gerber(io.BytesIO(_gerber("X0Y0D02*\n" + draws).encode()), "d.gbr")
    assert len(read_gerber(io.BytesIO(_gerber("X0Y0D02*\n" + draws).encode()), "d.gbr").traces.x1) == 100


def test_json_track_points_cap(tmp_path, capsys) -> None:
    data = json.loads(demo_board_path().read_text(encoding="utf-8"))
    data["tracks"][3]["points"] = [[x * 0.01, 5.0] for x in range(3000)]
    path = tmp_path / "b.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    code, _, err = run(capsys, "check", path, "--limit", "track-points=2000")
    line = one_error_line(err)
    assert code == 2 and ("b.json: tracks[3].points: 3,000 points, over the cap of 2,000 points per track or "
                          "outline; raise it with --limit track-points=N") in line


def test_json_file_size_cap(tmp_path, capsys) -> None:
    data = json.loads(demo_board_path().read_text(encoding="utf-8"))
    data["description"] = "x" * 1_500_000
    path = tmp_path / "b.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    code, _, err = run(capsys, "check", path, "--limit", "file-mb=1")
    line = one_error_line(err)
    assert code == 2 and "b.json: the file is 2 MB, over the cap of 1 MB per file" in line


@pytest.mark.parametrize("item, words", [
    ("draws", "expected NAME=VALUE"), ("pixels=3", "expected NAME=VALUE"),
    ("draws=0", "at least 1"), ("draws=1.5", "whole number"), ("file-mb=1e400", "whole number"),
])
def test_limit_option_is_checked(capsys, item, words) -> None:
    code, _, err = run(capsys, "demo", "--limit", item)
    line = one_error_line(err)
    assert code == 2 and words in line


def test_limits_parse_reads_names_and_numbers() -> None:
    caps = limits.parse(["draws=5e7", "file-mb=1_024", "track-points=10"])
    assert (caps.draws, caps.file_mb, caps.track_points) == (50_000_000, 1024, 10)
    assert caps.package_mb == limits.Limits().package_mb


def test_progress_lines_for_long_stages_only() -> None:
    lines: list[str] = []
    now = [100.0]
    with progress.to(lines.append):
        quick = progress.Stage("reading a.gbr", 10e6, clock=lambda: now[0])
        now[0] += 1.0
        quick.at(5e6)
        assert lines == []  # under QUIET_SECONDS: silent
        slow = progress.Stage("reading big.gbr", 400e6, clock=lambda: now[0])
        for step in range(1, 21):
            now[0] += 1.0
            slow.at(step * 20e6)
    assert lines[0] == "couplint: reading big.gbr: 60 of 400 MB (15 %), 3 s"
    assert len(lines) == 4  # at 3 s, then every 5 s: 8, 13, 18
    assert lines[-1].endswith("360 of 400 MB (90 %), 18 s")
    silent = progress.Stage("reading c.gbr", 1.0, clock=lambda: now[0] + 1000)
    silent.at(1.0)  # no sink outside the block: nothing, no error


# --------------------------------------------------------------------------- hostile text in every output


def test_control_characters_are_neutralised_in_every_output(tmp_path, capsys) -> None:
    """ECMA-48: ESC (0x1b) and the single-byte CSI (0x9b, a C1 control)
    start control sequences, BEL (0x07) ends an OSC string. None may reach
    the terminal or a file raw: terminal, JSON (escaped \\u00XX, RFC 8259
    section 7 allows any character escaped), HTML, SVG and JUnit XML (XML 1.0
    section 2.2: C0 forbidden, DEL and C1 discouraged) show escapes."""
    hostile = "CLK_A\x1b]0;pwned\x07\x9b2J\x7f\x00"
    path = board_with_net_named(tmp_path, hostile)
    outputs = {name: tmp_path / name for name in ("r.html", "o.svg", "j.xml")}
    code, out, err = run(capsys, "check", path, "--format", "json", "--html", outputs["r.html"],
                         "--svg", outputs["o.svg"], "--junit", outputs["j.xml"])
    assert code == 1, err
    raw = set("\x1b\x07\x9b\x7f\x00")
    assert not raw & set(out + err)
    report = json.loads(out)
    assert hostile in {n for p in report["net_pairs"] for n in p["nets"]}  # the JSON still carries the name exactly
    assert "\\u009b2J\\u007f\\u0000" in out
    for name, file in outputs.items():
        text = file.read_text(encoding="utf-8")
        assert not raw & set(text), name
        assert "CLK_A\\x1b]0;pwned\\x07\\x9b2J\\x7f\\x00" in text, name
    code, out, err = run(capsys, "check", path)  # the terminal table
    assert not raw & set(out + err) and "CLK_A\\x1b]0;pwned\\x07\\x9b2J\\x7f\\x00" in out


def test_runs_of_comment_lines_are_skipped_whole_and_counted() -> None:
    """A run of plain G04 comments is skipped in one step (a file padded
    with comments reads at tens of MB/s, scripts/bench_gerber.py), and the
    lines are still counted (errors name the right line) while comments
    that carry an attribute (``G04 #@! TO.N``, spec 5.1.1) still apply."""
    from checker.readers.fab.gerber import read_gerber

    head = "%FSLAX46Y46*%\n%MOMM*%\n%ADD10C,0.1*%\nD10*\n"
    with pytest.raises(FabError, match=r"^c\.gbr: line 8: cannot read the command 'X0Y0Q5D02'"):
        read_gerber(io.BytesIO((head + "G04 a*\nG04 b*\r\nG4 c*\nX0Y0Q5D02*\nM02*\n").encode()), "c.gbr")
    body = "G04 a*\nG04 #@! TO.N,SENSE*\nG04 b*\nX0Y0D02*\nX1000000Y0D01*\nG04 c*\nG04 d*\nM02*\n"
    layer = read_gerber(io.BytesIO((head + body).encode()), "c.gbr")
    assert layer.net_names == ["SENSE"] and len(layer.traces.x1) == 1


def test_a_long_check_prints_plain_progress_lines_when_not_on_a_terminal(capsys, monkeypatch) -> None:
    monkeypatch.setattr(progress, "QUIET_SECONDS", 0.0)  # every step counts as long for this test
    monkeypatch.setattr(progress, "EVERY_SECONDS", 0.0)
    code, out, err = run(capsys, "demo")
    assert code == 1
    lines = [ln for ln in err.splitlines() if ln.startswith("couplint: checking: ")]
    assert len(lines) >= 5
    assert all("\x1b" not in ln for ln in lines)  # plain text: no colour, no cursor movement
    first, last = lines[0], lines[-1]
    total = int(first.split(" of ")[1].split()[0])
    assert first.startswith("couplint: checking: 0 of ") and f"of {total} steps" in last


def test_progress_lines_say_how_far_a_step_has_got(capsys, monkeypatch, tmp_path) -> None:
    # inside a step: the field solves done (of how many), the candidate pairs measured, the reference
    # copper's layers, the JSON report's parts; the demo's solves go to an empty cache so they run
    monkeypatch.setattr(progress, "QUIET_SECONDS", 0.0)
    monkeypatch.setattr(progress, "EVERY_SECONDS", 0.0)
    monkeypatch.setenv("COUPLINT_CACHE_DIR", str(tmp_path / "cache"))
    from collections import OrderedDict

    from checker.physics import sections

    monkeypatch.setattr(sections, "_shared", OrderedDict())  # nothing solved earlier in this process
    code, _, err = run(capsys, "demo", "--format", "json", "--out", tmp_path / "r.json")
    assert code == 1
    lines = err.splitlines()
    solves = [ln for ln in lines if ": field solves " in ln]
    assert solves and all(re.search(r"field solves [0-9,]+ of [0-9,]+\)$", ln) for ln in solves), solves[:3]
    assert any("candidate piece pairs measured: " in ln for ln in lines)
    assert any("reference copper: layers " in ln for ln in lines)
    assert any(ln.startswith("couplint: writing the JSON report: ") for ln in lines)
    assert all("\x1b" not in ln for ln in lines)


@pytest.mark.parametrize("text, tag", [("version: !!float\n", "!!float"), ("!!bool\n", "!!bool"),
                                       ("!!timestamp\n", "!!timestamp"), ("version: !!int 12x\n", "!!int")])
def test_an_explicit_tag_with_a_value_it_cannot_take(tmp_path, capsys, text, tag) -> None:
    """Found by the fuzz harness (tests/fuzz/crashers/rules): PyYAML's
    constructors fail on these with IndexError, KeyError, AttributeError."""
    for argv in (["demo", "--rules"], ["demo", "--waivers"], ["check", SIX, "--stackup"]):
        path = tmp_path / "t.yaml"
        path.write_text(text, encoding="utf-8")
        code, _, err = run(capsys, *argv, path)
        line = one_error_line(err)
        assert code == 2 and "t.yaml: " in line, line
        if argv[1] != "--waivers":  # the waiver reader judges nodes itself, with its own words
            assert "t.yaml: line 1" in line and tag in line, line


def test_a_quantity_finite_as_written_but_not_in_si(tmp_path, capsys) -> None:
    """Found by the fuzz harness (tests/fuzz/crashers/rules/2c6118552624):
    1e308 MHz is 1e314 Hz, beyond the IEEE-754 double range."""
    text = RULES.read_text(encoding="utf-8").replace("frequency: 25 MHz", "frequency: 1e308 MHz")
    rules = tmp_path / "r.yaml"
    rules.write_text(text, encoding="utf-8")
    code, _, err = run(capsys, "demo", "--rules", rules)
    line = one_error_line(err)
    assert code == 2 and "net_classes.clocks.frequency: frequency far too large" in line


def test_rich_markup_in_a_name_is_shown_as_text(tmp_path, capsys) -> None:
    """A name is the input's to choose: rich markup in it ([link=...] would
    make an OSC 8 hyperlink) must print as the characters themselves."""
    hostile = "[link=http://example.invalid][bold]CLK_A[/bold][/link]"
    path = board_with_net_named(tmp_path, hostile)
    code, out, err = run(capsys, "check", path)
    assert code == 1 and hostile in out and "\x1b" not in out + err


@pytest.mark.parametrize("text, words", [
    ('{"report": "couplint", "x": ' + "[" * 5000 + "]" * 5000 + "}", "nested far too deeply"),
    ('{"report": "couplint", "x": 1' + "0" * 5000 + "}", "a number with thousands of digits"),
])
def test_baseline_nesting_and_huge_numbers_are_worded(tmp_path, capsys, text, words) -> None:
    """Reported by the fuzz harness's run: both gave Python's own wording."""
    path = tmp_path / "old.json"
    path.write_text(text, encoding="utf-8")
    code, _, err = run(capsys, "demo", "--baseline", path)
    line = one_error_line(err)
    assert code == 2 and f"old.json: invalid JSON: {words}" in line
