"""`couplint check` on a fabrication package: the folder, .zip or file-list
door from the command line, its options (--stackup, --netlist, --layer) and
its errors (one line naming the file and place, exit 2, no traceback, no
output file left behind)."""

from __future__ import annotations

import json
import pathlib
import shutil

import pytest

from checker.cli import main

ROOT = pathlib.Path(__file__).resolve().parent.parent
SIX = ROOT / "fixtures" / "fab" / "six_layer"


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_folder_check_reports_findings_and_reader_notes(capsys):
    code, out, err = run(capsys, "check", SIX, "--format", "json")
    assert code == 1, err
    report = json.loads(out)
    assert report["board"]["name"] == "six_layer"
    assert [c["copper"] for c in report["board"]["stackup"] if "copper" in c] == \
        ["TOP", "GND", "IN2", "IN3", "PWR", "BOT"]
    assert report["summary"]["findings"] > 0
    assert any(n.startswith("unconnected copper") for n in report["notes"])


def test_stackup_yaml_replaces_a_missing_job_file(capsys, tmp_path):
    folder = tmp_path / "nojob"
    shutil.copytree(SIX, folder)
    (folder / "six-layer-fab.gbrjob").unlink()
    code, _, err = run(capsys, "check", folder)
    assert code == 2
    assert "no stackup" in err and "--stackup" in err and "Traceback" not in err
    board = json.loads((ROOT / "fixtures" / "six_layer_fab.json").read_text())
    import yaml
    stack = tmp_path / "stack.yaml"
    stack.write_text(yaml.safe_dump({"units": board.get("units", "mm"), "stackup": board["stackup"]}))
    code, out, err = run(capsys, "check", folder, "--stackup", stack, "--format", "json")
    assert code == 1, err
    with_job = json.loads(run(capsys, "check", SIX, "--format", "json")[1])
    assert [f["id"] for f in json.loads(out)["findings"]] == [f["id"] for f in with_job["findings"]]


def test_one_unnamed_copper_file_fills_the_one_free_layer_and_two_need_the_layer_option(capsys, tmp_path):
    # The fixture package is the reference (its files carry X2 attributes).
    with_x2 = json.loads(run(capsys, "check", SIX, "--format", "json")[1])
    folder = tmp_path / "renamed"
    shutil.copytree(SIX, folder)
    for n, new_name in ((3, "inner-a.gbr"), (4, "inner-b.gbr")):
        text = (folder / f"six-layer-fab-L{n}.gbr").read_text()
        (folder / f"six-layer-fab-L{n}.gbr").unlink()
        stripped = "\n".join(line for line in text.splitlines() if "TF.FileFunction" not in line) + "\n"
        (folder / new_name).write_text(stripped)
        if n == 3:
            # one file no name claims, one layer no file holds: its content (tracks,
            # pads and pours) makes it copper, and it can only be L3
            code, out, err = run(capsys, "check", folder, "--format", "json")
            assert code == 1, err
            report = json.loads(out)
            assert [f["id"] for f in report["findings"]] == [f["id"] for f in with_x2["findings"]]
            assert any("inner-a.gbr = L3" in note for note in report["notes"])
    code, _, err = run(capsys, "check", folder)
    assert code == 2 and "inner-a.gbr" in err and "inner-b.gbr" in err and "--layer" in err
    assert "position unknown" in err and "Traceback" not in err
    code, out, err = run(capsys, "check", folder, "--layer", "inner-a.gbr=L3,signal", "--format", "json")
    assert code == 1, err


def test_bad_gerber_gives_one_line_with_file_and_line(capsys, tmp_path):
    folder = tmp_path / "bad"
    shutil.copytree(SIX, folder)
    path = folder / "six-layer-fab-L2.gbr"
    lines = path.read_text().splitlines()
    lines.insert(20, "D999*")
    path.write_text("\n".join(lines) + "\n")
    out_file = tmp_path / "report.json"
    code, _, err = run(capsys, "check", folder, "--format", "json", "--out", out_file)
    assert code == 2
    assert err.count("\n") == 1 and "six-layer-fab-L2.gbr" in err and "line 21" in err
    assert "Traceback" not in err and not out_file.exists()


def test_package_options_refused_for_a_json_board(capsys):
    code, _, err = run(capsys, "check", ROOT / "fixtures" / "six_layer_fab.json", "--stackup", "x.yaml")
    assert code == 2 and "--stackup is for fabrication packages" in err


def test_output_may_not_overwrite_a_package_file(capsys, tmp_path):
    folder = tmp_path / "pkg"
    shutil.copytree(SIX, folder)
    target = folder / "six-layer-fab-L1.gbr"
    before = target.read_bytes()
    code, _, err = run(capsys, "check", folder, "--out", target)
    assert code == 2 and "refusing to overwrite" in err
    assert target.read_bytes() == before


def test_signoff_report_lists_every_file_of_the_package_with_its_sha256(capsys, tmp_path):
    import hashlib

    page = tmp_path / "signoff.html"
    overlay = tmp_path / "overlay.svg"
    code, _, err = run(capsys, "check", SIX, "--html", page, "--svg", overlay)
    assert code == 1, err
    html = page.read_text()
    for f in sorted(SIX.iterdir()):
        assert f.name in html
        assert hashlib.sha256(f.read_bytes()).hexdigest() in html  # FIPS 180-4 digest, by hashlib
    assert overlay.read_text().startswith("<svg") or "<svg" in overlay.read_text()[:200]


def test_several_json_boards_point_to_batch(capsys):
    board = ROOT / "fixtures" / "six_layer_fab.json"
    code, _, err = run(capsys, "check", board, board)
    assert code == 2 and "couplint batch" in err


def test_a_bad_drill_file_fails_before_any_gerber_is_read(capsys, tmp_path):
    # the drill files are read first, so a bad one stops the run in seconds,
    # naming itself, even when a Gerber file is bad too (and would take long)
    folder = tmp_path / "bad"
    shutil.copytree(SIX, folder)
    drill = folder / "six-layer-fab-PTH-1-6.drl"
    drill.write_text(drill.read_text().replace("T01\n", "T07\n", 1))  # select an undefined tool
    (folder / "six-layer-fab-L1.gbr").write_text("%FSLAX46Y46*%\n%MOMM*%\nD10*\nX0Y0D03*\nM02*\n")
    code, _, err = run(capsys, "check", folder)
    assert code == 2 and "six-layer-fab-PTH-1-6.drl" in err and "L1.gbr" not in err
    assert "Traceback" not in err


def test_ipc2581_file_checks_like_the_gerber_package(capsys, tmp_path):
    # reference: the Gerber X2 package of the same board (both written from
    # fixtures/six_layer_fab.json); the IPC-2581 door must give the same findings
    xml = ROOT / "fixtures" / "ipc2581" / "six_layer.xml"
    code, out, err = run(capsys, "check", xml, "--format", "json")
    assert code == 1, err
    gerber = json.loads(run(capsys, "check", SIX, "--format", "json")[1])
    key = lambda f: (f["rule"], f["aggressor"], f["victim"], round(f["value"], 4))  # noqa: E731
    assert sorted(map(key, json.loads(out)["findings"])) == sorted(map(key, gerber["findings"]))
    # renamed, it is still found by its content
    renamed = tmp_path / "board-export.dat"
    renamed.write_bytes(xml.read_bytes())
    assert run(capsys, "check", renamed, "--format", "json")[0] == 1
    code, _, err = run(capsys, "check", renamed, "--stackup", ROOT / "fixtures" / "fab" / "wild-ten-layer-stackup.yaml")
    assert code == 2 and "IPC-2581" in err and "--stackup" in err


@pytest.mark.parametrize(("content", "words"), [
    (b"", "the file is empty"), (b"  \n", "only white space"), (b"<svg/>", "the root element is <svg>"),
    (b"hello", "not XML"),
])
def test_a_lone_xml_file_that_is_no_ipc2581_says_so_naming_itself(capsys, tmp_path, content, words):
    path = tmp_path / "board.xml"
    path.write_bytes(content)
    code, _, err = run(capsys, "check", path)
    assert code == 2 and str(path) in err and words in err and "Traceback" not in err
    assert "Gerber job file" not in err


@pytest.mark.parametrize(("name", "content", "words"), [
    ("six-layer-fab-L1.gbr", b"x", "six-layer-fab-L1.gbr: line 1: the file ends inside the command"),
    ("six-layer-fab-L1.gbr", b"", "six-layer-fab-L1.gbr: line 1: the file ends without M02"),
    ("six-layer-fab-L2.gbr", "G04 a*\n%FSLAX46Y46*%\n".encode("utf-16"), "six-layer-fab-L2.gbr: line 1: byte 0xFF"),
    ("six-layer-fab.gbrjob", b'{"Header": {"GenerationSoftware": {"Vendor": "x"', "six-layer-fab.gbrjob: "),
])
def test_a_damaged_file_is_named_not_reported_missing(capsys, tmp_path, name, content, words):
    # a cut-short, empty or UTF-16 file whose name says what it is: its own
    # reader refuses it, naming it, instead of "no Gerber file for L1" / "no job file"
    folder = tmp_path / "damaged"
    shutil.copytree(SIX, folder)
    (folder / name).write_bytes(content)
    code, _, err = run(capsys, "check", folder)
    assert code == 2 and words in err and "Traceback" not in err
    assert "no Gerber file for copper layer" not in err and "no Gerber job file" not in err
