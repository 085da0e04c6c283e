"""Every fuzz seed and every input the fuzzer ever caught, through its door.

``scripts/fuzz.py`` fuzzes each input door (a reader's entry point) and
saves every input that crashed a door under ``tests/fuzz/crashers/<door>/``;
its starting inputs are ``tests/fuzz/seeds/<door>/``. Here each of them is
run through its door once, judged by the harness's own rule: the door
returns, or raises one CouplintError whose first line names the file (not
the internal-error fallback, not an unbounded message), and nothing else —
no other exception, no warning. A crasher whose fault lies in code this
change could not touch is marked ``xfail(strict=True)`` below: it fails the
suite as soon as it reads cleanly, so its mark is removed with the fix.
"""

from __future__ import annotations

import importlib.util
import pathlib
import sys

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]


def _harness():
    name = "couplint_fuzz_harness"
    if name not in sys.modules:
        spec = importlib.util.spec_from_file_location(name, ROOT / "scripts" / "fuzz.py")
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module  # before running it: its dataclasses look their module up
        spec.loader.exec_module(module)
    return sys.modules[name]


fuzz = _harness()

#: The doors issue 13 asks to be fuzzed, with the function each must reach.
EXPECTED_DOORS = {
    "gerber": "checker.readers.fab.gerber:read_gerber",
    "excellon": "checker.readers.fab.excellon:read_excellon",
    "ipc356": "checker.readers.fab.ipc356:read_ipc356",
    "jobfile": "checker.readers.fab.jobfile:read_job",
    "stackup-yaml": "checker.readers.fab.stackup_yaml:read_stackup_yaml",
    "ipc2581": "checker.readers.ipc2581:read_ipc2581",
    "board-json": "checker.readers.board_json:load_board",
    "rules": "checker.ruleset:load_ruleset",
    "waivers": "checker.waivers:parse_waivers",
    "baseline": "checker.baseline:load_baseline",
    "zip": "checker.readers.fab.assemble:load_package",
}

#: Crashers whose cause is in files outside this change (door/file -> why).
KNOWN_UNFIXED: dict[str, str] = {
}


def _cases(kind: str) -> list:
    out = []
    for door in sorted(fuzz.DOORS):
        folder = ROOT / "tests" / "fuzz" / kind / door
        for f in sorted(folder.iterdir()) if folder.is_dir() else []:
            key = f"{door}/{f.name}"
            marks = [pytest.mark.xfail(strict=True, reason=KNOWN_UNFIXED[key])] if key in KNOWN_UNFIXED else []
            out.append(pytest.param(door, f, id=f"{kind}:{key}", marks=marks))
    return out


def _judge(door_name: str, file: pathlib.Path, tmp_path: pathlib.Path):
    door = fuzz.DOORS[door_name]
    path = fuzz.input_path(door, tmp_path)
    with fuzz.hang_guard(fuzz.HANG_SECONDS):  # a hang fails the test instead of stopping the suite
        return fuzz.classify(door, file.read_bytes(), path)


def test_the_harness_has_every_door():
    assert set(fuzz.DOORS) == set(EXPECTED_DOORS)
    for name, entry in EXPECTED_DOORS.items():
        assert entry in fuzz.DOORS[name].entries, name


@pytest.mark.parametrize("door_name", sorted(EXPECTED_DOORS))
def test_each_door_reaches_its_reader(door_name, tmp_path, monkeypatch):
    """A valid seed fed to the door reaches every function its table names
    (so a door cannot quietly feed the wrong reader, or none)."""
    import importlib

    door = fuzz.DOORS[door_name]
    reached: list[str] = []
    for spec in door.entries:
        module_name, func_name = spec.split(":")
        module = importlib.import_module(module_name)
        real = getattr(module, func_name)

        def spy(*args, _real=real, _spec=spec, **kwargs):
            reached.append(_spec)
            return _real(*args, **kwargs)

        monkeypatch.setattr(module, func_name, spy)
    seeds = sorted((ROOT / "tests" / "fuzz" / "seeds" / door_name).iterdir())
    read, all_reached = [], set()
    for seed in seeds:
        reached.clear()
        outcome = fuzz.classify(door, seed.read_bytes(), fuzz.input_path(door, tmp_path))
        if outcome.status == "read":
            read.append(seed.name)
            assert door.entries[0] in reached, (seed.name, reached)
            all_reached.update(reached)
    assert read, f"no seed of {door_name} reads: the corpus starts the fuzzer from nothing valid"
    assert all_reached == set(door.entries)


@pytest.mark.parametrize(("door_name", "file"), _cases("seeds"))
def test_seed(door_name, file, tmp_path):
    outcome = _judge(door_name, file, tmp_path)
    assert outcome.status in ("read", "refused"), f"{outcome.detail}\n{outcome.trace}"


@pytest.mark.parametrize(("door_name", "file"), _cases("crashers"))
def test_crasher(door_name, file, tmp_path):
    outcome = _judge(door_name, file, tmp_path)
    assert outcome.status in ("read", "refused"), f"{outcome.detail}\n{outcome.trace}"
    if outcome.status == "refused":
        first = outcome.detail.split("\n", 1)[0]
        assert str(tmp_path) in first


def test_the_judge_catches_what_it_must(tmp_path):
    """The rule the seeds and crashers are held to rejects each kind of crash."""
    from checker.errors import CouplintError, FabError

    class Unbounded(CouplintError):
        """A couplint error whose message is not cut to size."""

    def door_raising(exc):
        def run(data, path):
            raise exc(path) if callable(exc) else exc  # an exception, or a function of the path making one
        return fuzz.Door("t", "test", ("x:y",), ".txt", 10, run)

    path = tmp_path / "fuzz-input.txt"
    cases = {
        "other": door_raising(RecursionError("deep")),
        "unnamed": door_raising(FabError("elsewhere.txt", 3, "bad")),
        "fallback": door_raising(lambda p: FabError(str(p), 1, "cannot be read: KeyError (please report it)")),
        "long line": door_raising(lambda p: Unbounded(f"{p}: " + "x" * fuzz.LINE_LIMIT)),
        "many lines": door_raising(lambda p: Unbounded(f"{p}: table" + "\nrow" * fuzz.LINES_LIMIT)),
    }
    for name, door in cases.items():
        assert fuzz.classify(door, b"", path).status == "crash", name

    def warns(data, path):
        import warnings
        warnings.warn("numbers overflowed", RuntimeWarning, stacklevel=2)

    assert fuzz.classify(fuzz.Door("t", "test", ("x:y",), ".txt", 10, warns), b"", path).status == "crash"

    def hangs(data, path):
        import time
        time.sleep(5)

    with fuzz.hang_guard(1):
        outcome = fuzz.classify(fuzz.Door("t", "test", ("x:y",), ".txt", 10, hangs), b"", path)
    assert outcome.status == "crash" and "Hang" in outcome.detail
    fine = door_raising(lambda p: FabError(str(p), 1, "bad"))
    assert fuzz.classify(fine, b"", path).status == "refused"
