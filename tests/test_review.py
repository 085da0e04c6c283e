"""Waivers and the baseline diff, end to end: library, CLI, JSON and terminal output."""

from __future__ import annotations

import datetime as dt
import json
import os
import stat

import pytest

from checker import review as rv
from checker import waivers as wv
from checker.cli import main
from checker.errors import WaiverError
from checker.findings import Finding

TODAY = "2026-12-01"


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def flat(text: str) -> str:
    """Terminal output with its line wrapping undone."""
    return " ".join(text.split())


def assert_one_error(err: str, *parts: str) -> None:
    """One line on stderr, no traceback, naming every part."""
    assert len(err.strip().splitlines()) == 1, err
    assert "Traceback" not in err and err.startswith("couplint: error: "), err
    for part in parts:
        assert part in err, (part, err)


@pytest.fixture(autouse=True)
def fixed_today(monkeypatch):
    """Expiry is judged on a fixed day, whatever the clock says."""
    monkeypatch.setenv(wv.TODAY_ENV, TODAY)


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    """(path, parsed JSON) of the plain demo report; also the baseline."""
    path = tmp_path_factory.mktemp("base") / "baseline.json"
    assert main(["demo", "--format", "json", "--out", str(path)]) == 1
    return path, json.loads(path.read_text(encoding="utf-8"))


def find(report: dict, rule: str, aggressor: str, victim: str) -> dict:
    (f,) = [f for f in report["findings"] if (f["rule"], f["aggressor"], f["victim"]) == (rule, aggressor, victim)]
    return f


def entry(ident: str, reason: str = "Accepted after review.", author: str = "J. Doe", date: str = "2026-11-30",
          extra: str = "") -> str:
    return f"  - id: {ident}\n    reason: {reason}\n    author: {author}\n    date: {date}\n{extra}"


def waiver_file(tmp_path, body: str, name: str = "waivers.yaml"):
    path = tmp_path / name
    path.write_text("# team waivers\nversion: 1\nwaivers:\n" + body, encoding="utf-8")
    return path


def check_json(capsys, *argv):
    code, out, err = run(capsys, "demo", "--format", "json", *argv)
    assert code in (0, 1), err
    return code, json.loads(out)


# --------------------------------------------------------------------------
# Applying waivers
# --------------------------------------------------------------------------


def test_waiver_by_id_marks_the_finding_and_keeps_it(tmp_path, capsys, demo_report):
    _, base = demo_report
    target = find(base, "coupled-noise", "CLK_ADC", "SENSE_P")
    path = waiver_file(tmp_path, entry(target["id"], reason="Sensor input is filtered to 10 Hz.",
                                       extra="    expires: 2027-06-30\n"))
    code, report = check_json(capsys, "--waivers", str(path))
    assert code == 1  # the other findings still fail
    assert len(report["findings"]) == len(base["findings"])  # nothing removed
    marked = [f for f in report["findings"] if f["waiver"] is not None]
    assert [f["id"] for f in marked] == [target["id"]]
    assert marked[0]["waiver"] == {"reason": "Sensor input is filtered to 10 Hz.", "author": "J. Doe",
                                   "date": "2026-11-30", "expires": "2027-06-30", "source": f"{path}:4"}
    assert report["summary"]["waived"] == 1
    assert report["summary"]["failing"] == len(base["findings"]) - 1
    assert report["review"] == {"waiver_file": str(path), "expired": [], "unused": [], "baseline": None,
                                "fixed": []}
    assert "status" not in marked[0]  # only with a baseline


def test_waiver_by_rule_and_patterns(tmp_path, capsys, demo_report):
    _, base = demo_report
    body = (
        "  - rule: same-layer-spacing\n"
        "    nets: [SPI_SCK, \"THERM*\"]\n"
        "    layers: TOP\n"
        "    reason: Thermistor is read at 1 Hz.\n    author: A. N. Other\n    date: 2026-10-01\n"
        "  - rule: coupled-noise\n"            # both CLK_ADC -> SENSE_P and -> SENSE_N
        "    nets: [\"CLK_*\", \"SENSE_?\"]\n"
        "    reason: Differential input rejects it.\n    author: A. N. Other\n    date: 2026-10-01\n"
        "  - rule: parallel-run-length\n"      # the right nets, the wrong layer: matches nothing
        "    nets: [SPI_SCK, AIN3]\n    layers: TOP\n"
        "    reason: r\n    author: a\n    date: 2026-10-01\n"
    )
    path = waiver_file(tmp_path, body)
    _, report = check_json(capsys, "--waivers", str(path))
    waived = {(f["rule"], f["aggressor"], f["victim"]): f["waiver"]["source"]
              for f in report["findings"] if f["waiver"]}
    assert waived == {
        ("same-layer-spacing", "SPI_SCK", "THERM_IN"): f"{path}:4",
        ("coupled-noise", "CLK_ADC", "SENSE_P"): f"{path}:10",
        ("coupled-noise", "CLK_ADC", "SENSE_N"): f"{path}:10",
    }
    # same nets under another rule are not waived
    assert find(report, "parallel-run-length", "SPI_SCK", "THERM_IN")["waiver"] is None
    (unused,) = report["review"]["unused"]
    assert unused["rule"] == "parallel-run-length" and unused["layers"] == "TOP"
    assert unused["nets"] == ["SPI_SCK", "AIN3"] and unused["source"] == f"{path}:15"


def test_everything_waived_passes_with_waivers(tmp_path, capsys, demo_report):
    _, base = demo_report
    path = waiver_file(tmp_path, "".join(entry(f["id"]) for f in base["findings"]))
    code, report = check_json(capsys, "--waivers", str(path))
    assert code == 0
    assert report["summary"]["verdict"] == "pass with waivers"
    assert report["summary"]["waived"] == report["summary"]["findings"] == len(base["findings"])
    code, out, _ = run(capsys, "demo", "--waivers", str(path))
    assert code == 0
    out = flat(out)
    assert f"verdict: pass with waivers ({len(base['findings'])} waived)" in out
    assert "(waived)" in out and "waived: Accepted after review. (J. Doe, 2026-11-30;" in out


def test_expired_and_unused_waivers_are_reported(tmp_path, capsys, monkeypatch, demo_report):
    _, base = demo_report
    target = find(base, "coupled-noise", "SPI_SCK", "AIN3")["id"]
    path = waiver_file(tmp_path, entry(target, extra="    expires: 2026-12-31\n") + entry("0123456789ab"))
    monkeypatch.setenv(wv.TODAY_ENV, "2027-01-01")
    code, report = check_json(capsys, "--waivers", str(path))
    assert code == 1
    assert report["summary"]["waived"] == 0
    assert next(f for f in report["findings"] if f["id"] == target)["waiver"] is None
    (expired,) = report["review"]["expired"]
    assert expired["id"] == target and expired["expires"] == "2026-12-31"
    assert expired["findings"] == [target] and expired["source"] == f"{path}:4"
    (unused,) = report["review"]["unused"]
    assert unused["id"] == "0123456789ab" and unused["source"] == f"{path}:9"
    code, out, _ = run(capsys, "demo", "--waivers", str(path))
    out = flat(out)
    assert f"expired {path}:4: id {target}, expired 2026-12-31 (would cover 1 finding; not applied)" in out
    assert f"unused {path}:9: id 0123456789ab matches no finding" in out
    # on its expiry day a waiver still holds
    monkeypatch.setenv(wv.TODAY_ENV, "2026-12-31")
    _, report = check_json(capsys, "--waivers", str(path))
    assert report["review"]["expired"] == [] and report["summary"]["waived"] == 1


def test_bad_today_variable_exits_2(tmp_path, capsys, monkeypatch, demo_report):
    path = waiver_file(tmp_path, entry("0123456789ab"))
    monkeypatch.setenv(wv.TODAY_ENV, "tomorrow")
    code, out, err = run(capsys, "demo", "--waivers", str(path))
    assert code == 2 and out == ""
    assert_one_error(err, wv.TODAY_ENV, "'tomorrow'")


def _finding(ident: str, rule: str = "r", aggressor: str = "CLK", victim: str = "AIN1", layers=("TOP",),
             severity: str = "error") -> Finding:
    return Finding(ident, rule, "spacing-ratio", severity, aggressor, victim, tuple(layers), (0, 0, 1, 1), (0, 0),
                   2.0, 3.0, "centre/width", "m", 1.5)


def test_build_review_precedence_and_injected_today():
    a, b = _finding("aaaaaaaaaaaa"), _finding("bbbbbbbbbbbb", layers=("TOP", "IN1"))
    by_pattern = wv.Waiver("pattern", "x", dt.date(2026, 1, 1), rule="r", nets=("CLK", "AIN?"), source="w:1")
    by_id = wv.Waiver("id", "x", dt.date(2026, 1, 1), id="aaaaaaaaaaaa", source="w:9")
    later = wv.Waiver("later", "x", dt.date(2026, 1, 1), rule="r", nets=("*", "*"), layers="TOP/*",
                      expires=dt.date(2026, 6, 30), source="w:20")
    waivers = wv.WaiverFile("w", (by_pattern, by_id, later))
    r = rv.build_review([a, b], waivers, on=dt.date(2026, 6, 30))
    assert r.waived == {"aaaaaaaaaaaa": by_id, "bbbbbbbbbbbb": by_pattern}  # an id beats a pattern
    assert r.covers[later] == ["bbbbbbbbbbbb"] and r.expired == [] and r.unused == []
    assert r.verdict([a, b]) == "pass with waivers"
    r = rv.build_review([a, b], wv.WaiverFile("w", (later, by_id)), on=dt.date(2026, 7, 1))
    assert r.expired == [later] and r.waived == {"aaaaaaaaaaaa": by_id}
    assert r.failing([a, b]) == [b] and r.verdict([a, b]) == "fail"
    assert rv.build_review([a], wv.WaiverFile("w", (by_pattern,)), on=dt.date(2026, 1, 1)).unused == []
    r = rv.build_review([b], wv.WaiverFile("w", (by_id,)), on=dt.date(2026, 1, 1))
    assert r.unused == [by_id] and r.waived == {}


def test_check_never_modifies_the_waiver_file(tmp_path, capsys, demo_report):
    _, base = demo_report
    path = waiver_file(tmp_path, entry(base["findings"][0]["id"]) + "  # trailing comment\n")
    before, mtime = path.read_bytes(), path.stat().st_mtime_ns
    run(capsys, "demo", "--waivers", str(path))
    run(capsys, "demo", "--waivers", str(path), "--format", "json", "--out", str(tmp_path / "r.json"))
    assert path.read_bytes() == before and path.stat().st_mtime_ns == mtime
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json", "waivers.yaml"]


def test_report_with_review_is_deterministic(tmp_path, capsys, demo_report):
    base_path, base = demo_report
    path = waiver_file(tmp_path, entry(base["findings"][0]["id"]) + entry("0123456789ab"))
    outs = [tmp_path / "a.json", tmp_path / "b.json"]
    for out in outs:
        run(capsys, "demo", "--format", "json", "--waivers", str(path), "--baseline", str(base_path),
            "--out", str(out))
    assert outs[0].read_bytes() == outs[1].read_bytes()


# --------------------------------------------------------------------------
# couplint waive
# --------------------------------------------------------------------------

HAND_WRITTEN = (
    "# Waivers for the sensor board.\n"
    "#   keep this list short!\n"
    "version: 1   # format\n"
    "\n"
    "waivers:\n"
    "    # the ADC clock\n"
    "    - {id: 5812f4f0d134, reason: 'Filtered to 10 Hz', author: J. Doe, date: 2026-11-30}\n"
    "    - rule: same-layer-spacing\n"
    "      nets: [SPI_SCK,   \"THERM*\"]     # odd spacing kept\n"
    "      reason: >\n"
    "        Thermistor is read\n"
    "        at 1 Hz.\n"
    "      author: A. N. Other\n"
    "      date: 2026-10-01\n"
    "# end of list\n"
)


def test_waive_appends_and_keeps_the_file_byte_for_byte(tmp_path, capsys, demo_report):
    _, base = demo_report
    path = tmp_path / "waivers.yaml"
    path.write_text(HAND_WRITTEN, encoding="utf-8")
    path.chmod(0o640)
    target = find(base, "coupled-noise", "SPI_SCK", "AIN3")["id"]
    code, out, err = run(capsys, "waive", target, "--reason", "Input filter: 10 Hz; see #123", "--author",
                         "yes", "--expires", "2027-06-30", "--waivers", str(path))
    assert code == 0, err
    assert f"waived {target} in {path}:16" in out
    text = path.read_text(encoding="utf-8")
    assert text == HAND_WRITTEN + (f"    - id: {target}\n"
                                   "      reason: \"Input filter: 10 Hz; see #123\"\n"
                                   "      author: \"yes\"\n"
                                   f"      date: {TODAY}\n"
                                   "      expires: 2027-06-30\n")
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    assert os.listdir(tmp_path) == ["waivers.yaml"]  # no temporary file left
    (*_, added) = wv.load_waivers(path).waivers
    assert added == wv.Waiver("Input filter: 10 Hz; see #123", "yes", dt.date(2026, 12, 1), id=target,
                              expires=dt.date(2027, 6, 30), source=f"{path}:16")
    # the new entry waives the finding in a check
    _, report = check_json(capsys, "--waivers", str(path))
    assert next(f for f in report["findings"] if f["id"] == target)["waiver"]["author"] == "yes"


def test_waive_refuses_an_id_already_waived(tmp_path, capsys):
    path = tmp_path / "waivers.yaml"
    path.write_text(HAND_WRITTEN, encoding="utf-8")
    code, out, err = run(capsys, "waive", "5812F4F0D134", "--reason", "again", "--author", "x",
                         "--waivers", str(path))
    assert code == 2 and out == ""
    assert_one_error(err, str(path), "waivers[0].id (line 7)", "already waived")
    assert path.read_text(encoding="utf-8") == HAND_WRITTEN


def test_waive_creates_the_default_file(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("COUPLINT_AUTHOR", raising=False)
    monkeypatch.setenv("USER", "jdoe")
    code, out, err = run(capsys, "waive", "0123456789ab", "--reason", "Known and accepted.")
    assert code == 0, err
    text = (tmp_path / "waivers.yaml").read_text(encoding="utf-8")
    assert text == wv.NEW_FILE_HEADER + (
        "  - id: 0123456789ab\n    reason: Known and accepted.\n    author: jdoe\n    date: 2026-12-01\n")
    code, _, err = run(capsys, "waive", "aaaaaaaaaaaa", "--reason", "second")
    assert code == 0, err
    assert [w.id for w in wv.load_waivers("waivers.yaml").waivers] == ["0123456789ab", "aaaaaaaaaaaa"]


def test_waive_keeps_crlf_line_ends(tmp_path, capsys):
    path = tmp_path / "w.yaml"
    original = b"version: 1\r\nwaivers:\r\n- id: 0123456789ab\r\n  reason: r\r\n  author: a\r\n  date: 2026-01-01"
    path.write_bytes(original)  # no newline at the end
    assert run(capsys, "waive", "bbbbbbbbbbbb", "--reason", "r2", "--author", "b", "--waivers", str(path))[0] == 0
    assert path.read_bytes() == original + (b"\r\n- id: bbbbbbbbbbbb\r\n  reason: r2\r\n  author: b\r\n"
                                            b"  date: 2026-12-01\r\n")


def test_waive_is_atomic(tmp_path, capsys, monkeypatch):
    path = tmp_path / "waivers.yaml"
    path.write_text(HAND_WRITTEN, encoding="utf-8")

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    code, _, err = run(capsys, "waive", "aaaaaaaaaaaa", "--reason", "r", "--author", "a", "--waivers", str(path))
    assert code == 2
    assert_one_error(err, str(path), "No space left on device; it is unchanged")
    assert path.read_text(encoding="utf-8") == HAND_WRITTEN
    assert os.listdir(tmp_path) == ["waivers.yaml"]


@pytest.mark.parametrize("argv, parts", [
    (["5812f4f0d13"], ["'5812f4f0d13' is not a finding id", "12 hex digits"]),
    (["zzzzzzzzzzzz"], ["'zzzzzzzzzzzz' is not a finding id"]),
    (["aaaaaaaaaaaa", "--expires", "2026-11-30"], ["--expires 2026-11-30 is before today (2026-12-01)"]),
    (["aaaaaaaaaaaa", "--expires", "2027-02-30"], ["--expires: '2027-02-30' is not a date"]),
    (["aaaaaaaaaaaa", "--reason", "  "], ["--reason must not be empty"]),
])
def test_waive_bad_arguments(tmp_path, capsys, argv, parts):
    path = tmp_path / "waivers.yaml"
    path.write_text(HAND_WRITTEN, encoding="utf-8")
    if "--reason" not in argv:
        argv = argv + ["--reason", "r"]
    code, out, err = run(capsys, "waive", *argv, "--author", "a", "--waivers", str(path))
    assert code == 2 and out == ""
    assert_one_error(err, *parts)
    assert path.read_text(encoding="utf-8") == HAND_WRITTEN


@pytest.mark.parametrize("content, parts", [
    ("version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    author: a\n    date: 2026-02-30\n",
     ["waivers[0].date (line 6)", "'2026-02-30' is not a date"]),
    ("version: 1\nwaivers: []\n", ["waivers", "cannot append", "not '[]'"]),
    ("waivers:\nversion: 1\n", ["waivers", "must be the last key"]),
    ("version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    author: a\n    date: 2026-01-01\n...\n",
     ["cannot append"]),
])
def test_waive_refuses_a_file_it_cannot_extend(tmp_path, capsys, content, parts):
    path = tmp_path / "waivers.yaml"
    path.write_text(content, encoding="utf-8")
    code, _, err = run(capsys, "waive", "aaaaaaaaaaaa", "--reason", "r", "--author", "a", "--waivers", str(path))
    assert code == 2
    assert_one_error(err, str(path), *parts)
    assert path.read_text(encoding="utf-8") == content
    assert os.listdir(tmp_path) == ["waivers.yaml"]


def test_waive_help_text(capsys):
    code = main(["waive", "--help"])
    out = capsys.readouterr().out
    assert code == 0
    assert ("with --report, against the findings of that JSON report, so a mistyped id is refused"
            in " ".join(out.split()))


# --------------------------------------------------------------------------
# Malformed waiver files
# --------------------------------------------------------------------------

GOOD = "    reason: r\n    author: a\n    date: 2026-01-01\n"

BAD_WAIVERS = [
    ("unknown-top-key", "version: 1\nwaivers:\nextra: 1\n", ["extra (line 3)", "unknown key"]),
    ("missing-version", "waivers:\n", ["line 1", "missing required key 'version'"]),
    ("version-2", "version: 2\nwaivers:\n", ["version (line 1)", "not a supported version"]),
    ("version-text", "version: '1'\nwaivers:\n", ["version (line 1)", "the text '1'"]),
    ("missing-waivers", "version: 1\n", ["missing required key 'waivers'"]),
    ("waivers-mapping", "version: 1\nwaivers: {a: 1}\n", ["waivers (line 2)", "expected a list"]),
    ("entry-not-mapping", "version: 1\nwaivers:\n  - 0123456789ab\n", ["waivers[0] (line 3)", "expected a mapping"]),
    ("unknown-entry-key", "version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD + "    colour: red\n",
     ["waivers[0].colour (line 7)", "unknown key"]),
    ("missing-reason", "version: 1\nwaivers:\n  - id: 0123456789ab\n    author: a\n    date: 2026-01-01\n",
     ["waivers[0] (line 3)", "missing required key 'reason'"]),
    ("missing-author", "version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    date: 2026-01-01\n",
     ["waivers[0] (line 3)", "missing required key 'author'"]),
    ("missing-date", "version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    author: a\n",
     ["waivers[0] (line 3)", "missing required key 'date'"]),
    ("empty-reason", "version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: ''\n    author: a\n"
                     "    date: 2026-01-01\n", ["waivers[0].reason (line 4)", "must not be empty"]),
    ("null-author", "version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    author:\n"
                    "    date: 2026-01-01\n", ["waivers[0].author", "expected text, got null"]),
    ("bad-month", "version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    author: a\n    date: 2026-13-01\n",
     ["waivers[0].date (line 6)", "month must be in 1..12"]),
    ("date-format", "version: 1\nwaivers:\n  - id: 0123456789ab\n    reason: r\n    author: a\n    date: 30.11.2026\n",
     ["waivers[0].date (line 6)", "YYYY-MM-DD"]),
    ("date-with-time", "version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD.replace("2026-01-01", "2026-01-01 10:00"),
     ["waivers[0].date (line 6)", "YYYY-MM-DD"]),
    ("expires-before-date", "version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD + "    expires: 2025-12-31\n",
     ["waivers[0].expires (line 7)", "before the waiver's date 2026-01-01"]),
    ("bad-expires", "version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD + "    expires: soon\n",
     ["waivers[0].expires (line 7)", "'soon' is not a date"]),
    ("neither-id-nor-rule", "version: 1\nwaivers:\n  - reason: r\n    author: a\n    date: 2026-01-01\n",
     ["waivers[0] (line 3)", "missing 'id'", "or 'rule'"]),
    ("both-id-and-rule",
     "version: 1\nwaivers:\n  - id: 0123456789ab\n    rule: coupled-noise\n    nets: [a, b]\n" + GOOD,
     ["waivers[0] (line 3)", "either 'id'", "not both"]),
    ("short-id", "version: 1\nwaivers:\n  - id: 5812f4f0d13\n" + GOOD,
     ["waivers[0].id (line 3)", "'5812f4f0d13' is not a finding id"]),
    ("non-hex-id", "version: 1\nwaivers:\n  - id: 5812f4f0d13x\n" + GOOD, ["waivers[0].id (line 3)", "12 hex digits"]),
    ("id-with-nets", "version: 1\nwaivers:\n  - id: 0123456789ab\n    nets: [a, b]\n" + GOOD,
     ["waivers[0].nets (line 4)", "only goes with 'rule'"]),
    ("rule-without-nets", "version: 1\nwaivers:\n  - rule: coupled-noise\n" + GOOD,
     ["waivers[0] (line 3)", "missing 'nets'"]),
    ("one-net", "version: 1\nwaivers:\n  - rule: coupled-noise\n    nets: [CLK]\n" + GOOD,
     ["waivers[0].nets (line 4)", "[aggressor pattern, victim pattern]"]),
    ("net-list-item", "version: 1\nwaivers:\n  - rule: coupled-noise\n    nets: [CLK, [a]]\n" + GOOD,
     ["waivers[0].nets[1] (line 4)", "expected text"]),
    ("bad-rule-name", "version: 1\nwaivers:\n  - rule: Coupled Noise\n    nets: [a, b]\n" + GOOD,
     ["waivers[0].rule (line 3)", "not a rule name"]),
    ("layers-list", "version: 1\nwaivers:\n  - rule: coupled-noise\n    nets: [a, b]\n    layers: [TOP]\n" + GOOD,
     ["waivers[0].layers (line 5)", "expected text"]),
    ("duplicate-key", "version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD + "    reason: again\n",
     ["waivers[0].reason", "duplicate key at line 7"]),
    ("duplicate-id", "version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD + "  - id: 0123456789AB\n" + GOOD,
     ["waivers[1].id (line 7)", "already waived by waivers[0] (line 3)"]),
    ("duplicate-pattern", "version: 1\nwaivers:\n" + ("  - rule: coupled-noise\n    nets: [a, b]\n" + GOOD) * 2,
     ["waivers[1] (line 8)", "same rule, nets and layers as waivers[0] (line 3)"]),
    ("yaml-syntax", "version: 1\nwaivers:\n  - id: [0123456789ab\n", ["line 4, column 1", "invalid YAML"]),
    ("empty-file", "# nothing yet\n", ["the file is empty"]),
    ("top-level-list", "- version: 1\n", ["line 1", "expected a mapping with 'version' and 'waivers'"]),
]


@pytest.mark.parametrize("name, content, parts", BAD_WAIVERS, ids=[b[0] for b in BAD_WAIVERS])
def test_malformed_waiver_file_exits_2(tmp_path, capsys, name, content, parts):
    path = tmp_path / "bad-waivers.yaml"
    path.write_text(content, encoding="utf-8")
    out_file = tmp_path / "report.json"
    code, out, err = run(capsys, "demo", "--format", "json", "--waivers", str(path), "--out", str(out_file))
    assert code == 2 and out == ""
    assert_one_error(err, f"{path}: ", *parts)
    assert not out_file.exists()  # nothing half-written
    assert path.read_text(encoding="utf-8") == content  # input never modified


def test_unreadable_waiver_files_exit_2(tmp_path, capsys):
    code, _, err = run(capsys, "demo", "--waivers", str(tmp_path / "nope.yaml"))
    assert code == 2
    assert_one_error(err, "nope.yaml", "no such file")
    path = tmp_path / "latin1.yaml"
    path.write_bytes(b"version: 1\nwaivers:\n  - reason: caf\xe9\n")
    code, _, err = run(capsys, "demo", "--waivers", str(path))
    assert code == 2
    assert_one_error(err, "latin1.yaml", "not UTF-8 text (bad byte at offset 35)")


def test_waiver_error_carries_file_key_path_and_line(tmp_path):
    with pytest.raises(WaiverError) as info:
        wv.parse_waivers("version: 1\nwaivers:\n  - id: 0123456789ab\n" + GOOD.replace("2026-01-01", "x"), "w.yaml")
    e = info.value
    assert (e.file, e.key_path, e.line) == ("w.yaml", "waivers[0].date", 6)
    assert str(e) == "w.yaml: waivers[0].date (line 6): 'x' is not a date written YYYY-MM-DD"


def test_merge_keys_and_quoted_values_are_read():
    text = ("version: 1\nwaivers:\n"
            "  - &who {id: '0123456789ab', reason: \"r\", author: a, date: '2026-01-01'}\n"
            "  - <<: *who\n    id: 1234567890ab\n    reason: other\n")
    first, second = wv.parse_waivers(text, "w.yaml").waivers
    assert first.date == second.date == dt.date(2026, 1, 1) and second.author == "a"
    assert second.id == "1234567890ab" and second.reason == "other" and second.source == "w.yaml:4"


# --------------------------------------------------------------------------
# Baseline
# --------------------------------------------------------------------------


def finding_only(f: dict) -> dict:
    """A report's finding without what the review of that run added."""
    return {k: v for k, v in f.items() if k not in ("waiver", "status")}


def changed_rules(tmp_path):
    """The default rules with the spacing rule renamed: its finding disappears
    under the old name (fixed) and appears under the new one (new)."""
    path = tmp_path / "changed.yaml"
    path.write_text(
        "version: 1\nextends: default\ndisable: [same-layer-spacing]\nrules:\n"
        "  - name: close-spacing\n    kind: spacing-ratio\n    aggressor: [clocks, switch-nodes]\n"
        "    victim: sensitive-analog\n    severity: warning\n    measure: centre/width\n"
        "    min_ratio: 3\n    min_length: 1 mm\n", encoding="utf-8")
    return path


def test_baseline_classifies_new_unchanged_fixed(tmp_path, capsys, demo_report):
    base_path, base = demo_report
    rules = changed_rules(tmp_path)
    code, report = check_json(capsys, "--rules", str(rules), "--baseline", str(base_path))
    assert code == 1
    # a list, not a dict by nets: a rule may report one net pair at several places (reference-gap stretches)
    status = [((f["rule"], f["aggressor"], f["victim"]), f["status"]) for f in report["findings"]]
    assert [key for key, st in status if st == "new"] == [("close-spacing", "SPI_SCK", "THERM_IN")]
    assert [st for _, st in status].count("unchanged") == len(status) - 1 == len(base["findings"]) - 1
    gone = find(base, "same-layer-spacing", "SPI_SCK", "THERM_IN")
    assert report["review"]["fixed"] == [finding_only(gone)]
    assert report["review"]["baseline"] == str(base_path)
    s = report["summary"]
    assert (s["new"], s["unchanged"], s["fixed"]) == (1, len(base["findings"]) - 1, 1)
    code, out, _ = run(capsys, "demo", "--rules", str(rules), "--baseline", str(base_path))
    out = flat(out)
    assert "status" in out and "unchanged" in out
    assert f"fixed since the baseline {base_path}:" in out
    assert f"fixed [{gone['id']}] same-layer-spacing: SPI_SCK -> THERM_IN on TOP" in out
    assert f"new 1, unchanged {len(base['findings']) - 1}, fixed 1" in out


def test_fail_on_new(tmp_path, capsys, demo_report):
    base_path, base = demo_report
    rules = changed_rules(tmp_path)
    # the same board and rules as the baseline: nothing new, so it passes, and the verdict says that known
    # findings of warning or worse remain (not "pass" nor "pass with waivers": nothing is waived)
    code, report = check_json(capsys, "--baseline", str(base_path), "--fail-on", "new")
    assert code == 0 and report["summary"]["verdict"] == "pass with known findings" and report["summary"]["new"] == 0
    # one new finding fails it ...
    code, report = check_json(capsys, "--rules", str(rules), "--baseline", str(base_path), "--fail-on", "new")
    assert code == 1 and report["summary"]["failing"] == 1
    new_id = next(f["id"] for f in report["findings"] if f["status"] == "new")
    # ... until it is waived
    waivers = waiver_file(tmp_path, entry(new_id))
    code, out, _ = run(capsys, "demo", "--rules", str(rules), "--baseline", str(base_path), "--fail-on", "new",
                       "--waivers", str(waivers))
    assert code == 0
    out = flat(out)
    assert (f"verdict: pass with known findings (1 waived; {len(base['findings']) - 1} unchanged since the "
            "baseline, not failing") in out
    # the default policy still fails on the unchanged findings
    assert run(capsys, "demo", "--rules", str(rules), "--baseline", str(base_path), "--waivers", str(waivers))[0] == 1
    # without a baseline every finding is new
    assert run(capsys, "demo", "--fail-on", "new")[0] == 1


def test_fixed_findings_drop_the_old_review(tmp_path, capsys, demo_report):
    """A baseline written with waivers: its fixed findings are findings, not old waiver marks."""
    base_path, base = demo_report
    gone = find(base, "same-layer-spacing", "SPI_SCK", "THERM_IN")
    waivers = waiver_file(tmp_path, entry(gone["id"]))
    old = tmp_path / "old.json"
    run(capsys, "demo", "--format", "json", "--waivers", str(waivers), "--baseline", str(base_path),
        "--out", str(old))
    assert next(f for f in json.loads(old.read_text())["findings"] if f["id"] == gone["id"])["waiver"] is not None
    _, report = check_json(capsys, "--rules", str(changed_rules(tmp_path)), "--baseline", str(old))
    assert report["review"]["fixed"] == [finding_only(gone)]
    assert "waiver" in gone and "status" not in finding_only(gone)


def _report_with(change) -> str:
    """A minimal valid report whose one finding is passed through ``change``."""
    finding = {"id": "0123456789ab", "rule": "r", "severity": "error", "aggressor": "A", "victim": "V",
               "layers": ["TOP"], "message": "m"}
    change(finding)
    return json.dumps({"report": "couplint", "report_version": 1, "findings": [finding]})


BAD_BASELINES = [
    ("not-json", "{\"report\": \"couplint\",\n  oops}", ["line 2, column 3", "invalid JSON"]),
    ("empty", "", ["the file is empty"]),
    ("not-a-report", "{\"findings\": []}", ["report", "not a couplint JSON report"]),
    ("a-list", "[]", ["not a couplint JSON report"]),
    ("version", "{\"report\": \"couplint\", \"report_version\": 99, \"findings\": []}",
     ["report_version", "99 is not a report version"]),
    ("no-findings", "{\"report\": \"couplint\", \"report_version\": 1}", ["missing \"findings\""]),
    ("findings-object", "{\"report\": \"couplint\", \"report_version\": 1, \"findings\": {}}",
     ["findings: expected a list"]),
    ("finding-not-object", "{\"report\": \"couplint\", \"report_version\": 1, \"findings\": [1]}",
     ["findings[0]: expected a finding object"]),
    ("missing-id", _report_with(lambda f: f.pop("id")), ["findings[0]: missing \"id\""]),
    ("bad-id", _report_with(lambda f: f.update(id="xyz")), ["findings[0].id", "'xyz' is not a finding id"]),
    ("id-number", _report_with(lambda f: f.update(id=5)), ["findings[0].id", "expected text, got the number 5"]),
    ("layers-text", _report_with(lambda f: f.update(layers="TOP")), ["findings[0].layers", "expected a list"]),
    ("layer-number", _report_with(lambda f: f.update(layers=[1])), ["findings[0].layers[0]", "expected a layer"]),
    ("severity", _report_with(lambda f: f.update(severity="fatal")),
     ["findings[0].severity", "'fatal' is not a severity"]),
    ("duplicate-key", _report_with(lambda f: None).replace('"rule": "r"', '"rule": "r", "rule": "q"'),
     ["findings[0].rule", "appears twice"]),
]


@pytest.mark.parametrize("name, content, parts", BAD_BASELINES, ids=[b[0] for b in BAD_BASELINES])
def test_malformed_baseline_exits_2(tmp_path, capsys, name, content, parts):
    path = tmp_path / "old.json"
    path.write_text(content, encoding="utf-8")
    out_file = tmp_path / "report.json"
    code, out, err = run(capsys, "demo", "--format", "json", "--baseline", str(path), "--out", str(out_file))
    assert code == 2 and out == ""
    assert_one_error(err, f"{path}", *parts)
    assert not out_file.exists() and path.read_text(encoding="utf-8") == content


def test_missing_baseline_exits_2(tmp_path, capsys):
    code, _, err = run(capsys, "demo", "--baseline", str(tmp_path / "gone.json"))
    assert code == 2
    assert_one_error(err, "gone.json", "no such file")


@pytest.mark.parametrize("option", ["--waivers", "--baseline"])
def test_output_may_not_overwrite_the_waivers_or_the_baseline(tmp_path, capsys, demo_report, option):
    base_path, base = demo_report
    target = tmp_path / "input"
    if option == "--waivers":
        target.write_text("version: 1\nwaivers:\n" + entry(base["findings"][0]["id"]), encoding="utf-8")
    else:
        target.write_bytes(base_path.read_bytes())
    before = target.read_bytes()
    code, _, err = run(capsys, "demo", "--format", "json", option, str(target), "--out", str(target))
    assert code == 2
    assert_one_error(err, str(target), "refusing to overwrite")
    assert target.read_bytes() == before


def test_docs_example_is_a_valid_waiver_file(capsys, demo_report, tmp_path):
    """docs/waivers.md's example reads, and waives what it says on the demo board."""
    import re
    from pathlib import Path

    doc = (Path(__file__).resolve().parents[1] / "docs" / "waivers.md").read_text(encoding="utf-8")
    example = re.findall(r"```yaml\n(.*?)```", doc, flags=re.S)[0]
    path = tmp_path / "waivers.yaml"
    path.write_text(example, encoding="utf-8")
    assert len(wv.load_waivers(path).waivers) == 2
    _, report = check_json(capsys, "--waivers", str(path))
    assert report["summary"]["waived"] == 2 and report["review"]["unused"] == []


def test_waive_checks_the_id_against_the_report_given(tmp_path, capsys, demo_report):
    report_path, demo_report = demo_report
    waivers = tmp_path / "waivers.yaml"
    known = demo_report["findings"][0]["id"]
    unknown = "0123456789ab" if known != "0123456789ab" else "ba9876543210"
    code, out, err = run(capsys, "waive", unknown, "--reason", "typo", "--author", "x", "--waivers", str(waivers),
                         "--report", str(report_path))
    assert code == 2 and out == "" and not waivers.exists()  # nothing written for an id no finding has
    assert_one_error(err, str(report_path), f"no finding with the id {unknown} in this report")
    code, out, err = run(capsys, "waive", known, "--reason", "Accepted.", "--author", "x", "--waivers", str(waivers),
                         "--report", str(report_path))
    assert code == 0, err
    first = demo_report["findings"][0]
    assert f"waived {known}: {first['rule']} {first['aggressor']} -> {first['victim']}" in out
    code, out, err = run(capsys, "waive", known, "--reason", "x", "--author", "x", "--waivers", str(waivers),
                         "--report", str(tmp_path / "missing.json"))
    assert code == 2 and "missing.json: no such file" in err


def test_the_html_banner_says_known_findings_remain_with_fail_on_new(tmp_path, capsys, demo_report):
    base_path, base = demo_report
    html = tmp_path / "signoff.html"
    code, _, _ = run(capsys, "demo", "--baseline", str(base_path), "--fail-on", "new", "--html", str(html))
    assert code == 0  # the banner and the exit status agree: a pass, with what remains said
    text = html.read_text(encoding="utf-8")
    assert "PASS WITH KNOWN FINDINGS" in text and "PASS WITH WAIVERS" not in text
    errors_and_warnings = sum(f["severity"] in ("error", "warning") for f in base["findings"])
    assert f"{errors_and_warnings} of {len(base['findings'])} findings of warning or worse" in text
