"""``--only``: the findings every output shows, and the exit status, follow
the selection; bad terms are refused with one line.

The expected sets are computed from the unfiltered demo report (the same
board, the same rules): the selection must equal that report's findings
filtered by the stated predicate, not a count written down here."""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET

import pytest

from checker.cli import main
from checker.errors import UsageError
from checker.selection import Selection


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def full():
    import io
    from contextlib import redirect_stdout

    buffer = io.StringIO()
    with redirect_stdout(buffer):
        assert main(["demo", "--format", "json"]) == 1
    return json.loads(buffer.getvalue())


def ids(report) -> list[str]:
    return [f["id"] for f in report["findings"]]


@pytest.mark.parametrize("terms, keep", [
    (["severity=error"], lambda f: f["severity"] == "error"),
    (["severity=WARNING"], lambda f: f["severity"] == "warning"),
    (["net=CLK*"], lambda f: f["aggressor"].startswith("CLK") or f["victim"].startswith("CLK")),
    (["net=AIN1", "net=VREF*"], lambda f: {"AIN1"} & {f["aggressor"], f["victim"]}
     or f["victim"].startswith("VREF") or f["aggressor"].startswith("VREF")),
    (["layer=IN1"], lambda f: "IN1" in f["layers"]),
    (["rule=coupled-noise"], lambda f: f["rule"] == "coupled-noise"),
    (["rule=noise-budget"], lambda f: f["kind"] == "noise-budget"),  # a kind selects every rule of it
    (["severity=error", "layer=TOP"], lambda f: f["severity"] == "error" and "TOP" in f["layers"]),
    (["net=re:^(AIN|CLK)"], lambda f: re.match("^(AIN|CLK)", f["aggressor"]) or re.match("^(AIN|CLK)", f["victim"])),
])
def test_json_report_holds_exactly_the_selected_findings(capsys, full, terms, keep):
    argv = ["demo", "--format", "json"] + [a for t in terms for a in ("--only", t)]
    code, out, err = run(capsys, *argv)
    report = json.loads(out)
    expected = [f["id"] for f in full["findings"] if keep(f)]
    assert expected and len(expected) < len(full["findings"])  # the case selects something, not everything
    assert ids(report) == expected
    assert report["summary"]["findings"] == len(expected)
    written = [t.lower() if t.lower().startswith("severity=") else t for t in terms]  # severities read as lower case
    assert report["summary"]["selection"] == {"only": written, "hidden": len(full["findings"]) - len(expected)}
    failing = [f for f in report["findings"] if f["severity"] in ("error", "warning")]
    assert code == (1 if failing else 0)


def test_exit_status_follows_the_selection(capsys, tmp_path):
    # the demo's rules give errors and warnings; with --fail-on error, selecting the warnings alone passes
    code, out, _ = run(capsys, "demo", "--fail-on", "error", "--only", "severity=warning")
    assert code == 0 and "verdict: pass" in out
    assert "only severity=warning:" in out


def test_every_output_shows_the_selection(capsys, tmp_path, full):
    svg, page, junit = tmp_path / "o.svg", tmp_path / "o.html", tmp_path / "o.xml"
    code, out, err = run(capsys, "demo", "--only", "net=AIN1", "--svg", str(svg), "--html", str(page),
                         "--junit", str(junit))
    chosen = [f for f in full["findings"] if "AIN1" in (f["aggressor"], f["victim"])]
    others = [f for f in full["findings"] if f not in chosen]
    assert chosen and others
    drawn = {el.get("id") for el in ET.fromstring(svg.read_text()).iter() if el.get("id")}
    assert {f"f-{f['id']}" for f in chosen} <= drawn
    assert not {f"f-{f['id']}" for f in others} & drawn
    text = page.read_text()
    assert all(f['id'] in text for f in chosen) and not any(f['id'] in text for f in others)
    assert f"only net=AIN1: {len(chosen)} of {len(full['findings'])} findings shown" in text
    cases = ET.fromstring(junit.read_text())
    failed = " ".join(el.text or "" for el in cases.iter("failure")) + " ".join(
        el.get("message") or "" for el in cases.iter("failure"))
    assert "AIN1" in failed


@pytest.mark.parametrize("term, words", [
    ("colour=red", "KEY one of rule, severity, net, layer"),
    ("net", "expected KEY=PATTERN"),
    ("net=", "pattern after '=' is empty"),
    ("severity=fatal", "severity is one of error, warning"),
    ("net=re:(", "not a valid regular expression"),
    ("net=NO_SUCH_NET", "matches no net of the board"),
    ("layer=L9", "matches no copper layer of the board"),
    ("rule=no-such-rule", "matches no rule name or kind"),
])
def test_bad_terms_exit_2_with_one_line(capsys, tmp_path, term, words):
    html = tmp_path / "never.html"
    code, out, err = run(capsys, "demo", "--only", term, "--html", str(html))
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and words in err and "Traceback" not in err
    assert not html.exists()


def test_batch_applies_the_selection_per_board(capsys, tmp_path, full):
    from checker.cli import demo_board_path

    out_dir = tmp_path / "reports"
    code, out, err = run(capsys, "batch", str(demo_board_path()), "--out-dir", str(out_dir), "--jobs", "1",
                         "--only", "severity=error", "--summary-json", str(tmp_path / "s.json"))
    (report_file,) = out_dir.glob("*.json")
    report = json.loads(report_file.read_text())
    assert ids(report) == [f["id"] for f in full["findings"] if f["severity"] == "error"]
    assert json.loads((tmp_path / "s.json").read_text())["only"] == ["severity=error"]
    assert "only severity=error" in out


def test_batch_refuses_an_unknown_rule_up_front(capsys, tmp_path):
    from checker.cli import demo_board_path

    code, _, err = run(capsys, "batch", str(demo_board_path()), "--out-dir", str(tmp_path / "r"),
                       "--only", "rule=nope")
    assert code == 2 and "matches no rule name or kind" in err
    assert not (tmp_path / "r").exists()


def test_parse_keeps_order_and_validate_skips_unknown_lists():
    s = Selection.parse(["net=A*", "severity=Error"])
    assert s.terms == (("net", "A*"), ("severity", "error"))
    s.validate([("r", "k")])  # nets unknown (a batch): not judged
    with pytest.raises(UsageError):
        s.validate([("r", "k")], nets=["B1"])
