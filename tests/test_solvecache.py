"""The on-disk field-solve cache: a hit gives exactly what solving gives,
damage is repaired, concurrent runs and unwritable folders are harmless.

The reference for every value is the solver itself (``fieldsolve.solve``),
whose accuracy is checked against published exact solutions in
tests/test_fieldsolve.py; here only the caching is under test.
"""

from __future__ import annotations

import multiprocessing
import os
import stat

import numpy as np
import pytest

from checker.physics import solvecache
from checker.physics.fieldsolve import GROUND, Conductor, CrossSection, Slab, solve

SECTION = CrossSection(
    conductors=(Conductor(-0.3, -0.1, 0.2, 0.235, 0), Conductor(0.1, 0.3, 0.2, 0.235, 1),
                Conductor(-3.0, 3.0, -0.035, 0.0, GROUND)),
    slabs=(Slab(0.0, 0.2, 4.3),),
)


@pytest.fixture()
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("COUPLINT_CACHE_DIR", str(tmp_path / "solves"))
    return tmp_path / "solves"


def entries(folder) -> list:
    return sorted(folder.glob("*/*.npz")) if folder.exists() else []


def same(a, b) -> None:
    assert np.array_equal(a.maxwell, b.maxwell) and a.resolution == b.resolution and a.nodes == b.nodes
    for x, y in ((a.error, b.error), (a.extrapolated, b.extrapolated)):
        assert (x is None and y is None) or np.array_equal(x, y)


@pytest.mark.parametrize("richardson", [False, True])
def test_a_hit_is_exactly_the_solve(cache, richardson) -> None:
    direct = solve(SECTION, 1.0, richardson=richardson)
    cold = solvecache.cached_solve(SECTION, 1.0, richardson)
    assert len(entries(cache)) == 1
    warm = solvecache.cached_solve(SECTION, 1.0, richardson)
    same(cold, direct)
    same(warm, direct)


def test_the_key_follows_geometry_resolution_and_solver(cache, monkeypatch) -> None:
    k = solvecache.key(SECTION, 1.0, False)
    assert k != solvecache.key(SECTION, 2.0, False) != solvecache.key(SECTION, 1.0, True)
    moved = CrossSection(conductors=(Conductor(-0.3, -0.1, 0.2, 0.235, 0), Conductor(0.1, 0.3000001, 0.2, 0.235, 1),
                                     SECTION.conductors[2]), slabs=SECTION.slabs)
    assert solvecache.key(moved, 1.0, False) != k
    monkeypatch.setattr(solvecache, "_tag", "another solver")
    assert solvecache.key(SECTION, 1.0, False) != k


@pytest.mark.parametrize("damage", ["truncated", "garbage", "wrong-shape", "not-finite"])
def test_a_damaged_entry_is_solved_again_and_replaced(cache, damage) -> None:
    good = solvecache.cached_solve(SECTION, 1.0, True)
    (path,) = entries(cache)
    if damage == "truncated":
        path.write_bytes(path.read_bytes()[:100])
    elif damage == "garbage":
        path.write_bytes(b"\x00not an npz at all")
    elif damage == "wrong-shape":
        np.savez(path, maxwell=np.ones((2, 3)), meta=np.ones(3), error=np.ones((2, 3)), extrapolated=np.ones((2, 3)))
    else:
        bad = good.maxwell.copy()
        bad[0, 0] = np.nan
        np.savez(path, maxwell=bad, meta=np.array([good.resolution, *good.nodes], float), error=good.error,
                 extrapolated=good.extrapolated)
    again = solvecache.cached_solve(SECTION, 1.0, True)
    same(again, good)
    same(solvecache.cached_solve(SECTION, 1.0, True), good)  # the repaired entry reads back
    assert len(entries(cache)) == 1


def test_off_and_unwritable_folders_change_nothing(tmp_path, monkeypatch) -> None:
    direct = solve(SECTION, 1.0)
    monkeypatch.setenv("COUPLINT_CACHE_DIR", "off")
    assert solvecache.cache_dir() is None
    same(solvecache.cached_solve(SECTION, 1.0), direct)
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(stat.S_IRUSR | stat.S_IXUSR)
    monkeypatch.setenv("COUPLINT_CACHE_DIR", str(locked / "solves"))
    try:
        same(solvecache.cached_solve(SECTION, 1.0), direct)
        if os.geteuid() != 0:  # root writes anywhere
            assert not (locked / "solves").exists()
    finally:
        locked.chmod(stat.S_IRWXU)


def _solve_in_child(folder: str, queue) -> None:
    os.environ["COUPLINT_CACHE_DIR"] = folder
    queue.put(solvecache.cached_solve(SECTION, 1.0, True).extrapolated.tolist())


def test_concurrent_runs_share_one_entry(cache) -> None:
    context = multiprocessing.get_context("spawn")
    queue = context.Queue()
    children = [context.Process(target=_solve_in_child, args=(str(cache), queue)) for _ in range(2)]
    for c in children:
        c.start()
    got = [queue.get(timeout=120) for _ in children]
    for c in children:
        c.join(timeout=60)
        assert c.exitcode == 0
    direct = solve(SECTION, 1.0, richardson=True).extrapolated
    assert all(np.array_equal(np.array(g), direct) for g in got)
    assert len(entries(cache)) == 1 and not list(cache.glob("*/.*.tmp"))
    same(solvecache.cached_solve(SECTION, 1.0, True), solve(SECTION, 1.0, richardson=True))


def test_prune_keeps_the_newest(cache) -> None:
    folder = cache / "ab"
    folder.mkdir(parents=True)
    for i in range(6):
        p = folder / f"{i:064x}.npz"
        p.write_bytes(b"x")
        os.utime(p, (1_000_000 + i, 1_000_000 + i))
    assert solvecache.prune(cache, keep=2) == 4
    assert sorted(p.name[-5] for p in folder.glob("*.npz")) == ["4", "5"]


def test_a_warm_recheck_writes_the_same_report(cache, tmp_path) -> None:
    """Three fresh runs of the demo (as a user re-checks): cold, warm, and
    with the cache off; the reports are byte-identical and the warm run
    solved nothing new."""
    import subprocess
    import sys

    def demo(out, cache_dir) -> None:
        env = dict(os.environ, COUPLINT_CACHE_DIR=cache_dir)
        proc = subprocess.run([sys.executable, "-m", "checker.cli", "demo", "--format", "json", "--out", str(out)],
                              env=env, capture_output=True, text=True)
        assert proc.returncode == 1, proc.stderr

    reports = [tmp_path / f"r{i}.json" for i in range(3)]
    demo(reports[0], str(cache))
    stored = len(entries(cache))
    assert stored > 10
    demo(reports[1], str(cache))
    assert len(entries(cache)) == stored  # nothing new to solve
    demo(reports[2], "off")
    assert reports[0].read_bytes() == reports[1].read_bytes() == reports[2].read_bytes()
