"""Safe writes: an interrupted write leaves the old file as it was and no debris."""

from __future__ import annotations

import pytest

from checker.atomic import refuse_overwriting_inputs, write_atomically
from checker.errors import UsageError


def test_interrupted_write_keeps_the_old_report(tmp_path):
    target = tmp_path / "report.json"
    target.write_text("old report\n")

    def emit(handle):
        handle.write("half of a new rep")
        raise KeyboardInterrupt  # the user pressed Ctrl-C mid-write

    with pytest.raises(KeyboardInterrupt):
        write_atomically(target, emit)
    assert target.read_text() == "old report\n"
    assert [p.name for p in tmp_path.iterdir()] == ["report.json"]  # no temporary file left behind


def test_complete_write_replaces_and_keeps_permissions(tmp_path):
    target = tmp_path / "report.json"
    target.write_text("old\n")
    target.chmod(0o640)
    write_atomically(target, lambda handle: handle.write("new\n"))
    assert target.read_text() == "new\n"
    assert target.stat().st_mode & 0o777 == 0o640


def test_output_naming_an_input_is_refused(tmp_path):
    board = tmp_path / "board.json"
    board.write_text("{}")
    with pytest.raises(UsageError, match="board.json"):
        refuse_overwriting_inputs(tmp_path / "." / "board.json", [board])
    refuse_overwriting_inputs(tmp_path / "other.json", [board])  # a different path is fine


# --------------------------------------------------------------------------- signals and leftovers

import signal  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402

from checker.atomic import TEMPORARY_NAME, sweep_leftovers  # noqa: E402

# A real `couplint demo --out` whose report write stalls after its first
# bytes (the JSON writer is wrapped), so a signal arrives mid-write.
_STALLING_RUN = """
import pathlib, sys, time
import checker.cli as cli
import checker.report.json_report as json_report
original = json_report.write
def stalling(result, handle, *rest):
    original(result, handle, *rest)
    handle.flush()
    pathlib.Path(sys.argv[2]).write_text("ready")
    time.sleep(120)
json_report.write = stalling
sys.exit(cli.main(["demo", "--format", "json", "--out", sys.argv[1]]))
"""


def _interrupt_mid_write(tmp_path, signum) -> tuple[int, str, list[str]]:
    out_dir = tmp_path / "out"
    out_dir.mkdir()
    ready = tmp_path / "ready"
    child = subprocess.Popen([sys.executable, "-c", _STALLING_RUN, str(out_dir / "report.json"), str(ready)],
                             stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 120
        while not ready.exists():
            assert child.poll() is None, "the run ended before its write"
            assert time.monotonic() < deadline, "the run never reached its write"
            time.sleep(0.05)
        assert any(TEMPORARY_NAME.match(p.name) for p in out_dir.iterdir())  # mid-write: the temporary exists
        child.send_signal(signum)
        _, err = child.communicate(timeout=60)
    finally:
        if child.poll() is None:
            child.kill()
            child.communicate()
    return child.returncode, err, sorted(p.name for p in out_dir.iterdir())


def test_sigterm_mid_write_leaves_nothing_behind(tmp_path):
    code, err, left = _interrupt_mid_write(tmp_path, signal.SIGTERM)
    assert code == 128 + signal.SIGTERM  # as a shell reports a process ended by SIGTERM
    assert "stopped by a signal" in err and "Traceback" not in err
    assert left == []


def test_sigint_mid_write_leaves_nothing_behind(tmp_path):
    code, err, left = _interrupt_mid_write(tmp_path, signal.SIGINT)
    assert code == 130 and "interrupted" in err and "Traceback" not in err
    assert left == []


def test_a_killed_run_s_leftover_is_swept_by_the_next_write_there(tmp_path):
    gone = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    dead_pid = int(gone.stdout)
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        dead = tmp_path / f".report.json.couplint-{dead_pid}-a1b2c3.tmp"
        alive = tmp_path / f".report.json.couplint-{sleeper.pid}-d4e5f6.tmp"
        foreign = tmp_path / ".report.json.x1y2.tmp"  # not ours by name: never touched
        for p in (dead, alive, foreign):
            p.write_text("half")
        elsewhere = tmp_path / "sub"
        elsewhere.mkdir()
        other_dead = elsewhere / dead.name
        other_dead.write_text("half")
        write_atomically(tmp_path / "summary.json", lambda handle: handle.write("{}\n"))
        assert not dead.exists()
        assert alive.exists() and foreign.exists()
        assert other_dead.exists()  # only the output's own folder is swept
        assert sweep_leftovers(tmp_path) == []
    finally:
        sleeper.kill()
        sleeper.wait()
