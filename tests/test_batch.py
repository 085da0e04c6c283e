"""couplint batch: many boards, worker processes or a Dask cluster, summary, JUnit."""

from __future__ import annotations

import argparse
import json
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from checker import batch
from checker.cli import demo_board_path
from checker.cli import main as cli_main
from checker.errors import CouplintError
from checker.report import junit

FIXTURES = Path(__file__).resolve().parent.parent / "fixtures"
GOOD = ["demo_board.json", "four_layer_mixed.json", "two_layer_parallel.json", "two_layer_parallel_mil.json"]
BROKEN = "{not json"
#: every board of the ``boards`` fixture but the (slower) demo
SMALL = ["boards/two_*.json", "boards/four_layer_mixed.json", "boards/broken.json"]
CLEAN_BOARD = {
    "format": "couplint-board", "version": 1,
    "stackup": [{"copper": "TOP", "role": "signal", "thickness": 0.035},
                {"dielectric": "core", "thickness": 1.0, "er": 4.5},
                {"copper": "BOT", "role": "plane", "thickness": 0.035}],
    "nets": [{"name": "CLK_A"}, {"name": "SENSE_A"}],
    "tracks": [{"layer": "TOP", "net": "CLK_A", "width": 0.2, "points": [[0, 0], [10, 0]]},
               {"layer": "TOP", "net": "SENSE_A", "width": 0.2, "points": [[0, 20], [10, 20]]}],
}


def run_batch(capsys, *argv: str) -> tuple[int, str, str]:
    """What the command line does with ``couplint batch ARGV``."""
    parser = argparse.ArgumentParser(prog="couplint batch")
    batch.add_arguments(parser)
    try:
        code = batch.run(parser.parse_args(list(argv)))
    except CouplintError as exc:
        print(f"couplint: error: {exc}", file=__import__("sys").stderr)
        code = 2
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def boards(tmp_path, monkeypatch) -> Path:
    """A folder ``boards`` (relative to the working directory) with the
    fixtures, the demo and one broken board."""
    monkeypatch.chdir(tmp_path)
    folder = tmp_path / "boards"
    folder.mkdir()
    for name in GOOD[1:]:
        shutil.copy(FIXTURES / name, folder / name)
    shutil.copy(demo_board_path(), folder / "demo_board.json")
    (folder / "broken.json").write_text(BROKEN)
    (folder / "notes.txt").write_text("not a board")
    (folder / "sub").mkdir()
    shutil.copy(FIXTURES / GOOD[2], folder / "sub" / "nested.json")
    return folder


def snapshot(folder: Path) -> dict[str, bytes]:
    return {str(p): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def test_batch_over_a_folder(boards, capsys):
    before = snapshot(boards)
    code, out, err = run_batch(capsys, "boards", "--out-dir", "out", "--jobs", "2",
                               "--summary-json", "summary.json", "--junit", "junit.xml")
    assert code == 1
    assert snapshot(boards) == before  # inputs never modified
    # one report per good board, none for the broken one; the nested board is not picked up
    assert sorted(p.name for p in Path("out").iterdir()) == GOOD
    summary = json.loads(Path("summary.json").read_text())
    rows = {b["path"]: b for b in summary["boards"]}
    assert list(rows) == sorted(f"boards/{n}" for n in GOOD + ["broken.json"])
    broken = rows["boards/broken.json"]
    assert broken["verdict"] == "error" and broken["report_path"] is None
    assert broken["error"].startswith("boards/broken.json: line 1")
    for name in GOOD:
        row = rows[f"boards/{name}"]
        assert row["error"] is None and row["report_path"] == f"out/{name}"
        # the same report, byte for byte, as `couplint check --format json --out`
        single = Path(f"single-{name}")
        assert cli_main(["check", f"boards/{name}", "--format", "json", "--out", str(single)]) == 1
        assert Path(row["report_path"]).read_bytes() == single.read_bytes()
        report = json.loads(single.read_text())
        assert row["findings"] == len(report["findings"]) == report["summary"]["findings"] > 0
        assert row["by_rule"] == report["summary"]["findings_by_rule"]
        assert row["verdict"] == report["summary"]["verdict"] == "fail"
        assert row["failing"] == row["findings"]
        noises = [max(v for v in p["noise_mv_on"].values() if v is not None)
                  for p in report["net_pairs"] if any(v is not None for v in p["noise_mv_on"].values())]
        assert row["worst_noise_mv"] == pytest.approx(max(noises), rel=1e-5)
    totals = summary["totals"]
    assert totals["boards"] == 5 and totals["fail"] == 4 and totals["error"] == 1 and totals["pass"] == 0
    assert totals["findings"] == sum(r["findings"] for r in rows.values())
    assert "seconds" not in json.dumps(summary)
    # the table: every board, sorted by path, the broken one as an error row
    lines = [line for line in out.splitlines() if "boards/" in line]
    assert [next(w for w in line.split() if w.startswith("boards/")) for line in lines] == list(rows)
    assert "error" in lines[0] and "broken.json" in lines[0]
    assert "5 boards: 4 fail, 1 error" in out
    # one line per broken board on stderr, no traceback
    assert err.strip().splitlines() == [f"couplint: error: {broken['error']}"]
    assert "Traceback" not in out + err
    check_junit(summary, "junit.xml")


def check_junit(summary: dict, path: str) -> None:
    """The JUnit file agrees with the summary and the reports."""
    root = ET.parse(path).getroot()
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert [s.get("name") for s in suites] == [b["path"] for b in summary["boards"]]
    rule_names = list(summary["boards"][1]["by_rule"])
    assert len(rule_names) == 7  # the rules of the default set
    for suite, row in zip(suites, summary["boards"]):
        cases = suite.findall("testcase")
        assert [c.get("name") for c in cases] == ["load"] + rule_names
        assert suite.get("tests") == str(len(cases))
        if row["verdict"] == "error":
            assert cases[0].find("error").get("message") == row["error"]
            assert all(c.find("skipped") is not None for c in cases[1:])
            assert suite.get("errors") == "1" and suite.get("failures") == "0"
            continue
        assert cases[0].find("error") is None and cases[0].find("failure") is None
        failed = {c.get("name"): c.find("failure") for c in cases[1:] if c.find("failure") is not None}
        assert set(failed) == {rule for rule, n in row["by_rule"].items() if n}
        assert suite.get("failures") == str(len(failed)) and suite.get("errors") == "0"
        report = json.loads(Path(row["report_path"]).read_text())
        for f in report["findings"]:  # every failing finding is listed with its id and message
            assert f"[{f['id']}]" in failed[f["rule"]].text and f["message"] in failed[f["rule"]].text
    assert root.get("tests") == str(5 * 8)  # 5 boards x (load + 7 rules)
    assert root.get("errors") == "1"
    assert root.get("failures") == str(sum(sum(1 for n in b["by_rule"].values() if n) for b in summary["boards"]))


def test_output_is_deterministic_across_runs_and_jobs(boards, capsys):
    outputs = []
    for i, jobs in enumerate(("1", "2", "2")):
        code, _, _ = run_batch(capsys, *SMALL, "--out-dir", "out", "--jobs", jobs,
                               "--summary-json", f"s{i}.json", "--junit", f"j{i}.xml")
        assert code == 1
        outputs.append((Path(f"s{i}.json").read_bytes(), Path(f"j{i}.xml").read_bytes(), snapshot(Path("out"))))
    assert outputs[0] == outputs[1] == outputs[2]


def test_clean_board_passes_and_fail_on(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    Path("clean.json").write_text(json.dumps(CLEAN_BOARD))
    code, out, _ = run_batch(capsys, "clean.json", "--out-dir", "out", "--summary-json", "s.json", "--junit", "j.xml")
    assert code == 0
    row = json.loads(Path("s.json").read_text())["boards"][0]
    assert (row["verdict"], row["findings"], row["failing"], row["name"]) == ("pass", 0, 0, "clean")
    assert ET.parse("j.xml").getroot().get("failures") == "0"
    assert "1 board: 1 pass" in out
    # only warnings: --fail-on error passes a board that has findings
    shutil.copy(demo_board_path(), "demo.json")
    rules = Path("warn.yaml")
    from checker.ruleset import default_ruleset

    rules.write_text("version: 1\nextends: default\n"
                     "rules:\n  - {name: only-warn, kind: capacitance-budget, severity: warning, max_c12: 0.001 pF}\n"
                     "disable: [" + ", ".join(r.name for r in default_ruleset().rules) + "]\n")
    for fail_on, expected in (("warning", 1), ("error", 0)):
        code, _, _ = run_batch(capsys, "demo.json", "clean.json", "--rules", str(rules), "--out-dir", "out",
                               "--fail-on", fail_on, "--summary-json", "s.json", "--jobs", "1")
        assert code == expected
        demo = json.loads(Path("s.json").read_text())["boards"][1]
        assert demo["findings"] > 0 and list(demo["by_rule"]) == ["only-warn"]
        assert demo["failing"] == (demo["findings"] if fail_on == "warning" else 0)


def test_glob_and_folder_targets(boards, capsys):
    code, _, _ = run_batch(capsys, "boards/two_*.json", "boards/sub", "boards/two_layer_parallel.json",
                           "--out-dir", "out", "--summary-json", "s.json", "--jobs", "1")
    assert code == 1
    paths = [b["path"] for b in json.loads(Path("s.json").read_text())["boards"]]
    # sorted, each file once, folders give only the *.json directly inside
    assert paths == ["boards/sub/nested.json", "boards/two_layer_parallel.json", "boards/two_layer_parallel_mil.json"]
    # ** recurses; a pattern that matches a folder takes the *.json inside it
    code, _, _ = run_batch(capsys, "boards/**/n*.json", "board?/su[b]", "--out-dir", "out2", "--summary-json",
                           "s2.json", "--jobs", "1")
    assert [b["path"] for b in json.loads(Path("s2.json").read_text())["boards"]] == ["boards/sub/nested.json"]


@pytest.mark.parametrize("target, message", [
    ("nope.json", "nope.json: no such file or folder"),
    ("boards/*.yaml", "boards/*.yaml: the pattern matches no files"),
    ("empty", "empty: no *.json files and no fabrication package in this folder"),
])
def test_targets_that_name_nothing(boards, capsys, target, message):
    Path("empty").mkdir()
    code, out, err = run_batch(capsys, target, "--out-dir", "out", "--summary-json", "s.json")
    assert code == 2 and message in err and "Traceback" not in err
    assert not Path("out").exists() and not Path("s.json").exists()


def test_same_stem_gets_distinct_report_names(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    for folder in "abc":
        Path(folder).mkdir()
    shutil.copy(FIXTURES / GOOD[1], "a/board.json")
    shutil.copy(FIXTURES / GOOD[2], "b/Board.json")  # collides on a case-insensitive disk too
    shutil.copy(FIXTURES / GOOD[3], "c/board-2.json")
    code, out, _ = run_batch(capsys, "a", "b", "c", "--out-dir", "out", "--summary-json", "s.json", "--jobs", "1")
    assert code == 1
    assert "filed with their folder" in out and "a/board.json -> a--board.json" in " ".join(out.split())
    rows = json.loads(Path("s.json").read_text())["boards"]
    # boards whose names collide are filed with their folder; the others keep their own name
    assert [(r["path"], r["report_path"]) for r in rows] == [
        ("a/board.json", "out/a--board.json"), ("b/Board.json", "out/b--Board.json"),
        ("c/board-2.json", "out/board-2.json")]
    for r in rows:  # each report is of its own board
        assert json.loads(Path(r["report_path"]).read_text())["board"]["path"] == r["path"]
    assert batch.report_names(["x/b.json", "y/b.json", "z/c.json"]) == {
        "x/b.json": "x--b.json", "y/b.json": "y--b.json", "z/c.json": "c.json"}
    # a board's name does not depend on the order of the batch or on boards of other names
    assert batch.report_names(["y/b.json", "x/b.json"])["y/b.json"] == "y--b.json"
    assert batch.report_names(["y/b.json", "x/b.json", "q/other.json"])["y/b.json"] == "y--b.json"
    # the folder collides too: the path's hash decides (SHA-256 of the path as given, first 8 hex digits)
    names = batch.report_names(["p/rev/b.json", "q/rev/b.json"])
    import hashlib

    assert names == {p: f"b-{hashlib.sha256(p.encode()).hexdigest()[:8]}.json"
                     for p in ("p/rev/b.json", "q/rev/b.json")}


def test_refuses_to_overwrite_inputs(boards, capsys):
    before = snapshot(boards)
    for argv in (["boards", "--out-dir", "boards"],
                 ["boards", "--out-dir", "out", "--summary-json", "boards/demo_board.json"],
                 ["boards", "--out-dir", "out", "--junit", "out/demo_board.json"],
                 ["boards/demo_board.json", "--rules", "boards/broken.json", "--out-dir", "out",
                  "--junit", "boards/broken.json"]):
        code, _, err = run_batch(capsys, *argv)
        assert code == 2 and len(err.strip().splitlines()) == 1, err
        assert "overwrite" in err or "--out-dir" in err
        assert snapshot(boards) == before
        assert not Path("out").exists()


def test_bad_rule_file_stops_before_any_work(boards, capsys):
    Path("bad.yaml").write_text("version: 1\nrules: 3\n")
    code, _, err = run_batch(capsys, "boards", "--rules", "bad.yaml", "--out-dir", "out", "--summary-json", "s.json")
    assert code == 2 and err.startswith("couplint: error: bad.yaml: rules")
    assert not Path("out").exists() and not Path("s.json").exists()


WAIVERS = """version: 1
waivers:
  - rule: coupled-noise
    nets: ["*", "*"]
    reason: accepted for the test
    author: test
    date: 2024-01-01
"""


def test_waivers_and_baseline_dir(boards, capsys):
    Path("w.yaml").write_text(WAIVERS)
    # (the JUnit file may go into the --out-dir that the batch creates)
    code, _, _ = run_batch(capsys, *SMALL, "--waivers", "w.yaml", "--out-dir", "out", "--summary-json", "s.json",
                           "--junit", "out/j.xml", "--jobs", "2")
    assert code == 1
    summary = json.loads(Path("s.json").read_text())
    assert summary["waivers"] == "w.yaml" and summary["totals"]["waived"] > 0
    suites = {s.get("name"): s for s in ET.parse("out/j.xml").getroot().findall("testsuite")}
    for row in summary["boards"][1:]:
        assert row["waived"] == row["by_rule"]["coupled-noise"]
        assert row["failing"] == row["findings"] - row["waived"]
        expected = "pass with waivers" if row["failing"] == 0 else "fail"
        assert row["verdict"] == expected
        case = suites[row["path"]].find("testcase[@name='coupled-noise']")
        assert case.find("failure") is None  # a waived finding is not a failure
        assert case.find("system-out").text.count("waived: ") == row["waived"]
        # the same report as `couplint check --waivers`
        assert cli_main(["check", row["path"], "--waivers", "w.yaml", "--format", "json", "--out", "one.json"]) \
            == (1 if row["failing"] else 0)
        assert Path(row["report_path"]).read_bytes() == Path("one.json").read_bytes()

    # against that run as a baseline nothing is new; a board it did not have is all new
    shutil.copy(FIXTURES / GOOD[1], "boards/fresh.json")
    good = ["boards/two_*.json", "boards/four_layer_mixed.json", "boards/fresh.json"]
    code, _, _ = run_batch(capsys, *good, "--baseline-dir", "out", "--fail-on", "new", "--out-dir", "out2",
                           "--summary-json", "s2.json", "--jobs", "1")
    assert code == 1
    rows = {r["path"]: r for r in json.loads(Path("s2.json").read_text())["boards"]}
    assert rows.pop("boards/fresh.json")["failing"] == rows["boards/four_layer_mixed.json"]["findings"]
    # nothing new fails; the unchanged findings remain, and the verdict says so (it exits 0 all the same)
    assert all(r["verdict"] == "pass with known findings" and r["failing"] == 0 and r["findings"] > 0
               for r in rows.values())
    report = json.loads(Path("out2/two_layer_parallel.json").read_text())
    assert {f["status"] for f in report["findings"]} == {"unchanged"}
    # a baseline report may not be overwritten by this run's reports
    code, _, err = run_batch(capsys, *good, "--baseline-dir", "out", "--out-dir", "out")
    assert code == 2 and "overwrite" in err


def test_check_one_never_raises(tmp_path):
    outcome = batch.check_one(str(tmp_path), None, "warning")
    # a folder is read as a fabrication package: an empty one is an error row, not an exception
    assert outcome.verdict == "error" and outcome.error == f"{tmp_path}: the folder holds no files"
    outcome = batch.check_one(str(demo_board_path()), str(tmp_path / "missing.yaml"), "warning")
    assert outcome.verdict == "error" and "missing.yaml" in outcome.error and outcome.report_text is None


def test_rule_set_changed_on_the_worker_is_an_error_row(boards, capsys, monkeypatch):
    real = batch.check_one

    def stale(path, **options):
        outcome = real(path, **options)
        outcome.ruleset_sha256 = "0" * 64
        return outcome

    monkeypatch.setattr(batch, "check_one", stale)
    code, _, _ = run_batch(capsys, "boards/four_layer_mixed.json", "--out-dir", "out", "--summary-json", "s.json",
                           "--jobs", "1")
    row = json.loads(Path("s.json").read_text())["boards"][0]
    assert code == 1 and row["verdict"] == "error" and "rule set differs" in row["error"]
    assert not Path("out/four_layer_mixed.json").exists()


def test_junit_escapes_text_and_waivers_do_not_fail():
    finding = {"id": "abc", "rule": "r<1>", "severity": "error", "aggressor": 'A&"B', "victim": "V\x01",
               "layers": ["TOP"], "at": [1.0, 2.0], "bbox": [0, 0, 1, 1], "message": "x < y & z"}
    suite = junit.board_suite(path="b&<.json", name="n\x00", rules=["r<1>", "ok"], failing=[finding])
    bad = junit.board_suite(path="e.json", name="e", rules=["ok"], error="e.json: line 1: \x1b[31m <oops>")
    root = ET.fromstring(junit.document([suite, bad]).encode("utf-8"))
    first, second = root.findall("testsuite")
    assert first.get("name") == "b&<.json"
    failure = first.find("testcase[@name='r<1>']/failure")
    assert 'A&"B -> V\\x01' in failure.text and "x < y & z" in failure.text
    assert second.find("testcase[@name='load']/error").get("message") == "e.json: line 1: \\x1b[31m <oops>"
    assert (root.get("tests"), root.get("failures"), root.get("errors"), root.get("skipped")) == ("5", "1", "1", "1")

    # a single checked board, with every finding of one rule waived
    import datetime

    from checker.readers import load_board
    from checker.ruleset import default_ruleset
    from checker.runner import check_board
    from checker.waivers import Waiver

    result = check_board(load_board(demo_board_path()), default_ruleset())
    xml = ET.fromstring(junit.junit_for_result(result).encode("utf-8"))
    noisy = [f for f in result.findings if f.rule == "coupled-noise"]
    assert xml.find("testsuite/testcase[@name='coupled-noise']/failure") is not None
    waiver = Waiver(reason="accepted", author="test", date=datetime.date(2024, 1, 1), rule="coupled-noise")
    result.review.waived = {f.id: waiver for f in noisy}
    xml = ET.fromstring(junit.junit_for_result(result).encode("utf-8"))
    case = xml.find("testsuite/testcase[@name='coupled-noise']")
    assert case.find("failure") is None
    assert case.find("system-out").text.count("waived: ") == len(noisy)
    rules_failing = {f.rule for f in result.failing()}
    assert xml.get("failures") == str(len(rules_failing)) and "coupled-noise" not in rules_failing


def test_missing_dask_is_a_clear_error(boards, capsys, monkeypatch):
    monkeypatch.setitem(__import__("sys").modules, "distributed", None)
    code, _, err = run_batch(capsys, "boards", "--out-dir", "out", "--scheduler", "tcp://127.0.0.1:8786")
    assert code == 2 and "pip install 'dask[distributed]'" in err
    assert not Path("out").exists()


def test_unreachable_scheduler(boards, capsys):
    pytest.importorskip("distributed")
    code, _, err = run_batch(capsys, "boards", "--out-dir", "out", "--summary-json", "s.json",
                             "--scheduler", "tcp://127.0.0.1:1", "--connect-timeout", "0.5")
    assert code == 2, err
    assert "couplint: error: --scheduler tcp://127.0.0.1:1: cannot reach the Dask scheduler" in err
    assert "Traceback" not in err
    assert not Path("out").exists() and not Path("s.json").exists()
    code, _, err = run_batch(capsys, "boards", "--out-dir", "out", "--scheduler", "tcp://127.0.0.1:port")
    assert code == 2 and "--scheduler tcp://127.0.0.1:port: not a scheduler address" in err
    assert len(err.strip().splitlines()) == 1


def test_dask_cluster_gives_the_same_summary(boards, capsys):
    pytest.importorskip("distributed")
    from distributed import LocalCluster

    targets = SMALL
    code, _, _ = run_batch(capsys, *targets, "--out-dir", "out", "--jobs", "2", "--summary-json", "pool.json",
                           "--junit", "pool.xml")
    assert code == 1
    pool_reports = snapshot(Path("out"))
    shutil.rmtree("out")
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None,
                      host="127.0.0.1", protocol="tcp://", scheduler_port=0) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        code, out, err = run_batch(capsys, *targets, "--out-dir", "out", "--summary-json", "dask.json",
                                   "--junit", "dask.xml", "--scheduler", cluster.scheduler_address)
    assert code == 1, err
    assert Path("dask.json").read_bytes() == Path("pool.json").read_bytes()
    assert Path("dask.xml").read_bytes() == Path("pool.xml").read_bytes()
    assert snapshot(Path("out")) == pool_reports
    assert "4 boards: 3 fail, 1 error" in out


def test_fabrication_packages_are_batch_targets(tmp_path, monkeypatch, capsys):
    """Revisions as exported: a package folder, a .zip of it and a JSON board in
    one batch; each package is one board, reported under its folder or archive
    name, with the same findings as a single check of it."""
    import zipfile

    monkeypatch.chdir(tmp_path)
    package = Path(__file__).resolve().parent.parent / "fixtures" / "fab" / "six_layer"
    Path("revs").mkdir()
    shutil.copytree(package, "revs/rev-a")
    with zipfile.ZipFile("revs/rev-b.zip", "w") as z:
        for p in sorted(package.iterdir()):
            z.write(p, p.name)
    shutil.copy(FIXTURES / GOOD[1], "revs/" + GOOD[1])
    code, out, err = run_batch(capsys, "revs/*", "--out-dir", "out", "--summary-json", "s.json", "--jobs", "1")
    assert code == 1, err
    rows = {b["path"]: b for b in json.loads(Path("s.json").read_text())["boards"]}
    assert set(rows) == {"revs/rev-a", "revs/rev-b.zip", "revs/" + GOOD[1]}
    assert rows["revs/rev-a"]["verdict"] == rows["revs/rev-b.zip"]["verdict"] == "fail"
    a = json.loads(Path("out/rev-a.json").read_text())
    b = json.loads(Path("out/rev-b.json").read_text())
    assert [f["id"] for f in a["findings"]] == [f["id"] for f in b["findings"]]
    assert cli_main(["check", "revs/rev-a", "--format", "json", "--out", "single.json"]) == 1
    assert [f["id"] for f in json.loads(Path("single.json").read_text())["findings"]] == \
        [f["id"] for f in a["findings"]]


def test_rules_by_shipped_name_is_the_default_rule_set(boards, capsys):
    # `--rules default` names the shipped set; the reports equal those of a batch without --rules
    code, _, _ = run_batch(capsys, "boards/two_*.json", "--out-dir", "named", "--rules", "default", "--jobs", "1")
    code_plain, _, _ = run_batch(capsys, "boards/two_*.json", "--out-dir", "plain", "--jobs", "1")
    assert code == code_plain
    for report in Path("plain").glob("*.json"):
        assert (Path("named") / report.name).read_bytes() == report.read_bytes()
    code, _, err = run_batch(capsys, "boards/two_*.json", "--out-dir", "x", "--rules", "nope")
    assert code == 2 and "nope: no such file, and no shipped rule set of that name" in err
