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
